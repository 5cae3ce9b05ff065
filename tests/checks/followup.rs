//! Follow-ups (METHODS §9): simple effects, pairwise comparisons, planned contrasts and
//! trends, multiplicity, the noncentral t and the within-slice permutation test, checked
//! against `tests/reference/followup.json` (written by `tests/reference/gen/followup.py`;
//! every record names its library call) and METHODS §12.7.
//!
//! Sources: scipy `stats.tukey_hsd` (Tukey–Kramer, Games–Howell), scipy
//! `studentized_range`, statsmodels `multipletests`, statsmodels `OLS.f_test` /
//! `wald_test(cov_type='HC3')` / `t_test`, scipy `f_oneway`, statsmodels `anova_oneway`,
//! scipy `ttest_ind(trim=0.2)`, scipy `nct`, brute-force enumeration with
//! `itertools.combinations`, an independent numpy permutation implementation.

use crate::support::*;
use quorum::config::{Config, Settings};
use quorum::design::Design;
use quorum::followup::{self, contrasts, multiplicity, Adjust, ContrastSpec, Probe};
use quorum::model::Fit;
use quorum::results::{Followup, PairwiseComparison, SimpleEffectTest};
use serde_json::Value;

/// The noncentral t cdf is a series of incomplete betas; scipy's `nct.cdf` (Boost) and
/// ours agree to about 1e-13 absolute where both are accurate. 1e-11 absolute leaves
/// room for the summation order and still catches any wrong term.
const NCT_ABS: f64 = 1e-11;
/// δ interval endpoints: roots of the cdf found to 1e-12 relative on both sides
/// (Illinois here, scipy brentq there); the cdf's slope makes a 1e-11 cdf difference
/// move a root by at most ~1e-10.
const ROOT_REL: f64 = 1e-9;
/// Studentized-range p-values and quantiles: `dist::ptukey_*` is accurate to about
/// 1e-12 absolute, scipy's `studentized_range` to about 1e-10 (its own documentation
/// and the dist fixture), so the p comparison uses 1e-9 absolute on top of P_REL.
const PTUKEY_ABS: f64 = 1e-9;
/// Intervals built on the studentized-range quantile inherit scipy's quantile error
/// (about 1e-9 relative in q).
const PTUKEY_CI_REL: f64 = 1e-8;

fn load(entry: &Value, settings: Settings) -> (Config, Design) {
    let (csv, outcome, factors) = dataset(entry);
    let mut config = config_for(&csv, &outcome, &factors);
    config.settings = Settings { quiet: true, ..settings };
    let obs = quorum::data::read(&config.data).expect("read");
    let design = Design::build(&obs, &config.data).expect("design");
    (config, design)
}

fn index(design: &Design, names: &Value) -> Vec<usize> {
    let mut v: Vec<usize> = names
        .as_array()
        .unwrap()
        .iter()
        .map(|n| design.factors().iter().position(|f| f.name == n.as_str().unwrap()).unwrap())
        .collect();
    v.sort_unstable();
    v
}

fn rows<'a>(f: &'a Followup, method: &str) -> Vec<&'a SimpleEffectTest> {
    f.tests.iter().filter(|t| t.method == method).collect()
}

fn pairs<'a>(f: &'a Followup, method: &str, slice: usize, per_slice: usize) -> Vec<&'a PairwiseComparison> {
    let all: Vec<&PairwiseComparison> = f.pairwise.iter().filter(|p| p.method == method).collect();
    all[slice * per_slice..(slice + 1) * per_slice].to_vec()
}

fn datasets_of(fix: &Value) -> Vec<(String, Value)> {
    datasets(fix).into_iter().filter(|(k, _)| !["multiplicity", "nct", "permutation"].contains(&k.as_str())).collect()
}

#[test]
fn multiplicity_matches_statsmodels_multipletests() {
    // Source: statsmodels multipletests(method='holm'|'simes-hochberg'|'fdr_bh'|'bonferroni').
    let fix = fixture("followup");
    for rec in fix["multiplicity"].as_array().unwrap() {
        let p: Vec<Option<f64>> = nums(&rec["p"]).into_iter().map(Some).collect();
        for (key, method) in [
            ("holm", Adjust::Holm),
            ("hochberg", Adjust::Hochberg),
            ("bh", Adjust::Bh),
            ("bonferroni", Adjust::Bonferroni),
        ] {
            let got = multiplicity::adjust(&p, method);
            for (g, w) in got.iter().zip(nums(&rec[key])) {
                assert_close(g.unwrap(), w, STAT_REL, STAT_ABS, key);
            }
        }
    }
}

