//! Generalized-Pareto approximation of the far tail of a permutation distribution, for
//! p-values smaller than the resamples can resolve (METHODS §3.5; Knijnenburg,
//! Wessels, Reinders & Shmulevich 2009, Bioinformatics 25:i161–i168; Winkler,
//! Ridgway, Douaud, Nichols & Smith 2016, NeuroImage 141:502–516).
//!
//! Used only when the user asks (`--tail-approximation`), only when fewer than 10
//! resampled statistics reach the observed one and at least 1000 were drawn, and
//! always reported beside the plain permutation p, never instead of it.
//!
//! Steps: take the N_exc = 250 largest statistics, set the threshold t halfway between
//! the N_exc-th and (N_exc+1)-th largest, fit a generalized Pareto distribution
//! G(z) = 1 − (1 + ξz/σ)^(−1/ξ) to the excesses z = T − t by maximum likelihood, and
//! test the fit with the Anderson–Darling statistic. Where METHODS names the
//! Choulakian & Stephens (2001) table for the test's p, this module uses a parametric
//! bootstrap of the statistic (refitting each simulated sample, as
//! `scipy.stats.goodness_of_fit` does), because that table is not at hand; the
//! bootstrap draws from the auxiliary stream (METHODS §10.2 code 6), so it is
//! reproducible. A fit with p_AD < 0.05 moves the threshold up by 10 exceedances; below
//! 10 the approximation is abandoned. Then p_tail = (N_exc/B)·(1 − G(T_obs − t)).
//!
//! The maximum-likelihood fit profiles the scale out (Grimshaw 1993, Technometrics
//! 35:185–191): with θ = ξ/σ, ξ̂(θ) = mean ln(1 + θz), σ̂ = ξ̂/θ and the profile
//! log-likelihood is −n[ln(ξ̂/θ) + ξ̂ + 1] (θ → 0: the exponential, −n[ln z̄ + 1]). It
//! is maximised over θ·z_max ∈ (−1, 10⁴] by a grid search refined by golden sections;
//! a maximum on the lower boundary (ξ ≤ −1, where the likelihood is unbounded) is a
//! failed fit.

use super::permute::TermOutcome;
use super::{Purpose, Stream, StreamKey};
use crate::config::TailApproximation;
use crate::results::{finite, TailApproximationResult};

/// Exceedances used first (METHODS §3.5).
pub const START_EXCEEDANCES: usize = 250;
/// Fewest resamples for a tail fit.
pub const MIN_RESAMPLES: u64 = 1000;
/// The approximation is offered only when fewer resampled statistics reach the observed one.
pub const MAX_EXCEEDING: u64 = 10;
/// Step by which the threshold moves up after a rejected fit.
pub const EXCEEDANCE_STEP: usize = 10;
/// Level of the goodness-of-fit test below which a fit is rejected.
pub const FIT_ALPHA: f64 = 0.05;
/// Parametric-bootstrap samples behind the Anderson–Darling p.
pub const FIT_BOOTSTRAP: usize = 199;

/// A fitted generalized Pareto distribution (location 0).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gpd {
    /// Shape ξ.
    pub shape: f64,
    /// Scale σ > 0.
    pub scale: f64,
}

impl Gpd {
    /// Survival function 1 − G(z) = (1 + ξz/σ)^(−1/ξ) (ξ = 0: e^(−z/σ)); 0 beyond the
    /// upper end −σ/ξ when ξ < 0.
    pub fn sf(&self, z: f64) -> f64 {
        if z <= 0.0 {
            return 1.0;
        }
        let x = self.shape * z / self.scale;
        if self.shape == 0.0 {
            (-z / self.scale).exp()
        } else if x <= -1.0 {
            0.0
        } else {
            (-(x.ln_1p()) / self.shape).exp()
        }
    }

    /// Log-likelihood of excesses `z` (all ≥ 0).
    pub fn log_likelihood(&self, z: &[f64]) -> f64 {
        let n = z.len() as f64;
        if self.shape == 0.0 {
            return -n * self.scale.ln() - z.iter().sum::<f64>() / self.scale;
        }
        let mut acc = 0.0;
        for &v in z {
            let x = self.shape * v / self.scale;
            if x <= -1.0 {
                return f64::NEG_INFINITY;
            }
            acc += x.ln_1p();
        }
        -n * self.scale.ln() - (1.0 + 1.0 / self.shape) * acc
    }

    /// Quantile function G⁻¹(u) = σ/ξ·((1 − u)^(−ξ) − 1) (ξ = 0: −σ ln(1 − u)).
    pub fn quantile(&self, u: f64) -> f64 {
        if self.shape == 0.0 {
            -self.scale * (-u).ln_1p()
        } else {
            self.scale / self.shape * ((-self.shape * (-u).ln_1p()).exp() - 1.0)
        }
    }
}

