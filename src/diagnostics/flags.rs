//! Flag codes and their plain-language messages.
//!
//! A flag is data (`{code, message}`): the code is stable and catalogued in
//! DEVELOPERS.md, the message names cells and input lines in words a researcher can act
//! on. Two kinds exist. *Calibrated* flags rest on a statistic whose null p-value under
//! normal, equal-variance data with the same cell sizes is at most
//! [`super::calibration::FLAG_LEVEL`]; they fire on about 1% of clean datasets each.
//! *Structural* flags report facts that normal continuous data never produce (a
//! constant cell, one observation in a cell, MAD = 0, tied values) or limits of a
//! method (Shapiro–Wilk above n = 5000).

use crate::results::Flag;

/// Stable flag codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Code {
    /// Calibrated: pooled residual excess kurtosis larger than normal data give.
    HeavyTails,
    /// Calibrated: pooled residual skewness (either sign) larger than normal data give.
    SkewedResiduals,
    /// Calibrated: a point further from its cell median (in MADN, adjusted for cell
    /// size) than normal data give; lists every such point.
    Outliers,
    /// Calibrated: more far-out points (3 × IQR) than normal data give; one flag per cell
    /// that has far-out points.
    FarOut,
    /// Calibrated: largest/smallest cell variance beyond its null distribution.
    UnequalVariances,
    /// Calibrated variance flag together with cell sizes differing by more than 1.5×.
    UnequalVariancesUnequalN,
    /// Structural: a cell whose values are all equal.
    ConstantCell,
    /// Structural: a cell with a single observation.
    SingleObservation,
    /// Structural: Shapiro–Wilk could not run in some cells (n < 3 or constant).
    ShapiroNotApplicable,
    /// Structural: Shapiro–Wilk on more than 5000 values (p not validated).
    ShapiroLargeN,
    /// Structural: MAD = 0 in a cell, so the MAD–median rule does not apply there.
    MadZero,
    /// Structural: Levene/Brown–Forsythe undefined.
    HomogeneityUndefined,
    /// Structural: at most 10 distinct values (ordinal or discrete outcome).
    DiscreteOutcome,
    /// Structural: more than 25% of observations tied (rounded or discrete measurements).
    ManyTies,
}

/// Every flag code, in catalogue order.
pub const ALL: [Code; 14] = [
    Code::HeavyTails,
    Code::SkewedResiduals,
    Code::Outliers,
    Code::FarOut,
    Code::UnequalVariances,
    Code::UnequalVariancesUnequalN,
    Code::ConstantCell,
    Code::SingleObservation,
    Code::ShapiroNotApplicable,
    Code::ShapiroLargeN,
    Code::MadZero,
    Code::HomogeneityUndefined,
    Code::DiscreteOutcome,
    Code::ManyTies,
];

impl Code {
    /// The code string in `diagnostics.flags[].code`.
    pub fn id(self) -> &'static str {
        match self {
            Code::HeavyTails => "heavy-tails",
            Code::SkewedResiduals => "skewed-residuals",
            Code::Outliers => "outliers",
            Code::FarOut => "far-out",
            Code::UnequalVariances => "unequal-variances",
            Code::UnequalVariancesUnequalN => "unequal-variances-unequal-n",
            Code::ConstantCell => "constant-cell",
            Code::SingleObservation => "single-observation",
            Code::ShapiroNotApplicable => "shapiro-wilk-not-applicable",
            Code::ShapiroLargeN => "shapiro-wilk-large-n",
            Code::MadZero => "mad-zero",
            Code::HomogeneityUndefined => "homogeneity-undefined",
            Code::DiscreteOutcome => "discrete-outcome",
            Code::ManyTies => "many-ties",
        }
    }

    /// Whether the flag rests on a calibrated statistic.
    pub fn calibrated(self) -> bool {
        matches!(
            self,
            Code::HeavyTails
                | Code::SkewedResiduals
                | Code::Outliers
                | Code::FarOut
                | Code::UnequalVariances
                | Code::UnequalVariancesUnequalN
        )
    }

    /// A flag with this code.
    pub fn flag(self, message: impl Into<String>) -> Flag {
        Flag { code: self.id().to_string(), message: message.into() }
    }
}

/// "line 17", "lines 17 and 88", "lines 3, 17 and 88" (at most `max` listed, then "and k more").
pub fn lines_phrase(lines: &[u64]) -> String {
    const MAX: usize = 10;
    match lines {
        [] => "no lines".to_string(),
        [one] => format!("line {one}"),
        _ if lines.len() > MAX => {
            let shown: Vec<String> = lines[..MAX].iter().map(u64::to_string).collect();
            format!("lines {} and {} more", shown.join(", "), lines.len() - MAX)
        }
        _ => {
            let (last, rest) = lines.split_last().unwrap_or((&0, &[]));
            let rest: Vec<String> = rest.iter().map(u64::to_string).collect();
            format!("lines {} and {last}", rest.join(", "))
        }
    }
}

/// "1 point" / "2 points".
pub fn points(k: usize) -> String {
    if k == 1 {
        "1 point".to_string()
    } else {
        format!("{k} points")
    }
}

/// A p-value of the calibration in words: "p = 0.003" or "p ≤ 0.0005".
pub fn null_p_phrase(p: f64, datasets: u64) -> String {
    let floor = 1.0 / (datasets + 1) as f64;
    if p <= floor {
        format!("p ≤ {}", fmt_small(floor))
    } else {
        format!("p = {}", fmt_small(p))
    }
}

fn fmt_small(p: f64) -> String {
    if p >= 0.01 {
        format!("{p:.3}")
    } else {
        format!("{p:.4}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_lists_read_naturally() {
        assert_eq!(lines_phrase(&[17]), "line 17");
        assert_eq!(lines_phrase(&[17, 88]), "lines 17 and 88");
        assert_eq!(lines_phrase(&[3, 17, 88]), "lines 3, 17 and 88");
        let many: Vec<u64> = (1..=12).collect();
        assert_eq!(lines_phrase(&many), "lines 1, 2, 3, 4, 5, 6, 7, 8, 9, 10 and 2 more");
        assert_eq!(points(1), "1 point");
        assert_eq!(null_p_phrase(0.0005, 1999), "p ≤ 0.0005");
        assert_eq!(null_p_phrase(0.0125, 1999), "p = 0.013");
    }

    #[test]
    fn codes_are_unique() {
        let ids: std::collections::BTreeSet<&str> = ALL.iter().map(|c| c.id()).collect();
        assert_eq!(ids.len(), ALL.len());
    }
}
