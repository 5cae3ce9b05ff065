//! The aligned rank transform ANOVA (id `art`; Wobbrock, Findlater, Gergle & Higgins
//! 2011, Proc. CHI '11, pp. 143–146; METHODS §5 with Overrides 5).
//!
//! For each term S: align (residual from the cell mean plus the saturated model's
//! sum-coded estimate of S), mid-rank over all N, fit the full factorial to the ranks
//! with the same Type III forms as the classical engine (the ranks' cell sums), and keep
//! only S's F with df (df_S, N − C). One ranking per term; each costs O(N log N) plus
//! O(C·df_S) for the form. The alignment is checked on every analysis
//! ([`align::check_alignment`]; failure is exit 4), and the published limitations are
//! flagged when the data call for them ([`limitations`]).
//!
//! The headline effect is the partial η² of the ART ANOVA, SS_S/(SS_S + SSE) on the
//! aligned ranks: a rank-scale quantity, named `partial_eta_squared_aligned_ranks` so
//! that nobody mistakes it for the classical one.

use super::{all_not_applicable, Context, Engine};
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::dist;
use crate::error::Result;
use crate::model::Fit;
use crate::rank::align::{self, AlignmentCheck, RankedFit, ALIGNMENT_SS_REL};
use crate::rank::{tie_summary, TieRule, TieSummary};
use crate::results::{
    finite, AlignmentReport, ArtDetails, Decision, Details, Effect, EngineResult, Flag, TermResult, TieReport,
};
use rayon::prelude::*;
use serde_json::json;
use std::collections::BTreeMap;

/// Flag when the outcome has at most this many distinct values (METHODS §5.5 and
/// Appendix B, a toolkit convention after Lüpsen 2017).
pub const FEW_DISTINCT_VALUES: usize = 10;

/// Flag when ties remove at least this share of the mid-rank variance, Σ(t³ − t)/(N³ − N):
/// about what ten equally filled categories lose (1/10²). It replaces METHODS §5.5's "more
/// than 25% of observations tied", which fires on most continuous data recorded to two or
/// three significant digits once N is moderate (DEVELOPERS.md has the simulation);
/// few distinct values, not ties as such, is what Lüpsen (2017) found harmful.
pub const TIED_VARIANCE_LIMIT: f64 = 0.01;

/// Another term's effect counts as large at classical partial η² ≥ 0.14 (Cohen's 1988
/// "large" benchmark; common practice) …
pub const LARGE_PARTIAL_ETA_SQ: f64 = 0.14;

/// … and clearly present at classical p below this (so that noise in small designs does
/// not make an effect "large").
pub const LARGE_EFFECT_P: f64 = 0.001;

/// The aligned rank transform engine.
pub struct Art;

/// The ART ANOVA of one term.
#[derive(Debug, Clone, PartialEq)]
pub struct ArtTerm {
    /// Type III SS of the term on its aligned ranks.
    pub ss: f64,
    /// Error SS of the full factorial on the same ranks.
    pub sse: f64,
    /// Total corrected SS of the ranks.
    pub sst: f64,
    /// df_S.
    pub df1: f64,
    /// N − C.
    pub df2: f64,
    /// F = (SS/df_S)/(SSE/(N − C)).
    pub f: f64,
    /// P(F(df_S, N − C) ≥ F).
    pub p: f64,
    /// SS/(SS + SSE) on the aligned ranks.
    pub partial_eta_sq: f64,
    /// The alignment check of this term.
    pub check: AlignmentCheck,
    /// Why the F is undefined, when it is.
    pub not_applicable: Option<String>,
}

/// The ART ANOVA of every term (canonical order): align for the term with the
/// Overrides-5 estimates, check the alignment, mid-rank (aligned values within
/// [`align::ALIGNED_TIE_REL`]·max|y − ȳ| are tied), fit the full factorial to the ranks
/// and keep the term's Type III F with df (df_S, N − C) (METHODS §5.1).
///
/// `forms` are the Type III forms for the design's cell sizes. A term whose ranks have no
/// within-cell variance (or a design without residual df) is `not_applicable`.
///
/// # Errors
/// [`crate::Error::internal`] when an alignment check fails (a bug).
pub fn art_anova(design: &Design, fit: &Fit, forms: &SsForms) -> Result<Vec<ArtTerm>> {
    let classical = fit.term_ss(forms);
    let rule = align::aligned_tie_rule(design, fit);
    (0..design.terms().len())
        .into_par_iter()
        .map(|t| art_term(design, fit, forms, &classical, rule, t))
        .collect::<Result<Vec<_>>>()
}

