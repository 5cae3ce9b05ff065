//! The rank ANOVA-type statistic with Box-type degrees of freedom (id `rank-ats`;
//! Brunner, Dette & Munk 1997, JASA 92:1494–1502; Brunner & Puri 2001, Statistical
//! Papers 42:1–52; METHODS §6 with Overrides 7 and 12).
//!
//! The hypothesis is about distribution functions, H0: T_S F = 0, so the test is
//! unchanged by any strictly increasing transform of the outcome. Everything is
//! per-cell: relative effects p̂_c from the cells' mean ranks and a diagonal covariance
//! V̂ from the within-cell rank variances, so the statistic of each term is a few
//! Kronecker mode products (T_S is the projection ⊗_f (I − J/a or J/a), whose diagonal is
//! constant) and no C×C matrix is formed.
//!
//! Ranks: mid-ranks over all N in balanced designs and pseudo-ranks (Brunner,
//! Konietschke, Pauly & Puri 2017, JRSS-B 79:1463–1485) when cell sizes differ. With
//! mid-ranks the relative effects are measured against the *observation-weighted*
//! mixture of the cell distributions, so the hypothesis and the estimated effects change
//! with the cell sizes (Brunner et al. 2017 show the resulting paradoxes); pseudo-ranks
//! measure them against the *unweighted* mean distribution, a fixed property of the
//! experiment, matching the unweighted Type III hypotheses of the other engines. In
//! balanced designs the two coincide exactly.

use super::{all_not_applicable, Context, Engine};
use crate::design::kron;
use crate::design::Design;
use crate::dist;
use crate::error::Result;
use crate::rank::{self, align};
use crate::results::{
    finite, AtsTerm, Decision, Details, Effect, EngineResult, RankAtsDetails, RelativeEffect, TermResult,
};
use serde_json::json;
use std::collections::BTreeMap;

/// The rank ATS engine.
pub struct RankAts;

/// Which ranks the statistic uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RankScheme {
    /// Mid-ranks over all N (weighted relative effects).
    MidRanks,
    /// Pseudo-ranks (unweighted relative effects; Brunner et al. 2017).
    PseudoRanks,
}

impl RankScheme {
    /// Mid-ranks for a balanced design (where they equal pseudo-ranks), pseudo-ranks otherwise.
    pub fn for_design(design: &Design) -> RankScheme {
        if design.is_balanced() {
            RankScheme::MidRanks
        } else {
            RankScheme::PseudoRanks
        }
    }

    /// `mid-ranks` or `pseudo-ranks`.
    pub fn name(self) -> &'static str {
        match self {
            RankScheme::MidRanks => "mid-ranks",
            RankScheme::PseudoRanks => "pseudo-ranks",
        }
    }
}

/// The rank ATS of one term.
#[derive(Debug, Clone, PartialEq)]
pub struct AtsTermResult {
    /// F = N·p̂'T_S p̂ / tr(T_S V̂).
    pub statistic: f64,
    /// tr(T_S V̂).
    pub trace: f64,
    /// f̂ = tr(T_S V̂)² / tr(T_S V̂ T_S V̂).
    pub f_hat: f64,
    /// f̂₀ = tr(T_S V̂)² / tr(D_T² V̂² Λ), Λ = diag(1/(n_c − 1)).
    pub f0_hat: f64,
    /// P(F(f̂, f̂₀) ≥ F).
    pub p: f64,
    /// P(F(f̂, ∞) ≥ F), the large-sample version.
    pub p_large_sample: f64,
    /// For a 1-df term: ℓ'p̂ with ℓ = ⊗_{f∈S}(1, −1) ⊗_{f∉S} 1'/a_f (first level minus
    /// second; for an interaction the difference of differences). `None` otherwise.
    pub effect: Option<f64>,
    /// Why the term cannot be tested, when it cannot.
    pub not_applicable: Option<String>,
}

/// The rank ATS of every term of a design.
#[derive(Debug, Clone, PartialEq)]
pub struct AtsAnalysis {
    /// Ranks used.
    pub scheme: RankScheme,
    /// p̂_c = (R̄_c − ½)/N for every cell, cell order.
    pub relative_effects: Vec<f64>,
    /// One result per term, canonical order.
    pub terms: Vec<AtsTermResult>,
}

