//! Simple effects (METHODS §9.1): the effect of a factor set S within each level
//! combination ℓ_R of conditioning factors R, averaged (unweighted) over the remaining
//! factors, tested by five methods.
//!
//! The hypothesis matrix of a slice is L = ⊗_f (H_{a_f} if f ∈ S; e'_ℓ if f ∈ R;
//! 1'_{a_f}/a_f otherwise), built from `design::kron` blocks into a
//! [`WaldForm`], so every method tests the same contrast of cell means that the engines
//! use for whole terms:
//!
//! | method | statistic | reference |
//! |---|---|---|
//! | `classical-pooled` | SS = (Lμ̂)'(LD⁻¹L')⁻¹(Lμ̂), F = (SS/q)/MSE_full | F(q, N − C) |
//! | `classical-slice` | the same SS over the slice's own MSE (cells with R = ℓ_R) | F(q, N_ℓ − C_ℓ) |
//! | `hc` | HC Wald F with the same L (`engines::hc::hc_wald`, METHODS §7.2) | F(q, N − C) |
//! | `trimmed` | Johansen's Welch–James F_WJ on trimmed means (`robust::welch_james`) | F(q, ν₂) |
//! | `permutation-slice` | the slice-error F, observations permuted within the slice | permutation |
//!
//! When S ∪ R holds every factor, the slice-error version is the one-way ANOVA of the
//! slice's cells and the trimmed version is Welch's one-way test on trimmed means of the
//! slice (statsmodels `anova_oneway(use_var='unequal', trim_frac=γ)`), METHODS §4.2.
//! Each method's tests over the slices form one family for `--adjust`.

use super::{multiplicity, permutation, Probe};
use crate::config::WjReference;
use crate::design::kron::{self, Small};
use crate::dist;
use crate::engines::hc;
use crate::error::Result;
use crate::model::wald::WaldForm;
use crate::results::{finite, Decision, Effect, SimpleEffectTest, SliceLevel};
use crate::robust;

/// The methods, in report order.
pub const METHODS: [&str; 5] = ["classical-pooled", "classical-slice", "hc", "trimmed", "permutation-slice"];

/// The factor blocks of L for slice `combo` of `at` (METHODS §9.1). Factors outside S ∪ R
/// get 1'/a (unweighted averages, so contrast estimates are in outcome units).
pub fn slice_blocks(shape: &[usize], effect: &[usize], at: &[usize], combo: &[usize]) -> Vec<Small> {
    shape
        .iter()
        .enumerate()
        .map(|(f, &a)| {
            if effect.contains(&f) {
                kron::h_matrix(a)
            } else if let Some(pos) = at.iter().position(|&g| g == f) {
                let mut data = vec![0.0; a];
                data[combo[pos]] = 1.0;
                Small { rows: 1, cols: a, data }
            } else {
                Small { rows: 1, cols: a, data: vec![1.0 / a as f64; a] }
            }
        })
        .collect()
}

/// A blank test row.
fn row(method: &str, hypothesis: &str, slice: Vec<SliceLevel>) -> SimpleEffectTest {
    SimpleEffectTest {
        method: method.into(),
        hypothesis: hypothesis.into(),
        slice,
        statistic: None,
        df1: None,
        df2: None,
        p: None,
        p_adjusted: None,
        decision: None,
        mc: None,
        effect: None,
        not_applicable: None,
        notes: Vec::new(),
    }
}

fn with_f(mut r: SimpleEffectTest, f: f64, df1: f64, df2: f64, p: f64) -> SimpleEffectTest {
    if f.is_finite() && p.is_finite() {
        r.statistic = finite(f);
        r.df1 = finite(df1);
        r.df2 = finite(df2);
        r.p = Some(p.clamp(0.0, 1.0));
    } else {
        r.not_applicable = Some("the statistic is not finite".into());
    }
    r
}

