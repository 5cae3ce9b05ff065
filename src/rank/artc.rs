//! ART-C contrasts (Elkin, Kay, Higgins & Wobbrock 2021, Proc. UIST '21, pp. 754–768;
//! METHODS §5.3): pairwise comparisons of the level combinations of any factor set, and
//! difference-of-differences interaction contrasts, on aligned ranks.
//!
//! Ordinary ART ranks are aligned for one term and answer only that term's F test;
//! comparing level combinations on them mixes in the other terms' removal. ART-C aligns
//! for the *whole* marginal effect of the factor set S instead (residual plus U_S − U_∅,
//! all terms T ⊆ S kept), ranks, fits the full factorial to the ranks and compares
//! unweighted marginal rank means with the pooled rank MSE. Interaction contrasts use
//! the ordinary ART ranks aligned for the interaction S (§5.3 last sentence).
//! Alignment uses the unweighted (saturated-model) estimates of Overrides 5, like the
//! `art` engine, and is checked the same way.
//!
//! Multiplicity: each call is one family; [`Adjustment::Holm`] adjusts within it
//! (Holm 1979), [`Adjustment::None`] leaves adjustment to the caller (e.g. a follow-up
//! module that pools families or prefers another method).

use super::align::{self, AlignmentCheck, RankedFit};
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::dist;
use crate::error::{Error, Result};
use crate::model::Fit;

/// Multiplicity adjustment within one family of contrasts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Adjustment {
    /// Raw p-values only (the caller adjusts).
    None,
    /// Holm's step-down adjustment (valid under any dependence).
    Holm,
}

/// Which family of contrasts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ContrastKind {
    /// Every pair of level combinations of the factor set.
    Pairwise,
    /// Every difference of differences: one pair of levels per factor of the set.
    Interaction,
}

/// The two levels a contrast compares on one factor.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LevelPair {
    /// Factor name.
    pub factor: String,
    /// Level entering with a plus sign.
    pub first: String,
    /// Level entering with a minus sign (equal to `first` when a pairwise contrast holds
    /// this factor fixed).
    pub second: String,
}

/// One ART-C contrast on the aligned-rank scale.
#[derive(Debug, Clone, PartialEq)]
pub struct ArtcContrast {
    /// Levels compared, one entry per factor of the set.
    pub levels: Vec<LevelPair>,
    /// Pairwise: marginal rank mean of `first` minus that of `second` (unweighted over
    /// the other factors). Interaction: the difference of differences ℓ'R̄.
    pub estimate: f64,
    /// √(MSE_rank · Σ_c ℓ_c²/n_c).
    pub se: f64,
    /// estimate / se.
    pub t: f64,
    /// N − C.
    pub df: f64,
    /// Two-sided p from t(N − C).
    pub p: f64,
    /// Adjusted p within the family (equals `p` with [`Adjustment::None`]).
    pub p_adjusted: f64,
}

/// A family of ART-C contrasts for one factor set.
#[derive(Debug, Clone, PartialEq)]
pub struct ArtcFamily {
    /// Factor names of the set, in factor order.
    pub factors: Vec<String>,
    /// Pairwise or interaction.
    pub kind: ContrastKind,
    /// Adjustment applied within the family.
    pub adjustment: Adjustment,
    /// Contrasts in a fixed order (level combinations row-major, pairs (i, j) with i < j).
    pub contrasts: Vec<ArtcContrast>,
    /// Pooled mean squared error of the full factorial on the ranks.
    pub mse: f64,
    /// The alignment check of the ranks used.
    pub check: AlignmentCheck,
    /// Why the family cannot be computed, when it cannot (then `contrasts` is empty).
    pub not_applicable: Option<String>,
}

