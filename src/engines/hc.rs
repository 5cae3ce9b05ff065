//! The `hc` engine: heteroscedasticity-consistent Wald F tests of every term (METHODS §7).
//!
//! The full factorial model is saturated in cells, so every observation in cell c has
//! leverage 1/n_c and the sandwich covariance of the cell means is diagonal (METHODS
//! §7.2): v_c = (n_c − 1)s²_c/n_c² · ω_c with the HC0–HC4 weight ω_c. The Wald F of a
//! term is then the quadratic form of [`crate::model::wald`] in the cell means with
//! V = diag(v), divided by q, against F(q, N − C) (statsmodels' convention). This is the
//! Type III hypothesis of the term, identical to the coefficient-block Wald test of the
//! sum-coded OLS fit with the full sandwich, at O(C·q²) cost instead of O(N·C²).
//! [`cell_variances`] and [`hc_wald`] are public so that follow-ups (simple effects,
//! contrasts) use the same numbers.

use super::{Context, Engine};
use crate::config::HcType;
use crate::design::forms::DENSE_CELL_LIMIT;
use crate::dist;
use crate::error::Result;
use crate::model::wald::WaldForm;
use crate::results::{finite, Decision, EngineResult, TermResult};
use serde_json::json;
use std::collections::BTreeMap;

/// The HC Wald engine (id `hc`).
pub struct Hc;

/// At most this many degenerate cells are named in a reason; the rest are counted.
const NAMED_CELLS: usize = 5;

/// Sandwich variance of each cell mean in the saturated cell-means model (METHODS §7.2):
/// v_c = SS_c/n_c² · ω_c, SS_c = Σ_i (y_ci − ȳ_c)², with ω_c = 1 (HC0), N/(N − C) (HC1),
/// n_c/(n_c − 1) (HC2, so v_c = s²_c/n_c), (n_c/(n_c − 1))² (HC3, v_c = s²_c/(n_c − 1)),
/// (n_c/(n_c − 1))^δ_c with δ_c = min(4, N/(C·n_c)) (HC4; Cribari-Neto 2004).
/// White (1980); MacKinnon & White (1985); Long & Ervin (2000). Cells with n_c < 2 get NaN
/// (leverage 1: the HC covariance is undefined).
pub fn cell_variances(n: &[usize], ss_within: &[f64], hc: HcType) -> Vec<f64> {
    let n_total: usize = n.iter().sum();
    let n_cells = n.len();
    n.iter()
        .zip(ss_within)
        .map(|(&nc, &ss)| {
            if nc < 2 {
                return f64::NAN;
            }
            let nf = nc as f64;
            let base = ss / (nf * nf);
            let ratio = nf / (nf - 1.0);
            match hc {
                HcType::Hc0 => base,
                HcType::Hc1 => base * n_total as f64 / (n_total - n_cells) as f64,
                HcType::Hc2 => ss / (nf * (nf - 1.0)),
                HcType::Hc3 => ss / ((nf - 1.0) * (nf - 1.0)),
                HcType::Hc4 => {
                    let delta = (n_total as f64 / (n_cells as f64 * nf)).min(4.0);
                    base * ratio.powf(delta)
                }
            }
        })
        .collect()
}

/// A heteroscedasticity-consistent Wald F test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HcWald {
    /// F = (Lμ̂)'(L V L')⁻¹(Lμ̂)/q.
    pub f: f64,
    /// q, rows of L.
    pub df1: f64,
    /// Residual df N − C.
    pub df2: f64,
    /// P(F(q, N − C) ≥ F).
    pub p: f64,
}

/// Wald F of H₀: Lμ = 0 for cell means `means` with sandwich variances `v`
/// ([`cell_variances`]) and residual df `df_error` (METHODS §7.1–§7.2). `None` when
/// L V L' is not positive definite or `df_error` is 0.
pub fn hc_wald(form: &WaldForm, means: &[f64], v: &[f64], df_error: usize) -> Option<HcWald> {
    if df_error == 0 || form.q() == 0 {
        return None;
    }
    let w = form.statistic(means, v, &mut form.scratch())?;
    let q = form.q() as f64;
    let f = w / q;
    let df2 = df_error as f64;
    f.is_finite().then(|| HcWald { f, df1: q, df2, p: dist::f_sf(f, q, df2) })
}

