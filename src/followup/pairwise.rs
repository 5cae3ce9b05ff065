//! Pairwise comparisons of the effect's level combinations, within each slice of the
//! conditioning factors or of marginal means (METHODS §9.2, §5.3).
//!
//! A comparison of combinations i and j of S in slice ℓ_R is the contrast
//! ℓ_c = (1/m_O)([S(c) = i] − [S(c) = j])·[R(c) = ℓ_R] over cells, m_O the number of
//! level combinations of the averaged factors (so the estimate is a difference of
//! unweighted means in outcome units). Methods, each a family per slice:
//!
//! * `tukey-kramer` (Kramer 1956, Biometrics 12:307–310): SE² = MSE·Σℓ²/n (full-model
//!   MSE, df N − C), q = √2·|ψ̂|/SE, p = P(Q_{m,N−C} ≥ q) with m the number of
//!   combinations of S, simultaneous interval ψ̂ ± Q_{m,N−C,level}/√2·SE. Exact for
//!   balanced designs, conservative otherwise (Hayter 1984). Effect size: Hedges' g
//!   with the noncentral-t interval (`nct::standardized_contrast`).
//! * `games-howell` (Games & Howell 1976, Journal of Educational Statistics 1:113–125),
//!   when each mean is a single cell: SE² = s²_i/n_i + s²_j/n_j, Welch–Satterthwaite ν,
//!   q = √2·|t|, p = P(Q_{m,ν} ≥ q), interval ψ̂ ± Q_{m,ν,level}/√2·SE (scipy
//!   `tukey_hsd(equal_var=False)`).
//! * `yuen` (single cells, Yuen 1974; `robust::yuen`) or `trimmed-contrast` (averaged
//!   cells: the q = 1 Johansen test, a Welch–Satterthwaite t on ℓ'μ̂_t, METHODS §9.2),
//!   p adjusted with `--adjust`; per-comparison interval; effect size: the robust d_R
//!   (`robust::akp_pair` / `robust::akp_contrast`, METHODS §4.5).
//! * `art-c` (`rank::artc::pairwise` on the factor set S ∪ R): differences of marginal
//!   rank means with the rank MSE, t(N − C), p adjusted with `--adjust`; a
//!   per-comparison t interval on the rank scale.
//!
//! The studentized-range methods already control the familywise error, so their
//! `p_adjusted` equals `p`.

use super::{multiplicity, nct, Probe};
use crate::dist;
use crate::error::Result;
use crate::model::wald::WaldForm;
use crate::rank::artc::{self, Adjustment, ArtcFamily};
use crate::results::{finite, Effect, PairwiseComparison, SliceLevel};
use crate::robust;

/// A blank comparison row.
fn blank(
    method: &str,
    scale: &str,
    slice: &[SliceLevel],
    first: &[String],
    second: &[String],
    m: usize,
) -> PairwiseComparison {
    PairwiseComparison {
        method: method.into(),
        scale: scale.into(),
        slice: slice.to_vec(),
        first: first.to_vec(),
        second: second.to_vec(),
        estimate: None,
        se: None,
        statistic: None,
        statistic_name: "t".into(),
        df: None,
        means_compared: m,
        p: None,
        p_adjusted: None,
        decision: None,
        ci_low: None,
        ci_high: None,
        ci_level: None,
        effect: None,
        not_applicable: None,
    }
}

/// Sets estimate, SE, statistic, df, p and the interval (NaN → `not_applicable`).
#[allow(clippy::too_many_arguments)]
fn fill(r: &mut PairwiseComparison, est: f64, se: f64, stat: f64, df: f64, p: f64, half: f64, level: f64) {
    if !(est.is_finite() && se.is_finite() && stat.is_finite() && p.is_finite()) {
        r.not_applicable = Some("the comparison's statistic is not finite".into());
        return;
    }
    r.estimate = finite(est);
    r.se = finite(se);
    r.statistic = finite(stat);
    r.df = finite(df);
    r.p = Some(p.clamp(0.0, 1.0));
    if half.is_finite() {
        r.ci_low = finite(est - half);
        r.ci_high = finite(est + half);
        r.ci_level = Some(level);
    }
}

