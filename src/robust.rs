//! Trimmed-mean inference building blocks: per-cell trimmed summaries, Johansen's
//! Welch–James test for any contrast matrix, Yuen's two-sample test and the
//! Algina–Keselman–Penfield robust effect size (METHODS §4).
//!
//! These are shared by the `trimmed` engine (every term of a k-way design) and by the
//! follow-ups (simple effects, pairwise comparisons), so every function takes cells by
//! index and contrasts as a [`WaldForm`] of any shape: a term's Kronecker matrix, a
//! simple-effect matrix, or a single row. The quadratic form itself is the one in
//! [`crate::model::wald`] (with v_c = d_c); this module adds Johansen's correction
//! and the reference distributions. Degenerate cells (h < 2 after trimming, zero
//! winsorized variance) are reported as a [`ContrastProblem`] naming the cell index,
//! never as NaN, so callers can turn them into `not_applicable` reasons.

use crate::dist;
use crate::model::mean_two_pass;
use crate::model::wald::WaldForm;
use crate::summary;

/// Robust summaries of one cell at trimming proportion γ (METHODS §4.1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrimmedCell {
    /// Trimming proportion γ ∈ [0, 0.5).
    pub gamma: f64,
    /// Observations n.
    pub n: usize,
    /// Number trimmed from each end, g = ⌊γn⌋ (floor of the double product).
    pub g: usize,
    /// Observations left after trimming, h = n − 2g.
    pub h: usize,
    /// Trimmed mean (1/h) Σ_{i=g+1}^{n−g} x_(i); NaN when h = 0.
    pub trimmed_mean: f64,
    /// Winsorized variance s²_w (n − 1 denominator); exactly 0 when x_(g+1) = x_(n−g);
    /// NaN for n < 2 or h = 0.
    pub winsorized_variance: f64,
    /// Squared standard error of the trimmed mean, d = (n − 1)s²_w/(h(h − 1)) (Yuen 1974);
    /// NaN when h < 2.
    pub d: f64,
}

/// Why a cell cannot enter a trimmed-means test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CellDefect {
    /// Fewer than two observations remain after trimming.
    TooFewAfterTrimming {
        /// Observations in the cell.
        n: usize,
        /// Trimmed from each end.
        g: usize,
    },
    /// The winsorized sample is constant (x_(g+1) = x_(n−g)), so d = 0.
    ZeroWinsorizedVariance,
}

impl CellDefect {
    /// The defect in words, for a cell called `cell` (e.g. `A=a1, B=b2`).
    pub fn describe(&self, cell: &str) -> String {
        match self {
            CellDefect::TooFewAfterTrimming { n, g: 0 } => {
                format!("cell {cell}: n = {n}; trimmed-means tests need at least 2 observations per cell")
            }
            CellDefect::TooFewAfterTrimming { n, g } => format!(
                "cell {cell}: h = {} observation(s) left after trimming {g} from each end of n = {n}; trimmed means need h ≥ 2",
                n.saturating_sub(2 * g)
            ),
            CellDefect::ZeroWinsorizedVariance => {
                format!("cell {cell}: zero winsorized variance (its winsorized values are all equal), so its trimmed mean has no standard error")
            }
        }
    }
}

/// Why a contrast cannot be tested.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ContrastProblem {
    /// A cell the contrast involves is degenerate.
    Cell {
        /// Cell index (in the order of the slice passed in).
        cell: usize,
        /// What is wrong with it.
        defect: CellDefect,
    },
    /// L V L' is not positive definite (linearly dependent rows of L, or variances so
    /// unequal that it is singular to working precision).
    Singular,
}

impl ContrastProblem {
    /// The problem in words; `cell_name(c)` names cell c for people.
    pub fn describe(&self, cell_name: impl Fn(usize) -> String) -> String {
        match self {
            ContrastProblem::Cell { cell, defect } => defect.describe(&cell_name(*cell)),
            ContrastProblem::Singular => {
                "the covariance of the contrast (L V L') is singular to working precision".to_string()
            }
        }
    }
}

impl TrimmedCell {
    /// Summaries of unsorted values (sorts a copy).
    pub fn new(values: &[f64], gamma: f64) -> TrimmedCell {
        TrimmedCell::from_sorted(&summary::sorted(values), gamma)
    }

