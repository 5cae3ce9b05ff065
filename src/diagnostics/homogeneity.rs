//! Homogeneity of variance across cells: Levene's and the Brown–Forsythe test, the
//! largest-to-smallest variance ratios (classical and robust) and how cell sizes pair
//! with cell variances (METHODS §2.2, §2.5).
//!
//! The tests are one-way ANOVAs of absolute deviations over the C cells of the design
//! (cells, not factors, are the groups). Ratios are plain descriptive magnitudes; their
//! sampling distribution under normality is handled by [`super::calibration`].

use crate::dist;
use crate::results::FTest;
use crate::summary;

/// Centre of the absolute deviations.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Centre {
    /// Cell mean: Levene (1960).
    Mean,
    /// Cell median: Brown & Forsythe (1974).
    Median,
}

/// Why a homogeneity test cannot be computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum HomogeneityProblem {
    /// Fewer than two cells or no residual degrees of freedom (N ≤ C).
    NoDf,
    /// Every absolute deviation equals its cell's mean deviation (e.g. every cell constant).
    ZeroDenominator,
}

/// Levene (centre = mean; Levene 1960) or Brown–Forsythe (centre = median; Brown &
/// Forsythe 1974) test across cells: z_ci = |y_ci − m_c| and
/// W = (N − C)·Σ n_c (z̄_c − z̄)² / ((C − 1)·Σ_c Σ_i (z_ci − z̄_c)²),
/// p = P(F(C − 1, N − C) ≥ W). scipy `stats.levene(*cells, center=…)`.
///
/// # Errors
/// [`HomogeneityProblem`] when W is undefined.
pub fn levene(cells: &[&[f64]], centre: Centre) -> Result<FTest, HomogeneityProblem> {
    let centres: Vec<f64> = cells
        .iter()
        .map(|x| match centre {
            Centre::Mean => crate::model::mean_two_pass(x),
            Centre::Median => summary::median_sorted(&summary::sorted(x)),
        })
        .collect();
    levene_about(cells, &centres)
}

/// [`levene`] with each cell's centre given (its mean or median), for callers that
/// have the cells' medians already.
///
/// # Errors
/// As [`levene`].
pub fn levene_about(cells: &[&[f64]], centres: &[f64]) -> Result<FTest, HomogeneityProblem> {
    let c = cells.len();
    let n: usize = cells.iter().map(|x| x.len()).sum();
    if c < 2 || n <= c {
        return Err(HomogeneityProblem::NoDf);
    }
    // z_ci = |y_ci − m_c| is recomputed in each pass rather than stored.
    let z = |c: usize| cells[c].iter().map(move |v| (v - centres[c]).abs());
    let means: Vec<f64> = (0..c)
        .map(|k| {
            let len = cells[k].len() as f64;
            let m0 = z(k).sum::<f64>() / len;
            m0 + z(k).map(|v| v - m0).sum::<f64>() / len
        })
        .collect();
    let grand = (0..c).map(|k| means[k] * cells[k].len() as f64).sum::<f64>() / n as f64;
    let between: f64 = (0..c).map(|k| cells[k].len() as f64 * (means[k] - grand).powi(2)).sum();
    let within: f64 = (0..c).map(|k| z(k).map(|v| (v - means[k]).powi(2)).sum::<f64>()).sum();
    let (df1, df2) = ((c - 1) as f64, (n - c) as f64);
    // A denominator that is zero up to rounding (relative to the data's spread) is zero.
    let scale: f64 = (0..c).map(|k| z(k).map(|v| v * v).sum::<f64>()).sum();
    if within.is_nan() || within <= 1e-28 * scale || within <= 0.0 {
        return Err(HomogeneityProblem::ZeroDenominator);
    }
    let f = df2 * between / (df1 * within);
    Ok(FTest { f, df1, df2, p: dist::f_sf(f, df1, df2) })
}

