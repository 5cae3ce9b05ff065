//! Large-sample null distributions of the flag statistics, for designs whose every cell
//! is large.
//!
//! The design-matched simulation of [`super::calibration`] costs about R·N: seconds at
//! a million rows. When every non-empty cell has at least [`LARGE_CELL`] observations,
//! quorum instead draws each dataset's flag statistics directly from their sampling
//! distributions under the same null model (normal errors, equal variances, these cell
//! sizes), at a cost of a few draws per cell whatever N is:
//!
//! * **Cell variances** — exact: (n_c − 1)s²_c/σ² is χ²(n_c − 1), drawn as a gamma
//!   variate by Marsaglia & Tsang's (2000, ACM TOMS 26:363–372) method.
//! * **Skewness G1 of the pooled residuals** — D'Agostino's (1970, Biometrika 57:679–681)
//!   transformation Z = δ·asinh(Y/α) of √b1 is standard normal under normality; a
//!   normal Z is transformed back. n is the residual count N − k + 1 (k non-empty
//!   cells), which is the sample size when k = 1.
//! * **Excess kurtosis G2 of the pooled residuals** — likewise through Anscombe &
//!   Glynn's (1983, Biometrika 70:227–234) transformation of b2. Both transformations
//!   are the ones scipy's `skewtest` and `kurtosistest` use (checked against them).
//! * **Median, MADN and the quartiles** — asymptotically normal and, at the normal
//!   model, the median and MADN are uncorrelated, as are the mid-quartile and the
//!   half-IQR. n·Var(median) = π/2, n·Var(MADN) = 1/(16 q² φ(q)²) ≈ 1.3605 (q = Φ⁻¹(¾);
//!   Hampel 1974's influence function of the MAD: MADN is 37% efficient, Rousseeuw &
//!   Croux 1993), n·Var((Q1 + Q3)/2) = 1/(8 φ(q)²), and the half-IQR has the MAD's
//!   influence function.
//! * **Most extreme point** — the largest and smallest of n normal values are drawn
//!   exactly by inversion (the maximum of n uniforms is U^{1/n}), asymptotically
//!   independent of the median and MADN; the score is the larger distance to the
//!   drawn median in drawn MADN units.
//! * **Counts beyond a cut-off** (Tukey's fences, the MAD–median rule) — a count of
//!   points beyond centre ± T·scale, with an estimated centre and scale, has mean ≈ n·p₀
//!   (p₀ = 2Φ(−T)) and, by the influence functions above, variance n·v with
//!   v = p₀(1 − p₀) − 2c·p₀ + c², c = Tφ(T)/(2qφ(q)). With a total mean of at least
//!   [`NORMAL_COUNT_MEAN`] the total is drawn with that mean (plus, per cell, the
//!   second-order term Tφ(T)(V_centre + T²V_scale) − c) and variance: as a gamma–Poisson
//!   count, which keeps the right skew of a count, or above [`POISSON_COUNT_MEAN`] as a
//!   rounded normal. Below it (far-out points, whose cut-off is in the far tail), as a
//!   Poisson count whose rate n·P(beyond the drawn fences) mixes over the drawn centre
//!   and scale.
//!
//! Only each statistic's own distribution matters to the flags (each is tested on its
//! own), so the draws of different statistics are independent. The check
//! `calibration::large_sample_*` in `tests/checks` compares every statistic with the
//! exact simulation for cells of 1000 to 2000 and measures the flags' false-flag rates;
//! DEVELOPERS.md ("Calibrating the flags") has the figures.

use super::calibration::DatasetStats;
use super::outliers::{mad_score_tail, MAD_MEDIAN_K, MAD_NORMAL_SCALE, TUKEY_FAR, TUKEY_OUTSIDE};
use crate::dist;
use crate::plan::draws::NormalSource;
use crate::resample::{par_chunks, Purpose};