/// Profile log-likelihood at θ (see the module doc), with ξ̂(θ).
fn profile(z: &[f64], theta: f64) -> (f64, f64) {
    let n = z.len() as f64;
    if theta == 0.0 {
        let mean = z.iter().sum::<f64>() / n;
        return (-n * (mean.ln() + 1.0), 0.0);
    }
    let mut acc = 0.0;
    for &v in z {
        let x = theta * v;
        if x <= -1.0 {
            return (f64::NEG_INFINITY, f64::NAN);
        }
        acc += x.ln_1p();
    }
    let k = acc / n;
    if k / theta <= 0.0 || !k.is_finite() {
        return (f64::NEG_INFINITY, k);
    }
    (-n * ((k / theta).ln() + k + 1.0), k)
}

/// Maximum-likelihood fit of a generalized Pareto distribution with location 0 to
/// excesses `z` (all ≥ 0, not all 0): `None` when the maximum lies at ξ ≤ −1 (the
/// likelihood is unbounded there) or the data are degenerate.
pub fn fit(z: &[f64]) -> Option<Gpd> {
    let z_max = z.iter().copied().fold(0.0, f64::max);
    if z.len() < 2 || z_max <= 0.0 || z.iter().any(|v| !v.is_finite() || *v < 0.0) {
        return None;
    }
    // Grid in s = θ·z_max ∈ (−1, 1e4]: dense near −1 and around 0, log-spaced above.
    let mut grid: Vec<f64> = Vec::with_capacity(160);
    for i in 1..40 {
        grid.push(-1.0 + 10f64.powf(-6.0 + 6.0 * i as f64 / 40.0)); // −1+1e−6 … ≈ 0
    }
    for i in 0..40 {
        grid.push(-(10f64.powf(-8.0 + 8.0 * (39 - i) as f64 / 40.0)) * 0.9);
    }
    grid.push(0.0);
    for i in 0..70 {
        grid.push(10f64.powf(-8.0 + 12.0 * i as f64 / 69.0));
    }
    grid.sort_by(f64::total_cmp);
    grid.dedup();
    let value = |s: f64| profile(z, s / z_max).0;
    let values: Vec<f64> = grid.iter().map(|&s| value(s)).collect();
    let (best, _) =
        values.iter().enumerate().fold((0, f64::NEG_INFINITY), |acc, (i, &v)| if v > acc.1 { (i, v) } else { acc });
    if best == 0 || !values[best].is_finite() {
        return None;
    }
    let lo = grid[best - 1];
    let hi = if best + 1 < grid.len() { grid[best + 1] } else { grid[best] };
    let s = golden_max(value, lo, hi);
    let theta = s / z_max;
    let (_, k) = profile(z, theta);
    if theta == 0.0 || k == 0.0 {
        let mean = z.iter().sum::<f64>() / z.len() as f64;
        return Some(Gpd { shape: 0.0, scale: mean });
    }
    let gpd = Gpd { shape: k, scale: k / theta };
    (gpd.shape > -1.0 && gpd.scale > 0.0 && gpd.scale.is_finite()).then_some(gpd)
}

/// Golden-section search for the maximum of a unimodal `f` on [lo, hi].
fn golden_max(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let r = (5f64.sqrt() - 1.0) / 2.0;
    let mut x1 = hi - r * (hi - lo);
    let mut x2 = lo + r * (hi - lo);
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..200 {
        if (hi - lo).abs() <= 1e-13 * (1.0 + lo.abs().max(hi.abs())) {
            break;
        }
        if f1 < f2 {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + r * (hi - lo);
            f2 = f(x2);
        } else {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - r * (hi - lo);
            f1 = f(x1);
        }
    }
    if f1 > f2 {
        x1
    } else {
        x2
    }
}

/// Anderson–Darling statistic of sorted (ascending) `z` against `g`:
/// A² = −n − (1/n) Σ_i (2i − 1)[ln G(z_(i)) + ln(1 − G(z_(n+1−i)))].
pub fn anderson_darling(sorted: &[f64], g: &Gpd) -> f64 {
    let n = sorted.len();
    let mut acc = 0.0;
    for i in 0..n {
        let cdf = 1.0 - g.sf(sorted[i]);
        let sf_rev = g.sf(sorted[n - 1 - i]);
        acc += (2 * i + 1) as f64 * (cdf.ln() + sf_rev.ln());
    }
    -(n as f64) - acc / n as f64
}

