//! Alignment for the aligned rank transform (METHODS §5.1 with Overrides 5), the ranking
//! of aligned responses, the full factorial fit to ranks, and the alignment's internal
//! consistency check (§5.2).
//!
//! The effect of a term S is estimated by the saturated model's sum-coded least-squares
//! term estimate, which is inclusion–exclusion on the *unweighted* marginal means of the
//! cell means. As an operator on the vector of cell means it is a Kronecker product,
//! ê_S = (⊗_f M_f) ȳ with M_f = I − J/a (centring) for f ∈ S and J/a (averaging) for
//! f ∉ S, so it costs O(C·Σ a_f) for any number of factors and needs no C×C matrix.
//! Because ê_S sums to zero over every index in S and is constant over every factor
//! outside S, every Type III hypothesis matrix L_T with T ≠ S annihilates it: the
//! non-target sums of squares of the aligned responses are zero *exactly* (in exact
//! arithmetic), in balanced and unbalanced designs alike. [`check_alignment`] tests that
//! on every analysis; a failure is a bug (exit 4), not a property of the data.

use super::{weighted_mid_ranks, TieRule};
use crate::design::forms::SsForms;
use crate::design::kron::{self, Small};
use crate::design::Design;
use crate::error::{Error, Result};
use crate::model::{mean_two_pass, Fit};

/// Aligned values closer than this multiple of the outcome's scale (max |y − ȳ|) are
/// tied. Rounding in y − ȳ_c + ê_c is a few units of 1e-16 times the scale (times the
/// number of levels summed in the Kronecker products), so values equal in exact
/// arithmetic land well within it, while distinct data values closer than 1e-11 of the
/// outcome's range do not occur in measured data.
pub const ALIGNED_TIE_REL: f64 = 1e-11;

/// Non-target sums of squares of the aligned, unranked responses must be at most this
/// share of SST; kept terms must reproduce their classical SS to the same share
/// (METHODS §5.2: balanced designs observed ≤ 1e−28; the bound only catches bugs).
pub const ALIGNMENT_SS_REL: f64 = 1e-10;

/// The sum of the aligned cell means must be at most this multiple of C·max|y − ȳ|
/// (and, in a balanced design, the sum over observations at most this multiple of
/// N·max|y − ȳ|): rounding leaves a few units of 1e-16 per term summed.
pub const ALIGNMENT_SUM_REL: f64 = 1e-10;

/// The Kronecker operator ⊗_f (I − J/a_f if f ∈ `centre`, I if f ∈ `keep`, else J/a_f).
fn projection_blocks(shape: &[usize], centre: &[usize], keep: &[usize]) -> Vec<Small> {
    shape
        .iter()
        .enumerate()
        .map(|(f, &a)| {
            let af = a as f64;
            let mut data = vec![0.0; a * a];
            for i in 0..a {
                for j in 0..a {
                    let id = if i == j { 1.0 } else { 0.0 };
                    data[i * a + j] = if centre.contains(&f) {
                        id - 1.0 / af
                    } else if keep.contains(&f) {
                        id
                    } else {
                        1.0 / af
                    };
                }
            }
            Small { rows: a, cols: a, data }
        })
        .collect()
}

/// The sum-coded least-squares estimate of term S at every cell of the saturated model:
/// ê_S(c) = Σ_{T⊆S} (−1)^{|S|−|T|} U_T(c), with U_T the unweighted marginal mean of the
/// cell means over the factors outside T (U_∅ the unweighted grand mean). Main effect:
/// U_A − U_∅; two-way: U_AB − U_A − U_B + U_∅ (METHODS Overrides 5).
///
/// `shape` is the level count of each factor, `cell_means` is in cell order (row-major,
/// last factor fastest), `term` lists factor indices.
pub fn term_effect(shape: &[usize], cell_means: &[f64], term: &[usize]) -> Vec<f64> {
    kron::kron_apply(&kron::refs(&term_projection(shape, term)), cell_means)
}

/// Blocks of T_S = ⊗_f (I − J/a_f if f ∈ S else J/a_f): the orthogonal projection onto the
/// row space of the Type III hypothesis matrix L_S, T_S = L_S'(L_S L_S')⁻¹L_S (each
/// factor's block projects onto the row space of H_a or of 1'_a). Applied to cell means
/// it gives the term's sum-coded estimate ê_S; the rank ATS uses it as its T_S (§6.2).
pub fn term_projection(shape: &[usize], term: &[usize]) -> Vec<Small> {
    projection_blocks(shape, term, &[])
}