    /// Summaries of values sorted ascending; allocates nothing (used inside resampling
    /// loops). Trimmed mean and winsorized mean use a correction pass, like
    /// [`mean_two_pass`].
    pub fn from_sorted(sorted: &[f64], gamma: f64) -> TrimmedCell {
        let n = sorted.len();
        let g = summary::trim_count(gamma, n);
        let h = n.saturating_sub(2 * g);
        let mut cell =
            TrimmedCell { gamma, n, g, h, trimmed_mean: f64::NAN, winsorized_variance: f64::NAN, d: f64::NAN };
        if h == 0 {
            return cell;
        }
        let kept = &sorted[g..n - g];
        cell.trimmed_mean = mean_two_pass(kept);
        if n < 2 {
            return cell;
        }
        let (lo, hi) = (kept[0], kept[h - 1]);
        let var = if lo == hi {
            0.0
        } else {
            let gf = g as f64;
            let nf = n as f64;
            let m0 = (gf * lo + kept.iter().sum::<f64>() + gf * hi) / nf;
            let m = m0 + (gf * (lo - m0) + kept.iter().map(|x| x - m0).sum::<f64>() + gf * (hi - m0)) / nf;
            let ss = gf * (lo - m) * (lo - m)
                + kept.iter().map(|x| (x - m) * (x - m)).sum::<f64>()
                + gf * (hi - m) * (hi - m);
            ss / (nf - 1.0)
        };
        cell.winsorized_variance = var;
        if h >= 2 {
            cell.d = (n - 1) as f64 * var / (h * (h - 1)) as f64;
        }
        cell
    }

    /// `Ok` when the cell can enter a test: h ≥ 2 and a positive winsorized variance.
    ///
    /// # Errors
    /// The [`CellDefect`].
    pub fn check(&self) -> Result<(), CellDefect> {
        if self.h < 2 {
            Err(CellDefect::TooFewAfterTrimming { n: self.n, g: self.g })
        } else if self.winsorized_variance.is_nan() || self.winsorized_variance <= 0.0 {
            Err(CellDefect::ZeroWinsorizedVariance)
        } else {
            Ok(())
        }
    }
}

/// Johansen's Welch–James test of one contrast matrix (METHODS §4.2).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WelchJames {
    /// Rows of L, q (numerator df ν₁).
    pub q: usize,
    /// Q = (Lμ̂)'(LVL')⁻¹(Lμ̂), V = diag(d).
    pub statistic: f64,
    /// Johansen's A = Σ_c R_cc²/(h_c − 1), R = V L'(LVL')⁻¹L.
    pub a: f64,
    /// c_J = q + 2A − 6A/(q + 2).
    pub c: f64,
    /// ν₂ = q(q + 2)/(3A).
    pub df2: f64,
    /// F_WJ = Q/c_J.
    pub f: f64,
    /// P(F(q, ν₂) ≥ F_WJ): the default F form.
    pub p_f: f64,
    /// P(χ²_q ≥ c*), c* the root of a c² + b c = Q with a = 3A/(2q(q + 2)), b = 1 + A/(2q):
    /// the adjusted-critical-value form in closed form.
    pub p_adjusted: f64,
}

/// Cells a contrast involves: those with a non-zero entry in some row of L.
pub fn involved_cells(form: &WaldForm) -> Vec<bool> {
    let c = if form.q() == 0 { 0 } else { form.row(0).len() };
    (0..c).map(|j| (0..form.q()).any(|r| form.row(r)[j] != 0.0)).collect()
}

