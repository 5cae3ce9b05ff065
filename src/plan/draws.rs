//! Error distributions of the designed scenarios and the exact algorithms that draw them.
//!
//! Every family is standardised to mean 0 and standard deviation 1 so that cell SDs
//! and effects are in the same units whatever the shape (the discretised composite is
//! the exception: it is built on a latent normal scale and observed on a 1–7 scale).
//! The variates come from a [`Stream`] through algorithms written out here, using only
//! `+ − × ÷`, `sqrt`, `ln`, `exp` and `powf`, so that results do not change when a
//! dependency changes its samplers or when `dist` is rewritten for accuracy:
//!
//! * normal: Marsaglia & Bray's (1964, SIAM Review 6:260–264) polar method, both
//!   variates of each accepted pair used in order;
//! * Student t with ν df: Bailey's (1994, Mathematics of Computation 62:779–781) polar
//!   method, T = u·√(ν(w^(−2/ν) − 1)/w) for (u, v) uniform in the unit disc, w = u² + v²;
//! * lognormal: exp(σZ);
//! * skew-normal with shape α: δ|Z₀| + √(1 − δ²)Z₁, δ = α/√(1 + α²) (Azzalini 1985,
//!   Scandinavian Journal of Statistics 12:171–178; the representation is Henze's 1986);
//! * the 1–7 composite of m items: see [`ErrorFamily::Likert`].
//!
//! Uniforms on (−1, 1) are `2U − 1` with U = (next() >> 11)·2⁻⁵³ (METHODS §10.3).

use crate::resample::Stream;
use std::f64::consts::PI;

/// The distribution of the errors in a designed scenario.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ErrorFamily {
    /// Standard normal errors.
    Normal,
    /// exp(σZ), standardised: (e^{σZ} − e^{σ²/2}) / √((e^{σ²} − 1)e^{σ²}).
    /// Skewness (e^{σ²} + 2)√(e^{σ²} − 1).
    LogNormal {
        /// σ of the log (shape), in (0, 3].
        sigma: f64,
    },
    /// Student t with `df` > 2 degrees of freedom, standardised by √((ν − 2)/ν).
    StudentT {
        /// Degrees of freedom ν.
        df: f64,
    },
    /// Skew-normal with shape α, standardised with mean δ√(2/π) and variance 1 − 2δ²/π.
    SkewNormal {
        /// Shape α (positive: right-skewed).
        shape: f64,
    },
    /// A 1–7 rating composite: the mean of `items` items, each
    /// x_j = min(7, max(1, round(4 + η + e_j))) with e_j ~ N(0, 1) independent item noise
    /// and the person's latent score η = μ_c + σ_c·Z. Cell means and SDs are on the latent
    /// scale, whose unit is one scale point; at σ_c = 1 the latent item scores correlate
    /// 0.5. Rounding is half away from zero (`f64::round`).
    Likert {
        /// Items in the composite, 1 to 50.
        items: u32,
    },
}

impl ErrorFamily {
    /// The command-line spelling, e.g. `lognormal:0.5`.
    pub fn id(&self) -> String {
        match self {
            ErrorFamily::Normal => "normal".into(),
            ErrorFamily::LogNormal { sigma } => format!("lognormal:{sigma}"),
            ErrorFamily::StudentT { df } => format!("t:{df}"),
            ErrorFamily::SkewNormal { shape } => format!("skew-normal:{shape}"),
            ErrorFamily::Likert { items } => format!("likert:{items}"),
        }
    }

    /// A description for people.
    pub fn describe(&self) -> String {
        match self {
            ErrorFamily::Normal => "normal".into(),
            ErrorFamily::LogNormal { sigma } => {
                let e = (sigma * sigma).exp();
                format!("lognormal, σ of the log {sigma} (skewness {:.2}), standardised", (e + 2.0) * (e - 1.0).sqrt())
            }
            ErrorFamily::StudentT { df } => format!("Student t with {df} df, standardised"),
            ErrorFamily::SkewNormal { shape } => {
                format!("skew-normal, shape {shape} (skewness {:.2}), standardised", skew_normal_skewness(*shape))
            }
            ErrorFamily::Likert { items } => format!(
                "1–7 rating composite of {items} item(s): latent normal person score, item noise N(0, 1), rounded and clamped to 1–7"
            ),
        }
    }

