//! Distribution functions and p-values.
//!
//! Every p-value in quorum comes from this module, so that its accuracy can be tested
//! on one grid against scipy and improved in one place. Upper tails are computed as
//! survival functions, never as `1 - cdf` (METHODS §0).
//!
//! Functions return `NaN` for parameters outside their domain; callers turn a
//! non-finite result into `not_applicable` with a reason.

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
    use statrs::distribution::{ContinuousCDF, StudentsT};
    if !(df > 0.0) || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(p),
        Err(_) => f64::NAN,
    }
}