/// Every non-empty cell needs at least this many observations for the large-sample
/// null distributions (below it the exact simulation runs).
pub const LARGE_CELL: usize = 1000;
/// Datasets drawn from the large-sample distributions (R; (R + 1)·1% and (R + 1)·5% are
/// whole numbers, as for the exact simulation).
pub const LARGE_SAMPLE_DATASETS: u64 = 1999;
/// A count whose expected total is below this is drawn as a Poisson count mixed over
/// the drawn centre and scale.
pub const NORMAL_COUNT_MEAN: f64 = 20.0;
/// A count whose expected total is at least this is drawn as a rounded normal (its
/// skewness is below 0.03); between [`NORMAL_COUNT_MEAN`] and this, as a gamma–Poisson
/// count with the same mean and variance, which keeps the count's right skew.
pub const POISSON_COUNT_MEAN: f64 = 2000.0;
/// Sub-stream word of the large-sample draws ("DIAL").
pub const AUX_LARGE_SAMPLE: u64 = 0x4449_414C;

/// Whether the large-sample null distributions apply: at least one cell, and every
/// non-empty cell has at least [`LARGE_CELL`] observations.
pub fn applies(sizes: &[usize]) -> bool {
    sizes.iter().any(|&n| n > 0) && sizes.iter().all(|&n| n == 0 || n >= LARGE_CELL)
}

/// n·Var(MADN/σ) at the normal model, 1/(16 q² φ(q)²) with q = Φ⁻¹(¾).
pub fn madn_variance() -> f64 {
    let q = MAD_NORMAL_SCALE;
    1.0 / (16.0 * q * q * dist::normal_pdf(q).powi(2))
}

/// n·Var(median/σ) at the normal model, π/2.
pub const MEDIAN_VARIANCE: f64 = std::f64::consts::FRAC_PI_2;

/// n·Var(((Q1 + Q3)/2)/σ) at the normal model, 1/(8 φ(q)²).
pub fn midquartile_variance() -> f64 {
    1.0 / (8.0 * dist::normal_pdf(MAD_NORMAL_SCALE).powi(2))
}

/// D'Agostino's (1970) transformation of the sample skewness √b1 = m3/m2^{3/2} of n
/// values to an approximately standard normal Z (scipy `skewtest`).
#[derive(Debug, Clone, Copy)]
pub struct SkewTransform {
    y_scale: f64,
    alpha: f64,
    delta: f64,
}

impl SkewTransform {
    /// The constants for n ≥ 8 values. β₂(√b1) − 3 and W² − 1 are written without
    /// cancellation, so the constants stay accurate at n = 10⁹.
    pub fn new(n: f64) -> SkewTransform {
        let beta2_minus_3 =
            36.0 * (n * n * n - 5.0 * n * n - 19.0 * n + 35.0) / ((n - 2.0) * (n + 5.0) * (n + 7.0) * (n + 9.0));
        let root = (2.0 * (beta2_minus_3 + 2.0)).sqrt(); // √(2(β₂ − 1))
        let w2_minus_1 = 2.0 * beta2_minus_3 / (root + 2.0);
        SkewTransform {
            y_scale: ((n + 1.0) * (n + 3.0) / (6.0 * (n - 2.0))).sqrt(),
            alpha: (2.0 / w2_minus_1).sqrt(),
            delta: 1.0 / (0.5 * w2_minus_1.ln_1p()).sqrt(),
        }
    }

    /// Z of a sample skewness √b1.
    pub fn z(&self, sqrt_b1: f64) -> f64 {
        self.delta * (sqrt_b1 * self.y_scale / self.alpha).asinh()
    }

    /// The sample skewness √b1 whose Z is `z` (the inverse of [`SkewTransform::z`]).
    pub fn sqrt_b1(&self, z: f64) -> f64 {
        self.alpha * (z / self.delta).sinh() / self.y_scale
    }
}

/// Anscombe & Glynn's (1983) transformation of the sample kurtosis b2 = m4/m2² of n
/// values to an approximately standard normal Z (scipy `kurtosistest`).
#[derive(Debug, Clone, Copy)]
pub struct KurtosisTransform {
    mean: f64,
    sd: f64,
    a: f64,
}