    /// True when the standardised distribution is symmetric about 0 (so trimmed means
    /// equal means).
    pub fn symmetric(&self) -> bool {
        match self {
            ErrorFamily::Normal | ErrorFamily::StudentT { .. } => true,
            ErrorFamily::SkewNormal { shape } => *shape == 0.0,
            ErrorFamily::LogNormal { .. } | ErrorFamily::Likert { .. } => false,
        }
    }

    /// True when the observed outcome is a discretised transform of a latent scale.
    pub fn discretised(&self) -> bool {
        matches!(self, ErrorFamily::Likert { .. })
    }

    /// Draws of one cell: standard normals are drawn from `stream` through a
    /// [`NormalSource`], and each observation consumes its variates in order, so the
    /// first n values of a cell are the same for any larger n (nested samples).
    pub fn sampler(self, stream: Stream) -> Sampler {
        Sampler { family: self, normals: NormalSource::new(stream) }
    }
}

/// Skewness of the skew-normal with shape α (Azzalini 1985):
/// ((4 − π)/2)·(δ√(2/π))³ / (1 − 2δ²/π)^{3/2}.
pub fn skew_normal_skewness(shape: f64) -> f64 {
    let delta = shape / (1.0 + shape * shape).sqrt();
    let m = delta * (2.0 / PI).sqrt();
    (4.0 - PI) / 2.0 * m.powi(3) / (1.0 - m * m).powf(1.5)
}

/// Standard normal variates by the polar method; the second variate of each pair is
/// kept for the next call.
pub struct NormalSource {
    stream: Stream,
    spare: Option<f64>,
}

impl NormalSource {
    /// A source reading `stream`.
    pub fn new(stream: Stream) -> NormalSource {
        NormalSource { stream, spare: None }
    }

    /// A uniform on the open interval (0, 1) ([`Stream::open_uniform`]).
    #[inline]
    pub fn open_uniform(&mut self) -> f64 {
        self.stream.open_uniform()
    }

    /// A uniform on (−1, 1): 2U − 1.
    #[inline]
    fn symmetric_uniform(&mut self) -> f64 {
        2.0 * self.stream.uniform() - 1.0
    }

    /// A point uniform in the open unit disc without its centre: (u, v, w = u² + v²).
    #[inline]
    fn disc_point(&mut self) -> (f64, f64, f64) {
        loop {
            let u = self.symmetric_uniform();
            let v = self.symmetric_uniform();
            let w = u * u + v * v;
            if w > 0.0 && w < 1.0 {
                return (u, v, w);
            }
        }
    }

    /// Next N(0, 1) variate (Marsaglia & Bray 1964): for (u, v, w) uniform in the
    /// unit disc, u·√(−2 ln w / w) and v·√(−2 ln w / w) are independent normals.
    #[inline]
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let (u, v, w) = self.disc_point();
        let m = (-2.0 * w.ln() / w).sqrt();
        self.spare = Some(v * m);
        u * m
    }

    /// Next Student t variate with ν df (Bailey 1994): u·√(ν(w^(−2/ν) − 1)/w).
    /// Draws its own disc point (it does not use or disturb the normal spare).
    #[inline]
    pub fn student_t(&mut self, df: f64) -> f64 {
        let (u, _, w) = self.disc_point();
        u * (df * (w.powf(-2.0 / df) - 1.0) / w).sqrt()
    }
}

/// Draws standardised errors (or composite scores) of one cell.
pub struct Sampler {
    family: ErrorFamily,
    normals: NormalSource,
}

impl Sampler {
    /// The next outcome value of a cell with mean `mean` and SD `sd` (SD units; for the
    /// composite, the latent scale).
    #[inline]
    pub fn value(&mut self, mean: f64, sd: f64) -> f64 {
        match self.family {
            ErrorFamily::Likert { items } => {
                let eta = mean + sd * self.normals.normal();
                let mut total = 0.0;
                for _ in 0..items {
                    let x = (4.0 + eta + self.normals.normal()).round();
                    total += x.clamp(1.0, 7.0);
                }
                total / items as f64
            }
            _ => mean + sd * self.error(),
        }
    }

