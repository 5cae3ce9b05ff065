//! Multiplicity control over a family of p-values (METHODS §9.4).
//!
//! Every follow-up family (the slices of one simple-effect analysis by one method, the
//! pairs compared within one slice by one method, the planned contrasts of one run)
//! goes through [`adjust`]. Comparisons that could not be computed are `None`: they are
//! excluded from the family and m shrinks accordingly (METHODS §9.4 "Edge"), so the
//! function takes and returns `Option<f64>` in input order.

use serde::Serialize;

/// A multiplicity adjustment (`--adjust`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Adjust {
    /// Holm's (1979, Scandinavian Journal of Statistics 6:65–70) step-down: controls the
    /// familywise error under any dependence (the default).
    #[default]
    Holm,
    /// Hochberg's (1988, Biometrika 75:800–802) step-up: familywise error under
    /// independence or positive dependence.
    Hochberg,
    /// Benjamini & Hochberg's (1995, JRSS-B 57:289–300) step-up: false discovery rate
    /// under independence or positive dependence.
    Bh,
    /// Bonferroni: min(1, m·p).
    Bonferroni,
    /// No adjustment (adjusted p = raw p).
    None,
}

impl Adjust {
    /// The id used on the command line and in the results.
    pub fn id(self) -> &'static str {
        match self {
            Adjust::Holm => "holm",
            Adjust::Hochberg => "hochberg",
            Adjust::Bh => "bh",
            Adjust::Bonferroni => "bonferroni",
            Adjust::None => "none",
        }
    }

    /// What the adjustment controls, in words.
    pub fn describe(self) -> &'static str {
        match self {
            Adjust::Holm => "Holm step-down (familywise error, any dependence)",
            Adjust::Hochberg => "Hochberg step-up (familywise error, independent or positively dependent tests)",
            Adjust::Bh => "Benjamini–Hochberg (false discovery rate, independent or positively dependent tests)",
            Adjust::Bonferroni => "Bonferroni (familywise error, any dependence)",
            Adjust::None => "none (raw p-values)",
        }
    }
}

/// Adjusted p-values of one family, in input order (METHODS §9.4). With the m values
/// that are `Some`, sorted ascending by a stable sort (ties keep input order, and the
/// results do not depend on it):
///
/// * Holm: p̃_(i) = max_{j≤i} min(1, (m − j + 1)·p_(j));
/// * Hochberg: p̃_(i) = min_{j≥i} min(1, (m − j + 1)·p_(j));
/// * Benjamini–Hochberg: p̃_(i) = min_{j≥i} min(1, m·p_(j)/j);
/// * Bonferroni: min(1, m·p_i).
///
/// These are statsmodels' `multipletests(method='holm' | 'simes-hochberg' | 'fdr_bh' |
/// 'bonferroni')`. `None` entries (comparisons that failed) stay `None` and do not count
/// in m. A NaN is treated as missing.
pub fn adjust(p: &[Option<f64>], method: Adjust) -> Vec<Option<f64>> {
    let present: Vec<usize> = (0..p.len()).filter(|&i| p[i].is_some_and(|x| !x.is_nan())).collect();
    let m = present.len();
    let mut out = vec![None; p.len()];
    if m == 0 {
        return out;
    }
    let value = |i: usize| p[i].unwrap_or(f64::NAN).clamp(0.0, 1.0);
    let mut order = present.clone();
    order.sort_by(|&i, &j| value(i).total_cmp(&value(j)));
    let mf = m as f64;
    match method {
        Adjust::None => {
            for &i in &present {
                out[i] = Some(value(i));
            }
        }
        Adjust::Bonferroni => {
            for &i in &present {
                out[i] = Some((mf * value(i)).min(1.0));
            }
        }
        Adjust::Holm => {
            let mut running: f64 = 0.0;
            for (rank, &i) in order.iter().enumerate() {
                running = running.max(((m - rank) as f64 * value(i)).min(1.0));
                out[i] = Some(running);
            }
        }
        Adjust::Hochberg | Adjust::Bh => {
            let mut running: f64 = 1.0;
            for (rank, &i) in order.iter().enumerate().rev() {
                let factor = match method {
                    Adjust::Hochberg => (m - rank) as f64,
                    _ => mf / (rank + 1) as f64,
                };
                running = running.min((factor * value(i)).min(1.0));
                out[i] = Some(running);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn some(p: &[f64]) -> Vec<Option<f64>> {
        p.iter().map(|&x| Some(x)).collect()
    }

    fn check(got: Vec<Option<f64>>, want: &[f64]) {
        for (g, w) in got.iter().zip(want) {
            assert!((g.unwrap() - w).abs() < 1e-15, "{got:?} vs {want:?}");
        }
    }

    #[test]
    fn methods_section_12_7_values() {
        // Source: METHODS §12.7 (statsmodels multipletests), p = (0.01, 0.04, 0.03, 0.005, 0.20, 0.04).
        let p = some(&[0.01, 0.04, 0.03, 0.005, 0.20, 0.04]);
        check(adjust(&p, Adjust::Holm), &[0.05, 0.12, 0.12, 0.03, 0.2, 0.12]);
        check(adjust(&p, Adjust::Hochberg), &[0.05, 0.08, 0.08, 0.03, 0.2, 0.08]);
        check(adjust(&p, Adjust::Bh), &[0.03, 0.048, 0.048, 0.03, 0.2, 0.048]);
        check(adjust(&p, Adjust::Bonferroni), &[0.06, 0.24, 0.18, 0.03, 1.0, 0.24]);
        check(adjust(&p, Adjust::None), &[0.01, 0.04, 0.03, 0.005, 0.20, 0.04]);
    }

    #[test]
    fn failed_comparisons_leave_the_family() {
        // m shrinks to 2: Holm of (0.01, 0.04) is (0.02, 0.04).
        let got = adjust(&[Some(0.01), None, Some(0.04), Some(f64::NAN)], Adjust::Holm);
        assert_eq!(got[1], None);
        assert_eq!(got[3], None);
        assert!((got[0].unwrap() - 0.02).abs() < 1e-15 && (got[2].unwrap() - 0.04).abs() < 1e-15);
        assert!(adjust(&[], Adjust::Bh).is_empty());
    }
}
