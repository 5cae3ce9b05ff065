//! Planned contrasts (`--contrast "A: 1,-1,0"`) and orthogonal-polynomial trends
//! (`--trend A`) on the unweighted marginal means of one factor, by three methods.
//!
//! A contrast with level weights w (Σw = 0) is the cell vector ℓ = w ⊗ (1'/a_f for every
//! other factor), so ψ = ℓ'μ = Σ_l w_l·(unweighted marginal mean of level l) in outcome
//! units — the Type III scale of the engines. Methods:
//!
//! * `classical`: t = ψ̂/√(MSE·Σℓ²/n), df N − C, interval ψ̂ ± t_{N−C}·SE (statsmodels
//!   `OLS(y ~ 0 + C(cell)).t_test(ℓ)`), effect size the standardized contrast
//!   g = J·ψ̂/√MSE with its noncentral-t interval (`nct::standardized_contrast`);
//! * `hc`: t = ψ̂/√(Σℓ²v_c) with the `--hc` sandwich variances of the cell means
//!   (METHODS §7.2), df N − C like `engines::hc` (statsmodels `t_test` with
//!   `cov_type='HC3'` and `use_t=True`);
//! * `trimmed`: the q = 1 Johansen test on trimmed means (a Welch–Satterthwaite t,
//!   METHODS §4.2), interval ψ̂_t ± t_{ν₂}·√(Σℓ²d), effect size the robust d_R
//!   (`robust::akp_contrast`, METHODS §4.5).
//!
//! Trend weights are orthogonal polynomials in the numeric level values: the columns
//! x, x², …, x^{a−1} of the centred and scaled levels, orthogonalized (Gram–Schmidt,
//! twice for stability) against the constant and the lower degrees with equal weight per
//! level, scaled to unit length, sign chosen so that the last level's weight is positive
//! (the convention of the usual tables for equally spaced levels, e.g. linear
//! (−1, 0, 1)/√2). Unequal spacing is honoured. `p_adjusted` is adjusted with
//! `--adjust` over all `--contrast`s (one family per method), and over the a − 1 trend
//! components of one factor.

use super::{multiplicity, nct, Probe};
use crate::dist;
use crate::error::{Error, Result};
use crate::model::wald::WaldForm;
use crate::results::{finite, Decision, Effect};
use crate::robust;
use serde::Serialize;

/// A planned contrast as given on the command line.
#[derive(Debug, Clone, PartialEq)]
pub struct ContrastSpec {
    /// Factor name.
    pub factor: String,
    /// One weight per level, in level order.
    pub weights: Vec<f64>,
}

impl ContrastSpec {
    /// Parses `FACTOR: w1,w2,...` (spaces allowed).
    ///
    /// # Errors
    /// A usage error naming the text when there is no `:` or a weight is not a number.
    pub fn parse(text: &str) -> Result<ContrastSpec> {
        let hint = "write it as --contrast \"FACTOR: 1,-1,0\" with one weight per level, summing to zero";
        let Some((factor, list)) = text.split_once(':') else {
            return Err(Error::usage(format!("--contrast `{text}` has no `:`"), hint));
        };
        let mut weights = Vec::new();
        for w in list.split(',') {
            let v: f64 = w
                .trim()
                .parse()
                .map_err(|_| Error::usage(format!("--contrast `{text}`: `{}` is not a number", w.trim()), hint))?;
            if !v.is_finite() {
                return Err(Error::usage(format!("--contrast `{text}`: weights must be finite"), hint));
            }
            weights.push(v);
        }
        Ok(ContrastSpec { factor: factor.trim().to_string(), weights })
    }
}