impl KurtosisTransform {
    /// The constants for n ≥ 20 values.
    pub fn new(n: f64) -> KurtosisTransform {
        let mean = 3.0 * (n - 1.0) / (n + 1.0);
        let var = 24.0 * n * (n - 2.0) * (n - 3.0) / ((n + 1.0) * (n + 1.0) * (n + 3.0) * (n + 5.0));
        let sqrt_beta1 = 6.0 * (n * n - 5.0 * n + 2.0) / ((n + 7.0) * (n + 9.0))
            * (6.0 * (n + 3.0) * (n + 5.0) / (n * (n - 2.0) * (n - 3.0))).sqrt();
        let a = 6.0 + 8.0 / sqrt_beta1 * (2.0 / sqrt_beta1 + (1.0 + 4.0 / (sqrt_beta1 * sqrt_beta1)).sqrt());
        KurtosisTransform { mean, sd: var.sqrt(), a }
    }

    /// Z of a sample kurtosis b2 (NaN where the transformation is undefined).
    pub fn z(&self, b2: f64) -> f64 {
        let a = self.a;
        let x = (b2 - self.mean) / self.sd;
        let denom = 1.0 + x * (2.0 / (a - 4.0)).sqrt();
        if denom == 0.0 {
            return f64::NAN;
        }
        let term2 = denom.signum() * ((1.0 - 2.0 / a) / denom.abs()).cbrt();
        (1.0 - 2.0 / (9.0 * a) - term2) / (2.0 / (9.0 * a)).sqrt()
    }

    /// The sample kurtosis b2 whose Z is `z` (the inverse of [`KurtosisTransform::z`]);
    /// +∞ beyond the largest Z the transformation can give.
    pub fn b2(&self, z: f64) -> f64 {
        let a = self.a;
        let term2 = 1.0 - 2.0 / (9.0 * a) - z * (2.0 / (9.0 * a)).sqrt();
        if term2 <= 0.0 {
            return f64::INFINITY;
        }
        let denom = (1.0 - 2.0 / a) / (term2 * term2 * term2);
        let x = (denom - 1.0) / (2.0 / (a - 4.0)).sqrt();
        self.mean + x * self.sd
    }
}

/// A gamma(shape, 1) variate (Marsaglia & Tsang 2000): with d = shape − ⅓, c = 1/√(9d),
/// x normal and v = (1 + cx)³ > 0, accept d·v when ln U < x²/2 + d − dv + d·ln v. A
/// shape below 1 uses their boost: gamma(shape + 1)·U^{1/shape}.
pub fn gamma(src: &mut NormalSource, shape: f64) -> f64 {
    if shape < 1.0 {
        let g = gamma(src, shape + 1.0);
        return g * src.open_uniform().powf(1.0 / shape);
    }
    let d = shape - 1.0 / 3.0;
    let c = 1.0 / (9.0 * d).sqrt();
    loop {
        let x = src.normal();
        let v = 1.0 + c * x;
        if v <= 0.0 {
            continue;
        }
        let v = v * v * v;
        let u = src.open_uniform();
        if u.ln() < 0.5 * x * x + d - d * v + d * v.ln() {
            return d * v;
        }
    }
}

/// A Poisson(λ) count: sequential inversion on pieces of rate at most 400 (a sum of
/// independent Poisson counts is Poisson), so e^{−λ} never underflows.
pub fn poisson(src: &mut NormalSource, lambda: f64) -> u64 {
    if lambda.is_nan() || lambda <= 0.0 {
        return 0;
    }
    let mut rest = lambda;
    let mut total = 0u64;
    while rest > 0.0 {
        let l = rest.min(400.0);
        rest -= l;
        let u = src.open_uniform();
        let mut p = (-l).exp();
        let mut cdf = p;
        let mut k = 0u64;
        let cap = (l + 40.0 * l.sqrt() + 100.0) as u64;
        while u > cdf && k < cap {
            k += 1;
            p *= l / k as f64;
            cdf += p;
        }
        total += k;
    }
    total
}