/// Partial η² = SS/(SS + SSE) with the Steiger (2004) noncentral-F interval mapped by
/// λ/(λ + N) (METHODS §1.4), N the observations behind the error term.
fn partial_eta(ss: f64, sse: f64, f: f64, df1: f64, df2: f64, n: usize, level: f64) -> Option<Effect> {
    let value = ss / (ss + sse);
    if !value.is_finite() {
        return None;
    }
    let mut e = Effect::point("partial_eta_squared", value);
    if let Some((lo, hi)) = dist::ncf_lambda_interval(f, df1, df2, level) {
        let nf = n as f64;
        e.ci_low = finite(lo / (lo + nf));
        e.ci_high = finite(hi / (hi + nf));
        e.ci_level = Some(level);
    }
    Some(e)
}

/// Simple-effect tests of S = `effect` at every level combination of R = `at` (both
/// sorted factor indices, disjoint, R non-empty), grouped by method (order [`METHODS`]),
/// slices in row-major order within a method; p adjusted over the slices per method.
///
/// # Errors
/// None at present (degenerate slices are `not_applicable` rows); the `Result` leaves
/// room for internal consistency checks.
pub fn simple_effects(probe: &Probe<'_>, effect: &[usize], at: &[usize]) -> Result<Vec<SimpleEffectTest>> {
    let design = probe.design;
    let fit = probe.fit;
    let settings = probe.settings;
    let combos = probe.combinations(at);
    let n_cells = design.n_cells();
    let layout = &design.layout;
    let inv_n: Vec<f64> = fit.n.iter().map(|&n| 1.0 / n as f64).collect();
    let effect_name = probe.set_name(effect);
    let mut by_method: Vec<Vec<SimpleEffectTest>> = vec![Vec::new(); METHODS.len()];
    for (r, combo) in combos.iter().enumerate() {
        let slice = probe.slice_levels(at, combo);
        let form = WaldForm::from_blocks(&slice_blocks(design.shape(), effect, at, combo));
        let q = form.q() as f64;
        let in_slice: Vec<usize> = (0..n_cells).filter(|&c| probe.in_slice(c, at, combo)).collect();
        // Shared: the contrast SS with D⁻¹.
        let ss = form.statistic(&fit.mean, &inv_n, &mut form.scratch());

        // classical, pooled error of the full model
        let mut pooled = row(
            METHODS[0],
            &format!("equal means of {effect_name} in this slice; error: the full model's pooled MSE (df N − C)"),
            slice.clone(),
        );
        let mse = fit.mse();
        match ss {
            Some(ss) if fit.df_error > 0 && mse > 0.0 => {
                let df2 = fit.df_error as f64;
                let f = ss / q / mse;
                pooled = with_f(pooled, f, q, df2, dist::f_sf(f, q, df2));
                pooled.effect = partial_eta(ss, fit.sse, f, q, df2, fit.n_total, settings.ci_level);
            }
            _ => pooled.not_applicable = Some("no pooled error variance (zero residual SS or no residual df)".into()),
        }
        by_method[0].push(pooled);

        // classical, the slice's own error
        let mut own = row(
            METHODS[1],
            &format!("equal means of {effect_name} in this slice; error: this slice's own MSE (a one-way analysis of the slice when no factor is averaged)"),
            slice.clone(),
        );
        let sse_slice: f64 = in_slice.iter().map(|&c| fit.ss_within[c]).sum();
        let n_slice: usize = in_slice.iter().map(|&c| fit.n[c]).sum();
        let df_slice = n_slice.saturating_sub(in_slice.len());
        match ss {
            Some(ss) if df_slice > 0 && sse_slice > 0.0 => {
                let df2 = df_slice as f64;
                let f = ss / q / (sse_slice / df2);
                own = with_f(own, f, q, df2, dist::f_sf(f, q, df2));
                own.effect = partial_eta(ss, sse_slice, f, q, df2, n_slice, settings.ci_level);
            }
            _ => {
                own.not_applicable = Some(if df_slice == 0 {
                    "the slice has no residual degrees of freedom (one observation per cell)".into()
                } else {
                    "the slice's cells have no within-cell variation".into()
                })
            }
        }
        by_method[1].push(own);

        // HC Wald
        let mut hcr = row(
            METHODS[2],
            &format!(
                "equal means of {effect_name} in this slice; {} sandwich variances, variances free",
                settings.hc.label()
            ),
            slice.clone(),
        );
        let bad: Vec<usize> = in_slice
            .iter()
            .copied()
            .filter(|&c| fit.n[c] < 2 || probe.hc_v[c].is_nan() || probe.hc_v[c] <= 0.0)
            .collect();
        if let Some(&c) = bad.first() {
            hcr.not_applicable = Some(format!(
                "cell {}: n = {} with {}; the HC covariance needs n ≥ 2 and within-cell variation",
                layout.cell_name(c),
                fit.n[c],
                if fit.n[c] < 2 { "a single observation" } else { "no variation" }
            ));
        } else {
            let v: Vec<f64> = (0..n_cells).map(|c| if in_slice.contains(&c) { probe.hc_v[c] } else { 0.0 }).collect();
            match hc::hc_wald(&form, &fit.mean, &v, fit.df_error) {
                Some(w) => hcr = with_f(hcr, w.f, w.df1, w.df2, w.p),
                None => hcr.not_applicable = Some("the HC covariance of the contrast is singular".into()),
            }
        }
        by_method[2].push(hcr);

        // trimmed Welch–James
        let mut tr = row(
            METHODS[3],
            &format!(
                "equal {}% trimmed means of {effect_name} in this slice; Johansen's Welch–James, variances free",
                (settings.trim * 100.0).round()
            ),
            slice.clone(),
        );
        match robust::welch_james(&form, &probe.trimmed) {
            Ok(wj) => {
                let p = match settings.wj_reference {
                    WjReference::Adjusted => wj.p_adjusted,
                    _ => wj.p_f,
                };
                tr = with_f(tr, wj.f, wj.q as f64, wj.df2, p);
                if settings.wj_reference == WjReference::Bootstrap {
                    tr.notes.push("the bootstrap reference is not offered for follow-ups: F form used".into());
                }
            }
            Err(e) => tr.not_applicable = Some(e.describe(|c| layout.cell_name(c))),
        }
        by_method[3].push(tr);

        // permutation within the slice
        let mut perm = row(
            METHODS[4],
            &format!(
                "no effect of {effect_name} in this slice (exchangeable observations {}); statistic: the slice-error F",
                if in_slice.len() == combos_per_slice(probe, effect) {
                    "across the slice's cells".to_string()
                } else {
                    "within each level combination of the averaged factors".to_string()
                }
            ),
            slice.clone(),
        );
        match permutation::slice_test(probe, effect, at, combo, r) {
            Ok(out) => {
                perm = with_f(perm, out.f, q, out.df2, out.p);
                perm.mc = Some(out.mc);
                perm.notes.extend(out.notes);
                perm.decision = out.raw_undetermined.then_some(Decision::Undetermined);
            }
            Err(reason) => perm.not_applicable = Some(reason),
        }
        by_method[4].push(perm);
    }
    let mut out = Vec::new();
    for mut family in by_method {
        let raw: Vec<Option<f64>> = family.iter().map(|t| t.p).collect();
        let adj = multiplicity::adjust(&raw, settings.adjust);
        for (t, a) in family.iter_mut().zip(adj) {
            t.p_adjusted = a;
            if t.mc.is_some() {
                t.decision = permutation::adjusted_decision(t, settings.alpha);
            } else {
                t.decision = probe.decide(a);
            }
        }
        out.extend(family);
    }
    Ok(out)
}

/// Number of cells in one slice whose only varying factors are those of the effect.
fn combos_per_slice(probe: &Probe<'_>, effect: &[usize]) -> usize {
    effect.iter().map(|&f| probe.design.shape()[f]).product()
}