/// All pairwise ART-C comparisons of the level combinations of `factors` (indices into
/// the design's factors; any non-empty subset, e.g. one factor for its levels, all
/// factors for the cells).
///
/// Alignment (Elkin et al. 2021): y^C_i = (y_i − ȳ_c(i)) + (U_S(i) − U_∅), where U_S is
/// the unweighted marginal mean of the cell means at i's levels of S; mid-ranks over all
/// N (ties within [`align::ALIGNED_TIE_REL`] of the scale); full factorial fitted to the
/// ranks; contrast of combinations j and k: ℓ_c = ±1/m on the m cells of each, estimate
/// ℓ'R̄, SE² = MSE_rank·Σ ℓ_c²/n_c, t with df N − C, two-sided p. For one factor this is
/// the ART main-effect alignment; for all factors it ranks y itself.
///
/// # Errors
/// A usage error for an empty or invalid factor set; [`Error::internal`] when the
/// alignment check fails (a bug).
pub fn pairwise(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    factors: &[usize],
    adjustment: Adjustment,
) -> Result<ArtcFamily> {
    let set = factor_set(design, factors, 1)?;
    let shape = design.shape();
    let effect = align::marginal_effect(shape, &fit.mean, &set);
    let kept: Vec<bool> = design.terms().iter().map(|t| t.factors.iter().all(|f| set.contains(f))).collect();
    let combos = combinations(shape, &set);
    let mut specs = Vec::new();
    for j in 0..combos.len() {
        for k in j + 1..combos.len() {
            let pairs: Vec<(usize, usize, usize)> =
                set.iter().enumerate().map(|(i, &f)| (f, combos[j][i], combos[k][i])).collect();
            specs.push(pairs);
        }
    }
    family(design, fit, forms, &set, effect, &kept, specs, ContrastKind::Pairwise, adjustment)
}

/// All difference-of-differences (interaction) ART-C contrasts of the factor set
/// `factors` (at least two factors): for every choice of one pair of levels (i < j) per
/// factor, ℓ = ⊗_{f∈S}(e_i − e_j) ⊗_{f∉S} 1/a_f, tested on the ordinary ART ranks
/// aligned for the interaction S (METHODS §5.3), SE and t as in [`pairwise`].
///
/// # Errors
/// As [`pairwise`]; also a usage error for fewer than two factors.
pub fn interaction(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    factors: &[usize],
    adjustment: Adjustment,
) -> Result<ArtcFamily> {
    let set = factor_set(design, factors, 2)?;
    let shape = design.shape();
    let effect = align::term_effect(shape, &fit.mean, &set);
    let kept: Vec<bool> = design.terms().iter().map(|t| t.factors == set).collect();
    let per_factor: Vec<Vec<(usize, usize)>> =
        set.iter().map(|&f| (0..shape[f]).flat_map(|i| (i + 1..shape[f]).map(move |j| (i, j))).collect()).collect();
    let mut specs = Vec::new();
    let mut idx = vec![0usize; set.len()];
    'outer: loop {
        specs.push(
            set.iter().enumerate().map(|(i, &f)| (f, per_factor[i][idx[i]].0, per_factor[i][idx[i]].1)).collect(),
        );
        for pos in (0..set.len()).rev() {
            idx[pos] += 1;
            if idx[pos] < per_factor[pos].len() {
                continue 'outer;
            }
            idx[pos] = 0;
        }
        break;
    }
    family(design, fit, forms, &set, effect, &kept, specs, ContrastKind::Interaction, adjustment)
}

/// Sorted, validated factor indices.
fn factor_set(design: &Design, factors: &[usize], min: usize) -> Result<Vec<usize>> {
    let mut set = factors.to_vec();
    set.sort_unstable();
    set.dedup();
    let k = design.factors().len();
    if set.len() < min || set.len() != factors.len() || set.iter().any(|&f| f >= k) {
        return Err(Error::usage(
            format!("ART-C contrasts need {min} or more distinct factors of the design (got indices {factors:?})"),
            "name each factor once",
        ));
    }
    Ok(set)
}

/// Level combinations of `set`, row-major (last factor fastest).
fn combinations(shape: &[usize], set: &[usize]) -> Vec<Vec<usize>> {
    let mut out = vec![Vec::new()];
    for &f in set {
        out = out
            .into_iter()
            .flat_map(|p: Vec<usize>| (0..shape[f]).map(move |l| [p.clone(), vec![l]].concat()))
            .collect();
    }
    out
}