/// One method's test of a contrast.
#[derive(Debug, Clone, Serialize)]
pub struct ContrastTest {
    /// `classical`, `hc` or `trimmed`.
    pub method: String,
    /// `means` or `trimmed means`.
    pub scale: String,
    /// ψ̂ = Σ_l w_l·(marginal mean of level l), outcome units.
    pub estimate: Option<f64>,
    /// Standard error of ψ̂.
    pub se: Option<f64>,
    /// t = ψ̂/SE.
    pub statistic: Option<f64>,
    /// Degrees of freedom of t.
    pub df: Option<f64>,
    /// Two-sided p.
    pub p: Option<f64>,
    /// p adjusted within the family (see the module notes).
    pub p_adjusted: Option<f64>,
    /// Decision from the adjusted p at α.
    pub decision: Option<Decision>,
    /// Lower end of the per-contrast interval for ψ.
    pub ci_low: Option<f64>,
    /// Upper end.
    pub ci_high: Option<f64>,
    /// Confidence level.
    pub ci_level: Option<f64>,
    /// Standardized size (classical: g with noncentral-t interval; trimmed: robust d_R).
    pub effect: Option<Effect>,
    /// Why the method cannot test this contrast.
    pub not_applicable: Option<String>,
}

/// A planned or trend contrast with its tests.
#[derive(Debug, Clone, Serialize)]
pub struct PlannedContrast {
    /// Name, e.g. `dose: 1,-1,0` or `dose linear`.
    pub name: String,
    /// `planned` or `trend`.
    pub kind: String,
    /// Factor name.
    pub factor: String,
    /// Level labels in order.
    pub levels: Vec<String>,
    /// Weight of each level.
    pub weights: Vec<f64>,
    /// One test per method: classical, hc, trimmed.
    pub tests: Vec<ContrastTest>,
}

/// Relative size below which the weights' sum counts as zero.
const SUM_TOLERANCE: f64 = 1e-9;

/// Every `--contrast`, tested by each method; p adjusted over all of them per method.
///
/// # Errors
/// A usage error for an unknown factor, a wrong number of weights, all-zero weights or
/// weights that do not sum to zero.
pub fn planned(probe: &Probe<'_>, specs: &[ContrastSpec]) -> Result<Vec<PlannedContrast>> {
    let mut out = Vec::new();
    for spec in specs {
        let f = super::resolve(probe.design, std::slice::from_ref(&spec.factor), "--contrast")?[0];
        let levels = &probe.design.factors()[f].levels;
        let text = spec.weights.iter().map(|w| format!("{w}")).collect::<Vec<_>>().join(",");
        if spec.weights.len() != levels.len() {
            return Err(Error::usage(
                format!(
                    "--contrast for `{}` has {} weights but the factor has {} levels",
                    spec.factor,
                    spec.weights.len(),
                    levels.len()
                ),
                format!("give one weight per level, in the order {}", levels.join(", ")),
            ));
        }
        let scale: f64 = spec.weights.iter().map(|w| w.abs()).sum();
        let sum: f64 = spec.weights.iter().sum();
        if scale == 0.0 {
            return Err(Error::usage(
                format!("--contrast `{}: {text}` has only zero weights", spec.factor),
                "give at least two non-zero weights",
            ));
        }
        if sum.abs() > SUM_TOLERANCE * scale {
            return Err(Error::usage(
                format!("--contrast `{}: {text}`: the weights sum to {sum}, not zero", spec.factor),
                "a contrast compares means, so its weights must sum to zero (e.g. 1,-1,0 or 2,-1,-1)",
            ));
        }
        out.push(contrast(probe, f, &spec.weights, format!("{}: {text}", spec.factor), "planned"));
    }
    adjust_families(probe, &mut out);
    Ok(out)
}

/// Orthogonal-polynomial trend contrasts of factor `f` (degrees 1 to a − 1) from its
/// numeric level values; p adjusted over the components per method.
///
/// # Errors
/// A usage error when a level label is not a number.
pub fn trend(probe: &Probe<'_>, f: usize) -> Result<Vec<PlannedContrast>> {
    let factor = &probe.design.factors()[f];
    let mut x = Vec::new();
    for l in &factor.levels {
        let v: f64 = l.trim().parse().map_err(|_| {
            Error::usage(
                format!("--trend {}: level `{l}` is not a number", factor.name),
                "trend contrasts need ordered numeric levels (e.g. doses 0.5, 1, 2)",
            )
        })?;
        x.push(v);
    }
    let names = ["linear", "quadratic", "cubic", "quartic", "quintic"];
    let mut out: Vec<PlannedContrast> = orthogonal_polynomials(&x)
        .into_iter()
        .enumerate()
        .map(|(d, w)| {
            let name = names.get(d).map_or_else(|| format!("degree {}", d + 1), |s| s.to_string());
            contrast(probe, f, &w, format!("{} {name}", factor.name), "trend")
        })
        .collect();
    adjust_families(probe, &mut out);
    Ok(out)
}