fn art_term(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    classical: &[f64],
    rule: TieRule,
    t: usize,
) -> Result<ArtTerm> {
    let term = &design.terms()[t];
    let effect = align::term_effect(design.shape(), &fit.mean, &term.factors);
    let aligned = align::aligned(design, fit, &effect);
    let kept: Vec<bool> = (0..design.terms().len()).map(|u| u == t).collect();
    let check = align::check_alignment(design, fit, forms, &aligned, &kept, classical, &term.name)?;
    let ranks = align::aligned_ranks(&aligned, rule);
    let rf = RankedFit::new(design, &ranks);
    let ss = forms.ss(t, &rf.centred_sums).max(0.0);
    let df1 = term.df as f64;
    let df2 = rf.df_error as f64;
    let f = (ss / df1) / (rf.sse / df2);
    let not_applicable = if rf.df_error == 0 {
        Some("no residual degrees of freedom (every cell has one observation)".to_string())
    } else if rf.sse.is_nan() || rf.sse <= 0.0 {
        Some(format!(
            "the ranks aligned for {} are constant within every cell: no rank error variance, F undefined",
            term.name
        ))
    } else {
        None
    };
    Ok(ArtTerm {
        ss,
        sse: rf.sse,
        sst: rf.sst,
        df1,
        df2,
        f,
        p: dist::f_sf(f, df1, df2),
        partial_eta_sq: ss / (ss + rf.sse),
        check,
        not_applicable,
    })
}

/// The published limitations of ART that these data call for (METHODS §5.5), as flags
/// and as a note per term (`notes[t]`).
///
/// * `art-discrete`: the outcome has ≤ [`FEW_DISTINCT_VALUES`] distinct values or its
///   ties remove ≥ [`TIED_VARIANCE_LIMIT`] of the rank variance. Lüpsen (2017, Communications in
///   Statistics – Simulation and Computation 46:6923–6936 \[M pages\]) found ART's type I
///   error inflated for discrete responses with few distinct values.
/// * `art-other-effects`: for term S, another term T has a large, clear classical effect
///   (partial η² ≥ [`LARGE_PARTIAL_ETA_SQ`] and p < [`LARGE_EFFECT_P`]) *and* the outcome
///   is discrete (above). Lüpsen (2017; 2018, same journal 47:2547–2576 \[M pages\]) and
///   Elkin et al. (2021) report inflated type I error for a term when other effects are
///   large and the responses discrete. Large effects on continuous data are not flagged:
///   a pure location shift cancels exactly in the alignment, and quorum's simulations
///   (DEVELOPERS.md) found ART at its nominal level with a large shift on normal and on
///   skewed (exponential) errors, while on 7-point data it ran slightly above it.
///
/// Calibration (DEVELOPERS.md, measured with quorum's own streams): on clean normal data
/// at n = 5, 10, 20, 50 per cell neither flag fires (0 of 10 000 datasets), with or without
/// a large true effect; on 7-point data `art-discrete` fires on every dataset.
pub fn limitations(design: &Design, fit: &Fit, forms: &SsForms) -> (Vec<Flag>, Vec<Vec<String>>, TieSummary) {
    let terms = design.terms();
    let ties = tie_summary(design.y());
    let mut flags = Vec::new();
    let mut notes = vec![Vec::new(); terms.len()];
    let discrete = is_discrete(&ties);
    if discrete {
        flags.push(Flag {
            code: "art-discrete".into(),
            message: format!(
                "ART not recommended: the outcome has {} distinct values among {} observations (ties remove {:.1}% of the rank variance); ART's type I error can be inflated with discrete responses (Lüpsen 2017, 2018). Prefer the rank ATS for such outcomes",
                ties.distinct,
                ties.n,
                100.0 * ties.variance_lost()
            ),
        });
    }
    if discrete && fit.df_error > 0 && fit.sse > 0.0 {
        let ss = fit.term_ss(forms);
        let mse = fit.mse();
        let large: Vec<(usize, f64, f64)> = terms
            .iter()
            .enumerate()
            .filter_map(|(t, term)| {
                let pes = ss[t] / (ss[t] + fit.sse);
                let p = dist::f_sf(ss[t] / term.df as f64 / mse, term.df as f64, fit.df_error as f64);
                (pes >= LARGE_PARTIAL_ETA_SQ && p < LARGE_EFFECT_P).then_some((t, pes, p))
            })
            .collect();
        for (s, term) in terms.iter().enumerate() {
            let others: Vec<String> = large
                .iter()
                .filter(|(t, _, _)| *t != s)
                .map(|&(t, pes, _)| format!("{} (classical partial η² = {pes:.2})", terms[t].name))
                .collect();
            if others.is_empty() {
                continue;
            }
            let note = format!(
                "other effects are large — {} — and the outcome is discrete; ART's type I error for a term can be inflated when other effects are large and the responses discrete (Lüpsen 2017, 2018; Elkin et al. 2021)",
                others.join(", ")
            );
            flags.push(Flag { code: "art-other-effects".into(), message: format!("{}: {note}", term.name) });
            notes[s].push(note);
        }
    }
    (flags, notes, ties)
}

/// The `art-discrete` condition: ≤ [`FEW_DISTINCT_VALUES`] distinct values, or ties that
/// remove ≥ [`TIED_VARIANCE_LIMIT`] of the rank variance.
pub fn is_discrete(ties: &TieSummary) -> bool {
    ties.distinct <= FEW_DISTINCT_VALUES || ties.variance_lost() >= TIED_VARIANCE_LIMIT
}