/// Johansen's (1980, Biometrika 67:85–92) Welch–James statistic for H₀: Lμ_t = 0 on
/// trimmed means, with Lix & Keselman's (1995) and Keselman, Wilcox & Lix's (2003)
/// use of trimmed means and winsorized variances (METHODS §4.2):
///
/// Q = (Lμ̂)'M⁻¹(Lμ̂), M = L V L', V = diag(d_c); R_cc = d_c ℓ_c'M⁻¹ℓ_c;
/// A = Σ_c R_cc²/(h_c − 1); c_J = q + 2A − 6A/(q + 2); ν₂ = q(q + 2)/(3A);
/// F_WJ = Q/c_J ~ F(q, ν₂). The adjusted-critical-value p solves the James-type
/// critical value Q = c[1 + (3c + q + 2)A/(2q(q + 2))] for c and takes P(χ²_q ≥ c).
///
/// `form` is any full-row-rank L over the cells of `cells` (a term's Kronecker
/// matrix, a simple effect, one contrast row). Only cells with a non-zero column in L
/// are checked and used; others may be degenerate. With one factor and L of rank C − 1
/// this is Welch's (1951) heteroscedastic F on trimmed means; with q = 1 it is the
/// Welch–Satterthwaite t² (Yuen's test for two cells); with γ = 0 Q equals q times the
/// HC2 Wald F.
///
/// # Errors
/// [`ContrastProblem::Cell`] naming the first involved cell with h < 2 or zero
/// winsorized variance; [`ContrastProblem::Singular`] when M is not positive definite.
pub fn welch_james(form: &WaldForm, cells: &[TrimmedCell]) -> Result<WelchJames, ContrastProblem> {
    let involved = involved_cells(form);
    let mut mu = vec![0.0; cells.len()];
    let mut v = vec![0.0; cells.len()];
    for (c, cell) in cells.iter().enumerate() {
        if involved.get(c).copied().unwrap_or(false) {
            cell.check().map_err(|defect| ContrastProblem::Cell { cell: c, defect })?;
            mu[c] = cell.trimmed_mean;
            v[c] = cell.d;
        }
    }
    let (statistic, leverage) = form.statistic_and_leverages(&mu, &v).ok_or(ContrastProblem::Singular)?;
    let a: f64 = cells
        .iter()
        .zip(&leverage)
        .zip(&involved)
        .filter(|(_, &inv)| inv)
        .map(|((cell, r), _)| r * r / (cell.h - 1) as f64)
        .sum();
    let q = form.q();
    let qf = q as f64;
    if a.is_nan() || a <= 0.0 || !statistic.is_finite() {
        return Err(ContrastProblem::Singular);
    }
    let c = qf + 2.0 * a - 6.0 * a / (qf + 2.0);
    let df2 = qf * (qf + 2.0) / (3.0 * a);
    let f = statistic / c;
    let p_f = dist::f_sf(f, qf, df2);
    let quad = 3.0 * a / (2.0 * qf * (qf + 2.0));
    let lin = 1.0 + a / (2.0 * qf);
    // Root of quad·c² + lin·c − Q = 0 in the cancellation-free form 2Q/(lin + √(lin² + 4·quad·Q)).
    let critical = 2.0 * statistic / (lin + (lin * lin + 4.0 * quad * statistic).sqrt());
    let p_adjusted = dist::chi2_sf(critical, qf);
    Ok(WelchJames { q, statistic, a, c, df2, f, p_f, p_adjusted })
}

/// Yuen's two-sample trimmed-means test with its confidence interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Yuen {
    /// X̄_t,first − X̄_t,second.
    pub difference: f64,
    /// √(d_first + d_second).
    pub se: f64,
    /// T = difference/se.
    pub t: f64,
    /// Welch–Satterthwaite df (d₁ + d₂)²/(d₁²/(h₁ − 1) + d₂²/(h₂ − 1)).
    pub df: f64,
    /// Two-sided p = 2·P(t_df ≥ |T|).
    pub p: f64,
    /// Lower end of difference ± t_{df, (1+level)/2}·se.
    pub ci_low: f64,
    /// Upper end of the interval.
    pub ci_high: f64,
    /// Confidence level of the interval.
    pub ci_level: f64,
}

/// Yuen's (1974, Biometrika 61:165–170) test of equal trimmed means of cells `first`
/// and `second` (METHODS §4.4): T = (X̄_t1 − X̄_t2)/√(d₁ + d₂),
/// df = (d₁ + d₂)²/(d₁²/(h₁ − 1) + d₂²/(h₂ − 1)), p = 2·P(t_df ≥ |T|), interval
/// (X̄_t1 − X̄_t2) ± t_{df,1−α/2}·√(d₁ + d₂) at `ci_level` = 1 − α. Same numbers as
/// scipy's `ttest_ind(x, y, equal_var=False, trim=γ)`; equals the q = 1 Welch–James
/// test of the contrast e_first − e_second (T² = Q, df = ν₂).
///
/// # Errors
/// [`ContrastProblem::Cell`] naming a cell with h < 2 or zero winsorized variance.
pub fn yuen(cells: &[TrimmedCell], first: usize, second: usize, ci_level: f64) -> Result<Yuen, ContrastProblem> {
    let pick = |c: usize| -> Result<&TrimmedCell, ContrastProblem> {
        let cell = &cells[c];
        cell.check().map_err(|defect| ContrastProblem::Cell { cell: c, defect })?;
        Ok(cell)
    };
    let (x, y) = (pick(first)?, pick(second)?);
    let difference = x.trimmed_mean - y.trimmed_mean;
    let var = x.d + y.d;
    let se = var.sqrt();
    let t = difference / se;
    let df = var * var / (x.d * x.d / (x.h - 1) as f64 + y.d * y.d / (y.h - 1) as f64);
    let p = (2.0 * dist::t_sf(t.abs(), df)).min(1.0);
    let crit = dist::t_quantile(0.5 + ci_level / 2.0, df);
    Ok(Yuen { difference, se, t, df, p, ci_low: difference - crit * se, ci_high: difference + crit * se, ci_level })
}