/// Orthogonal polynomial contrast weights for level values `x`: degree 1 to a − 1, each
/// of unit length, orthogonal to the constant and to each other, last entry positive.
pub fn orthogonal_polynomials(x: &[f64]) -> Vec<Vec<f64>> {
    let a = x.len();
    let mean = x.iter().sum::<f64>() / a as f64;
    let spread = x.iter().map(|v| (v - mean).abs()).fold(0.0, f64::max);
    let z: Vec<f64> = x.iter().map(|v| if spread > 0.0 { (v - mean) / spread } else { 0.0 }).collect();
    let mut basis: Vec<Vec<f64>> = vec![vec![1.0 / (a as f64).sqrt(); a]];
    for d in 1..a {
        let mut col: Vec<f64> = z.iter().map(|v| v.powi(d as i32)).collect();
        for _ in 0..2 {
            for b in &basis {
                let dot: f64 = col.iter().zip(b).map(|(c, e)| c * e).sum();
                for (c, e) in col.iter_mut().zip(b) {
                    *c -= dot * e;
                }
            }
        }
        let norm = col.iter().map(|c| c * c).sum::<f64>().sqrt();
        let sign = if col[a - 1] < 0.0 { -1.0 } else { 1.0 };
        basis.push(col.iter().map(|c| sign * c / norm).collect());
    }
    basis.split_off(1)
}

/// p adjusted over the contrasts of one call, per method.
fn adjust_families(probe: &Probe<'_>, list: &mut [PlannedContrast]) {
    let n_methods = list.first().map_or(0, |c| c.tests.len());
    for m in 0..n_methods {
        let raw: Vec<Option<f64>> = list.iter().map(|c| c.tests[m].p).collect();
        for (c, a) in list.iter_mut().zip(multiplicity::adjust(&raw, probe.settings.adjust)) {
            c.tests[m].p_adjusted = a;
            c.tests[m].decision = probe.decide(a);
        }
    }
}

