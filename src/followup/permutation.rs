//! The permutation version of a simple effect: observations are permuted only within
//! the slice (METHODS §3.1 "Manly (raw data)" applied to the slice, restricted to
//! strata when factors are averaged; Anderson & ter Braak 2003, Journal of Statistical
//! Computation and Simulation 73:85–113).
//!
//! Statistic: the slice-error F of the slice's contrast L (the `classical-slice` F),
//! recomputed from cell sums of the permuted slice: SS* = (Lμ̂*)'(LD⁻¹L')⁻¹(Lμ̂*),
//! SSE* = Σy² − Σ_c s*_c²/n_c (Σy² over the slice is invariant), F* = (SS*/q)/(SSE*/df).
//! The slice's values are centred at the slice mean first. When S ∪ R holds every factor,
//! the slice's cells are the levels of S and this is the exact one-way permutation test
//! of the slice (Manly 2007, Randomization, Bootstrap and Monte Carlo Methods in Biology,
//! 3rd ed.). When other factors are averaged, observations are permuted only within each
//! level combination of those factors (strata), which keeps the test exact under "S has
//! no effect at any level of the averaged factors within this slice".
//!
//! Counting (METHODS §3.3–§3.4): if the number of distinct assignments
//! M = ∏_strata (n_stratum!/∏_c n_c!) is at most `--permutations`, every assignment is
//! enumerated (nested lexicographic subsets per cell, strata as a mixed-radix product)
//! and p = #{F_m ≥ F_obs(1 − 1e−10)}/M is exact. Otherwise B random permutations give the
//! Phipson–Smyth p with `McCount`, extended while α lies inside its 99% interval, up to
//! `--max-permutations`. A permuted F that is not finite (e.g. zero error SS after
//! permuting tied values) counts as an exceedance (conservative).
//!
//! Random streams (METHODS §10.2): key (purpose = 1 `Permutation`, term = the 1-based
//! canonical index of the effect S's term, chunk, aux = 0x5346·2⁴⁸ + mask_R·2³² + r + 1),
//! where mask_R is the bit mask of the conditioning factors and r the 0-based row-major
//! index of the slice. The tag 0x5346 ("SF", simple effect) keeps these streams apart
//! from the whole-term engines' (aux = 0). Each resample restores the slice to its
//! canonical order and shuffles each stratum in turn with Fisher–Yates (strata in
//! row-major order of the averaged factors' levels).

use super::{simple, Probe};
use crate::model::wald::{WaldForm, WaldScratch};
use crate::resample::mc::{self, McCount};
use crate::resample::{par_chunks, Purpose};
use crate::results::{Decision, MonteCarlo, SimpleEffectTest};

/// The stream key in words (printed with the results).
pub const KEY_NOTE: &str = "permutation-slice: observations permuted within the slice only (within each level combination of averaged factors); streams keyed (1, term index of the effect, chunk, 0x5346·2^48 + conditioning-factor mask·2^32 + slice index + 1)";

/// Tag of the aux word of simple-effect permutation streams ("SF").
pub const AUX_TAG: u64 = 0x5346;

/// The result of one slice's permutation test.
#[derive(Debug, Clone)]
pub struct SliceOutcome {
    /// Observed slice-error F.
    pub f: f64,
    /// Its denominator df (slice observations − slice cells).
    pub df2: f64,
    /// Permutation p (exact, or Phipson–Smyth).
    pub p: f64,
    /// Monte Carlo details.
    pub mc: MonteCarlo,
    /// α lies inside the 99% interval of the raw p after every extension.
    pub raw_undetermined: bool,
    /// Remarks.
    pub notes: Vec<String>,
}

/// The slice rearranged stratum by stratum, with its contrast over the slice's cells.
pub struct SliceData {
    /// Centred values, strata contiguous, cells contiguous within a stratum.
    pub y: Vec<f64>,
    /// Index range of each stratum in `y`.
    pub strata: Vec<std::ops::Range<usize>>,
    /// Index range of each local cell in `y`.
    pub cells: Vec<std::ops::Range<usize>>,
    /// 1/n of each local cell.
    pub inv_n: Vec<f64>,
    /// The contrast restricted to the local cells.
    pub form: WaldForm,
    /// Σy² of the centred slice.
    pub sum_sq: f64,
    /// Residual df of the slice.
    pub df: f64,
}

