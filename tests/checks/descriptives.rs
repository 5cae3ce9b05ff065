//! The cell table against numpy and scipy (source: tests/reference/gen/descriptives.py,
//! fixture descriptives.json): mean, sd, median, `scipy.stats.trim_mean(x, 0.2)`,
//! winsorized sd via `scipy.stats.mstats.winsorize`, `skew/kurtosis(bias=False)`, the
//! Joanes & Gill standard errors, and the t interval of each cell mean.

use crate::support::*;

#[test]
fn cell_table_matches_numpy_and_scipy() {
    let fix = fixture("descriptives");
    for (name, entry) in datasets(&fix) {
        let (csv, outcome, factors) = dataset(&entry);
        let a = quorum::analysis::run(&config_for(&csv, &outcome, &factors)).unwrap();
        let want_cells = entry["cells"].as_array().unwrap();
        assert_eq!(a.design.cells.len(), want_cells.len(), "{name}: cell count");
        for (got, want) in a.design.cells.iter().zip(want_cells) {
            let levels: Vec<&str> = want["levels"].as_array().unwrap().iter().map(|v| v.as_str().unwrap()).collect();
            assert_eq!(got.levels, levels, "{name}: cell order (row-major, last factor fastest)");
            let what = format!("{name} {levels:?}");
            assert_eq!(got.n as f64, num(&want["n"]), "{what} n");
            assert_stat(got.mean, num(&want["mean"]), &format!("{what} mean"));
            assert_stat(got.median, num(&want["median"]), &format!("{what} median"));
            assert_stat(got.trimmed_mean, num(&want["trimmed_mean"]), &format!("{what} trimmed mean"));
            assert_stat(got.min, num(&want["min"]), &format!("{what} min"));
            assert_stat(got.max, num(&want["max"]), &format!("{what} max"));
            if got.n >= 2 {
                assert_stat(got.sd.unwrap(), num(&want["sd"]), &format!("{what} sd"));
                assert_stat(got.winsorized_sd.unwrap(), num(&want["winsorized_sd"]), &format!("{what} winsorized sd"));
                let ci = nums(&want["mean_ci"]);
                let g = got.mean_ci.unwrap();
                assert_close(g.low.unwrap(), ci[0], P_REL, STAT_ABS, &format!("{what} CI low"));
                assert_close(g.high.unwrap(), ci[1], P_REL, STAT_ABS, &format!("{what} CI high"));
            }
            for (g, key) in [
                (got.skewness, "skewness"),
                (got.excess_kurtosis, "excess_kurtosis"),
                (got.skewness_se, "skewness_se"),
                (got.excess_kurtosis_se, "excess_kurtosis_se"),
            ] {
                match (g, want[key].as_f64()) {
                    (Some(g), Some(w)) => assert_stat(g, w, &format!("{what} {key}")),
                    (None, None) => {}
                    (g, w) => panic!("{what} {key}: got {g:?}, expected {w:?}"),
                }
            }
        }
    }
}