/// Parametric-bootstrap p of the Anderson–Darling test of a fitted GPD: simulate
/// samples of the same size from `g`, refit each, and count statistics at least the
/// observed one: (1 + #)/(1 + R). Draws from `stream`.
pub fn anderson_darling_p(sorted: &[f64], g: &Gpd, replicates: usize, stream: &mut Stream) -> f64 {
    let a_obs = anderson_darling(sorted, g);
    if !a_obs.is_finite() {
        return 0.0;
    }
    let mut sample = vec![0.0; sorted.len()];
    let mut count = 0usize;
    for _ in 0..replicates {
        for v in sample.iter_mut() {
            *v = g.quantile(stream.uniform());
        }
        sample.sort_by(f64::total_cmp);
        let a = match fit(&sample) {
            Some(h) => anderson_darling(&sample, &h),
            None => f64::INFINITY,
        };
        if a >= a_obs {
            count += 1;
        }
    }
    (1 + count) as f64 / (1 + replicates) as f64
}

/// The tail approximation of a term's permutation p (see the module doc).
///
/// `statistics` are the B resampled statistics (NaN for degenerate ones; B is their
/// number), `observed` the observed statistic, `exceedances` the count b behind the
/// plain p; `stream_term`
/// and `stream_aux` key the auxiliary stream of the goodness-of-fit bootstrap.
pub fn approximate(
    statistics: &[f64],
    observed: f64,
    exceedances: u64,
    seed: u64,
    stream_term: u64,
    stream_aux: u64,
) -> TailApproximationResult {
    let mut result = TailApproximationResult {
        p: None,
        status: String::new(),
        exceedances_used: 0,
        threshold: None,
        shape: None,
        scale: None,
        fit_p: None,
    };
    let b = statistics.len() as u64;
    if b < MIN_RESAMPLES {
        result.status = format!("too-few-resamples (needs at least {MIN_RESAMPLES})");
        return result;
    }
    if exceedances >= MAX_EXCEEDING {
        result.status = format!("not-needed ({exceedances} resampled statistics reach the observed one)");
        return result;
    }
    let mut desc: Vec<f64> = statistics.iter().copied().filter(|x| !x.is_nan()).collect();
    desc.sort_by(|a, b| b.total_cmp(a));
    let mut n_exc = START_EXCEEDANCES;
    while n_exc >= EXCEEDANCE_STEP {
        if desc.len() <= n_exc || !desc[0].is_finite() {
            break;
        }
        let t = (desc[n_exc - 1] + desc[n_exc]) / 2.0;
        let mut z: Vec<f64> = desc[..n_exc].iter().map(|v| v - t).collect();
        z.reverse();
        if let Some(g) = fit(&z) {
            let key =
                StreamKey { purpose: Purpose::Auxiliary, term: stream_term, chunk: n_exc as u64, aux: stream_aux };
            let mut stream = Stream::new(seed, key);
            let fit_p = anderson_darling_p(&z, &g, FIT_BOOTSTRAP, &mut stream);
            if fit_p >= FIT_ALPHA {
                result.exceedances_used = n_exc as u64;
                result.threshold = finite(t);
                result.shape = finite(g.shape);
                result.scale = finite(g.scale);
                result.fit_p = finite(fit_p);
                let tail = g.sf(observed - t);
                if tail > 0.0 {
                    result.p = finite(n_exc as f64 / b as f64 * tail);
                    result.status = "fitted".into();
                } else {
                    result.status = "observed-beyond-fitted-upper-end".into();
                }
                return result;
            }
        }
        n_exc -= EXCEEDANCE_STEP;
    }
    result.status = "fit-rejected (no threshold gave an acceptable generalized Pareto fit)".into();
    result
}

/// The tail approximation of a permutation outcome when `setting` asks for one:
/// `None` when off, a `not-needed` status for exact enumerations, else [`approximate`].
pub fn for_outcome(
    setting: TailApproximation,
    outcome: &TermOutcome,
    observed: f64,
    seed: u64,
    stream_term: u64,
    stream_aux: u64,
) -> Option<TailApproximationResult> {
    match setting {
        TailApproximation::Off => None,
        TailApproximation::GeneralizedPareto if outcome.exact => Some(TailApproximationResult {
            p: None,
            status: "not-needed (exact enumeration)".into(),
            exceedances_used: 0,
            threshold: None,
            shape: None,
            scale: None,
            fit_p: None,
        }),
        TailApproximation::GeneralizedPareto => {
            Some(approximate(&outcome.statistics, observed, outcome.exceedances, seed, stream_term, stream_aux))
        }
    }
}

