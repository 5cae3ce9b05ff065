//! Parsing the outcome column: exact decimals and a clear reason when a field is not a number.
//!
//! A field is parsed twice: once by Rust's correctly rounded `f64` parser (which also
//! detects overflow such as `1e400`) and once into an exact decimal `m × 10^e`. The
//! decimal form lets the data layer subtract a reference value exactly before any
//! rounding to `f64` ("exact decimal centring"), so data such as 1000000000000.4 keep
//! every digit that matters for sums of squares (NIST StRD SmLs07–09).

use rayon::prelude::*;

/// An exact decimal `mant × 10^exp`, as written in the file (16 bytes, so that a million
/// rows cost 16 MB).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Decimal {
    /// Signed significand (at most [`MAX_DIGITS`] significant digits).
    pub mant: i64,
    /// Power of ten.
    pub exp: i32,
}

/// Longest significand kept exactly; longer ones fall back to the correctly rounded double.
pub const MAX_DIGITS: usize = 18;

/// Why a field is not a usable number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumberProblem {
    /// Not a number at all.
    NotANumber,
    /// `inf`, `infinity` or a `nan` spelling that is not a missing token.
    NotFinite,
    /// Beyond the range of a double (e.g. `1e400`).
    Overflow,
    /// Looks like a decimal comma (`7,5`) but `--decimal-comma` was not given.
    DecimalCommaWithoutFlag,
    /// Has a decimal point although `--decimal-comma` was given.
    PointWithDecimalComma,
    /// Looks like a thousands separator (`1,234.5` or `1.234,5`).
    ThousandsSeparator,
}

impl NumberProblem {
    /// The problem and what to do about it, for an error message.
    pub fn explain(self, field: &str) -> (String, String) {
        let shown = shorten(field);
        match self {
            NumberProblem::NotANumber => (
                format!("`{shown}` is not a number"),
                "the outcome must be numeric; mark missing values with one of the --missing tokens".into(),
            ),
            NumberProblem::NotFinite => (
                format!("`{shown}` is not a finite number"),
                "infinite values cannot be analysed; mark missing values with one of the --missing tokens instead"
                    .into(),
            ),
            NumberProblem::Overflow => (
                format!("`{shown}` is too large to represent (beyond ±1.8e308)"),
                "check the value; rescale the outcome if it is real".into(),
            ),
            NumberProblem::DecimalCommaWithoutFlag => {
                (format!("`{shown}` is not a number"), "use --decimal-comma if the file uses decimal commas".into())
            }
            NumberProblem::PointWithDecimalComma => (
                format!("`{shown}` has a decimal point, but --decimal-comma was given"),
                "use one decimal mark throughout the file, or drop --decimal-comma".into(),
            ),
            NumberProblem::ThousandsSeparator => (
                format!("`{shown}` seems to contain a thousands separator"),
                "remove thousands separators from the outcome column".into(),
            ),
        }
    }
}

fn shorten(s: &str) -> String {
    if s.chars().count() > 40 {
        let head: String = s.chars().take(37).collect();
        format!("{head}...")
    } else {
        s.to_string()
    }
}

/// Parses one outcome field (already trimmed and known not to be a missing token).
///
/// Returns the correctly rounded double and, when the significand fits in 38 digits,
/// the exact decimal. Short decimals (significand below 2⁵³, exponent within ±22, the
/// usual case) are converted exactly without a second parse (Clinger 1990).
///
/// # Errors
/// A [`NumberProblem`] saying why the field is not a finite number.
pub fn parse_number(field: &str, decimal_comma: bool) -> Result<(f64, Option<Decimal>), NumberProblem> {
    let (mark, other) = if decimal_comma { (b',', b'.') } else { (b'.', b',') };
    let bytes = field.as_bytes();
    match scan(bytes, mark) {
        Some(Some(dec)) if fast_path(dec) => Ok((to_f64(dec), Some(dec))),
        Some(dec) => {
            let normalized;
            let text = if decimal_comma {
                normalized = field.replace(',', ".");
                normalized.as_str()
            } else {
                field
            };
            let value: f64 = text.parse().map_err(|_| NumberProblem::NotANumber)?;
            if !value.is_finite() {
                return Err(NumberProblem::Overflow);
            }
            Ok((value, dec))
        }
        None => Err(diagnose(field, bytes, mark, other, decimal_comma)),
    }
}

const TWO53: i128 = 1 << 53;

/// Both the significand and the power of ten are exact doubles, so one IEEE operation
/// rounds correctly.
fn fast_path(d: Decimal) -> bool {
    (d.mant as i128).abs() <= TWO53 && d.exp.abs() <= 22
}