#[allow(clippy::too_many_arguments)]
fn family(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    set: &[usize],
    effect: Vec<f64>,
    kept: &[bool],
    specs: Vec<Vec<(usize, usize, usize)>>,
    kind: ContrastKind,
    adjustment: Adjustment,
) -> Result<ArtcFamily> {
    let names: Vec<String> = set.iter().map(|&f| design.factors()[f].name.clone()).collect();
    let y = align::aligned(design, fit, &effect);
    let classical = fit.term_ss(forms);
    let label = format!("ART-C on {}", names.join(":"));
    let check = align::check_alignment(design, fit, forms, &y, kept, &classical, &label)?;
    let ranks = align::aligned_ranks(&y, align::aligned_tie_rule(design, fit));
    let rf = RankedFit::new(design, &ranks);
    let mut out = ArtcFamily {
        factors: names,
        kind,
        adjustment,
        contrasts: Vec::new(),
        mse: rf.mse(),
        check,
        not_applicable: None,
    };
    if rf.df_error == 0 {
        out.not_applicable = Some("no residual degrees of freedom (every cell has one observation)".into());
        return Ok(out);
    }
    if rf.sse.is_nan() || rf.sse <= 0.0 {
        out.not_applicable =
            Some("the aligned ranks are constant within every cell: no rank error variance, t undefined".into());
        return Ok(out);
    }
    let layout = &design.layout;
    let shape = design.shape();
    let cells: Vec<Vec<usize>> = (0..design.n_cells()).map(|c| layout.cell_levels(c)).collect();
    let df = rf.df_error as f64;
    let mse = rf.mse();
    for spec in specs {
        let mut est = 0.0;
        let mut var = 0.0;
        for (c, lv) in cells.iter().enumerate() {
            let w = coefficient(kind, shape, set, &spec, lv);
            if w != 0.0 {
                est += w * rf.mean[c];
                var += w * w / fit.n[c] as f64;
            }
        }
        let se = (mse * var).sqrt();
        let t = est / se;
        let p = (2.0 * dist::t_sf(t.abs(), df)).min(1.0);
        let levels = spec
            .iter()
            .map(|&(f, i, j)| LevelPair {
                factor: layout.factors[f].name.clone(),
                first: layout.factors[f].levels[i].clone(),
                second: layout.factors[f].levels[j].clone(),
            })
            .collect();
        out.contrasts.push(ArtcContrast { levels, estimate: est, se, t, df, p, p_adjusted: p });
    }
    if adjustment == Adjustment::Holm {
        let raw: Vec<Option<f64>> = out.contrasts.iter().map(|c| Some(c.p)).collect();
        let adjusted = crate::multiplicity::adjust(&raw, crate::multiplicity::Adjust::Holm);
        for (c, a) in out.contrasts.iter_mut().zip(adjusted) {
            c.p_adjusted = a.unwrap_or(c.p);
        }
    }
    Ok(out)
}

/// ℓ_c of one contrast at a cell with levels `lv`.
fn coefficient(
    kind: ContrastKind,
    shape: &[usize],
    set: &[usize],
    spec: &[(usize, usize, usize)],
    lv: &[usize],
) -> f64 {
    // Cells per level combination of the set (the other factors' levels).
    let m: usize = (0..shape.len()).filter(|f| !set.contains(f)).map(|f| shape[f]).product();
    match kind {
        ContrastKind::Pairwise => {
            if spec.iter().all(|&(f, i, _)| lv[f] == i) {
                1.0 / m as f64
            } else if spec.iter().all(|&(f, _, j)| lv[f] == j) {
                -1.0 / m as f64
            } else {
                0.0
            }
        }
        ContrastKind::Interaction => {
            let mut w = 1.0 / m as f64;
            for &(f, i, j) in spec {
                w *= if lv[f] == i {
                    1.0
                } else if lv[f] == j {
                    -1.0
                } else {
                    return 0.0;
                };
            }
            w
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn combinations_are_row_major() {
        assert_eq!(combinations(&[2, 3, 2], &[0, 2]), vec![vec![0, 0], vec![0, 1], vec![1, 0], vec![1, 1]]);
    }
}