/// Work space of [`SliceData::statistic`].
pub struct StatScratch {
    mu: Vec<f64>,
    wald: WaldScratch,
}

impl SliceData {
    /// Builds the slice `combo` of `at` for effect S.
    pub fn new(probe: &Probe<'_>, effect: &[usize], at: &[usize], combo: &[usize]) -> SliceData {
        let design = probe.design;
        let shape = design.shape();
        let k = shape.len();
        let others: Vec<usize> = (0..k).filter(|f| !effect.contains(f) && !at.contains(f)).collect();
        let full = WaldForm::from_blocks(&simple::slice_blocks(shape, effect, at, combo));
        let mut local: Vec<usize> = Vec::new();
        let mut strata = Vec::new();
        let mut cells = Vec::new();
        let mut y = Vec::new();
        for ocombo in probe.combinations(&others) {
            let start = y.len();
            for c in 0..design.n_cells() {
                if probe.in_slice(c, at, combo) && probe.in_slice(c, &others, &ocombo) {
                    let s = y.len();
                    y.extend_from_slice(design.cell_values(c));
                    cells.push(s..y.len());
                    local.push(c);
                }
            }
            strata.push(start..y.len());
        }
        let m = y.iter().sum::<f64>() / y.len() as f64;
        for v in &mut y {
            *v -= m;
        }
        let q = full.q();
        let mut l = Vec::with_capacity(q * local.len());
        for r in 0..q {
            let row = full.row(r);
            l.extend(local.iter().map(|&c| row[c]));
        }
        let form = WaldForm::from_matrix(q, local.len(), l);
        let inv_n = cells.iter().map(|r| 1.0 / r.len() as f64).collect();
        let sum_sq = y.iter().map(|v| v * v).sum();
        let df = y.len() as f64 - cells.len() as f64;
        SliceData { y, strata, cells, inv_n, form, sum_sq, df }
    }

    /// Work space sized for this slice.
    pub fn scratch(&self) -> StatScratch {
        StatScratch { mu: vec![0.0; self.cells.len()], wald: self.form.scratch() }
    }

    /// The slice-error F of values `y` (same layout as `self.y`); allocates nothing.
    pub fn statistic(&self, y: &[f64], s: &mut StatScratch) -> f64 {
        let mut between = 0.0;
        for (k, r) in self.cells.iter().enumerate() {
            let sum: f64 = y[r.clone()].iter().sum();
            s.mu[k] = sum * self.inv_n[k];
            between += sum * s.mu[k];
        }
        let sse = self.sum_sq - between;
        let Some(ss) = self.form.statistic(&s.mu, &self.inv_n, &mut s.wald) else { return f64::NAN };
        (ss / self.form.q() as f64) / (sse / self.df)
    }

    /// Number of distinct assignments M, or `None` once it exceeds `limit`.
    pub fn assignments(&self, limit: u64) -> Option<u64> {
        let mut m: u128 = 1;
        for st in &self.strata {
            let mut remaining = st.len() as u128;
            for r in self.cells.iter().filter(|r| r.start >= st.start && r.end <= st.end) {
                m = m.checked_mul(binomial(remaining, r.len() as u128, limit as u128)?)?;
                if m > limit as u128 {
                    return None;
                }
                remaining -= r.len() as u128;
            }
        }
        Some(m as u64)
    }
}

/// binom(n, k), or `None` once it exceeds `limit`.
fn binomial(n: u128, k: u128, limit: u128) -> Option<u128> {
    let k = k.min(n - k);
    let mut out: u128 = 1;
    for i in 0..k {
        out = out * (n - i) / (i + 1);
        if out > limit {
            return None;
        }
    }
    Some(out)
}

