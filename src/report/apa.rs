//! Number style for text meant for a paper: APA 7th edition (Publication Manual of the
//! American Psychological Association, 2020, §6.36 and §6.40–§6.46; from memory of the
//! manual, not checked against it here).
//!
//! Conventions (each function says which it applies):
//! * **p-values**: exact, three decimals, no leading zero (`p = .015`); below .001 as
//!   `p < .001`; above .999 as `p > .999`. When three decimals would print α itself
//!   for a p that is not α (e.g. .0499 at α = .05), four decimals are printed, so the
//!   number never contradicts the decision next to it.
//! * **Test statistics** (F, Q, W, t): two decimals (`F = 4.54`).
//! * **Degrees of freedom**: whole numbers without decimals (`F(2, 51)`); fractional
//!   df (Welch–James ν₂, Box-type df of the ATS) with two decimals (`F(1.97, 44.14)`).
//! * **Values that cannot exceed 1 in magnitude** (partial η², p, relative-effect
//!   differences): two decimals, no leading zero (`.15`, `-.03`).
//! * **Other values** (robust d, mean contrasts): two decimals with the leading zero
//!   (`-0.17`).
//! * **Intervals**: `95% CI [.01, .30]` (level, then brackets).
//! * **Counts**: thousands separated by commas (`4,999`).
//! * Minus signs are the ASCII hyphen-minus, so numbers paste into spreadsheets.

/// Rounds half away from zero at `decimals` and prints with that many decimals.
fn fixed(x: f64, decimals: usize) -> String {
    let s = format!("{x:.decimals$}");
    // `-0.00` reads as a sign that is not there.
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// Drops the leading zero of a fixed-point string: `0.15` → `.15`, `-0.03` → `-.03`.
fn no_leading_zero(s: String) -> String {
    if let Some(rest) = s.strip_prefix("-0.") {
        format!("-.{rest}")
    } else if let Some(rest) = s.strip_prefix("0.") {
        format!(".{rest}")
    } else {
        s
    }
}

/// A p-value without the `p`: `.015`, `< .001`, `> .999`, or four decimals when three
/// would print α for a p that is not α.
pub fn p_value(p: f64, alpha: f64) -> String {
    if p.is_nan() {
        return "—".into();
    }
    if p < 0.001 {
        return "< .001".into();
    }
    if p > 0.999 {
        return "> .999".into();
    }
    let three = fixed(p, 3);
    if three == fixed(alpha, 3) && p != alpha {
        no_leading_zero(fixed(p, 4))
    } else {
        no_leading_zero(three)
    }
}

/// `p = .015` or `p < .001` (the relation chosen by [`p_value`]).
pub fn p_phrase(p: f64, alpha: f64) -> String {
    let v = p_value(p, alpha);
    if v.starts_with('<') || v.starts_with('>') {
        format!("p {v}")
    } else {
        format!("p = {v}")
    }
}

/// A test statistic with two decimals.
pub fn stat(x: f64) -> String {
    fixed(x, 2)
}

/// Degrees of freedom: whole numbers as integers, others with two decimals.
pub fn df(x: f64) -> String {
    if (x - x.round()).abs() < 1e-9 && x.abs() < 1e15 {
        format!("{}", x.round() as i64)
    } else {
        fixed(x, 2)
    }
}

/// A value bounded by 1 in magnitude: two decimals, no leading zero.
pub fn unit(x: f64) -> String {
    no_leading_zero(fixed(x, 2))
}

/// Any other value: two decimals with the leading zero.
pub fn value(x: f64) -> String {
    fixed(x, 2)
}

/// `95% CI [.01, .30]` for a bounded value (`unit` style ends).
pub fn ci_unit(low: f64, high: f64, level: f64) -> String {
    format!("{} CI [{}, {}]", level_words(level), unit(low), unit(high))
}

/// `95% CI [-0.52, 0.10]` for an unbounded value.
pub fn ci_value(low: f64, high: f64, level: f64) -> String {
    format!("{} CI [{}, {}]", level_words(level), value(low), value(high))
}

/// A significance level as typed, without the leading zero: 0.05 → `.05`, 0.005 → `.005`.
pub fn alpha(a: f64) -> String {
    no_leading_zero(format!("{a}"))
}

/// A confidence level as a percentage: 0.95 → `95%`, 0.975 → `97.5%`.
pub fn level_words(level: f64) -> String {
    crate::concordance::profile::percent(level)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn p_values_follow_the_manual() {
        assert_eq!(p_phrase(0.01534, 0.05), "p = .015");
        assert_eq!(p_phrase(0.0004, 0.05), "p < .001");
        assert_eq!(p_phrase(0.001, 0.05), "p = .001");
        assert_eq!(p_phrase(0.9996, 0.05), "p > .999");
        assert_eq!(p_phrase(0.46331, 0.05), "p = .463");
        // Never prints α for a p that differs from it.
        assert_eq!(p_phrase(0.0499, 0.05), "p = .0499");
        assert_eq!(p_phrase(0.05004, 0.05), "p = .0500");
        assert_eq!(p_phrase(0.05, 0.05), "p = .050");
        assert_eq!(p_phrase(0.0509, 0.05), "p = .051");
        assert_eq!(p_value(f64::NAN, 0.05), "—");
    }

    #[test]
    fn statistics_df_and_effects() {
        assert_eq!(stat(4.5388), "4.54");
        assert_eq!(stat(746.9245), "746.92");
        assert_eq!(df(2.0), "2");
        assert_eq!(df(51.0), "51");
        assert_eq!(df(17.2612), "17.26");
        assert_eq!(unit(0.151), ".15");
        assert_eq!(unit(-0.0322), "-.03");
        assert_eq!(unit(0.0), ".00");
        assert_eq!(unit(-0.001), ".00");
        assert_eq!(value(-0.171), "-0.17");
        assert_eq!(ci_unit(0.0053, 0.298, 0.95), "95% CI [.01, .30]");
        assert_eq!(ci_value(-0.5, 0.25, 0.9), "90% CI [-0.50, 0.25]");
        assert_eq!(alpha(0.05), ".05");
        assert_eq!(alpha(0.005), ".005");
    }
}