/// The whole marginal effect of a factor set S: U_S(c) − U_∅ = Σ_{∅≠T⊆S} ê_T(c), the
/// unweighted marginal mean of S's level combination minus the unweighted grand mean
/// (what ART-C aligns for; Elkin, Kay, Higgins & Wobbrock 2021; METHODS §5.3).
pub fn marginal_effect(shape: &[usize], cell_means: &[f64], set: &[usize]) -> Vec<f64> {
    let kept = kron::kron_apply(&kron::refs(&projection_blocks(shape, &[], set)), cell_means);
    let grand = kron::kron_apply(&kron::refs(&projection_blocks(shape, &[], &[])), cell_means);
    kept.iter().zip(&grand).map(|(k, g)| k - g).collect()
}

/// Aligned responses y_i − ȳ_c(i) + e_c(i) in canonical order: the residual from the
/// cell mean plus the per-cell effect `effect` (METHODS §5.1 step 3).
pub fn aligned(design: &Design, fit: &Fit, effect: &[f64]) -> Vec<f64> {
    let mut out = Vec::with_capacity(design.n_obs());
    for (c, (&m, &e)) in fit.mean.iter().zip(effect).enumerate() {
        out.extend(design.cell_values(c).iter().map(|y| (y - m) + e));
    }
    out
}

/// The tie tolerance for aligned responses of this design (outcome units):
/// [`ALIGNED_TIE_REL`] times the largest |y − ȳ|.
pub fn aligned_tie_tolerance(design: &Design, fit: &Fit) -> f64 {
    let scale = design.y().iter().map(|y| (y - fit.grand_mean).abs()).fold(0.0, f64::max);
    ALIGNED_TIE_REL * scale
}

/// The tie rule for aligned responses of this design ([`aligned_tie_tolerance`]).
pub fn aligned_tie_rule(design: &Design, fit: &Fit) -> TieRule {
    TieRule::Within(aligned_tie_tolerance(design, fit))
}

/// Mid-ranks of aligned responses over all N observations, ties by `rule`.
pub fn aligned_ranks(aligned: &[f64], rule: TieRule) -> Vec<f64> {
    weighted_mid_ranks(aligned, &vec![1.0; aligned.len()], rule)
}

/// The full factorial model fitted to ranks (or any response in canonical order):
/// cell means, cell sums centred at the grand mean (input to the SS forms), the error
/// sum of squares (two-pass within cells) and its df N − C.
#[derive(Debug, Clone)]
pub struct RankedFit {
    /// Cell means of the ranks.
    pub mean: Vec<f64>,
    /// Cell sums of (rank − grand mean of ranks).
    pub centred_sums: Vec<f64>,
    /// Σ_c Σ_i (R_ci − R̄_c)².
    pub sse: f64,
    /// N − C.
    pub df_error: usize,
    /// Σ_i (R_i − R̄)².
    pub sst: f64,
}

impl RankedFit {
    /// Fits the cell-means model to `values` (canonical order).
    pub fn new(design: &Design, values: &[f64]) -> RankedFit {
        let grand = mean_two_pass(values);
        let mut mean = Vec::with_capacity(design.n_cells());
        let mut centred_sums = Vec::with_capacity(design.n_cells());
        let mut sse = 0.0;
        for c in 0..design.n_cells() {
            let v = &values[design.cell_range(c)];
            let m = mean_two_pass(v);
            sse += v.iter().map(|x| (x - m) * (x - m)).sum::<f64>();
            mean.push(m);
            centred_sums.push(v.iter().map(|x| x - grand).sum());
        }
        let sst = values.iter().map(|x| (x - grand) * (x - grand)).sum();
        RankedFit { mean, centred_sums, sse, df_error: design.n_obs() - design.n_cells(), sst }
    }

    /// Mean squared error SSE/(N − C).
    pub fn mse(&self) -> f64 {
        self.sse / self.df_error as f64
    }
}

/// What the alignment check measured (METHODS §5.2 under Overrides 5).
#[derive(Debug, Clone, PartialEq)]
pub struct AlignmentCheck {
    /// Σ_i y^(S)_i over observations. Zero in balanced designs; under Overrides 5 in
    /// unbalanced designs it is Σ_c n_c ê_S(c), generally not zero (ranks ignore shifts).
    pub observation_sum: f64,
    /// Σ_c (cell mean of y^(S)): zero in every design (the estimates sum to zero).
    pub cell_mean_sum: f64,
    /// Largest SS of a term the alignment removes, as a share of SST (should be 0).
    pub max_removed_ss_share: f64,
    /// Largest |SS_aligned − SS_classical| of a term the alignment keeps, share of SST.
    pub max_kept_ss_error_share: f64,
}