/// The rank ATS of every term (METHODS §6.2):
/// R = mid-ranks or pseudo-ranks of y over all N; p̂_c = (R̄_c − ½)/N;
/// σ̂²_c = Σ_i (R_ci − R̄_c)²/(N²(n_c − 1)); V̂ = N·diag(σ̂²_c/n_c);
/// T_S = L_S'(L_S L_S')⁻¹L_S; F = N·p̂'T_S p̂/tr(T_S V̂);
/// f̂ = tr(T_S V̂)²/tr(T_S V̂ T_S V̂); f̂₀ = tr(T_S V̂)²/tr(D_T² V̂² Λ);
/// p = P(F(f̂, f̂₀) ≥ F).
///
/// Needs n_c ≥ 2 in every cell (else every term is `not_applicable`, naming the cell);
/// tr(T_S V̂) = 0 (no rank variability within any cell) makes the term `not_applicable`.
pub fn rank_ats(design: &Design, scheme: RankScheme) -> AtsAnalysis {
    let y = design.y();
    let sizes = design.cell_sizes();
    let ranks = match scheme {
        RankScheme::MidRanks => rank::mid_ranks(y),
        RankScheme::PseudoRanks => rank::pseudo_ranks(y, &sizes),
    };
    let n = y.len() as f64;
    let c_count = design.n_cells();
    let mut p_hat = Vec::with_capacity(c_count);
    let mut v = Vec::with_capacity(c_count);
    for (c, &nc) in sizes.iter().enumerate() {
        let r = &ranks[design.cell_range(c)];
        let m = crate::model::mean_two_pass(r);
        p_hat.push((m - 0.5) / n);
        let ss: f64 = r.iter().map(|x| (x - m) * (x - m)).sum();
        let var = if nc >= 2 { ss / (n * n * (nc - 1) as f64) } else { f64::NAN };
        v.push(n * var / nc as f64);
    }
    let small: Vec<usize> = (0..c_count).filter(|&c| sizes[c] < 2).collect();
    let shape = design.shape();
    let terms = design
        .terms()
        .iter()
        .map(|term| {
            if !small.is_empty() {
                let named: Vec<String> =
                    small.iter().take(5).map(|&c| format!("({})", design.layout.cell_name(c))).collect();
                return na(format!(
                    "the rank ATS needs n ≥ 2 in every cell for its variance estimate; n = 1 in {}{}",
                    named.join(", "),
                    if small.len() > 5 { format!(" and {} more", small.len() - 5) } else { String::new() }
                ));
            }
            let d_t: f64 = shape
                .iter()
                .enumerate()
                .map(|(f, &a)| if term.factors.contains(&f) { 1.0 - 1.0 / a as f64 } else { 1.0 / a as f64 })
                .product();
            let trace = d_t * v.iter().sum::<f64>();
            if trace.is_nan() || trace <= 0.0 {
                return na(format!(
                    "no rank variability: every cell is constant, so the rank ATS of {} is undefined",
                    term.name
                ));
            }
            let blocks = align::term_projection(shape, &term.factors);
            let tp = kron::kron_apply(&kron::refs(&blocks), &p_hat);
            let quad: f64 = tp.iter().map(|x| x * x).sum();
            let statistic = n * quad / trace;
            // tr(T V T V) = Σ_{c,c'} T_cc'² V_c V_c' = V'(⊗_f T_f∘T_f)V.
            let squared: Vec<kron::Small> = blocks
                .iter()
                .map(|b| kron::Small { rows: b.rows, cols: b.cols, data: b.data.iter().map(|x| x * x).collect() })
                .collect();
            let t2v = kron::kron_apply(&kron::refs(&squared), &v);
            let tvtv: f64 = t2v.iter().zip(&v).map(|(a, b)| a * b).sum();
            let f_hat = trace * trace / tvtv;
            let lambda: f64 = v.iter().zip(&sizes).map(|(vc, &nc)| vc * vc / (nc - 1) as f64).sum();
            let f0_hat = trace * trace / (d_t * d_t * lambda);
            let effect = (term.df == 1).then(|| {
                let contrast: Vec<kron::Small> = shape
                    .iter()
                    .enumerate()
                    .map(|(f, &a)| {
                        if term.factors.contains(&f) {
                            kron::Small { rows: 1, cols: 2, data: vec![1.0, -1.0] }
                        } else {
                            kron::Small { rows: 1, cols: a, data: vec![1.0 / a as f64; a] }
                        }
                    })
                    .collect();
                kron::kron_apply(&kron::refs(&contrast), &p_hat)[0]
            });
            AtsTermResult {
                statistic,
                trace,
                f_hat,
                f0_hat,
                p: dist::f_sf(statistic, f_hat, f0_hat),
                p_large_sample: dist::f_sf(statistic, f_hat, f64::INFINITY),
                effect,
                not_applicable: None,
            }
        })
        .collect();
    AtsAnalysis { scheme, relative_effects: p_hat, terms }
}