/// Every arrangement of one stratum: for its cells of sizes `sizes`, nested
/// lexicographic subsets (cell 1's members from all, cell 2's from the rest, …), each
/// as the list of original positions in cell order.
fn arrangements(sizes: &[usize]) -> Vec<Vec<usize>> {
    fn rec(remaining: &[usize], sizes: &[usize], current: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
        let Some((&k, rest)) = sizes.split_first() else {
            out.push(current.clone());
            return;
        };
        let n = remaining.len();
        let mut idx: Vec<usize> = (0..k).collect();
        loop {
            let chosen: Vec<usize> = idx.iter().map(|&i| remaining[i]).collect();
            let left: Vec<usize> = remaining.iter().copied().filter(|x| !chosen.contains(x)).collect();
            let len = current.len();
            current.extend_from_slice(&chosen);
            rec(&left, rest, current, out);
            current.truncate(len);
            // next k-subset in lexicographic order
            let mut i = k;
            loop {
                if i == 0 {
                    return;
                }
                i -= 1;
                if idx[i] < n - k + i {
                    idx[i] += 1;
                    for j in i + 1..k {
                        idx[j] = idx[j - 1] + 1;
                    }
                    break;
                }
                if i == 0 {
                    return;
                }
            }
        }
    }
    let n: usize = sizes.iter().sum();
    let all: Vec<usize> = (0..n).collect();
    let mut out = Vec::new();
    rec(&all, sizes, &mut Vec::new(), &mut out);
    out
}

/// Exact p by enumerating every assignment: (count, M).
pub fn enumerate(data: &SliceData, f_obs: f64) -> (u64, u64) {
    let per_stratum: Vec<Vec<Vec<usize>>> = data
        .strata
        .iter()
        .map(|st| {
            let sizes: Vec<usize> =
                data.cells.iter().filter(|r| r.start >= st.start && r.end <= st.end).map(|r| r.len()).collect();
            arrangements(&sizes)
        })
        .collect();
    let mut digit = vec![0usize; per_stratum.len()];
    let mut buf = data.y.clone();
    let mut scratch = data.scratch();
    let (mut count, mut total) = (0u64, 0u64);
    'outer: loop {
        for (s, st) in data.strata.iter().enumerate() {
            let arr = &per_stratum[s][digit[s]];
            for (pos, &src) in arr.iter().enumerate() {
                buf[st.start + pos] = data.y[st.start + src];
            }
        }
        let f = data.statistic(&buf, &mut scratch);
        total += 1;
        if !f.is_finite() || mc::exceeds(f, f_obs) {
            count += 1;
        }
        for s in (0..digit.len()).rev() {
            digit[s] += 1;
            if digit[s] < per_stratum[s].len() {
                continue 'outer;
            }
            digit[s] = 0;
        }
        break;
    }
    (count, total)
}

/// Exceedances among random resamples `start..end` of the slice's stream.
pub fn random_count(data: &SliceData, f_obs: f64, seed: u64, term: u64, aux: u64, start: u64, end: u64) -> u64 {
    let counts = par_chunks(start, end, |task| {
        let mut stream = task.stream(seed, Purpose::Permutation, term, aux);
        let mut buf = data.y.clone();
        let mut scratch = data.scratch();
        let mut count = 0u64;
        for b in task.first..task.hi {
            buf.copy_from_slice(&data.y);
            for st in &data.strata {
                stream.shuffle(&mut buf[st.clone()]);
            }
            if b < task.lo {
                continue;
            }
            let f = data.statistic(&buf, &mut scratch);
            if !f.is_finite() || mc::exceeds(f, f_obs) {
                count += 1;
            }
        }
        count
    });
    counts.iter().sum()
}