#[test]
fn noncentral_t_matches_scipy_nct() {
    // Source: scipy.stats.nct.cdf and brentq on it (fixture "nct").
    let fix = fixture("followup");
    for r in fix["nct"]["cdf"].as_array().unwrap() {
        let v = nums(r);
        let got = quorum::dist::nct_cdf(v[0], v[1], v[2]);
        assert_close(got, v[3], 0.0, NCT_ABS, &format!("nct.cdf({}, {}, {})", v[0], v[1], v[2]));
    }
    for r in fix["nct"]["intervals"].as_array().unwrap() {
        let v = nums(r);
        let (lo, hi) = quorum::dist::nct_delta_interval(v[0], v[1], v[2]).expect("interval");
        assert_close(lo, v[3], ROOT_REL, 1e-12, "δ lower");
        assert_close(hi, v[4], ROOT_REL, 1e-12, "δ upper");
    }
}

#[test]
fn simple_effects_match_statsmodels_and_scipy() {
    // Sources: statsmodels OLS('y ~ 0 + C(cell)').f_test(L) (pooled error) and
    // fit(cov_type='HC3').wald_test(L, use_f=True) (HC3); scipy f_oneway on the slice
    // (slice error); statsmodels anova_oneway(use_var='unequal', trim_frac=0.2) on the
    // slice, or the numpy Johansen of gen/heteroscedastic.py for averaged slices.
    let fix = fixture("followup");
    let mut checked = 0;
    for (name, entry) in datasets_of(&fix) {
        let (config, design) = load(&entry, Settings::default());
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &config.settings).unwrap();
        for spec in entry["simple"].as_array().unwrap() {
            let effect = index(&design, &spec["effect"]);
            let at = index(&design, &spec["at"]);
            let f = followup::follow(&probe, &effect, &at, "test").unwrap();
            let slices = spec["slices"].as_array().unwrap();
            let pooled = rows(&f, "classical-pooled");
            let own = rows(&f, "classical-slice");
            let hc = rows(&f, "hc");
            let tr = rows(&f, "trimmed");
            assert_eq!(pooled.len(), slices.len());
            for (i, s) in slices.iter().enumerate() {
                let what = format!("{name} {:?} at {:?} slice {i}", spec["effect"], spec["at"]);
                let want: Vec<String> =
                    s["levels"].as_array().unwrap().iter().map(|l| l.as_str().unwrap().into()).collect();
                let got: Vec<String> = pooled[i].slice.iter().map(|l| l.level.clone()).collect();
                assert_eq!(got, want, "{what}");
                assert_stat(pooled[i].statistic.unwrap(), num(&s["pooled"]["F"]), &format!("{what} pooled F"));
                assert_eq!(pooled[i].df2.unwrap(), num(&s["pooled"]["df2"]));
                assert_p(pooled[i].p.unwrap(), num(&s["pooled"]["p"]), &format!("{what} pooled p"));
                assert_stat(hc[i].statistic.unwrap(), num(&s["hc3"]["F"]), &format!("{what} HC3 F"));
                assert_p(hc[i].p.unwrap(), num(&s["hc3"]["p"]), &format!("{what} HC3 p"));
                if let Some(o) = s.get("slice") {
                    assert_stat(own[i].statistic.unwrap(), num(&o["F"]), &format!("{what} slice F"));
                    assert_eq!(own[i].df2.unwrap(), num(&o["df2"]));
                    assert_p(own[i].p.unwrap(), num(&o["p"]), &format!("{what} slice p"));
                }
                assert_stat(tr[i].statistic.unwrap(), num(&s["trimmed"]["F"]), &format!("{what} WJ F"));
                assert_stat(tr[i].df2.unwrap(), num(&s["trimmed"]["df2"]), &format!("{what} WJ df2"));
                assert_p(tr[i].p.unwrap(), num(&s["trimmed"]["p"]), &format!("{what} WJ p"));
                checked += 1;
            }
            // Holm over the slices, per method (statsmodels multipletests is checked above;
            // here: the family is exactly the slices of one method).
            let raw: Vec<Option<f64>> = pooled.iter().map(|t| t.p).collect();
            let adj = multiplicity::adjust(&raw, Adjust::Holm);
            for (t, a) in pooled.iter().zip(adj) {
                assert_eq!(t.p_adjusted, a);
            }
        }
    }
    assert!(checked >= 25, "{checked} slices checked");
}