/// A count of points beyond centre ± T·scale in every cell (see the module notes).
#[derive(Debug, Clone, Copy)]
struct CountRule {
    /// Cut-off T in σ units.
    t: f64,
    /// n·Var of the centre estimate.
    centre_variance: f64,
}

impl CountRule {
    /// P(|Z| > T) under the normal model.
    fn p0(&self) -> f64 {
        2.0 * dist::normal_sf(self.t)
    }

    /// c = Tφ(T)/(2qφ(q)): the count's sensitivity to the scale estimate.
    fn c(&self) -> f64 {
        let q = MAD_NORMAL_SCALE;
        self.t * dist::normal_pdf(self.t) / (2.0 * q * dist::normal_pdf(q))
    }

    /// Per-observation variance of the count, p₀(1 − p₀) − 2c·p₀ + c².
    fn unit_variance(&self) -> f64 {
        let (p0, c) = (self.p0(), self.c());
        p0 * (1.0 - p0) - 2.0 * c * p0 + c * c
    }

    /// The O(1) part of a cell's expected count: Tφ(T)(V_centre + T²V_scale) from the
    /// curvature of P(beyond) in the estimated centre and scale, less c for each point's
    /// own pull on the scale estimate.
    fn cell_shift(&self, madn_variance: f64) -> f64 {
        let t = self.t;
        t * dist::normal_pdf(t) * (self.centre_variance + t * t * madn_variance) - self.c()
    }
}

/// The large-sample null model of a design.
#[derive(Debug, Clone)]
pub struct LargeSampleModel {
    sizes: Vec<usize>,
    /// The distinct cell sizes, ascending, and each cell's index among them.
    distinct_sizes: Vec<usize>,
    size_group: Vec<usize>,
    skew: SkewTransform,
    kurtosis: KurtosisTransform,
    residual_n: f64,
    madn_variance: f64,
    rules: [CountRule; 3],
}

impl LargeSampleModel {
    /// The model for cell sizes `sizes` (empty cells are left out). Call only when
    /// [`applies`] holds.
    pub fn new(sizes: &[usize]) -> LargeSampleModel {
        let sizes: Vec<usize> = sizes.iter().copied().filter(|&n| n > 0).collect();
        let n_total: usize = sizes.iter().sum();
        let residual_n = (n_total + 1 - sizes.len()) as f64;
        let q = MAD_NORMAL_SCALE;
        let tukey = |m: f64| CountRule { t: q * (1.0 + 2.0 * m), centre_variance: midquartile_variance() };
        let mut distinct_sizes = sizes.clone();
        distinct_sizes.sort_unstable();
        distinct_sizes.dedup();
        let size_group = sizes.iter().map(|n| distinct_sizes.binary_search(n).unwrap_or(0)).collect();
        LargeSampleModel {
            distinct_sizes,
            size_group,
            sizes,
            skew: SkewTransform::new(residual_n),
            kurtosis: KurtosisTransform::new(residual_n),
            residual_n,
            madn_variance: madn_variance(),
            rules: [
                tukey(TUKEY_OUTSIDE),
                tukey(TUKEY_FAR),
                CountRule { t: MAD_MEDIAN_K, centre_variance: MEDIAN_VARIANCE },
            ],
        }
    }