/// The permutation test of slice `r` (row-major index `combo` of `at`) for effect S.
///
/// # Errors
/// The reason as text when the slice cannot be tested (no residual df, no variation).
pub fn slice_test(
    probe: &Probe<'_>,
    effect: &[usize],
    at: &[usize],
    combo: &[usize],
    r: usize,
) -> Result<SliceOutcome, String> {
    let settings = probe.settings;
    let data = SliceData::new(probe, effect, at, combo);
    if data.df < 1.0 {
        return Err("the slice has no residual degrees of freedom (one observation per cell)".into());
    }
    let f_obs = data.statistic(&data.y, &mut data.scratch());
    if !f_obs.is_finite() {
        return Err("the slice's cells have no within-cell variation: F undefined".into());
    }
    let term = probe.design.layout.term_index(&probe.set_name(effect)).map_or(0, |t| t as u64 + 1);
    let mask: u64 = at.iter().map(|&f| 1u64 << f).sum();
    let aux = (AUX_TAG << 48) | (mask << 32) | (r as u64 + 1);
    let mut notes = Vec::new();
    if let Some(m) = data.assignments(settings.permutations) {
        let (count, total) = enumerate(&data, f_obs);
        debug_assert_eq!(total, m);
        let p = count as f64 / total as f64;
        notes.push(format!("exact: all {total} distinct assignments of the slice's observations enumerated"));
        let mc = MonteCarlo {
            resamples: total,
            exceedances: count,
            se: 0.0,
            ci_low: p,
            ci_high: p,
            exact: true,
            scheme: "within-slice".into(),
            scheme_exact: Some(true),
        };
        return Ok(SliceOutcome { f: f_obs, df2: data.df, p, mc, raw_undetermined: false, notes });
    }
    let mut b = settings.permutations;
    let mut count = random_count(&data, f_obs, settings.seed, term, aux, 0, b);
    loop {
        let c = McCount { resamples: b, exceedances: count };
        if !c.ambiguous(settings.alpha) {
            break;
        }
        match mc::next_resamples(b, settings.max_permutations) {
            Some(next) => {
                count += random_count(&data, f_obs, settings.seed, term, aux, b, next);
                b = next;
            }
            None => break,
        }
    }
    let c = McCount { resamples: b, exceedances: count };
    if b > settings.permutations {
        notes.push(format!("extended to {b} permutations because α was inside the Monte Carlo interval"));
    }
    Ok(SliceOutcome {
        f: f_obs,
        df2: data.df,
        p: c.p(),
        mc: c.to_result("within-slice"),
        raw_undetermined: c.ambiguous(settings.alpha),
        notes,
    })
}

/// Decision of a permutation row from its adjusted p: `undetermined` when α lies in the
/// 99% Clopper–Pearson interval of the raw p scaled by the same factor as the
/// adjustment (p̃/p); exact p-values decide directly.
pub fn adjusted_decision(t: &SimpleEffectTest, alpha: f64) -> Option<Decision> {
    let (p, adj, mc) = (t.p?, t.p_adjusted?, t.mc.as_ref()?);
    if mc.exact || p <= 0.0 {
        return Some(Decision::from_p(adj, alpha));
    }
    let factor = adj / p;
    let (lo, hi) = (mc.ci_low * factor, (mc.ci_high * factor).min(1.0));
    if lo <= alpha && alpha <= hi {
        Some(Decision::Undetermined)
    } else {
        Some(Decision::from_p(adj, alpha))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arrangements_count_the_multinomial() {
        // 5!/(2!·3!) = 10; 6!/(2!·2!·2!) = 90.
        assert_eq!(arrangements(&[2, 3]).len(), 10);
        let a = arrangements(&[2, 2, 2]);
        assert_eq!(a.len(), 90);
        let mut seen = std::collections::BTreeSet::new();
        for x in &a {
            let key: Vec<Vec<usize>> = x
                .chunks(2)
                .map(|c| {
                    let mut v = c.to_vec();
                    v.sort_unstable();
                    v
                })
                .collect();
            seen.insert(key);
        }
        assert_eq!(seen.len(), 90, "every arrangement distinct");
        assert_eq!(binomial(10, 3, 1000), Some(120));
        assert_eq!(binomial(100, 50, 1000), None);
    }
}