/// c_γ = √σ²_w(γ), the standard deviation of the γ-winsorized standard normal:
/// σ²_w(γ) = (1 − 2γ) − 2zφ(z) + 2γz², z = Φ⁻¹(1 − γ) (METHODS §4.5). c_0 = 1,
/// c_0.2 = 0.64193982.
pub fn winsorized_normal_scale(gamma: f64) -> f64 {
    if gamma <= 0.0 {
        return 1.0;
    }
    let z = dist::normal_quantile(1.0 - gamma);
    ((1.0 - 2.0 * gamma) - 2.0 * z * dist::normal_pdf(z) + 2.0 * gamma * z * z).sqrt()
}

/// Algina, Keselman & Penfield's (2005, Psychological Methods 10:317–328) robust
/// standardized difference of two cells (METHODS §4.5):
/// d_R = c_γ (X̄_t,second − X̄_t,first)/S_w,
/// S_w² = [(n₁ − 1)s²_w1 + (n₂ − 1)s²_w2]/(n₁ + n₂ − 2). Note the orientation
/// (second minus first), as in the paper.
///
/// # Errors
/// [`ContrastProblem::Cell`] naming a cell with h < 2 or zero winsorized variance.
pub fn akp_pair(cells: &[TrimmedCell], first: usize, second: usize) -> Result<f64, ContrastProblem> {
    for c in [first, second] {
        cells[c].check().map_err(|defect| ContrastProblem::Cell { cell: c, defect })?;
    }
    let (x, y) = (&cells[first], &cells[second]);
    let pooled =
        ((x.n - 1) as f64 * x.winsorized_variance + (y.n - 1) as f64 * y.winsorized_variance) / (x.n + y.n - 2) as f64;
    Ok(winsorized_normal_scale(x.gamma) * (y.trimmed_mean - x.trimmed_mean) / pooled.sqrt())
}