fn blank(method: &str, scale: &str) -> ContrastTest {
    ContrastTest {
        method: method.into(),
        scale: scale.into(),
        estimate: None,
        se: None,
        statistic: None,
        df: None,
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

fn fill(r: &mut ContrastTest, est: f64, se: f64, df: f64, level: f64) {
    let t = est / se;
    let p = 2.0 * dist::t_sf(t.abs(), df);
    if !(t.is_finite() && p.is_finite()) {
        r.not_applicable = Some("the contrast's statistic is not finite".into());
        return;
    }
    let half = dist::t_quantile(0.5 + level / 2.0, df) * se;
    r.estimate = finite(est);
    r.se = finite(se);
    r.statistic = finite(t);
    r.df = finite(df);
    r.p = Some(p.min(1.0));
    r.ci_low = finite(est - half);
    r.ci_high = finite(est + half);
    r.ci_level = Some(level);
}

/// The cell vector of level weights `w` of factor `f`: w ⊗ 1'/a for the other factors.
pub fn cell_vector(probe: &Probe<'_>, f: usize, w: &[f64]) -> Vec<f64> {
    let shape = probe.design.shape();
    let m_other: usize = shape.iter().enumerate().filter(|(g, _)| *g != f).map(|(_, a)| a).product();
    (0..probe.design.n_cells()).map(|c| w[probe.design.layout.cell_levels(c)[f]] / m_other as f64).collect()
}

/// Tests one contrast by every method.
fn contrast(probe: &Probe<'_>, f: usize, w: &[f64], name: String, kind: &str) -> PlannedContrast {
    let design = probe.design;
    let fit = probe.fit;
    let level = probe.settings.ci_level;
    let ell = cell_vector(probe, f, w);
    let df_e = fit.df_error as f64;
    let mse = fit.mse();
    let est: f64 = ell.iter().zip(&fit.mean).map(|(l, m)| l * m).sum();
    let k2: f64 = ell.iter().zip(&fit.n).map(|(l, &n)| l * l / n as f64).sum();

    let mut classical = blank("classical", "means");
    if fit.df_error > 0 && mse > 0.0 {
        let se = (mse * k2).sqrt();
        fill(&mut classical, est, se, df_e, level);
        if let Some(g) = nct::standardized_contrast(est, mse.sqrt(), k2.sqrt(), df_e, level) {
            classical.effect = Some(Effect {
                name: "standardized_contrast".into(),
                value: finite(g.g),
                ci_low: finite(g.ci_low),
                ci_high: finite(g.ci_high),
                ci_level: Some(level),
            });
        }
    } else {
        classical.not_applicable = Some("no pooled error variance".into());
    }

    let mut hc = blank("hc", "means");
    let bad = (0..ell.len()).find(|&c| ell[c] != 0.0 && probe.hc_v[c].is_nan() || probe.hc_v[c] <= 0.0);
    if let Some(c) = bad {
        hc.not_applicable = Some(format!(
            "cell {}: the HC covariance needs n ≥ 2 and within-cell variation",
            design.layout.cell_name(c)
        ));
    } else if fit.df_error > 0 {
        let var: f64 = ell.iter().zip(&probe.hc_v).filter(|(l, _)| **l != 0.0).map(|(l, v)| l * l * v).sum();
        fill(&mut hc, est, var.sqrt(), df_e, level);
    } else {
        hc.not_applicable = Some("no residual degrees of freedom".into());
    }

    let mut trimmed = blank("trimmed", "trimmed means");
    let form = WaldForm::from_matrix(1, ell.len(), ell.clone());
    match robust::welch_james(&form, &probe.trimmed) {
        Ok(wj) => {
            let involved = ell.iter().zip(&probe.trimmed).filter(|(l, _)| **l != 0.0);
            let est_t: f64 = involved.clone().map(|(l, c)| l * c.trimmed_mean).sum();
            let se = involved.map(|(l, c)| l * l * c.d).sum::<f64>().sqrt();
            fill(&mut trimmed, est_t, se, wj.df2, level);
            if let Ok(d) = robust::akp_contrast(&ell, &probe.trimmed) {
                trimmed.effect = Some(Effect::point("robust_d", d));
            }
        }
        Err(e) => trimmed.not_applicable = Some(e.describe(|c| design.layout.cell_name(c))),
    }
    PlannedContrast {
        name,
        kind: kind.into(),
        factor: design.factors()[f].name.clone(),
        levels: design.factors()[f].levels.clone(),
        weights: w.to_vec(),
        tests: vec![classical, hc, trimmed],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polynomials_for_equal_spacing_match_the_classical_tables() {
        // Equally spaced 3 and 4 levels: linear (−1, 0, 1), quadratic (1, −2, 1);
        // (−3, −1, 1, 3), (1, −1, −1, 1), (−1, 3, −3, 1) — the standard tables.
        let p = orthogonal_polynomials(&[1.0, 2.0, 3.0]);
        let want = [[-1.0, 0.0, 1.0], [1.0, -2.0, 1.0]];
        for (got, w) in p.iter().zip(want) {
            let norm = w.iter().map(|x: &f64| x * x).sum::<f64>().sqrt();
            for (g, x) in got.iter().zip(w) {
                assert!((g - x / norm).abs() < 1e-14, "{p:?}");
            }
        }
        let p = orthogonal_polynomials(&[10.0, 20.0, 30.0, 40.0]);
        let want = [[-3.0, -1.0, 1.0, 3.0], [1.0, -1.0, -1.0, 1.0], [-1.0, 3.0, -3.0, 1.0]];
        for (got, w) in p.iter().zip(want) {
            let norm = w.iter().map(|x: &f64| x * x).sum::<f64>().sqrt();
            for (g, x) in got.iter().zip(w) {
                assert!((g - x / norm).abs() < 1e-13, "{p:?}");
            }
        }
    }

    #[test]
    fn parsing() {
        let c = ContrastSpec::parse("dose: 1, -0.5,-0.5").unwrap();
        assert_eq!(c.factor, "dose");
        assert_eq!(c.weights, vec![1.0, -0.5, -0.5]);
        assert!(ContrastSpec::parse("dose 1,2").is_err());
        assert!(ContrastSpec::parse("dose: 1,x").is_err());
    }
}