fn diagnose(field: &str, bytes: &[u8], mark: u8, other: u8, decimal_comma: bool) -> NumberProblem {
    let lower = field.to_ascii_lowercase();
    let unsigned = lower.trim_start_matches(['+', '-']);
    if matches!(unsigned, "inf" | "infinity" | "nan") {
        return NumberProblem::NotFinite;
    }
    let numeric_shape = !bytes.is_empty()
        && bytes.iter().all(|b| b.is_ascii_digit() || matches!(b, b'.' | b',' | b'+' | b'-' | b'e' | b'E'))
        && bytes.iter().any(|b| b.is_ascii_digit());
    if numeric_shape {
        let has_mark = bytes.contains(&mark);
        let has_other = bytes.contains(&other);
        if has_mark && has_other {
            return NumberProblem::ThousandsSeparator;
        }
        if has_other {
            return if decimal_comma {
                NumberProblem::PointWithDecimalComma
            } else if bytes.iter().filter(|&&b| b == b',').count() == 1 {
                NumberProblem::DecimalCommaWithoutFlag
            } else {
                NumberProblem::ThousandsSeparator
            };
        }
    }
    NumberProblem::NotANumber
}

/// Scans `[+-] digits [mark digits] [(e|E) [+-] digits]` with at least one significand digit.
/// Returns `Some(decimal)` for a valid number (the inner option is `None` when the
/// significand has more than [`MAX_DIGITS`] digits), `None` when the grammar does not match.
fn scan(b: &[u8], mark: u8) -> Option<Option<Decimal>> {
    let mut i = 0;
    let negative = match b.first() {
        Some(b'-') => {
            i += 1;
            true
        }
        Some(b'+') => {
            i += 1;
            false
        }
        _ => false,
    };
    let mut mant: u64 = 0;
    let mut digits = 0usize; // significand digits seen
    let mut sig_digits = 0usize; // digits after leading zeros
    let mut frac_digits: i64 = 0;
    let mut seen_mark = false;
    while i < b.len() {
        let c = b[i];
        if c.is_ascii_digit() {
            digits += 1;
            if sig_digits > 0 || c != b'0' {
                sig_digits += 1;
            }
            if sig_digits <= MAX_DIGITS {
                mant = mant * 10 + (c - b'0') as u64;
                if seen_mark {
                    frac_digits += 1;
                }
            }
            i += 1;
        } else if c == mark && !seen_mark {
            seen_mark = true;
            i += 1;
        } else {
            break;
        }
    }
    if digits == 0 {
        return None;
    }
    let mut exp: i64 = 0;
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        i += 1;
        let mut exp_negative = false;
        if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
            exp_negative = b[i] == b'-';
            i += 1;
        }
        let start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            exp = (exp * 10 + (b[i] - b'0') as i64).min(1_000_000_000);
            i += 1;
        }
        if i == start {
            return None;
        }
        if exp_negative {
            exp = -exp;
        }
    }
    if i != b.len() {
        return None;
    }
    let e = exp - frac_digits;
    if sig_digits > MAX_DIGITS || e.abs() > 100_000 {
        return Some(None);
    }
    let mant = mant as i64;
    Some(Some(Decimal { mant: if negative { -mant } else { mant }, exp: e as i32 }))
}

/// 10^k as i128 for k ≤ 38 (table lookup; `None` beyond).
fn pow10(k: u32) -> Option<i128> {
    const TABLE: [i128; 39] = {
        let mut t = [1i128; 39];
        let mut i = 1;
        while i < 39 {
            t[i] = t[i - 1] * 10;
            i += 1;
        }
        t
    };
    TABLE.get(k as usize).copied()
}

/// `a - b` exactly, as a significand and exponent, when it fits in i128.
fn sub_exact(a: Decimal, b: Decimal) -> Option<(i128, i32)> {
    if a.exp == b.exp {
        return Some((a.mant as i128 - b.mant as i128, a.exp));
    }
    let e = a.exp.min(b.exp);
    let ma = (a.mant as i128).checked_mul(pow10((a.exp - e) as u32)?)?;
    let mb = (b.mant as i128).checked_mul(pow10((b.exp - e) as u32)?)?;
    Some((ma.checked_sub(mb)?, e))
}

/// The decimal as the nearest double (correctly rounded).
pub fn to_f64(d: Decimal) -> f64 {
    exact_to_f64(d.mant as i128, d.exp)
}

/// `mant × 10^exp` as the nearest double (correctly rounded).
fn exact_to_f64(mant: i128, exp: i32) -> f64 {
    const EXACT_POW10: [f64; 23] = [
        1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19,
        1e20, 1e21, 1e22,
    ];
    if mant == 0 {
        return 0.0;
    }
    if mant.abs() <= TWO53 && exp.abs() <= 22 {
        // Both operands are exact doubles, so one IEEE operation rounds correctly (Clinger 1990).
        let m = mant as i64 as f64;
        let p = EXACT_POW10[exp.unsigned_abs() as usize];
        return if exp >= 0 { m * p } else { m / p };
    }
    format!("{mant}e{exp}").parse().unwrap_or(f64::NAN)
}

/// Values from which [`centre_exactly`] centres on the rayon pool.
const PARALLEL_CENTRING: usize = 1 << 16;