#[test]
fn methods_12_7_simple_effects_and_pairs() {
    // Source: METHODS §12.7 (statsmodels f_test on the cell-means model, plain and HC3;
    // scipy tukey_hsd). Printed to 10 significant digits.
    const PRINTED: f64 = 5e-9;
    let entry = serde_json::json!({"csv": "tests/data/methods12.csv", "outcome": "y", "factors": ["A", "B"]});
    let (config, design) = load(&entry, Settings::default());
    let fit = Fit::new(&design);
    let probe = Probe::new(&design, &fit, &config.settings).unwrap();
    let f = followup::follow(&probe, &[0], &[1], "test").unwrap();
    for (t, (fv, p)) in rows(&f, "classical-pooled").iter().zip([
        (0.1911659895, 0.6647959817),
        (5.004304157, 0.03215698570),
        (5.037463454, 0.03162951092),
    ]) {
        assert_close(t.statistic.unwrap(), fv, PRINTED, 0.0, "pooled F");
        assert_close(t.p.unwrap(), p, PRINTED, 0.0, "pooled p");
    }
    for (t, (fv, p)) in rows(&f, "hc").iter().zip([
        (0.5338005766, 0.4701691169),
        (4.877114239, 0.03427154900),
        (2.648902821, 0.1131333739),
    ]) {
        assert_close(t.statistic.unwrap(), fv, PRINTED, 0.0, "HC3 F");
        assert_close(t.p.unwrap(), p, PRINTED, 0.0, "HC3 p");
    }
    // Every cell: Tukey–Kramer and Games–Howell pairs of §12.7.
    let all = followup::follow(&probe, &[0, 1], &[], "test").unwrap();
    let find = |method: &str, a: [&str; 2], b: [&str; 2]| {
        all.pairwise
            .iter()
            .find(|p| p.method == method && p.first == a.map(String::from) && p.second == b.map(String::from))
            .unwrap()
            .clone()
    };
    for (a, b, q, p) in [
        (["a1", "b1"], ["a2", "b3"], 8.379454970, 1.684601845e-05),
        (["a1", "b3"], ["a2", "b3"], 3.174102536, 0.2455409002),
        (["a1", "b2"], ["a2", "b2"], 3.163638461, 0.2486935669),
    ] {
        let r = find("tukey-kramer", a, b);
        assert_close(r.statistic.unwrap(), q, PRINTED, 0.0, "Tukey q");
        assert_close(r.p.unwrap(), p, PRINTED, 0.0, "Tukey p");
    }
    for (a, b, t, nu, p) in [
        (["a1", "b1"], ["a2", "b3"], -5.852612197_f64, 6.351907955, 0.00700792401),
        (["a1", "b3"], ["a2", "b3"], -1.765902023, 10.22410953, 0.523532062),
        (["a1", "b2"], ["a2", "b2"], -2.412525865, 7.403583803, 0.2622416702),
    ] {
        let r = find("games-howell", a, b);
        assert_close(r.statistic.unwrap(), t.abs() * std::f64::consts::SQRT_2, PRINTED, 0.0, "GH q = √2|t|");
        assert_close(r.df.unwrap(), nu, PRINTED, 0.0, "GH ν");
        assert_close(r.p.unwrap(), p, PRINTED, 0.0, "GH p");
    }
}

#[test]
fn all_cell_pairs_match_scipy_tukey_hsd() {
    // Source: scipy.stats.tukey_hsd(*cells) and tukey_hsd(*cells, equal_var=False) with
    // confidence_interval(0.95): the effect is every factor, no slice.
    let fix = fixture("followup");
    for (name, entry) in datasets_of(&fix) {
        let (config, design) = load(&entry, Settings::default());
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &config.settings).unwrap();
        let every: Vec<usize> = (0..design.factors().len()).collect();
        let f = followup::follow(&probe, &every, &[], "test").unwrap();
        for (method, key) in [("tukey-kramer", "tukey"), ("games-howell", "games_howell")] {
            let got: Vec<&PairwiseComparison> = f.pairwise.iter().filter(|p| p.method == method).collect();
            let want = entry["all_cells"][key].as_array().unwrap();
            assert_eq!(got.len(), want.len(), "{name} {method}");
            for (g, w) in got.iter().zip(want) {
                let what = format!("{name} {method} {:?} vs {:?}", g.first, g.second);
                assert_eq!(serde_json::to_value(&g.first).unwrap(), w["first"], "{what}");
                assert_stat(g.estimate.unwrap(), num(&w["estimate"]), &what);
                assert_close(g.p.unwrap(), num(&w["p"]), P_REL, PTUKEY_ABS, &format!("{what} p"));
                assert_close(g.ci_low.unwrap(), num(&w["ci_low"]), PTUKEY_CI_REL, 1e-10, &format!("{what} low"));
                assert_close(g.ci_high.unwrap(), num(&w["ci_high"]), PTUKEY_CI_REL, 1e-10, &format!("{what} high"));
            }
        }
    }
}