fn na(reason: String) -> AtsTermResult {
    AtsTermResult {
        statistic: f64::NAN,
        trace: f64::NAN,
        f_hat: f64::NAN,
        f0_hat: f64::NAN,
        p: f64::NAN,
        p_large_sample: f64::NAN,
        effect: None,
        not_applicable: Some(reason),
    }
}

impl Engine for RankAts {
    fn id(&self) -> &'static str {
        "rank-ats"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let scheme = RankScheme::for_design(design);
        let (reason, reference) = match scheme {
            RankScheme::MidRanks => (
                "balanced design: mid-ranks (equal to pseudo-ranks when every cell has the same n)",
                "the pooled distribution of all observations (equal to the unweighted mean of the cell distributions in a balanced design)",
            ),
            RankScheme::PseudoRanks => (
                "unequal cell sizes: pseudo-ranks (Brunner, Konietschke, Pauly & Puri 2017), so that the relative effects and the hypothesis do not depend on the cell sizes",
                "the unweighted mean of the cell distributions",
            ),
        };
        let mut settings = BTreeMap::new();
        settings.insert("ss_type".to_string(), json!(3));
        settings.insert("ranks".to_string(), json!(scheme.name()));
        settings.insert("reference_distribution".to_string(), json!("F(f̂, f̂₀), Box-type degrees of freedom"));
        settings.insert("alpha".to_string(), json!(ctx.settings.alpha));
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings,
            terms: Vec::new(),
            details: None,
            notes: vec![
                format!("ranks: {reason}"),
                "tests H0: T_S F = 0 on the cells' distribution functions (Brunner, Dette & Munk 1997); unchanged by any strictly increasing transform of the outcome".into(),
            ],
        };
        if design.n_obs() < 2 {
            result.terms = all_not_applicable(design, "fewer than two observations");
            return Ok(result);
        }
        let ats = rank_ats(design, scheme);
        let alpha = ctx.settings.alpha;
        result.terms = design
            .terms()
            .iter()
            .zip(&ats.terms)
            .map(|(term, a)| {
                if let Some(why) = &a.not_applicable {
                    return TermResult::not_applicable(&term.name, why.clone());
                }
                let mut notes = Vec::new();
                let effect = match a.effect {
                    Some(e) => Some(Effect::point("relative_effect_difference", e)),
                    None => {
                        notes.push(format!(
                            "no single-number effect for a term with {} df; the cells' relative effects are in the details",
                            term.df
                        ));
                        None
                    }
                };
                if a.effect.is_some() {
                    let parts: Vec<String> = term
                        .factors
                        .iter()
                        .map(|&f| {
                            let fac = &design.factors()[f];
                            format!("{n}={} − {n}={}", fac.levels[0], fac.levels[1], n = fac.name)
                        })
                        .collect();
                    notes.push(if parts.len() == 1 {
                        format!("effect: relative effect at {}, averaged over the other factors", parts[0])
                    } else {
                        format!(
                            "effect: difference of differences of relative effects, ({}), averaged over the other factors",
                            parts.join(") × (")
                        )
                    });
                }
                TermResult {
                    term: term.name.clone(),
                    statistic: finite(a.statistic),
                    df1: finite(a.f_hat),
                    df2: finite(a.f0_hat),
                    p: finite(a.p),
                    decision: finite(a.p).map(|p| Decision::from_p(p, alpha)),
                    mc: None,
                    effects: effect.iter().cloned().collect(),
                    effect,
                    not_applicable: None,
                    notes,
                }
            })
            .collect();
        let sizes = design.cell_sizes();
        result.details = Some(Details::RankAts(RankAtsDetails {
            ranks: scheme.name().into(),
            ranks_reason: reason.into(),
            reference: reference.into(),
            relative_effects: (0..design.n_cells())
                .map(|c| RelativeEffect {
                    levels: design.layout.cell_labels(c),
                    n: sizes[c],
                    value: finite(ats.relative_effects[c]),
                })
                .collect(),
            terms: design
                .terms()
                .iter()
                .zip(&ats.terms)
                .map(|(term, a)| AtsTerm {
                    term: term.name.clone(),
                    trace: finite(a.trace),
                    f_hat: finite(a.f_hat),
                    f0_hat: finite(a.f0_hat),
                    p_large_sample: finite(a.p_large_sample),
                })
                .collect(),
        }));
        Ok(result)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    fn design(cells: &[Vec<f64>]) -> Design {
        let f = |n: &str| Factor { name: n.into(), levels: vec!["1".into(), "2".into()], measured: false };
        Design::from_cells("y", vec![f("A"), f("B")], cells).unwrap()
    }

    #[test]
    fn two_by_two_worked_by_hand() {
        // Ranks 1..8 in cells of two: cells (1,2), (3,4), (5,6), (7,8). N = 8.
        // R̄ = 1.5, 3.5, 5.5, 7.5 → p̂ = (R̄ − ½)/8 = 0.125, 0.375, 0.625, 0.875.
        // σ̂²_c = 0.5/(64·1) → V_c = 8·σ̂²_c/2 = 1/32. T_A = (I − J/2) ⊗ J/2, diagonal 1/4:
        // tr(T_A V) = 4·(1/4)·(1/32) = 1/32. T_A p̂ = (−0.25, −0.25, 0.25, 0.25),
        // p̂'T_A p̂ = 0.25 → F = 8·0.25·32 = 64. tr(T V T V) = Σ T_cc'² V² = 4·4·(1/16)/1024
        // = 1/1024 → f̂ = 1. f̂₀ = (1/32)²/((1/16)·4·(1/1024)) = 4. Effect A: p̄(a1) − p̄(a2) = −0.5.
        let d = design(&[vec![1.0, 2.0], vec![3.0, 4.0], vec![5.0, 6.0], vec![7.0, 8.0]]);
        let a = rank_ats(&d, RankScheme::MidRanks);
        assert_eq!(a.relative_effects, vec![0.125, 0.375, 0.625, 0.875]);
        let t = &a.terms[0];
        assert!((t.statistic - 64.0).abs() < 1e-12 && (t.f_hat - 1.0).abs() < 1e-12 && (t.f0_hat - 4.0).abs() < 1e-12);
        assert_eq!(t.effect, Some(-0.5));
        // Interaction: (p11 − p12) − (p21 − p22) = 0: additive ranks.
        assert!(a.terms[2].effect.unwrap().abs() < 1e-15);
    }

    #[test]
    fn degenerate_cells_are_named() {
        let d = design(&[vec![1.0], vec![3.0, 4.0], vec![5.0, 6.0], vec![7.0, 8.0]]);
        let a = rank_ats(&d, RankScheme::PseudoRanks);
        assert!(a.terms.iter().all(|t| t.not_applicable.as_deref().unwrap_or("").contains("A=1, B=1")));
        let d = design(&[vec![1.0, 1.0], vec![3.0, 3.0], vec![5.0, 5.0], vec![7.0, 7.0]]);
        let a = rank_ats(&d, RankScheme::MidRanks);
        assert!(a.terms.iter().all(|t| t.not_applicable.as_deref().unwrap_or("").contains("no rank variability")));
    }
}
