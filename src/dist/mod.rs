//! Distribution functions and p-values.
//!
//! Every p-value in quorum comes from this module, so that its accuracy can be tested
//! on one grid against scipy and mpmath (`tests/checks/dist.rs`, fixtures written by
//! `tests/reference/gen/dist.py`) and improved in one place. Upper tails are computed as
//! survival functions, never as `1 - cdf` (METHODS §0): each file computes the smaller
//! of the two tails directly and the other as its complement.
//!
//! Layout (one file per family, shared building blocks first):
//!
//! * `gamma`: ln Γ, the regularized incomplete gamma P(a, x), Q(a, x) and the
//!   cancellation-free helpers the others share.
//! * `beta`: the regularized incomplete beta I_x(a, b) and the beta quantile.
//! * `normal`: Φ, 1 − Φ, φ and Φ⁻¹ (Wichura's AS 241).
//! * `central`: Student t, χ² and F — cdf, survival function and quantile.
//! * `noncentral`: the noncentral F (and χ² as df2 = ∞) and the Steiger (2004)
//!   confidence interval for the noncentrality.
//! * `tukey`: the studentized range distribution.
//! * `solve`: bracketing plus Brent's method, shared by every inverse.
//!
//! Conventions: all functions take and return `f64`; parameters outside the domain
//! (non-positive df, p outside [0, 1], NaN) give `NaN` — never a panic — and callers
//! turn a non-finite result into `not_applicable` with a reason. Where marked,
//! `df2 = f64::INFINITY` is allowed and gives the χ² limit.
//!
//! Accuracy (measured in `tests/checks/dist.rs`, run it with `--nocapture` for the
//! table): central cdfs and tails within 2e−13 relative of mpmath down to p = 1e−300 and
//! for df up to 10⁶ (targets 1e−12); quantiles within 1e−13 relative in x; noncentral F
//! within 3e−13 relative (target 1e−9 where above 1e−10, else 1e−14 absolute);
//! studentized range within 1e−12 absolute on the cdf (target 1e−8) and about 1e−11
//! relative on upper tails down to 1e−12.
//!
//! Supported ranges: accuracy is tested for shape parameters (df/2) up to 5·10⁵; every
//! series or continued fraction is capped at 10⁵ terms, so absurd shapes (10¹⁵ and up)
//! cost at most about a millisecond and lose accuracy near the centre instead of
//! hanging. The noncentral F accepts λ ≤ 10¹⁰ and the studentized range k ≤ 10⁴
//! (NaN beyond); ν ≥ 10⁹ counts as ∞ there.

mod beta;
mod central;
mod gamma;
mod noncentral;
mod noncentral_t;
mod normal;
mod solve;
mod tukey;

pub use beta::{beta_quantile, beta_reg};
pub use central::{chi2_cdf, chi2_quantile, chi2_sf, f_cdf, f_quantile, f_sf, t_cdf, t_quantile, t_sf};
pub use gamma::{gamma_p, gamma_q, ln_gamma};
pub use noncentral::{ncf_cdf, ncf_lambda_interval, ncf_sf};
pub use noncentral_t::{nct_cdf, nct_delta_interval};
pub use normal::{normal_cdf, normal_pdf, normal_quantile, normal_quantile_ppnd16, normal_sf};
pub use tukey::{ptukey_cdf, ptukey_quantile, ptukey_sf};