    /// A count of points beyond the cut-off of `rule`, over all cells.
    fn count(&self, rule: &CountRule, src: &mut NormalSource) -> u32 {
        let n_total: f64 = self.sizes.iter().map(|&n| n as f64).sum();
        let mean = n_total * rule.p0();
        if mean >= NORMAL_COUNT_MEAN {
            let mean = mean + self.sizes.len() as f64 * rule.cell_shift(self.madn_variance);
            let var = n_total * rule.unit_variance();
            if mean >= POISSON_COUNT_MEAN || var <= mean {
                return (mean + var.sqrt() * src.normal()).round().max(0.0) as u32;
            }
            // Gamma–Poisson: rate λ with mean `mean` and variance var − mean.
            let scale = (var - mean) / mean;
            let rate = scale * gamma(src, mean / scale);
            return poisson(src, rate).min(u32::MAX as u64) as u32;
        }
        let mut rate = 0.0;
        for &n in &self.sizes {
            let nf = n as f64;
            let centre = (rule.centre_variance / nf).sqrt() * src.normal();
            let scale = (1.0 + (self.madn_variance / nf).sqrt() * src.normal()).max(0.0);
            rate += nf * (dist::normal_sf(rule.t * scale - centre) + dist::normal_sf(rule.t * scale + centre));
        }
        poisson(src, rate).min(u32::MAX as u64) as u32
    }

    /// One dataset's flag statistics.
    pub fn draw(&self, src: &mut NormalSource) -> DatasetStats {
        let n = self.residual_n;
        let g1 = {
            let b = self.skew.sqrt_b1(src.normal());
            b * (n * (n - 1.0)).sqrt() / (n - 2.0)
        };
        let g2 = {
            let b2 = self.kurtosis.b2(src.normal());
            ((n + 1.0) * (b2 - 3.0) + 6.0) * (n - 1.0) / ((n - 2.0) * (n - 3.0))
        };
        let (mut v_max, mut v_min) = (f64::NEG_INFINITY, f64::INFINITY);
        let (mut r_max, mut r_min) = (f64::NEG_INFINITY, f64::INFINITY);
        // The tail level falls as the score rises, so per distinct cell size only the
        // largest score needs its level.
        let mut top_score = vec![f64::NEG_INFINITY; self.distinct_sizes.len()];
        for (&size, &group) in self.sizes.iter().zip(&self.size_group) {
            let nf = size as f64;
            let df = nf - 1.0;
            let var = 2.0 * gamma(src, df / 2.0) / df;
            v_max = v_max.max(var);
            v_min = v_min.min(var);
            let median = (MEDIAN_VARIANCE / nf).sqrt() * src.normal();
            let madn = (1.0 + (self.madn_variance / nf).sqrt() * src.normal()).max(f64::MIN_POSITIVE);
            r_max = r_max.max(madn * madn);
            r_min = r_min.min(madn * madn);
            // Largest and smallest of n normals: Φ̄(max) = 1 − U^{1/n}, computed as −expm1.
            let top = -dist::normal_quantile(-(src.open_uniform().ln() / nf).exp_m1());
            let bottom = dist::normal_quantile(-(src.open_uniform().ln() / nf).exp_m1());
            let score = (top - median).max(median - bottom) / madn;
            top_score[group] = top_score[group].max(score);
        }
        let min_tail =
            self.distinct_sizes.iter().zip(&top_score).map(|(&n, &s)| mad_score_tail(s, n)).fold(1.0f64, f64::min);
        let ratio = |max: f64, min: f64| if self.sizes.len() < 2 { f64::NAN } else { max / min };
        let outside = self.count(&self.rules[0], src);
        let far = self.count(&self.rules[1], src);
        let mad = self.count(&self.rules[2], src);
        DatasetStats {
            residual_g1: g1,
            residual_g2: g2,
            variance_ratio: ratio(v_max, v_min),
            robust_variance_ratio: ratio(r_max, r_min),
            outside,
            far,
            mad,
            min_mad_tail: min_tail,
        }
    }