impl Engine for Art {
    fn id(&self) -> &'static str {
        "art"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let fit = ctx.fit;
        let mut settings = BTreeMap::new();
        settings.insert("ss_type".to_string(), json!(3));
        settings.insert(
            "alignment".to_string(),
            json!("saturated-model sum-coded term estimates (unweighted marginal means of cell means)"),
        );
        settings.insert("ranks".to_string(), json!("mid-ranks over all observations"));
        settings.insert("alpha".to_string(), json!(ctx.settings.alpha));
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings,
            terms: Vec::new(),
            details: None,
            notes: vec![
                "ART tests each effect on an aligned-rank scale: a rejection says the effect is present, not that means or distributions differ in a stated way (Wobbrock et al. 2011)".into(),
            ],
        };
        if fit.df_error == 0 {
            result.terms =
                all_not_applicable(design, "no residual degrees of freedom (every cell has one observation)");
            return Ok(result);
        }
        let anova = art_anova(design, fit, ctx.forms)?;
        let (flags, mut notes, ties) = limitations(design, fit, ctx.forms);
        let tol = align::aligned_tie_tolerance(design, fit);
        result.settings.insert("tie_tolerance".to_string(), json!(tol));
        if design.factors().len() == 1 && anova[0].not_applicable.is_none() && anova[0].sst > 0.0 {
            // With one factor ART is the rank-transform ANOVA (METHODS §5.4):
            // H = (N − 1)·SSB_R/SST_R is the tie-corrected Kruskal–Wallis statistic.
            let a = &anova[0];
            let h = (design.n_obs() as f64 - 1.0) * a.ss / a.sst;
            notes[0].push(format!(
                "one factor: ART is the rank-transform ANOVA; tie-corrected Kruskal–Wallis H = {h:.6}, χ²({}) p = {:.4e}",
                a.df1,
                dist::chi2_sf(h, a.df1)
            ));
        }
        let alpha = ctx.settings.alpha;
        result.terms = design
            .terms()
            .iter()
            .zip(&anova)
            .zip(notes)
            .map(|((term, a), notes)| {
                if let Some(why) = &a.not_applicable {
                    let mut r = TermResult::not_applicable(&term.name, why.clone());
                    r.notes = notes;
                    return r;
                }
                let effect = Effect::point("partial_eta_squared_aligned_ranks", a.partial_eta_sq);
                TermResult {
                    term: term.name.clone(),
                    statistic: finite(a.f),
                    df1: Some(a.df1),
                    df2: Some(a.df2),
                    p: finite(a.p),
                    decision: finite(a.p).map(|p| Decision::from_p(p, alpha)),
                    mc: None,
                    effect: Some(effect.clone()),
                    effects: vec![effect],
                    not_applicable: None,
                    notes,
                }
            })
            .collect();
        let checks = design
            .terms()
            .iter()
            .zip(&anova)
            .map(|(term, a)| AlignmentReport {
                term: term.name.clone(),
                observation_sum: a.check.observation_sum,
                cell_mean_sum: a.check.cell_mean_sum,
                max_other_ss_share: a.check.max_removed_ss_share,
                target_ss_error_share: a.check.max_kept_ss_error_share,
                bound: ALIGNMENT_SS_REL,
            })
            .collect();
        result.notes.push(format!(
            "alignment checked for every term: the aligned cell means sum to 0, other terms' SS on the aligned responses ≤ {ALIGNMENT_SS_REL:e} of SST, the term's own SS equals its classical SS"
        ));
        for f in &flags {
            if f.code == "art-discrete" {
                result.notes.push(f.message.clone());
            }
        }
        result.details = Some(Details::Art(ArtDetails {
            alignment: "each term aligned with the saturated model's sum-coded estimates (unweighted marginal means; equal to the observation-weighted definition in balanced designs)".into(),
            tie_tolerance: tol,
            outcome_ties: TieReport {
                n: ties.n,
                distinct: ties.distinct,
                tied_share: ties.tied_share(),
                rank_variance_lost: ties.variance_lost(),
            },
            checks,
            flags,
        }));
        Ok(result)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rank::tie_summary;

    #[test]
    fn discrete_means_few_values_or_heavy_ties() {
        // Seven categories: flagged however many observations.
        let seven: Vec<f64> = (0..70).map(|i| (i % 7) as f64).collect();
        assert!(is_discrete(&tie_summary(&seven)));
        // Forty distinct values, a few pairs tied: ties remove far less than 1%.
        let mut forty: Vec<f64> = (0..40).map(f64::from).collect();
        forty.extend([1.0, 2.0, 3.0]);
        assert!(!is_discrete(&tie_summary(&forty)));
        // Eleven values but one holds most observations: 1 − Σ(t³−t)/(N³−N) well below 0.99.
        let mut lumpy = vec![0.0; 30];
        lumpy.extend((1..=10).map(f64::from));
        assert!(is_discrete(&tie_summary(&lumpy)));
    }
}