impl Engine for Hc {
    fn id(&self) -> &'static str {
        "hc"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let fit = ctx.fit;
        let settings = ctx.settings;
        let hc = settings.hc;
        let mut out = BTreeMap::new();
        out.insert("ss_type".to_string(), json!(3));
        out.insert("hc".to_string(), json!(hc.label()));
        out.insert("df2".to_string(), json!("N - C (residual df of the full factorial model)"));
        out.insert("alpha".to_string(), json!(settings.alpha));
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings: out,
            terms: Vec::new(),
            details: None,
            notes: vec![format!(
                "Wald F with the {} sandwich covariance of the cell means; no effect size of its own (the classical engine's partial η² estimates the same contrast)",
                hc.label()
            )],
        };
        let na = |reason: &str| -> Vec<TermResult> {
            design.terms().iter().map(|t| TermResult::not_applicable(&t.name, reason)).collect()
        };
        let n_cells = design.n_cells();
        if n_cells > DENSE_CELL_LIMIT {
            result.terms = na(&format!(
                "the design has {n_cells} cells; the Wald forms are dense and limited to {DENSE_CELL_LIMIT} cells"
            ));
            return Ok(result);
        }
        let mut defects = Vec::new();
        for c in 0..n_cells {
            let values = design.cell_values(c);
            let name = design.layout.cell_name(c);
            if values.len() < 2 {
                defects.push(format!("cell {name} has n = 1: its leverage is 1 and the HC covariance is undefined"));
            } else if values.iter().all(|&x| x == values[0]) {
                defects.push(format!(
                    "cell {name} has zero variance (all values equal): the HC covariance of its mean is 0"
                ));
            }
        }
        if !defects.is_empty() {
            let mut reason = defects.iter().take(NAMED_CELLS).cloned().collect::<Vec<_>>().join("; ");
            if defects.len() > NAMED_CELLS {
                reason.push_str(&format!("; and {} more cell(s)", defects.len() - NAMED_CELLS));
            }
            result.terms = na(&reason);
            return Ok(result);
        }
        let v = cell_variances(&fit.n, &fit.ss_within, hc);
        for (t, term) in design.terms().iter().enumerate() {
            let form = WaldForm::new(&design.layout, t);
            result.terms.push(match hc_wald(&form, &fit.mean, &v, fit.df_error) {
                Some(w) => TermResult {
                    term: term.name.clone(),
                    statistic: finite(w.f),
                    df1: Some(w.df1),
                    df2: Some(w.df2),
                    p: finite(w.p),
                    decision: finite(w.p).map(|p| Decision::from_p(p, settings.alpha)),
                    mc: None,
                    effect: None,
                    effects: Vec::new(),
                    not_applicable: None,
                    notes: Vec::new(),
                },
                None => TermResult::not_applicable(
                    &term.name,
                    "the HC covariance of this term's contrast is singular to working precision",
                ),
            });
        }
        Ok(result)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Settings;
    use crate::design::forms::SsForms;
    use crate::design::{Design, Factor};
    use crate::model::Fit;

    fn factor(name: &str, a: usize) -> Factor {
        Factor {
            name: name.into(),
            levels: (1..=a).map(|i| format!("{}{i}", name.to_lowercase())).collect(),
            measured: false,
        }
    }

    fn run(design: &Design, settings: &Settings) -> EngineResult {
        let fit = Fit::new(design);
        let forms = SsForms::new(&design.layout, &fit.n, crate::config::SsType::Three).unwrap();
        Hc.run(&Context { design, fit: &fit, forms: &forms, settings }).unwrap()
    }

    fn methods12() -> Design {
        let cells = vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ];
        Design::from_cells("y", vec![factor("A", 2), factor("B", 3)], &cells).unwrap()
    }

    #[test]
    fn every_hc_type_matches_methods_12_2() {
        // Source: METHODS §12.2: statsmodels OLS(cov_type='HC0'..'HC3').wald_test(use_f=True);
        // HC4 self-computed there from the full sandwich.
        let want: [[(f64, f64); 3]; 5] = [
            [(10.22823165, 0.003047811924), (29.79538457, 4.046812601e-08), (2.124873492, 0.1355018141)],
            [(8.654657550, 0.005926271257), (25.21147926, 2.260829507e-07), (1.797969878, 0.1814834774)],
            [(8.674885271, 0.005874587448), (25.42962434, 2.074383507e-07), (1.809130919, 0.1796666760)],
            [(7.355050324, 0.01053716094), (21.69540799, 9.667207706e-07), (1.539487799, 0.2295016125)],
            [(8.676550313, 0.005870354749), (25.56435338, 1.967435460e-07), (1.812907197, 0.1790563466)],
        ];
        let design = methods12();
        for (hc, rows) in HcType::ALL.iter().zip(want) {
            let r = run(&design, &Settings { hc: *hc, ..Settings::default() });
            for (t, (f, p)) in rows.iter().enumerate() {
                let term = &r.terms[t];
                assert!((term.statistic.unwrap() / f - 1.0).abs() < 1e-9, "{hc:?} {t}");
                assert!((term.p.unwrap() / p - 1.0).abs() < 1e-8, "{hc:?} {t}");
                assert_eq!(term.df2, Some(33.0));
            }
            assert_eq!(r.settings["hc"], hc.label());
        }
    }

    #[test]
    fn single_observation_and_constant_cells_are_named() {
        let cells = vec![vec![1.0, 2.0], vec![4.0], vec![3.0, 3.0], vec![2.0, 5.0]];
        let design = Design::from_cells("y", vec![factor("A", 2), factor("B", 2)], &cells).unwrap();
        let r = run(&design, &Settings::default());
        for t in &r.terms {
            let why = t.not_applicable.as_deref().unwrap();
            assert!(why.contains("A=a1, B=b2 has n = 1") && why.contains("A=a2, B=b1 has zero variance"), "{why}");
        }
    }

    #[test]
    fn balanced_hc4_equals_hc2() {
        // METHODS §7.2: with equal n, δ = 1 and HC4 = HC2.
        let n = [4, 4, 4];
        let ss = [1.0, 2.0, 3.0];
        let a = cell_variances(&n, &ss, HcType::Hc4);
        let b = cell_variances(&n, &ss, HcType::Hc2);
        for (x, y) in a.iter().zip(&b) {
            assert!((x - y).abs() < 1e-15);
        }
    }
}