/// max/min of positive values among cells with n ≥ 2; `None` with fewer than two such
/// cells, `Some(∞)` when the smallest is 0.
pub fn ratio(values: &[f64]) -> Option<f64> {
    if values.len() < 2 {
        return None;
    }
    let max = values.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let min = values.iter().cloned().fold(f64::INFINITY, f64::min);
    Some(if min > 0.0 { max / min } else { f64::INFINITY })
}

/// Spearman's rank correlation of two equally long samples: Pearson's correlation of
/// their mid-ranks (scipy `stats.spearmanr`). `None` when either has no rank variation
/// or fewer than three pairs.
pub fn spearman(x: &[f64], y: &[f64]) -> Option<f64> {
    if x.len() != y.len() || x.len() < 3 {
        return None;
    }
    let (rx, ry) = (mid_ranks(x), mid_ranks(y));
    let mx = crate::model::mean_two_pass(&rx);
    let my = crate::model::mean_two_pass(&ry);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in rx.iter().zip(&ry) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx).powi(2);
        syy += (b - my).powi(2);
    }
    (sxx > 0.0 && syy > 0.0).then(|| (sxy / (sxx * syy).sqrt()).clamp(-1.0, 1.0))
}

/// Mid-ranks (average of tied positions), 1-based (METHODS §0).
pub fn mid_ranks(x: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..x.len()).collect();
    idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut r = vec![0.0; x.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && x[idx[j + 1]] == x[idx[i]] {
            j += 1;
        }
        let rank = (i + j) as f64 / 2.0 + 1.0;
        for &k in &idx[i..=j] {
            r[k] = rank;
        }
        i = j + 1;
    }
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn methods12() -> Vec<Vec<f64>> {
        vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ]
    }

    #[test]
    fn methods_12_1_levene_and_brown_forsythe() {
        // METHODS §12.1 (scipy `levene(center='mean'|'median')`).
        let d = methods12();
        let cells: Vec<&[f64]> = d.iter().map(|v| v.as_slice()).collect();
        let l = levene(&cells, Centre::Mean).unwrap();
        assert!((l.f - 3.597404688).abs() < 1e-8 && l.df1 == 5.0 && l.df2 == 33.0);
        assert!((l.p - 0.01046943521).abs() < 1e-9);
        let b = levene(&cells, Centre::Median).unwrap();
        assert!((b.f - 2.090586392).abs() < 1e-8);
        assert!((b.p - 0.09148672229).abs() < 1e-9);
    }

    #[test]
    fn degenerate_cells() {
        let a = [1.0, 1.0];
        let b = [2.0, 2.0];
        assert_eq!(levene(&[&a, &b], Centre::Mean).err(), Some(HomogeneityProblem::ZeroDenominator));
        assert_eq!(levene(&[&[1.0][..], &[2.0][..]], Centre::Median).err(), Some(HomogeneityProblem::NoDf));
        assert_eq!(ratio(&[1.0]), None);
        assert_eq!(ratio(&[0.0, 2.0]), Some(f64::INFINITY));
    }

    #[test]
    fn spearman_with_ties() {
        // Mid-ranks by hand: x ranks 1, 4.5, 2.5, 6, 2.5, 4.5 (scipy `rankdata` convention);
        // the correlation itself is checked against scipy `spearmanr` in tests/checks/diagnostics.rs.
        let r = spearman(&[5.0, 7.0, 6.0, 8.0, 6.0, 7.0], &[0.152, 1.113, 2.867, 2.187, 3.854, 7.193]).unwrap();
        let rx = mid_ranks(&[5.0, 7.0, 6.0, 8.0, 6.0, 7.0]);
        assert_eq!(rx, vec![1.0, 4.5, 2.5, 6.0, 2.5, 4.5]);
        // scipy `stats.spearmanr` on these pairs: 0.23539595453459985.
        assert!((r - 0.23539595453459985).abs() < 1e-12, "{r}");
        assert_eq!(spearman(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]), None);
    }
}