/// A note for the reader when an approximate p exists.
pub fn note(tail: &TailApproximationResult) -> Option<String> {
    let p = tail.p?;
    Some(format!(
        "generalized Pareto tail approximation (Knijnenburg et al. 2009; {} exceedances, shape {:.3}, fit p {:.2}): p ≈ {p:.3e}, beside the permutation p, not instead of it",
        tail.exceedances_used,
        tail.shape.unwrap_or(f64::NAN),
        tail.fit_p.unwrap_or(f64::NAN),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ML estimates from 5000 draws: the shape's standard error is about 0.015 (ξ ≈ 0)
    /// to 0.02, the scale's about 2% (asymptotic GPD information), so 4 SE.
    const SHAPE_TOL: f64 = 0.06;
    const SCALE_REL_TOL: f64 = 0.08;
    /// Quantile and survival function are closed forms: rounding only.
    const INVERSE_TOL: f64 = 1e-12;

    fn sample(g: &Gpd, n: usize, seed: u64) -> Vec<f64> {
        let mut s = Stream::new(seed, StreamKey { purpose: Purpose::Auxiliary, term: 99, chunk: 0, aux: 0 });
        let mut v: Vec<f64> = (0..n).map(|_| g.quantile(s.uniform())).collect();
        v.sort_by(f64::total_cmp);
        v
    }

    #[test]
    fn fit_recovers_parameters_and_beats_nearby_points() {
        // Property: the ML estimate has a log-likelihood at least that of nearby
        // parameter values, and is close to the truth for a large sample.
        for (shape, scale) in [(0.2, 1.5), (-0.3, 2.0), (0.0, 1.0), (0.8, 0.5)] {
            let g = Gpd { shape, scale };
            let z = sample(&g, 5000, 7);
            let f = fit(&z).unwrap();
            let ll = f.log_likelihood(&z);
            for (ds, dc) in [(1e-3, 0.0), (-1e-3, 0.0), (0.0, 1e-3), (0.0, -1e-3)] {
                let near = Gpd { shape: f.shape + ds, scale: f.scale * (1.0 + dc) };
                assert!(ll >= near.log_likelihood(&z) - 1e-9, "{shape}: {f:?}");
            }
            assert!((f.shape - shape).abs() < SHAPE_TOL, "{shape}: {f:?}");
            assert!((f.scale / scale - 1.0).abs() < SCALE_REL_TOL, "{scale}: {f:?}");
        }
    }

    #[test]
    fn quantile_inverts_the_survival_function() {
        for g in [Gpd { shape: 0.3, scale: 2.0 }, Gpd { shape: -0.4, scale: 1.0 }, Gpd { shape: 0.0, scale: 3.0 }] {
            for u in [0.01, 0.3, 0.9, 0.999] {
                assert!((1.0 - g.sf(g.quantile(u)) - u).abs() < INVERSE_TOL);
            }
        }
    }

    #[test]
    fn tail_p_of_a_known_distribution_is_median_unbiased() {
        // Simulation check: 12 null samples of B = 10 000 exponential statistics (rate 1);
        // the observed statistic ln(1e5) has true tail probability 1e−5, ten times
        // below 1/B. The fitted shape varies from sample to sample (its standard error
        // with 250 exceedances is about 0.06, and a negative ξ̂ shortens the tail
        // sharply), so single approximations are off by factors of 10 or more in either
        // direction (observed here: 4e−11 to 7e−5); their median must be within a
        // factor of 2.5 of the truth.
        let g = Gpd { shape: 0.0, scale: 1.0 };
        let observed = (1e5f64).ln();
        let mut logs = Vec::new();
        for rep in 0..12 {
            let null = sample(&g, 10_000, 100 + rep);
            let r = approximate(&null, observed, 0, 5, 1, rep);
            if let Some(p) = r.p {
                logs.push((p / 1e-5).ln());
            }
        }
        assert!(logs.len() >= 10, "{logs:?}");
        logs.sort_by(f64::total_cmp);
        let median = (logs[(logs.len() - 1) / 2] + logs[logs.len() / 2]) / 2.0;
        assert!(median.abs() < 2.5f64.ln(), "median ratio {}", median.exp());
    }

    #[test]
    fn tail_approximation_is_offered_only_where_it_applies() {
        let g = Gpd { shape: 0.0, scale: 1.0 };
        let null = sample(&g, 2000, 11);
        assert!(approximate(&null, 1.0, 500, 5, 1, 0).status.starts_with("not-needed"));
        assert!(approximate(&null[..500], 14.0, 0, 5, 1, 0).status.starts_with("too-few"));
        // Heavy ties (a discrete null) leave zero excesses at the threshold: never a panic.
        let ties: Vec<f64> = (0..2000).map(|i| (i % 3) as f64).collect();
        let r = approximate(&ties, 5.0, 0, 5, 1, 0);
        assert!(r.p.is_none() || r.p.unwrap().is_finite());
    }
}
