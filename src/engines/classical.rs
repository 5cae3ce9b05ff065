//! The classical F test of every term (METHODS §1.3) with its effect sizes (§1.4).
//!
//! The `terms` list always holds the Type III test (the hypothesis every engine
//! shares and the concordance compares). `--ss 1|2` adds the requested table under
//! `details` and says so in `settings.ss_type`.

use super::{all_not_applicable, Context, Engine};
use crate::config::SsType;
use crate::design::forms::SsForms;
use crate::dist;
use crate::error::Result;
use crate::model::{effect_sizes, EffectSizes, Fit};
use crate::results::{finite, AnovaRow, AnovaTable, Decision, Details, Effect, EngineResult, TermResult};
use serde_json::json;
use std::collections::BTreeMap;

/// The classical F engine (id `classical`).
pub struct Classical;

impl Engine for Classical {
    fn id(&self) -> &'static str {
        "classical"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let fit = ctx.fit;
        let settings = ctx.settings;
        let mut settings_out = BTreeMap::new();
        settings_out.insert("ss_type".to_string(), json!(settings.ss_type.number()));
        settings_out.insert("terms_ss_type".to_string(), json!(3));
        settings_out.insert("coding".to_string(), json!("sum-to-zero"));
        settings_out.insert("alpha".to_string(), json!(settings.alpha));
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings: settings_out,
            terms: Vec::new(),
            details: None,
            notes: Vec::new(),
        };
        if let Some(reason) = unusable(fit) {
            result.terms = all_not_applicable(design, &reason);
            return Ok(result);
        }
        let measured: Vec<bool> =
            design.terms().iter().map(|t| t.factors.iter().any(|&f| design.factors()[f].measured)).collect();
        let dfs: Vec<usize> = design.terms().iter().map(|t| t.df).collect();

        let ss3 = fit.term_ss(ctx.forms);
        result.terms = term_results(ctx, &ss3, &dfs, &measured);
        let (table_ss, reported_terms) = if settings.ss_type == SsType::Three {
            (ss3, None)
        } else {
            let forms = SsForms::new(&design.layout, &fit.n, settings.ss_type)?;
            let ss = fit.term_ss(&forms);
            let terms = term_results(ctx, &ss, &dfs, &measured);
            (ss, Some(terms))
        };
        result.details =
            Some(Details::Classical { anova: anova_table(ctx, &table_ss, &dfs, settings.ss_type), reported_terms });
        if !design.is_balanced() && settings.ss_type != SsType::Three {
            result.notes.push(format!(
                "unbalanced design: the Type {} table differs from Type III; verdicts use Type III",
                settings.ss_type.number()
            ));
        }
        Ok(result)
    }
}

/// Why the F test cannot be computed at all, if it cannot.
fn unusable(fit: &Fit) -> Option<String> {
    if fit.df_error == 0 {
        Some("no residual degrees of freedom (every cell has one observation)".into())
    } else if fit.sse <= 0.0 {
        Some("zero residual variance (every cell is constant): F is undefined".into())
    } else {
        None
    }
}

fn term_results(ctx: &Context<'_>, ss: &[f64], dfs: &[usize], measured: &[bool]) -> Vec<TermResult> {
    let fit = ctx.fit;
    let mse = fit.mse();
    let df_e = fit.df_error as f64;
    let sizes = effect_sizes(ss, dfs, measured, fit);
    ctx.design
        .terms()
        .iter()
        .enumerate()
        .map(|(t, term)| {
            let df1 = dfs[t] as f64;
            let f = (ss[t] / df1) / mse;
            let p = dist::f_sf(f, df1, df_e);
            let es = sizes[t];
            let mut notes = Vec::new();
            if es.partial_omega_sq < 0.0 {
                notes.push(format!(
                    "partial ω² is negative ({:.4}): the observed effect is smaller than expected from noise alone; reported as computed",
                    es.partial_omega_sq
                ));
            }
            let level = ctx.settings.ci_level;
            let interval = steiger_interval(f, df1, df_e, fit.n_total as f64, level);
            if f == 0.0 {
                notes.push("F = 0: the effect-size interval is [0, 0] by construction".into());
            }
            let effects = effects_list(&es, interval, level);
            TermResult {
                term: term.name.clone(),
                statistic: finite(f),
                df1: Some(df1),
                df2: Some(df_e),
                p: finite(p),
                decision: finite(p).map(|p| Decision::from_p(p, ctx.settings.alpha)),
                mc: None,
                effect: effects.first().cloned(),
                effects,
                not_applicable: None,
                notes,
            }
        })
        .collect()
}

/// Steiger's (2004, Psychological Methods 9:164–182) interval for partial η²: the
/// noncentrality limits λ_L, λ_U of the observed F (METHODS §1.4, `dist::ncf_lambda_interval`)
/// mapped by λ/(λ + N). Partial η² and partial ω² estimate the same population quantity,
/// so the one interval is reported beside both (METHODS Overrides 4).
pub fn steiger_interval(f: f64, df1: f64, df2: f64, n: f64, level: f64) -> Option<(f64, f64)> {
    let (lo, hi) = dist::ncf_lambda_interval(f, df1, df2, level)?;
    let map = |lambda: f64| lambda / (lambda + n);
    let (lo, hi) = (map(lo), map(hi));
    (lo.is_finite() && hi.is_finite()).then_some((lo, hi))
}

fn with_interval(name: &str, value: f64, interval: Option<(f64, f64)>, level: f64) -> Effect {
    let mut e = Effect::point(name, value);
    if let Some((lo, hi)) = interval {
        e.ci_low = finite(lo);
        e.ci_high = finite(hi);
        e.ci_level = Some(level);
    }
    e
}

fn effects_list(es: &EffectSizes, interval: Option<(f64, f64)>, level: f64) -> Vec<Effect> {
    let mut v = vec![
        with_interval("partial_eta_squared", es.partial_eta_sq, interval, level),
        with_interval("partial_omega_squared", es.partial_omega_sq, interval, level),
        Effect::point("eta_squared", es.eta_sq),
        Effect::point("omega_squared", es.omega_sq),
    ];
    if let Some(g) = es.generalized_eta_sq {
        v.push(Effect::point("generalized_eta_squared", g));
    }
    v
}

fn anova_table(ctx: &Context<'_>, ss: &[f64], dfs: &[usize], ty: SsType) -> AnovaTable {
    let fit = ctx.fit;
    let mse = fit.mse();
    let df_e = fit.df_error as f64;
    let mut rows: Vec<AnovaRow> = ctx
        .design
        .terms()
        .iter()
        .enumerate()
        .map(|(t, term)| {
            let ms = ss[t] / dfs[t] as f64;
            let f = ms / mse;
            AnovaRow {
                source: term.name.clone(),
                ss: ss[t],
                df: dfs[t],
                ms: finite(ms),
                f: finite(f),
                p: finite(dist::f_sf(f, dfs[t] as f64, df_e)),
            }
        })
        .collect();
    rows.push(AnovaRow { source: "Residual".into(), ss: fit.sse, df: fit.df_error, ms: finite(mse), f: None, p: None });
    rows.push(AnovaRow { source: "Total".into(), ss: fit.sst, df: fit.n_total - 1, ms: None, f: None, p: None });
    AnovaTable { ss_type: ty.number(), rows }
}