/// Checks aligned, unranked responses: the aligned cell means sum to zero (and, in a
/// balanced design, so do the responses); every term the alignment removes
/// (`kept[t] == false`) has Type III SS ≤ [`ALIGNMENT_SS_REL`]·SST, and every kept term
/// reproduces its classical Type III SS (`classical_ss[t]`) to the same share.
///
/// # Errors
/// [`Error::internal`] (exit 4) naming `label`, the check and the value, when a bound
/// fails: the alignment is then wrong, whatever the data.
pub fn check_alignment(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    aligned: &[f64],
    kept: &[bool],
    classical_ss: &[f64],
    label: &str,
) -> Result<AlignmentCheck> {
    let scale = design.y().iter().map(|y| (y - fit.grand_mean).abs()).fold(0.0, f64::max);
    let observation_sum: f64 = aligned.iter().sum();
    let sums = design.cell_sums(aligned);
    let cell_mean_sum: f64 = sums.iter().zip(&fit.n).map(|(s, &n)| s / n as f64).sum();
    let c = design.n_cells() as f64;
    let n = design.n_obs() as f64;
    if exceeds(cell_mean_sum.abs(), ALIGNMENT_SUM_REL * c * scale) {
        return Err(Error::internal(format!(
            "ART alignment for {label}: the aligned cell means sum to {cell_mean_sum:e}, not 0 (bound {:e})",
            ALIGNMENT_SUM_REL * c * scale
        )));
    }
    if design.is_balanced() && exceeds(observation_sum.abs(), ALIGNMENT_SUM_REL * n * scale) {
        return Err(Error::internal(format!(
            "ART alignment for {label}: the aligned responses of a balanced design sum to {observation_sum:e}, not 0"
        )));
    }
    let mut max_removed_ss_share: f64 = 0.0;
    let mut max_kept_ss_error_share: f64 = 0.0;
    if fit.sst > 0.0 {
        for (t, term) in design.terms().iter().enumerate() {
            let ss = forms.ss(t, &sums);
            if kept[t] {
                let err = (ss - classical_ss[t]).abs() / fit.sst;
                max_kept_ss_error_share = max_kept_ss_error_share.max(err);
                if exceeds(err, ALIGNMENT_SS_REL) {
                    return Err(Error::internal(format!(
                        "ART alignment for {label}: term {} keeps SS {ss:e} instead of its classical {:e} (difference {err:e} of SST)",
                        term.name, classical_ss[t]
                    )));
                }
            } else {
                let share = ss.abs() / fit.sst;
                max_removed_ss_share = max_removed_ss_share.max(share);
                if exceeds(share, ALIGNMENT_SS_REL) {
                    return Err(Error::internal(format!(
                        "ART alignment for {label}: the removed term {} still has SS {ss:e} ({share:e} of SST; bound {ALIGNMENT_SS_REL:e})",
                        term.name
                    )));
                }
            }
        }
    }
    Ok(AlignmentCheck { observation_sum, cell_mean_sum, max_removed_ss_share, max_kept_ss_error_share })
}

/// A value beyond its bound, NaN counting as beyond (a check must never pass on NaN).
fn exceeds(value: f64, bound: f64) -> bool {
    value.is_nan() || value > bound
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn effects_follow_inclusion_exclusion_on_unweighted_marginal_means() {
        // 2×3 cell means, worked by hand: U_∅ = 3.5, U_A = (2, 5), U_B = (2.5, 3.5, 4.5).
        let mu = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
        let shape = [2, 3];
        let a = term_effect(&shape, &mu, &[0]);
        let b = term_effect(&shape, &mu, &[1]);
        let ab = term_effect(&shape, &mu, &[0, 1]);
        let close = |x: &[f64], y: &[f64]| x.iter().zip(y).all(|(p, q)| (p - q).abs() < 1e-14);
        assert!(close(&a, &[-1.5, -1.5, -1.5, 1.5, 1.5, 1.5]));
        assert!(close(&b, &[-1.0, 0.0, 1.0, -1.0, 0.0, 1.0]));
        assert!(close(&ab, &[0.0; 6]), "additive means have no interaction");
        // The whole marginal effect of {A, B} is the cell mean minus the grand mean.
        let m = marginal_effect(&shape, &mu, &[0, 1]);
        assert!(close(&m, &mu.iter().map(|x| x - 3.5).collect::<Vec<_>>()));
        let ma = marginal_effect(&shape, &mu, &[0]);
        assert!(close(&ma, &a));
        // Main effects and interaction add back to the centred cell means.
        let sum: Vec<f64> = (0..6).map(|c| a[c] + b[c] + ab[c]).collect();
        assert!(close(&sum, &m));
    }

    #[test]
    fn interaction_effect_is_a_difference_of_differences() {
        // 2×2 means (1, 2, 3, 10): interaction estimate ±(1 − 2 − 3 + 10)/4 = ±1.5.
        let ab = term_effect(&[2, 2], &[1.0, 2.0, 3.0, 10.0], &[0, 1]);
        assert_eq!(ab, vec![1.5, -1.5, -1.5, 1.5]);
    }
}