/// Every pairwise comparison of the combinations of `effect` within each slice of `at`
/// (marginal means when `at` is empty), grouped by slice, then method, then pair
/// (i < j in row-major order).
///
/// # Errors
/// An internal error when ART-C's alignment check fails.
pub fn comparisons(probe: &Probe<'_>, effect: &[usize], at: &[usize]) -> Result<Vec<PairwiseComparison>> {
    let design = probe.design;
    let fit = probe.fit;
    let settings = probe.settings;
    let level = settings.ci_level;
    let n_cells = design.n_cells();
    let layout = &design.layout;
    let k = design.factors().len();
    let others: Vec<usize> = (0..k).filter(|f| !effect.contains(f) && !at.contains(f)).collect();
    let m_other: usize = others.iter().map(|&f| design.shape()[f]).product();
    let single_cells = others.is_empty();
    let combos = probe.combinations(effect);
    let m = combos.len();
    let slices = probe.combinations(at);
    let mse = fit.mse();
    let df_e = fit.df_error as f64;
    let mut set: Vec<usize> = effect.iter().chain(at).copied().collect();
    set.sort_unstable();
    let artc_family = artc::pairwise(design, fit, &probe.forms, &set, Adjustment::None)?;
    let tukey_crit = dist::ptukey_quantile(level, m as f64, df_e) / std::f64::consts::SQRT_2;
    let mut out = Vec::new();
    for slice_combo in &slices {
        let slice = probe.slice_levels(at, slice_combo);
        let mut families: [Vec<PairwiseComparison>; 4] = Default::default();
        for i in 0..m {
            for j in i + 1..m {
                let first = probe.labels(effect, &combos[i]);
                let second = probe.labels(effect, &combos[j]);
                let mut ell = vec![0.0; n_cells];
                let (mut ci, mut cj) = (0, 0);
                for (c, w) in ell.iter_mut().enumerate() {
                    if !probe.in_slice(c, at, slice_combo) {
                        continue;
                    }
                    if probe.in_slice(c, effect, &combos[i]) {
                        *w = 1.0 / m_other as f64;
                        ci = c;
                    } else if probe.in_slice(c, effect, &combos[j]) {
                        *w = -1.0 / m_other as f64;
                        cj = c;
                    }
                }
                let est: f64 = ell.iter().zip(&fit.mean).map(|(w, mu)| w * mu).sum();
                let k2: f64 = ell.iter().zip(&fit.n).map(|(w, &n)| w * w / n as f64).sum();

                // Tukey–Kramer
                let mut tk = blank("tukey-kramer", "means", &slice, &first, &second, m);
                tk.statistic_name = "q".into();
                if fit.df_error > 0 && mse > 0.0 {
                    let se = (mse * k2).sqrt();
                    let q = std::f64::consts::SQRT_2 * est.abs() / se;
                    let p = dist::ptukey_sf(q, m as f64, df_e);
                    fill(&mut tk, est, se, q, df_e, p, tukey_crit * se, level);
                    tk.p_adjusted = tk.p;
                    if let Some(g) = nct::standardized_contrast(est, mse.sqrt(), k2.sqrt(), df_e, level) {
                        tk.effect = Some(Effect {
                            name: "hedges_g".into(),
                            value: finite(g.g),
                            ci_low: finite(g.ci_low),
                            ci_high: finite(g.ci_high),
                            ci_level: Some(level),
                        });
                    }
                } else {
                    tk.not_applicable = Some("no pooled error variance".into());
                }
                families[0].push(tk);

                // Games–Howell (single cells only)
                if single_cells {
                    let mut gh = blank("games-howell", "means", &slice, &first, &second, m);
                    gh.statistic_name = "q".into();
                    let var = |c: usize| fit.ss_within[c] / (fit.n[c] as f64 - 1.0) / fit.n[c] as f64;
                    let bad = [ci, cj]
                        .into_iter()
                        .find(|&c| fit.n[c] < 2 || fit.ss_within[c].is_nan() || fit.ss_within[c] <= 0.0);
                    if let Some(c) = bad {
                        gh.not_applicable = Some(format!(
                            "cell {}: Games–Howell needs n ≥ 2 and within-cell variation",
                            layout.cell_name(c)
                        ));
                    } else {
                        let (vi, vj) = (var(ci), var(cj));
                        let se = (vi + vj).sqrt();
                        let nu = (vi + vj).powi(2)
                            / (vi * vi / (fit.n[ci] as f64 - 1.0) + vj * vj / (fit.n[cj] as f64 - 1.0));
                        let q = std::f64::consts::SQRT_2 * est.abs() / se;
                        let p = dist::ptukey_sf(q, m as f64, nu);
                        let half = dist::ptukey_quantile(level, m as f64, nu) / std::f64::consts::SQRT_2 * se;
                        fill(&mut gh, est, se, q, nu, p, half, level);
                        gh.p_adjusted = gh.p;
                    }
                    families[1].push(gh);
                }

                // trimmed: Yuen for single cells, the q = 1 Johansen contrast otherwise
                let method = if single_cells { "yuen" } else { "trimmed-contrast" };
                let mut tr = blank(method, "trimmed means", &slice, &first, &second, m);
                let name = |c: usize| layout.cell_name(c);
                if single_cells {
                    match robust::yuen(&probe.trimmed, ci, cj, level) {
                        Ok(y) => {
                            fill(&mut tr, y.difference, y.se, y.t, y.df, y.p, f64::NAN, level);
                            tr.ci_low = finite(y.ci_low);
                            tr.ci_high = finite(y.ci_high);
                            tr.ci_level = Some(level);
                            if let Ok(d) = robust::akp_pair(&probe.trimmed, cj, ci) {
                                tr.effect = Some(Effect::point("robust_d", d));
                            }
                        }
                        Err(e) => tr.not_applicable = Some(e.describe(name)),
                    }
                } else {
                    let form = WaldForm::from_matrix(1, n_cells, ell.clone());
                    match robust::welch_james(&form, &probe.trimmed) {
                        Ok(wj) => {
                            let involved = ell.iter().zip(&probe.trimmed).filter(|(w, _)| **w != 0.0);
                            let est_t: f64 = involved.clone().map(|(w, c)| w * c.trimmed_mean).sum();
                            let se = involved.map(|(w, c)| w * w * c.d).sum::<f64>().sqrt();
                            let t = est_t / se;
                            let half = dist::t_quantile(0.5 + level / 2.0, wj.df2) * se;
                            fill(&mut tr, est_t, se, t, wj.df2, wj.p_f, half, level);
                            if let Ok(d) = robust::akp_contrast(&ell, &probe.trimmed) {
                                tr.effect = Some(Effect::point("robust_d", d));
                            }
                        }
                        Err(e) => tr.not_applicable = Some(e.describe(name)),
                    }
                }
                families[2].push(tr);

                // ART-C
                let mut ar = blank("art-c", "aligned ranks", &slice, &first, &second, m);
                art_row(&mut ar, &artc_family, probe, &set, at, slice_combo, &first, &second, level);
                families[3].push(ar);
            }
        }
        for (idx, mut family) in families.into_iter().enumerate() {
            if idx >= 2 {
                let raw: Vec<Option<f64>> = family.iter().map(|r| r.p).collect();
                for (r, a) in family.iter_mut().zip(multiplicity::adjust(&raw, settings.adjust)) {
                    r.p_adjusted = a;
                }
            }
            for r in &mut family {
                r.decision = probe.decide(r.p_adjusted);
            }
            out.extend(family);
        }
    }
    Ok(out)
}

