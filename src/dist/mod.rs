//! Distribution functions and p-values.
//!
//! Every p-value in quorum comes from this module, so that its accuracy can be tested
//! on one grid against scipy and improved in one place. Upper tails are computed as
//! survival functions, never as `1 - cdf` (METHODS §0).
//!
//! Functions return `NaN` for parameters outside their domain; callers turn a
//! non-finite result into `not_applicable` with a reason.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

/// Upper tail of the F distribution, P(F(df1, df2) ≥ x).
///
/// Uses the regularized incomplete beta, P = I_{df2/(df2 + df1·x)}(df2/2, df1/2)
/// (METHODS §0). `df2 = ∞` gives the χ²_{df1}/df1 tail.
pub fn f_sf(x: f64, df1: f64, df2: f64) -> f64 {
    if !(df1 > 0.0) || !(df2 > 0.0) || x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x == f64::INFINITY {
        return 0.0;
    }
    if df2 == f64::INFINITY {
        return chi2_sf(x * df1, df1);
    }
    let z = df2 / (df2 + df1 * x);
    statrs::function::beta::beta_reg(df2 / 2.0, df1 / 2.0, z)
}

/// Upper tail of the χ² distribution, P(χ²_df ≥ x).
pub fn chi2_sf(x: f64, df: f64) -> f64 {
    if !(df > 0.0) || x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 1.0;
    }
    if x == f64::INFINITY {
        return 0.0;
    }
    statrs::function::gamma::gamma_ur(df / 2.0, x / 2.0)
}

/// Quantile of Student's t distribution (lower tail): x with P(t_df ≤ x) = p.
pub fn t_quantile(p: f64, df: f64) -> f64 {
    use statrs::distribution::StudentsT;
    if !(df > 0.0) || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}

// ---------------------------------------------------------------------------------
// Interim implementations on statrs, replaced by the accuracy work (issue: numerical
// accuracy). The names and signatures are the module's public API.
// ---------------------------------------------------------------------------------

use statrs::distribution::{Beta, ChiSquared, ContinuousCDF, FisherSnedecor, Normal};

/// Standard normal cdf Φ(x).
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * statrs::function::erf::erfc(-x / std::f64::consts::SQRT_2)
}

/// Standard normal upper tail 1 − Φ(x), computed directly.
pub fn normal_sf(x: f64) -> f64 {
    0.5 * statrs::function::erf::erfc(x / std::f64::consts::SQRT_2)
}

/// Standard normal density φ(x).
pub fn normal_pdf(x: f64) -> f64 {
    (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// Standard normal quantile Φ⁻¹(p).
pub fn normal_quantile(p: f64) -> f64 {
    match Normal::new(0.0, 1.0) {
        Ok(n) if (0.0..=1.0).contains(&p) => n.inverse_cdf(p),
        _ => f64::NAN,
    }
}

/// Student t cdf.
pub fn t_cdf(x: f64, df: f64) -> f64 {
    if x.is_nan() || !(df > 0.0) {
        return f64::NAN;
    }
    if x < 0.0 {
        t_sf(-x, df)
    } else {
        1.0 - t_sf(x, df)
    }
}

/// Student t upper tail P(t_df ≥ x).
pub fn t_sf(x: f64, df: f64) -> f64 {
    if x.is_nan() || !(df > 0.0) {
        return f64::NAN;
    }
    if df == f64::INFINITY {
        return normal_sf(x);
    }
    let tail = 0.5 * statrs::function::beta::beta_reg(df / 2.0, 0.5, df / (df + x * x));
    if x >= 0.0 {
        tail
    } else {
        1.0 - tail
    }
}

/// χ² cdf.
pub fn chi2_cdf(x: f64, df: f64) -> f64 {
    if !(df > 0.0) || x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 0.0;
    }
    statrs::function::gamma::gamma_lr(df / 2.0, x / 2.0)
}

/// χ² quantile (lower tail).
pub fn chi2_quantile(p: f64, df: f64) -> f64 {
    match ChiSquared::new(df) {
        Ok(d) if (0.0..=1.0).contains(&p) => d.inverse_cdf(p),
        _ => f64::NAN,
    }
}

/// F cdf.
pub fn f_cdf(x: f64, df1: f64, df2: f64) -> f64 {
    let s = f_sf(x, df1, df2);
    if s.is_nan() {
        s
    } else {
        1.0 - s
    }
}

/// F quantile (lower tail).
pub fn f_quantile(p: f64, df1: f64, df2: f64) -> f64 {
    if df2 == f64::INFINITY {
        return chi2_quantile(p, df1) / df1;
    }
    match FisherSnedecor::new(df1, df2) {
        Ok(d) if (0.0..=1.0).contains(&p) => d.inverse_cdf(p),
        _ => f64::NAN,
    }
}

/// Regularized incomplete beta I_x(a, b).
pub fn beta_reg(a: f64, b: f64, x: f64) -> f64 {
    if !(a > 0.0) || !(b > 0.0) || !(0.0..=1.0).contains(&x) {
        return f64::NAN;
    }
    statrs::function::beta::beta_reg(a, b, x)
}

/// Quantile of the Beta(a, b) distribution (lower tail).
pub fn beta_quantile(p: f64, a: f64, b: f64) -> f64 {
    match Beta::new(a, b) {
        Ok(d) if (0.0..=1.0).contains(&p) => d.inverse_cdf(p),
        _ => f64::NAN,
    }
}

/// Regularized lower incomplete gamma P(a, x).
pub fn gamma_p(a: f64, x: f64) -> f64 {
    if !(a > 0.0) || !(x >= 0.0) {
        return f64::NAN;
    }
    statrs::function::gamma::gamma_lr(a, x)
}

/// Regularized upper incomplete gamma Q(a, x).
pub fn gamma_q(a: f64, x: f64) -> f64 {
    if !(a > 0.0) || !(x >= 0.0) {
        return f64::NAN;
    }
    statrs::function::gamma::gamma_ur(a, x)
}

/// ln Γ(x).
pub fn ln_gamma(x: f64) -> f64 {
    statrs::function::gamma::ln_gamma(x)
}