#[test]
fn pairwise_within_slices_match_their_sources() {
    // Sources: Tukey–Kramer with the full MSE — statsmodels t_test + scipy
    // studentized_range.sf/.ppf; Hedges' g interval — scipy nct (brentq); Games–Howell
    // within a slice — scipy tukey_hsd(*slice_cells, equal_var=False); Yuen — scipy
    // ttest_ind(trim=0.2, equal_var=False) + multipletests('holm'); averaged slices —
    // numpy Welch–Satterthwaite on trimmed means; ART-C — gen/rank.py's statsmodels
    // t_test on aligned ranks + multipletests('holm').
    let fix = fixture("followup");
    let mut checked = 0;
    for (name, entry) in datasets_of(&fix) {
        let (config, design) = load(&entry, Settings::default());
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &config.settings).unwrap();
        for spec in entry["pairwise"].as_array().unwrap() {
            let effect = index(&design, &spec["effect"]);
            let at = index(&design, &spec["at"]);
            let f = followup::follow(&probe, &effect, &at, "test").unwrap();
            let m = spec["means_compared"].as_u64().unwrap() as usize;
            let per = m * (m - 1) / 2;
            for (s, want) in spec["slices"].as_array().unwrap().iter().enumerate() {
                let what = format!("{name} {:?} at {:?} slice {s}", spec["effect"], spec["at"]);
                for (g, w) in pairs(&f, "tukey-kramer", s, per).iter().zip(want["tukey"].as_array().unwrap()) {
                    assert_stat(g.estimate.unwrap(), num(&w["estimate"]), &format!("{what} TK estimate"));
                    assert_stat(g.se.unwrap(), num(&w["se"]), &format!("{what} TK se"));
                    assert_stat(g.statistic.unwrap(), num(&w["q"]), &format!("{what} TK q"));
                    assert_close(g.p.unwrap(), num(&w["p"]), P_REL, PTUKEY_ABS, &format!("{what} TK p"));
                    assert_close(g.ci_low.unwrap(), num(&w["ci_low"]), PTUKEY_CI_REL, 1e-10, &format!("{what} TK low"));
                    let e = g.effect.as_ref().unwrap();
                    assert_stat(e.value.unwrap(), num(&w["g"]), &format!("{what} g"));
                    assert_close(e.ci_low.unwrap(), num(&w["g_low"]), ROOT_REL, 1e-12, &format!("{what} g low"));
                    assert_close(e.ci_high.unwrap(), num(&w["g_high"]), ROOT_REL, 1e-12, &format!("{what} g high"));
                }
                let gh = want["games_howell"].as_array().unwrap();
                if !gh.is_empty() {
                    for (g, w) in pairs(&f, "games-howell", s, per).iter().zip(gh) {
                        assert_stat(g.estimate.unwrap(), num(&w["estimate"]), &format!("{what} GH estimate"));
                        assert_close(g.p.unwrap(), num(&w["p"]), P_REL, PTUKEY_ABS, &format!("{what} GH p"));
                        assert_close(
                            g.ci_high.unwrap(),
                            num(&w["ci_high"]),
                            PTUKEY_CI_REL,
                            1e-10,
                            &format!("{what} GH high"),
                        );
                    }
                }
                let trim_method = if gh.is_empty() { "trimmed-contrast" } else { "yuen" };
                for (g, w) in pairs(&f, trim_method, s, per).iter().zip(want["trimmed"].as_array().unwrap()) {
                    assert_stat(g.estimate.unwrap(), num(&w["estimate"]), &format!("{what} trimmed estimate"));
                    assert_stat(g.statistic.unwrap(), num(&w["t"]), &format!("{what} trimmed t"));
                    assert_stat(g.df.unwrap(), num(&w["df"]), &format!("{what} trimmed df"));
                    assert_p(g.p.unwrap(), num(&w["p"]), &format!("{what} trimmed p"));
                    assert_p(g.p_adjusted.unwrap(), num(&w["p_holm"]), &format!("{what} trimmed Holm"));
                    assert_stat(g.ci_low.unwrap(), num(&w["ci_low"]), &format!("{what} trimmed low"));
                    assert_stat(g.ci_high.unwrap(), num(&w["ci_high"]), &format!("{what} trimmed high"));
                }
                let art = want["artc"].as_array().unwrap();
                assert_eq!(art.len(), per, "{what}: ART-C rows in the fixture");
                for (g, w) in pairs(&f, "art-c", s, per).iter().zip(art) {
                    assert_stat(g.estimate.unwrap(), num(&w["estimate"]), &format!("{what} ART-C estimate"));
                    assert_stat(g.statistic.unwrap(), num(&w["t"]), &format!("{what} ART-C t"));
                    assert_p(g.p.unwrap(), num(&w["p"]), &format!("{what} ART-C p"));
                    assert_p(g.p_adjusted.unwrap(), num(&w["p_holm"]), &format!("{what} ART-C Holm"));
                }
                checked += 1;
            }
        }
    }
    assert!(checked >= 20, "{checked} slices checked");
}