    /// The next standardised error (mean 0, SD 1) of a continuous family.
    #[inline]
    pub fn error(&mut self) -> f64 {
        match self.family {
            ErrorFamily::Normal | ErrorFamily::Likert { .. } => self.normals.normal(),
            ErrorFamily::LogNormal { sigma } => {
                let s2 = sigma * sigma;
                let mean = (s2 / 2.0).exp();
                let sd = ((s2.exp() - 1.0) * s2.exp()).sqrt();
                ((sigma * self.normals.normal()).exp() - mean) / sd
            }
            ErrorFamily::StudentT { df } => self.normals.student_t(df) * ((df - 2.0) / df).sqrt(),
            ErrorFamily::SkewNormal { shape } => {
                let delta = shape / (1.0 + shape * shape).sqrt();
                let z0 = self.normals.normal();
                let z1 = self.normals.normal();
                let x = delta * z0.abs() + (1.0 - delta * delta).sqrt() * z1;
                let mean = delta * (2.0 / PI).sqrt();
                (x - mean) / (1.0 - 2.0 * delta * delta / PI).sqrt()
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dist;
    use crate::resample::{Purpose, StreamKey};

    fn stream(aux: u64) -> Stream {
        Stream::new(99, StreamKey { purpose: Purpose::Plan, term: 0, chunk: 0, aux })
    }

    /// Kolmogorov–Smirnov distance between a sample and a cdf.
    fn ks(mut x: Vec<f64>, cdf: impl Fn(f64) -> f64) -> f64 {
        x.sort_by(f64::total_cmp);
        let n = x.len() as f64;
        x.iter()
            .enumerate()
            .map(|(i, &v)| {
                let f = cdf(v);
                (f - i as f64 / n).abs().max(((i + 1) as f64 / n - f).abs())
            })
            .fold(0.0, f64::max)
    }

    /// The 0.001 critical value of the KS distance, 1.95/√n (asymptotic Kolmogorov
    /// distribution; Smirnov 1948's table, from memory).
    fn ks_critical(n: usize) -> f64 {
        1.95 / (n as f64).sqrt()
    }

    #[test]
    fn polar_normals_follow_the_normal_cdf() {
        let mut s = NormalSource::new(stream(1));
        let x: Vec<f64> = (0..50_000).map(|_| s.normal()).collect();
        assert!(ks(x, dist::normal_cdf) < ks_critical(50_000));
    }

    #[test]
    fn bailey_t_follows_the_t_cdf() {
        for df in [3.0, 5.5, 30.0] {
            let mut s = NormalSource::new(stream(2));
            let x: Vec<f64> = (0..50_000).map(|_| s.student_t(df)).collect();
            let d = ks(x, |v| dist::t_cdf(v, df));
            assert!(d < ks_critical(50_000), "df {df}: KS {d}");
        }
    }

    #[test]
    fn families_are_standardised() {
        let n = 200_000;
        for family in [
            ErrorFamily::Normal,
            ErrorFamily::LogNormal { sigma: 0.5 },
            ErrorFamily::StudentT { df: 5.0 },
            ErrorFamily::SkewNormal { shape: 5.0 },
        ] {
            let mut s = family.sampler(stream(3));
            let x: Vec<f64> = (0..n).map(|_| s.value(0.0, 1.0)).collect();
            let m = x.iter().sum::<f64>() / n as f64;
            let v = x.iter().map(|a| (a - m) * (a - m)).sum::<f64>() / (n - 1) as f64;
            // Mean within 5 SE (SD 1). The sample variance's SE is √((κ + 2)/n) with excess
            // kurtosis κ ≤ 6 for these families (t₅: 6; lognormal σ = 0.5: 5.9), under 0.007,
            // so 0.05 is more than 7 SE.
            assert!(m.abs() < 5.0 / (n as f64).sqrt(), "{family:?}: mean {m}");
            assert!((v - 1.0).abs() < 0.05, "{family:?}: variance {v}");
        }
    }

    #[test]
    fn likert_composites_lie_on_the_grid() {
        let mut s = ErrorFamily::Likert { items: 4 }.sampler(stream(4));
        for _ in 0..1000 {
            let y = s.value(0.5, 1.0);
            assert!((1.0..=7.0).contains(&y));
            assert_eq!((y * 4.0).fract(), 0.0, "{y}");
        }
    }

    #[test]
    fn samples_are_nested() {
        let mut a = ErrorFamily::SkewNormal { shape: 3.0 }.sampler(stream(5));
        let mut b = ErrorFamily::SkewNormal { shape: 3.0 }.sampler(stream(5));
        let short: Vec<f64> = (0..7).map(|_| a.value(1.0, 2.0)).collect();
        let long: Vec<f64> = (0..20).map(|_| b.value(1.0, 2.0)).collect();
        assert_eq!(short[..], long[..7]);
    }
}