/// Centres values on a reference chosen from the data, subtracting in exact decimal
/// arithmetic wherever the decimals are known, and returns `(centred, location)` with
/// `value ≈ location + centred`.
///
/// The reference is the smallest value (order-independent). Centring changes no sum of
/// squares, F or p-value (they are shift-invariant); location statistics add
/// `location` back.
pub fn centre_exactly(values: &[f64], decimals: &[Option<Decimal>]) -> (Vec<f64>, f64) {
    let Some(ref_index) = (0..values.len()).min_by(|&i, &j| values[i].total_cmp(&values[j])) else {
        return (Vec::new(), 0.0);
    };
    let location = values[ref_index];
    let reference = decimals[ref_index];
    let centre = |(&v, d): (&f64, &Option<Decimal>)| match (d, reference) {
        (Some(d), Some(r)) => match sub_exact(*d, r) {
            Some((mant, exp)) => exact_to_f64(mant, exp),
            None => v - location,
        },
        _ => v - location,
    };
    // Each value is centred on its own, so the threads change nothing but the time.
    let centred = if values.len() >= PARALLEL_CENTRING {
        values.par_iter().zip(decimals).map(centre).collect()
    } else {
        values.iter().zip(decimals).map(centre).collect()
    };
    (centred, location)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok(s: &str) -> f64 {
        parse_number(s, false).unwrap().0
    }

    #[test]
    fn parses_plain_forms() {
        assert_eq!(ok("3"), 3.0);
        assert_eq!(ok("-2.50"), -2.5);
        assert_eq!(ok("+.5"), 0.5);
        assert_eq!(ok("5."), 5.0);
        assert_eq!(ok("1e-3"), 0.001);
        assert_eq!(ok("1.5E+2"), 150.0);
        assert_eq!(parse_number("7,5", true).unwrap().0, 7.5);
    }

    #[test]
    fn exact_decimal_form() {
        let (_, d) = parse_number("1000000000000.4", false).unwrap();
        assert_eq!(d, Some(Decimal { mant: 10000000000004, exp: -1 }));
        let (_, d) = parse_number("007.50", false).unwrap();
        assert_eq!(d, Some(Decimal { mant: 750, exp: -2 }));
        let (_, d) = parse_number("-0.0030e2", false).unwrap();
        assert_eq!(d, Some(Decimal { mant: -30, exp: -2 }));
    }

    #[test]
    fn diagnoses_bad_fields() {
        assert_eq!(parse_number("7,5", false), Err(NumberProblem::DecimalCommaWithoutFlag));
        assert_eq!(parse_number("7.5", true), Err(NumberProblem::PointWithDecimalComma));
        assert_eq!(parse_number("1,234.5", false), Err(NumberProblem::ThousandsSeparator));
        assert_eq!(parse_number("1,234,567", false), Err(NumberProblem::ThousandsSeparator));
        assert_eq!(parse_number("inf", false), Err(NumberProblem::NotFinite));
        assert_eq!(parse_number("-Infinity", false), Err(NumberProblem::NotFinite));
        assert_eq!(parse_number("nan", false), Err(NumberProblem::NotFinite));
        assert_eq!(parse_number("1e400", false), Err(NumberProblem::Overflow));
        assert_eq!(parse_number("abc", false), Err(NumberProblem::NotANumber));
        assert_eq!(parse_number("1e", false), Err(NumberProblem::NotANumber));
        assert_eq!(parse_number("--1", false), Err(NumberProblem::NotANumber));
        assert_eq!(parse_number("0x10", false), Err(NumberProblem::NotANumber));
        assert_eq!(parse_number("1_000", false), Err(NumberProblem::NotANumber));
    }

    #[test]
    fn long_significands_fall_back_to_doubles() {
        let s = "1.2345678901234567890123456789012345678901234";
        let (v, d) = parse_number(s, false).unwrap();
        assert_eq!(d, None);
        assert_eq!(v, s.parse::<f64>().unwrap());
    }

    #[test]
    fn to_f64_is_correctly_rounded() {
        // Property: the decimal route agrees with Rust's correctly rounded parser.
        for s in ["0.1", "1000000000000.4", "-12345678901234567.8", "9.999999999999999e-300", "4e22", "3e-23"] {
            let (v, d) = parse_number(s, false).unwrap();
            assert_eq!(to_f64(d.unwrap()), v, "{s}");
        }
    }

    #[test]
    fn centring_is_exact_for_nist_like_data() {
        // Values like NIST StRD SmLs07 (1e12 + tenths): exact differences are tenths.
        let texts = ["1000000000000.4", "1000000000000.3", "1000000000000.5"];
        let parsed: Vec<_> = texts.iter().map(|s| parse_number(s, false).unwrap()).collect();
        let values: Vec<f64> = parsed.iter().map(|p| p.0).collect();
        let decimals: Vec<_> = parsed.iter().map(|p| p.1).collect();
        let (c, loc) = centre_exactly(&values, &decimals);
        assert_eq!(loc, 1000000000000.3);
        assert_eq!(c, vec![0.1, 0.0, 0.2]);
    }
}