/// The robust standardized size of a 1-df contrast over all cells (METHODS §4.5,
/// a toolkit extension of Algina, Keselman & Penfield 2005): ℓ rescaled so that its
/// positive entries sum to 1 (a difference of unweighted marginal trimmed means),
/// ψ̂ = ℓ'μ̂_t, S_w² = Σ_c (n_c − 1)s²_w,c/(N − C), d_R = c_γ ψ̂/S_w. The sign follows
/// ℓ (for a term's H_a = [I | −1], the first level minus the last). A cell with zero
/// winsorized variance is allowed (it adds 0 to the pooled variance, as the formula
/// says); bootstrap resamples of small cells produce such cells often.
///
/// # Errors
/// [`ContrastProblem::Cell`] naming a cell with h < 2, or the first cell with zero
/// winsorized variance when every cell has it (S_w = 0); [`ContrastProblem::Singular`]
/// when ℓ has no positive entry or its length differs from the number of cells.
pub fn akp_contrast(l: &[f64], cells: &[TrimmedCell]) -> Result<f64, ContrastProblem> {
    if l.len() != cells.len() {
        return Err(ContrastProblem::Singular);
    }
    let mut pooled = 0.0;
    let mut df = 0usize;
    for (c, cell) in cells.iter().enumerate() {
        if cell.h < 2 || cell.winsorized_variance.is_nan() {
            return Err(ContrastProblem::Cell {
                cell: c,
                defect: CellDefect::TooFewAfterTrimming { n: cell.n, g: cell.g },
            });
        }
        pooled += (cell.n - 1) as f64 * cell.winsorized_variance;
        df += cell.n - 1;
    }
    if pooled.is_nan() || pooled <= 0.0 {
        return Err(ContrastProblem::Cell { cell: 0, defect: CellDefect::ZeroWinsorizedVariance });
    }
    let positive: f64 = l.iter().filter(|&&x| x > 0.0).sum();
    if positive.is_nan() || positive <= 0.0 || df == 0 {
        return Err(ContrastProblem::Singular);
    }
    let psi: f64 = l.iter().zip(cells).map(|(w, cell)| w / positive * cell.trimmed_mean).sum();
    let gamma = cells.first().map(|c| c.gamma).unwrap_or(0.0);
    Ok(winsorized_normal_scale(gamma) * psi / (pooled / df as f64).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::{Factor, Layout};

    /// METHODS §12.0 cells (invented data).
    fn cells() -> Vec<Vec<f64>> {
        vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ]
    }

    fn trimmed(gamma: f64) -> Vec<TrimmedCell> {
        cells().iter().map(|c| TrimmedCell::new(c, gamma)).collect()
    }

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs().max(1e-300)
    }

    #[test]
    fn cell_summaries_match_methods_12_3() {
        // Source: METHODS §12.3 (γ = 0.2), computed there with scipy trim_mean and mstats.winsorize.
        let t = trimmed(0.2);
        let h = [3, 5, 4, 6, 4, 5];
        let tm = [9.833333333, 10.26, 13.425, 9.783333333, 12.475, 15.86];
        let wv = [0.042, 0.5623809524, 1.815, 0.07928571429, 3.292, 5.151428571];
        let d = [0.028, 0.1687142857, 0.75625, 0.0185, 1.371666667, 1.545428571];
        for c in 0..6 {
            assert_eq!(t[c].g, 1);
            assert_eq!(t[c].h, h[c]);
            assert!(close(t[c].trimmed_mean, tm[c], 1e-9), "cell {c}");
            assert!(close(t[c].winsorized_variance, wv[c], 1e-9), "cell {c}");
            assert!(close(t[c].d, d[c], 1e-9), "cell {c}");
        }
    }

    #[test]
    fn allocation_free_summaries_agree_with_the_summary_module() {
        // Property: the in-place winsorized variance equals summary's (which builds the sample).
        for gamma in [0.0, 0.1, 0.2, 0.3, 0.45] {
            for c in cells() {
                let s = summary::sorted(&c);
                let t = TrimmedCell::from_sorted(&s, gamma);
                assert!(close(t.trimmed_mean, summary::trimmed_mean_sorted(&s, gamma), 1e-14));
                assert!(close(t.winsorized_variance, summary::winsorized_variance_sorted(&s, gamma), 1e-12));
            }
        }
    }

    #[test]
    fn degenerate_cells_are_named_defects() {
        let tiny = TrimmedCell::new(&[1.0, 2.0, 3.0], 0.4);
        assert_eq!(tiny.check(), Err(CellDefect::TooFewAfterTrimming { n: 3, g: 1 }));
        let flat = TrimmedCell::new(&[5.0, 1.0, 5.0, 5.0, 9.0], 0.2);
        assert_eq!(flat.winsorized_variance, 0.0);
        assert_eq!(flat.check(), Err(CellDefect::ZeroWinsorizedVariance));
        assert!(flat.trimmed_mean.is_finite() && flat.d == 0.0);
        let one = TrimmedCell::new(&[1.0], 0.0);
        assert!(one.check().is_err());
        let text = CellDefect::TooFewAfterTrimming { n: 3, g: 1 }.describe("A=a1");
        assert!(text.contains("A=a1") && text.contains("h = 1"), "{text}");
        let text = CellDefect::TooFewAfterTrimming { n: 1, g: 0 }.describe("A=a2");
        assert!(text.contains("A=a2") && text.contains("n = 1"), "{text}");
    }

    fn layout(shape: &[usize]) -> Layout {
        let names = ["A", "B", "C"];
        Layout::new(
            shape
                .iter()
                .enumerate()
                .map(|(i, &a)| Factor {
                    name: names[i].into(),
                    levels: (0..a).map(|l| format!("{l}")).collect(),
                    measured: false,
                })
                .collect(),
        )
    }

    #[test]
    fn factorial_johansen_matches_methods_12_3() {
        // Source: METHODS §12.3 factorial Johansen (self-computed there; independent numpy
        // check in tests/reference/gen/heteroscedastic.py).
        let t = trimmed(0.2);
        let lay = layout(&[2, 3]);
        let want = [
            (5.441603728, 0.09407237010, 1.0, 10.63011380, 0.04043294702, 0.03705443049),
            (45.20968303, 0.3956855026, 2.197842751, 6.739359030, 0.001350877889, 0.0001027513404),
            (5.725538455, 0.3956855026, 2.197842751, 6.739359030, 0.1451628274, 0.1297648343),
        ];
        for (term, w) in want.iter().enumerate() {
            let wj = welch_james(&WaldForm::new(&lay, term), &t).unwrap();
            assert!(close(wj.statistic, w.0, 1e-9), "Q {term}: {}", wj.statistic);
            assert!(close(wj.a, w.1, 1e-9), "A {term}: {}", wj.a);
            assert!(close(wj.c, w.2, 1e-9), "c {term}: {}", wj.c);
            assert!(close(wj.df2, w.3, 1e-9), "nu2 {term}: {}", wj.df2);
            assert!(close(wj.p_f, w.4, 1e-8), "p_F {term}: {}", wj.p_f);
            assert!(close(wj.p_adjusted, w.5, 1e-8), "p_adj {term}: {}", wj.p_adjusted);
        }
    }

    #[test]
    fn one_way_johansen_is_welch_on_trimmed_means() {
        // Source: METHODS §12.3, statsmodels anova_oneway(use_var='unequal', trim_frac=0.2 and 0):
        // F = 6.977310241, df (5, 8.554070089), p = 0.007203375051;
        // untrimmed F = 11.70825784, df (5, 14.57576769), p = 0.0001104430561.
        let lay = layout(&[6]);
        let form = WaldForm::new(&lay, 0);
        let wj = welch_james(&form, &trimmed(0.2)).unwrap();
        assert!(close(wj.f, 6.977310241, 1e-9));
        assert!(close(wj.df2, 8.554070089, 1e-9));
        assert!(close(wj.p_f, 0.007203375051, 1e-8));
        let wj = welch_james(&form, &trimmed(0.0)).unwrap();
        assert!(close(wj.f, 11.70825784, 1e-9));
        assert!(close(wj.df2, 14.57576769, 1e-9));
        assert!(close(wj.p_f, 0.0001104430561, 1e-8));
    }

    #[test]
    fn yuen_matches_scipy_and_the_one_df_johansen() {
        // Source: METHODS §12.3 / scipy ttest_ind(a1b3, a2b3, equal_var=False, trim=0.2):
        // T = −1.605005882, df = 6.725344042, p = 0.1542715278; scipy
        // confidence_interval(0.95) = (−6.052353013667474, 1.1823530136674698).
        let t = trimmed(0.2);
        let y = yuen(&t, 2, 5, 0.95).unwrap();
        assert!(close(y.t, -1.605005882, 1e-9));
        assert!(close(y.df, 6.725344042, 1e-9));
        assert!(close(y.p, 0.1542715278, 1e-8));
        assert!(close(y.ci_low, -6.052353013667474, 1e-9));
        assert!(close(y.ci_high, 1.1823530136674698, 1e-9));
        // q = 1 Johansen of a1b1 vs a2b1: Q = t² = 0.05376344086, ν₂ = 4.695949615, p = 0.8264017391.
        let mut l = vec![0.0; 6];
        l[0] = 1.0;
        l[3] = -1.0;
        let wj = welch_james(&WaldForm::from_matrix(1, 6, l), &t).unwrap();
        assert!(close(wj.statistic, 0.05376344086, 1e-9));
        assert!(close(wj.df2, 4.695949615, 1e-9));
        assert!(close(wj.p_f, 0.8264017391, 1e-8));
        let y = yuen(&t, 0, 3, 0.95).unwrap();
        assert!(close(y.t * y.t, wj.statistic, 1e-12) && close(y.df, wj.df2, 1e-12) && close(y.p, wj.p_f, 1e-10));
    }

    #[test]
    fn robust_effect_size_matches_methods_12_3() {
        // Source: METHODS §4.5 and §12.3: c_0.2 = 0.64193982, d_R(a2b3 − a1b3) = 0.8198772379.
        assert!(close(winsorized_normal_scale(0.2), 0.64193982, 1e-8));
        assert_eq!(winsorized_normal_scale(0.0), 1.0);
        let t = trimmed(0.2);
        assert!(close(akp_pair(&t, 2, 5).unwrap(), 0.8198772379, 1e-9));
    }

    #[test]
    fn uninvolved_degenerate_cells_do_not_block_a_contrast() {
        let mut t = trimmed(0.2);
        t[1] = TrimmedCell::new(&[1.0], 0.2);
        let mut l = vec![0.0; 6];
        l[0] = 1.0;
        l[3] = -1.0;
        assert!(welch_james(&WaldForm::from_matrix(1, 6, l), &t).is_ok());
        let lay = layout(&[2, 3]);
        let err = welch_james(&WaldForm::new(&lay, 0), &t).unwrap_err();
        assert!(matches!(err, ContrastProblem::Cell { cell: 1, .. }));
    }
}