    /// Draws `datasets` datasets. Dataset b uses the stream (seed, Auxiliary, term 0,
    /// chunk ⌊b/256⌋, aux [`AUX_LARGE_SAMPLE`]), so the result does not depend on the
    /// thread count.
    pub fn simulate(&self, seed: u64, datasets: u64) -> Vec<DatasetStats> {
        let chunks = par_chunks(0, datasets, |task| {
            let mut src = NormalSource::new(task.stream(seed, Purpose::Auxiliary, 0, AUX_LARGE_SAMPLE));
            let mut out = Vec::with_capacity((task.hi - task.lo) as usize);
            for b in task.first..task.hi {
                let s = self.draw(&mut src);
                if b >= task.lo {
                    out.push(s);
                }
            }
            out
        });
        chunks.into_iter().flatten().collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::resample::{Stream, StreamKey};

    fn source(aux: u64) -> NormalSource {
        NormalSource::new(Stream::new(5, StreamKey { purpose: Purpose::Auxiliary, term: 0, chunk: 0, aux }))
    }

    #[test]
    fn transformations_invert() {
        for n in [20.0, 1000.0, 1e6, 1e9] {
            let s = SkewTransform::new(n);
            let k = KurtosisTransform::new(n);
            for z in [-4.0, -1.0, 0.0, 0.5, 3.0] {
                assert!((s.z(s.sqrt_b1(z)) - z).abs() < 1e-9, "skew n {n} z {z}");
                assert!((k.z(k.b2(z)) - z).abs() < 1e-9, "kurtosis n {n} z {z}");
            }
        }
    }

    #[test]
    fn influence_function_variances() {
        // 1/0.3675 = 2·1.3605: the MAD's 36.75% efficiency at the normal (Rousseeuw &
        // Croux 1993, value from memory), and 2/π for the median's 63.7%.
        assert!((madn_variance() - 1.36046).abs() < 1e-5);
        assert!((0.5 / madn_variance() - 0.3675).abs() < 1e-4);
        assert!((midquartile_variance() - 1.23784).abs() < 1e-5);
    }

    #[test]
    fn poisson_counts_have_poisson_moments() {
        for lambda in [0.3, 4.0, 950.0] {
            let mut src = source(1);
            let m = 20_000;
            let x: Vec<f64> = (0..m).map(|_| poisson(&mut src, lambda) as f64).collect();
            let mean = crate::model::mean_two_pass(&x);
            let var = crate::summary::variance(&x);
            let se = (lambda / m as f64).sqrt();
            assert!((mean - lambda).abs() < 5.0 * se, "λ {lambda}: mean {mean}");
            // Var of the sample variance ≈ (λ + 2λ²)/m for a Poisson count.
            let se_var = ((lambda + 2.0 * lambda * lambda) / m as f64).sqrt();
            assert!((var - lambda).abs() < 5.0 * se_var, "λ {lambda}: variance {var}");
        }
    }

    #[test]
    fn gamma_draws_follow_the_chi_square_cdf() {
        // 2·gamma(ν/2) is χ²(ν); dist::chi2_cdf is checked against scipy in tests/checks.
        // KS distance against 1.95/√m, the 0.001 critical value (Smirnov 1948, from memory).
        for df in [0.8, 2.0, 999.0, 83_332.0] {
            let mut src = source(2);
            let m = 20_000;
            let mut x: Vec<f64> = (0..m).map(|_| 2.0 * gamma(&mut src, df / 2.0)).collect();
            x.sort_by(f64::total_cmp);
            let d = x
                .iter()
                .enumerate()
                .map(|(i, &v)| {
                    let f = dist::chi2_cdf(v, df);
                    (f - i as f64 / m as f64).abs().max(((i + 1) as f64 / m as f64 - f).abs())
                })
                .fold(0.0, f64::max);
            assert!(d < 1.95 / (m as f64).sqrt(), "df {df}: KS distance {d}");
        }
    }

    #[test]
    fn draws_do_not_depend_on_threads() {
        let model = LargeSampleModel::new(&[1000, 0, 2500, 1200]);
        let run = |threads| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            pool.install(|| model.simulate(3, 700))
        };
        let (a, b) = (run(1), run(3));
        assert_eq!(a, b);
        assert_eq!(a.len(), 700);
        assert!(applies(&[1000, 0, 2500]) && !applies(&[999, 5000]) && !applies(&[0, 0]));
    }
}