#[test]
fn planned_contrasts_and_trends_match_statsmodels_t_test() {
    // Sources: statsmodels OLS('y ~ 0 + C(cell)').fit().t_test(ℓ) and
    // fit(cov_type='HC3', use_t=True).t_test(ℓ); numpy Welch–Satterthwaite on trimmed
    // means; scipy nct for the standardized contrast's interval; numpy QR for trend weights.
    let fix = fixture("followup");
    for (name, entry) in datasets_of(&fix) {
        let (config, design) = load(&entry, Settings::default());
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &config.settings).unwrap();
        let mut checks: Vec<(quorum::followup::PlannedContrast, Value)> = Vec::new();
        for c in entry["contrasts"].as_array().unwrap() {
            let spec = ContrastSpec { factor: c["factor"].as_str().unwrap().into(), weights: nums(&c["weights"]) };
            let got = contrasts::planned(&probe, &[spec]).unwrap();
            checks.push((got[0].clone(), c.clone()));
        }
        if let Some(t) = entry.get("trend") {
            let f = index(&design, &serde_json::json!([t["factor"]]))[0];
            let got = contrasts::trend(&probe, f).unwrap();
            for ((g, w), rec) in got.iter().zip(t["weights"].as_array().unwrap()).zip(t["tests"].as_array().unwrap()) {
                for (a, b) in g.weights.iter().zip(nums(w)) {
                    assert_close(*a, b, 1e-12, 1e-13, &format!("{name} trend weight"));
                }
                checks.push((g.clone(), rec.clone()));
            }
        }
        for (got, want) in checks {
            let what = format!("{name} {}", got.name);
            for (test, key) in got.tests.iter().zip(["classical", "hc3", "trimmed"]) {
                let w = &want[key];
                assert_stat(test.estimate.unwrap(), num(&w["estimate"]), &format!("{what} {key} estimate"));
                assert_stat(test.se.unwrap(), num(&w["se"]), &format!("{what} {key} se"));
                assert_stat(test.statistic.unwrap(), num(&w["t"]), &format!("{what} {key} t"));
                assert_p(test.p.unwrap(), num(&w["p"]), &format!("{what} {key} p"));
                assert_stat(test.ci_low.unwrap(), num(&w["ci_low"]), &format!("{what} {key} low"));
                assert_stat(test.ci_high.unwrap(), num(&w["ci_high"]), &format!("{what} {key} high"));
            }
            let g = got.tests[0].effect.as_ref().unwrap();
            assert_stat(g.value.unwrap(), num(&want["classical"]["g"]), &format!("{what} g"));
            assert_close(
                g.ci_low.unwrap(),
                num(&want["classical"]["g_low"]),
                ROOT_REL,
                1e-12,
                &format!("{what} g low"),
            );
        }
    }
}

#[test]
fn exact_slice_permutation_equals_brute_force_enumeration() {
    // Source: brute-force count over itertools.combinations (every assignment of the
    // slice's values to its two cells) — METHODS §12.0 data, A at each level of B.
    let fix = fixture("followup");
    let rec = &fix["permutation"]["exact"];
    let (config, design) = load(&rec["dataset"], Settings::default());
    let fit = Fit::new(&design);
    let probe = Probe::new(&design, &fit, &config.settings).unwrap();
    let f = followup::follow(&probe, &[0], &[1], "test").unwrap();
    let perm = rows(&f, "permutation-slice");
    for (t, w) in perm.iter().zip(rec["slices"].as_array().unwrap()) {
        let mc = t.mc.as_ref().unwrap();
        assert!(mc.exact, "enumerated");
        assert_eq!(mc.exceedances, w["count"].as_u64().unwrap());
        assert_eq!(mc.resamples, w["total"].as_u64().unwrap());
        assert_stat(t.statistic.unwrap(), num(&w["F"]), "slice F");
    }
}

#[test]
fn random_slice_permutation_agrees_with_numpy_within_monte_carlo_error() {
    // Source: independent numpy implementation (default_rng permutations within strata,
    // B = 40 000). Tolerance: METHODS Overrides 3, 4·√(SE₁² + SE₂²).
    let fix = fixture("followup");
    for rec in fix["permutation"]["monte_carlo"].as_array().unwrap() {
        let settings = Settings { permutations: 20_000, max_permutations: 20_000, ..Settings::default() };
        let (config, design) = load(&rec["dataset"], settings);
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &config.settings).unwrap();
        let effect = index(&design, &rec["effect"]);
        let at = index(&design, &rec["at"]);
        let f = followup::follow(&probe, &effect, &at, "test").unwrap();
        for (t, w) in rows(&f, "permutation-slice").iter().zip(rec["slices"].as_array().unwrap()) {
            let mc = t.mc.as_ref().unwrap();
            assert!(!mc.exact);
            assert_stat(t.statistic.unwrap(), num(&w["F"]), "slice F");
            let (p1, p2) = (t.p.unwrap(), num(&w["p"]));
            let se1 = if mc.exceedances == 0 { mc.ci_high } else { mc.se };
            let b2 = num(&w["resamples"]);
            let se2 = num(&w["se"]).max(1.0 / b2);
            let tol = 4.0 * (se1 * se1 + se2 * se2).sqrt();
            assert!((p1 - p2).abs() <= tol, "{:?}: quorum {p1} vs numpy {p2} (tol {tol})", w["levels"]);
        }
    }
}