/// Fills an ART-C row from the family computed on S ∪ R: the contrast whose
/// conditioning factors sit at this slice on both sides and whose effect levels are
/// `first` and `second`.
#[allow(clippy::too_many_arguments)]
fn art_row(
    r: &mut PairwiseComparison,
    family: &ArtcFamily,
    probe: &Probe<'_>,
    set: &[usize],
    at: &[usize],
    slice_combo: &[usize],
    first: &[String],
    second: &[String],
    level: f64,
) {
    if let Some(reason) = &family.not_applicable {
        r.not_applicable = Some(reason.clone());
        return;
    }
    let factors = probe.design.factors();
    let found = family.contrasts.iter().find(|c| {
        let mut fi = Vec::new();
        let mut se = Vec::new();
        for (lp, &f) in c.levels.iter().zip(set) {
            if let Some(pos) = at.iter().position(|&g| g == f) {
                let want = &factors[f].levels[slice_combo[pos]];
                if lp.first != *want || lp.second != *want {
                    return false;
                }
            } else {
                fi.push(lp.first.clone());
                se.push(lp.second.clone());
            }
        }
        fi == first && se == second
    });
    match found {
        Some(c) => {
            let half = dist::t_quantile(0.5 + level / 2.0, c.df) * c.se;
            fill(r, c.estimate, c.se, c.t, c.df, c.p, half, level);
        }
        None => r.not_applicable = Some("ART-C produced no such contrast".into()),
    }
}