#[test]
fn permutation_results_do_not_depend_on_thread_count() {
    let entry = serde_json::json!({"csv": "tests/data/threeway.csv", "outcome": "y", "factors": ["A", "B", "C"]});
    let run = |threads: usize| {
        let (config, design) = load(&entry, Settings { permutations: 999, ..Settings::default() });
        let fit = Fit::new(&design);
        rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap().install(|| {
            let probe = Probe::new(&design, &fit, &config.settings).unwrap();
            let f = followup::follow(&probe, &[0], &[2], "test").unwrap();
            serde_json::to_string(&f).unwrap()
        })
    };
    let one = run(1);
    assert_eq!(one, run(2));
    assert_eq!(one, run(8));
}

/// Runs the real binary in the repository root.
fn quorum_cli(args: &[&str]) -> (i32, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_quorum"))
        .args(args)
        .current_dir(repo_path(""))
        .output()
        .expect("spawn quorum");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn probe_command_three_factors_both_ways_text_and_json() {
    let base = ["probe", "tests/data/threeway.csv", "-y", "y", "-f", "A,B,C", "--effect", "A", "--at", "B,C"];
    let (code, out, err) =
        quorum_cli(&[&base[..], &["--both-ways", "--permutations", "499", "--format", "json"]].concat());
    assert_eq!(code, 0, "{err}");
    let json: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(json["schema"], "quorum.probe/1");
    let f = json["followup"].as_array().unwrap();
    assert_eq!(f.len(), 2);
    assert_eq!(f[0]["effect"], "A");
    assert_eq!(f[0]["at"], serde_json::json!(["B", "C"]));
    assert_eq!(f[1]["effect"], "B:C", "the other way round is the B:C interaction at each level of A");
    // 6 slices × 5 methods of simple effects for A at (B, C).
    assert_eq!(f[0]["tests"].as_array().unwrap().len(), 30);
    for t in f.iter().flat_map(|x| x["tests"].as_array().unwrap()) {
        match t["p"].as_f64() {
            Some(p) => assert!((0.0..=1.0).contains(&p) && t["p_adjusted"].as_f64().unwrap() >= p),
            None => assert!(t["not_applicable"].is_string(), "{t}"),
        }
    }
    let (code, text, err) = quorum_cli(&[&base[..], &["--permutations", "499"]].concat());
    assert_eq!(code, 0, "{err}");
    assert!(text.contains("Simple effects of A at each level of B × C"), "{text}");
    assert!(text.contains("Pairwise comparisons of A, B=r, C=u"), "{text}");
}

#[test]
fn probe_contrasts_trends_and_marginal_pairs() {
    let (code, out, err) = quorum_cli(&[
        "probe",
        "tests/data/toothgrowth.csv",
        "-y",
        "len",
        "-f",
        "supp,dose",
        "--effect",
        "dose",
        "--contrast",
        "dose: 2,-1,-1",
        "--contrast",
        "supp: 1,-1",
        "--trend",
        "dose",
        "--adjust",
        "bonferroni",
        "--format",
        "json",
    ]);
    assert_eq!(code, 0, "{err}");
    let json: Value = serde_json::from_str(&out).unwrap();
    let c = json["contrasts"].as_array().unwrap();
    assert_eq!(c.len(), 4, "two planned contrasts and the linear and quadratic trends");
    assert_eq!(c[2]["name"], "dose linear");
    assert_eq!(json["followup"][0]["at"], serde_json::json!([]));
    assert_eq!(json["followup"][0]["adjustment"], "bonferroni");
    // Marginal means of dose: Tukey–Kramer, trimmed contrast and ART-C, 3 pairs each.
    assert_eq!(json["followup"][0]["pairwise"].as_array().unwrap().len(), 9);
}

#[test]
fn probe_rejects_bad_requests_with_exit_2() {
    let base = ["probe", "tests/data/toothgrowth.csv", "-y", "len", "-f", "supp,dose"];
    for (extra, needle) in [
        (vec!["--effect", "nope"], "not one of the factors"),
        (vec!["--effect", "supp", "--at", "supp"], "both the effect and a conditioning factor"),
        (vec!["--contrast", "dose: 1,1,1"], "sum to"),
        (vec!["--contrast", "dose: 1,-1"], "has 2 weights"),
        (vec!["--contrast", "dose 1,-1,0"], "has no `:`"),
        (vec!["--trend", "supp"], "is not a number"),
        (vec!["--at", "dose"], "--at needs --effect"),
        (vec![], "nothing to probe"),
    ] {
        let (code, _, err) = quorum_cli(&[&base[..], &extra[..]].concat());
        assert_eq!(code, 2, "{extra:?}: {err}");
        assert!(err.contains(needle), "{extra:?}: {err}");
    }
}

#[test]
fn analyze_runs_follow_ups_for_terms_that_hold() {
    // ToothGrowth: supp:dose, supp and dose all hold (every engine rejects), so analyze
    // probes supp at dose and dose at supp, and compares the three dose means.
    let config = config_for("tests/data/toothgrowth.csv", "len", &["supp".into(), "dose".into()]);
    let a = quorum::analysis::run(&config).unwrap();
    let held: Vec<&str> = a
        .concordance
        .iter()
        .filter(|c| matches!(c.verdict, quorum::results::Verdict::Holds | quorum::results::Verdict::MethodDependent))
        .map(|c| c.term.as_str())
        .collect();
    assert!(held.contains(&"supp:dose") && held.contains(&"dose"), "{held:?}");
    let keys: Vec<(String, Vec<String>)> = a.followup.iter().map(|f| (f.effect.clone(), f.at.clone())).collect();
    assert!(keys.contains(&("supp".into(), vec!["dose".into()])), "{keys:?}");
    assert!(keys.contains(&("dose".into(), vec!["supp".into()])), "{keys:?}");
    assert!(keys.contains(&("dose".into(), vec![])), "{keys:?}");
    assert!(!keys.iter().any(|(e, at)| e == "supp" && at.is_empty()), "supp has two levels: no pairwise family");
    let text = quorum::report::to_string(&quorum::report::text::Text, &a);
    assert!(text.contains("Simple effects of supp at each level of dose"), "{text}");
    for f in &a.followup {
        for t in &f.tests {
            assert!(t.p.is_some() || t.not_applicable.is_some());
            assert!(t.statistic.is_none_or(f64::is_finite));
        }
        for p in &f.pairwise {
            assert!(p.p.is_some() || p.not_applicable.is_some());
        }
    }
}

#[test]
fn degenerate_cells_are_named_and_other_methods_carry_on() {
    // Invented 2×2 data with one constant cell (A=a2, B=b1): the HC, trimmed,
    // Games–Howell and Yuen rows of that slice are not applicable and name the cell; the
    // classical rows and the other slice are computed.
    let factor = |n: &str, l: [&str; 2]| quorum::design::Factor {
        name: n.into(),
        levels: l.iter().map(|s| s.to_string()).collect(),
        measured: false,
    };
    let cells = vec![vec![1.0, 2.0, 4.0, 3.0], vec![2.0, 5.0, 3.0, 6.0], vec![5.0; 4], vec![7.0, 9.0, 6.0, 8.5]];
    let design = Design::from_cells("y", vec![factor("A", ["a1", "a2"]), factor("B", ["b1", "b2"])], &cells).unwrap();
    let fit = Fit::new(&design);
    let settings = Settings { permutations: 199, ..Settings::default() };
    let probe = Probe::new(&design, &fit, &settings).unwrap();
    let f = followup::follow(&probe, &[0], &[1], "test").unwrap();
    for method in ["hc", "trimmed"] {
        let r = rows(&f, method);
        assert!(r[0].not_applicable.as_deref().unwrap().contains("A=a2, B=b1"), "{method}: {:?}", r[0].not_applicable);
        assert!(r[1].p.is_some(), "{method} at b2");
    }
    assert!(rows(&f, "classical-pooled").iter().all(|t| t.p.is_some()));
    for p in
        f.pairwise.iter().filter(|p| p.slice[0].level == "b1" && (p.method == "games-howell" || p.method == "yuen"))
    {
        assert!(p.not_applicable.as_deref().unwrap().contains("A=a2, B=b1"), "{:?}", p.not_applicable);
    }
    let json = serde_json::to_string(&f).unwrap();
    assert!(!json.contains("NaN") && !json.contains("inf"));
}

/// Familywise rejection rates of the simple effects of A at each level of B (Holm over
/// the three slices) on invented normal 2×3 data where A has no effect in any slice
/// (B has a large effect), `datasets` datasets per scenario. Returns, per scenario, the
/// rate of each method in `simple::METHODS` order.
fn simple_effect_type_one(datasets: usize, sds: [f64; 6]) -> Vec<f64> {
    use quorum::followup::simple::METHODS;
    use quorum::resample::{Purpose, Stream, StreamKey};
    let sizes = [5usize, 8, 6, 7, 5, 8];
    let shift = [0.0, 2.0, 4.0, 0.0, 2.0, 4.0];
    let factor = |n: &str, l: &[&str]| quorum::design::Factor {
        name: n.into(),
        levels: l.iter().map(|s| s.to_string()).collect(),
        measured: false,
    };
    let settings = Settings { permutations: 199, max_permutations: 199, ..Settings::default() };
    let mut hits = vec![0usize; METHODS.len()];
    for d in 0..datasets {
        let mut s =
            Stream::new(20240611, StreamKey { purpose: Purpose::Auxiliary, term: 0, chunk: d as u64, aux: 0x5346 });
        let mut normal = || {
            let (u, v) = (s.uniform(), s.uniform());
            (-2.0 * (1.0 - u).ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
        };
        let cells: Vec<Vec<f64>> =
            (0..6).map(|c| (0..sizes[c]).map(|_| shift[c] + sds[c] * normal()).collect()).collect();
        let design =
            Design::from_cells("y", vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2", "b3"])], &cells)
                .unwrap();
        let fit = Fit::new(&design);
        let probe = Probe::new(&design, &fit, &settings).unwrap();
        let f = followup::follow(&probe, &[0], &[1], "simulation").unwrap();
        for (m, method) in METHODS.iter().enumerate() {
            if rows(&f, method).iter().any(|t| t.p_adjusted.is_some_and(|p| p < 0.05)) {
                hits[m] += 1;
            }
        }
    }
    hits.iter().map(|&h| h as f64 / datasets as f64).collect()
}

#[test]
fn simple_effects_keep_the_familywise_error_under_the_null() {
    // Simulation (invented normal data, equal variances): every method's familywise
    // rate with Holm over the slices must not exceed α by more than 4 binomial SE.
    let n = 400;
    let rates = simple_effect_type_one(n, [1.0; 6]);
    let bound = 0.05 + 4.0 * (0.05 * 0.95 / n as f64).sqrt();
    println!("familywise rates (classical-pooled, classical-slice, hc, trimmed, permutation-slice): {rates:?}");
    for (m, r) in rates.iter().enumerate() {
        assert!(*r <= bound, "method {m}: familywise rate {r} > {bound}");
    }
}

#[test]
#[ignore = "larger simulation: cargo test --release --test checks followup::simple_effects_type_one_large -- --ignored --nocapture"]
fn simple_effects_type_one_large() {
    for (label, sds) in
        [("equal sd", [1.0; 6]), ("sd 1..3, larger in the bigger cells", [1.0, 3.0, 1.0, 2.0, 1.0, 3.0])]
    {
        let rates = simple_effect_type_one(4000, sds);
        println!("{label}: {rates:?}");
    }
}

#[test]
fn automatic_follow_ups_above_the_dense_limit_say_why_they_did_not_run() {
    // 7⁴ = 2401 cells (above the 2048-cell dense limit), two invented observations per
    // cell with a large effect of A, so A holds under the classical engine.
    use quorum::design::forms::{SsForms, DENSE_CELL_LIMIT};
    use quorum::design::Factor;
    use quorum::engines::{classical::Classical, Context, Engine};
    let names = ["A", "B", "C", "D"];
    let factors: Vec<Factor> = names
        .iter()
        .map(|n| Factor { name: (*n).into(), levels: (1..=7).map(|l| format!("{n}{l}")).collect(), measured: false })
        .collect();
    let cells: Vec<Vec<f64>> =
        (0..2401).map(|c| vec![(c / 343) as f64 * 10.0, (c / 343) as f64 * 10.0 + 1.0]).collect();
    let design = Design::from_cells("y", factors, &cells).unwrap();
    assert!(design.n_cells() > DENSE_CELL_LIMIT);
    let fit = Fit::new(&design);
    let settings = Settings { engines: vec!["classical".into()], quiet: true, ..Settings::default() };
    let forms = SsForms::new(&design.layout, &fit.n, quorum::config::SsType::Three).unwrap();
    let ctx = Context { design: &design, fit: &fit, forms: &forms, settings: &settings };
    let classical = Classical.run(&ctx).unwrap();
    let terms: Vec<String> = design.terms().iter().map(|t| t.name.clone()).collect();
    let concordance = quorum::concordance::verdicts(&terms, &[classical]);
    let out = followup::automatic(&design, &fit, &settings, &concordance).unwrap();
    assert!(!out.is_empty(), "the skipped follow-ups are listed");
    for f in &out {
        assert!(f.tests.is_empty() && f.pairwise.is_empty());
        assert!(f.notes.iter().any(|n| n.contains("2048 cells") && n.contains("2401")), "{:?}", f.notes);
    }
}
