//! Designed scenarios: factors, cell means from standardized term effects, cell SDs,
//! and which null hypotheses hold exactly for which engine.
//!
//! A scenario is given in SD units. Cell SDs are σ_c = ρ_c / √(mean_c ρ_c²) for the
//! user's ratios ρ_c, so their root mean square over cells is 1 and an effect of a given
//! size means the same whatever the heteroscedasticity.
//!
//! **Standardized term effect.** `--effect S=f` sets term S's component of the cell means
//! to
//!
//! ```text
//! τ_S(c) = f · r_S(c) / √((1/C) Σ_c' r_S(c')²),   r_S(c) = ∏_{g∈S} (l_g(c) − (a_g − 1)/2),
//! ```
//!
//! where l_g(c) ∈ {0, …, a_g − 1} is the level of factor g in cell c: a linear trend over
//! the level order for a main effect, a linear-by-linear pattern for an interaction. Then
//! f = √((1/C) Σ_c τ_S(c)²) is Cohen's (1988) f of the term measured against the RMS error
//! SD, and the Type III component of term S is τ_S (the patterns of different terms are
//! orthogonal). In a balanced design with n per cell and normal errors of equal SD the
//! classical F of S has noncentrality λ = N·f²; in general λ = (L_S μ)'(L_S D⁻¹L_S')⁻¹(L_S μ)
//! (METHODS §1.2 with s = Dμ). For a two-level factor f = d/2, Cohen's d of the two
//! marginal means.
//!
//! **Which nulls are exact.** A rate is a type-I error only where the hypothesis the
//! engine tests holds exactly in the simulated population; elsewhere it is a "rejection
//! rate". With μ and σ the cell means and SDs (latent scale for the 1–7 composite):
//!
//! * a term containing a factor along which neither μ nor σ changes: exact for every
//!   engine (the cells' distributions are identical along that factor, so any contrast of
//!   any functional of them is zero) — this is the only exact case for a discretised
//!   outcome, where a latent additive model creates interactions on the observed scale;
//! * otherwise, if the term's component of μ is not zero: the term has an effect (power);
//! * otherwise, for continuous errors (observed = latent + error with mean 0):
//!   means engines (`classical`, `hc`, `permutation`, `studentized-permutation`,
//!   `bootstrap`): exact; `trimmed`: exact when the errors are symmetric or σ has no
//!   component along the term (trimmed mean of a cell = μ_c + σ_c·t_γ); `art`: exact in a
//!   location-shift model (all σ_c equal); `rank-ats` and engines quorum does not know:
//!   not exact (other effects move the distribution functions).

use super::draws::ErrorFamily;
use crate::design::{Factor, Layout, MAX_CELLS};
use crate::error::{Error, Result};

/// The largest number of factors a designed scenario may have.
pub const MAX_FACTORS: usize = 6;

/// Tolerance for "this component is zero", relative to the largest |value| (and 1).
const ZERO_COMPONENT: f64 = 1e-9;

/// Where the cell means come from.
#[derive(Debug, Clone, PartialEq)]
pub enum MeanSpec {
    /// Every cell mean 0 (only the null condition is simulated).
    Zero,
    /// Standardized effects per term (`--effect A=0.25`).
    Effects(Vec<(String, f64)>),
    /// Cell means in cell order, SD units (`--means`).
    Means(Vec<f64>),
}

/// A designed scenario as the user gave it.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignedSpec {
    /// Levels of each factor (`--design 3x2`).
    pub shape: Vec<usize>,
    /// Cell means.
    pub means: MeanSpec,
    /// Error distribution.
    pub errors: ErrorFamily,
    /// SD ratio of each cell in cell order (`--sd-ratio`); None: equal.
    pub sd_ratio: Option<Vec<f64>>,
}

/// The hypothesis family of an engine, which decides when its null holds exactly.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    /// Contrasts of cell means.
    Means,
    /// Contrasts of cell trimmed means.
    TrimmedMeans,
    /// Location effects on aligned ranks (a location-shift model).
    AlignedLocation,
    /// Contrasts of distribution functions (relative effects).
    Distributions,
    /// An engine this module does not know: treated as testing distributions.
    Unknown,
}

impl Family {
    /// The family of an engine id (DESIGN.md ids).
    pub fn of(engine: &str) -> Family {
        match engine {
            "classical" | "hc" | "permutation" | "studentized-permutation" | "bootstrap" => Family::Means,
            "trimmed" => Family::TrimmedMeans,
            "art" => Family::AlignedLocation,
            "rank-ats" => Family::Distributions,
            _ => Family::Unknown,
        }
    }
}

/// What a simulated rejection rate estimates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum RateKind {
    /// The engine's null holds exactly: the rate is its type-I error.
    TypeIError,
    /// The term has an effect: the rate is power.
    Power,
    /// The null is not exact for this engine (or concerns something else): a rejection rate.
    RejectionRate,
}

impl RateKind {
    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            RateKind::TypeIError => "type-I error",
            RateKind::Power => "power",
            RateKind::RejectionRate => "rejection rate",
        }
    }
}

/// A designed scenario with every number resolved.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// Factors named A, B, C, … with levels a1, a2, ….
    pub layout: Layout,
    /// Cell means of the effects condition (SD units; latent scale for the composite).
    pub means: Vec<f64>,
    /// Cell means of the null condition: every cell at the unweighted average of `means`.
    pub null_means: Vec<f64>,
    /// Cell SDs, root mean square 1.
    pub sd: Vec<f64>,
    /// Error distribution.
    pub errors: ErrorFamily,
    /// The standardized effects as given (empty for `--means` or none).
    pub effects: Vec<(String, f64)>,
    /// True when some cell mean differs from another (an effects condition is run).
    pub has_effects: bool,
}

/// Factors A, B, C, … with levels a1, a2, … for a shape.
pub fn factors_for(shape: &[usize]) -> Vec<Factor> {
    shape
        .iter()
        .enumerate()
        .map(|(f, &a)| {
            let name = ((b'A' + f as u8) as char).to_string();
            let lower = name.to_lowercase();
            Factor { levels: (1..=a).map(|l| format!("{lower}{l}")).collect(), name, measured: false }
        })
        .collect()
}

/// Parses `3x2` (or `3×2`, `3*2`) into level counts.
///
/// # Errors
/// A usage error for fewer than 2 levels, more than [`MAX_FACTORS`] factors or more
/// than [`MAX_CELLS`] cells.
pub fn parse_design(text: &str) -> Result<Vec<usize>> {
    let hint = "write the levels of each factor joined by x, e.g. --design 3x2 for a 3 × 2 design";
    let mut shape = Vec::new();
    for part in text.split(['x', 'X', '×', '*']) {
        let a: usize = part
            .trim()
            .parse()
            .map_err(|_| Error::usage(format!("--design `{text}`: `{part}` is not a number of levels"), hint))?;
        if a < 2 {
            return Err(Error::usage(format!("--design `{text}`: a factor needs at least 2 levels"), hint));
        }
        shape.push(a);
    }
    if shape.len() > MAX_FACTORS {
        return Err(Error::usage(
            format!("--design `{text}` has {} factors", shape.len()),
            format!("quorum supports up to {MAX_FACTORS} factors"),
        ));
    }
    let cells = shape.iter().try_fold(1usize, |acc, &a| acc.checked_mul(a).filter(|&c| c <= MAX_CELLS));
    if cells.is_none() {
        return Err(Error::usage(format!("--design `{text}` has more than {MAX_CELLS} cells"), hint));
    }
    Ok(shape)
}

/// Parses `--errors`: `normal`, `lognormal[:SIGMA]` (default 0.5), `t:DF` (DF > 2),
/// `skew-normal[:SHAPE]` (default 5), `likert[:ITEMS]` (default 4).
///
/// # Errors
/// A usage error naming the accepted forms.
pub fn parse_errors(text: &str) -> Result<ErrorFamily> {
    let hint = "use normal, lognormal[:SIGMA], t:DF (DF > 2), skew-normal[:SHAPE] or likert[:ITEMS]";
    let (name, arg) = match text.split_once(':') {
        Some((n, a)) => (n.trim(), Some(a.trim())),
        None => (text.trim(), None),
    };
    let number = |default: Option<f64>| -> Result<f64> {
        match arg {
            None => default.ok_or_else(|| Error::usage(format!("--errors `{text}` needs a parameter"), hint)),
            Some(a) => a
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| Error::usage(format!("--errors `{text}`: `{a}` is not a number"), hint)),
        }
    };
    let family = match name.to_lowercase().as_str() {
        "normal" if arg.is_none() => ErrorFamily::Normal,
        "lognormal" => {
            let sigma = number(Some(0.5))?;
            if !(sigma > 0.0 && sigma <= 3.0) {
                return Err(Error::usage(format!("--errors `{text}`: σ of the log must be in (0, 3]"), hint));
            }
            ErrorFamily::LogNormal { sigma }
        }
        "t" => {
            let df = number(None)?;
            if df <= 2.0 {
                return Err(Error::usage(
                    format!("--errors `{text}`: t errors need more than 2 df"),
                    "with 2 df or fewer the variance is infinite, so effects in SD units are undefined",
                ));
            }
            ErrorFamily::StudentT { df }
        }
        "skew-normal" | "skewnormal" => ErrorFamily::SkewNormal { shape: number(Some(5.0))? },
        "likert" => {
            let items = number(Some(4.0))?;
            if items.fract() != 0.0 || !(1.0..=50.0).contains(&items) {
                return Err(Error::usage(format!("--errors `{text}`: the items must be a whole number 1–50"), hint));
            }
            ErrorFamily::Likert { items: items as u32 }
        }
        _ => return Err(Error::usage(format!("--errors `{text}` is not an error distribution quorum knows"), hint)),
    };
    Ok(family)
}

/// Parses one `--effect TERM=F`.
///
/// # Errors
/// A usage error when there is no `=` or F is not a finite number.
pub fn parse_effect(text: &str) -> Result<(String, f64)> {
    let hint = "write it as --effect TERM=F, e.g. --effect A=0.25 or --effect A:B=0.1 (Cohen's f of the term)";
    let Some((term, value)) = text.split_once('=') else {
        return Err(Error::usage(format!("--effect `{text}` has no `=`"), hint));
    };
    let f: f64 = value
        .trim()
        .parse()
        .ok()
        .filter(|v: &f64| v.is_finite())
        .ok_or_else(|| Error::usage(format!("--effect `{text}`: `{value}` is not a number"), hint))?;
    Ok((term.trim().to_string(), f))
}

/// Applies, along each axis of a row-major array of `shape`, either "centre along this
/// axis" (axes in `centre`) or "average along this axis". With `centre` = S this is the
/// projection T_S = ⊗_g (I − J/a_g if g ∈ S else J/a_g) onto term S's component.
pub fn term_component(shape: &[usize], centre: &[usize], v: &[f64]) -> Vec<f64> {
    let mut x = v.to_vec();
    for (g, &a) in shape.iter().enumerate() {
        let inner: usize = shape[g + 1..].iter().product();
        let outer: usize = shape[..g].iter().product();
        for o in 0..outer {
            for i in 0..inner {
                let idx = |l: usize| (o * a + l) * inner + i;
                let mean = (0..a).map(|l| x[idx(l)]).sum::<f64>() / a as f64;
                for l in 0..a {
                    let j = idx(l);
                    x[j] = if centre.contains(&g) { x[j] - mean } else { mean };
                }
            }
        }
    }
    x
}

/// True when `v` changes along factor `g` (some pair of cells differing only in g's level
/// has different values), beyond rounding.
pub fn varies_along(shape: &[usize], g: usize, v: &[f64]) -> bool {
    let scale = v.iter().fold(1.0f64, |m, x| m.max(x.abs()));
    let inner: usize = shape[g + 1..].iter().product();
    let outer: usize = shape[..g].iter().product();
    let a = shape[g];
    (0..outer).any(|o| {
        (0..inner).any(|i| {
            let first = v[o * a * inner + i];
            (1..a).any(|l| (v[(o * a + l) * inner + i] - first).abs() > ZERO_COMPONENT * scale)
        })
    })
}

/// True when term `factors`' component of `v` is zero beyond rounding.
pub fn component_is_zero(shape: &[usize], factors: &[usize], v: &[f64]) -> bool {
    let scale = v.iter().fold(1.0f64, |m, x| m.max(x.abs()));
    term_component(shape, factors, v).iter().all(|x| x.abs() <= ZERO_COMPONENT * scale)
}

/// The unit pattern of a term: r_S(c)/rms(r_S), a linear (by linear) trend.
pub fn effect_pattern(layout: &Layout, factors: &[usize]) -> Vec<f64> {
    let raw: Vec<f64> = (0..layout.n_cells())
        .map(|c| {
            let levels = layout.cell_levels(c);
            factors.iter().map(|&g| levels[g] as f64 - (layout.shape[g] as f64 - 1.0) / 2.0).product()
        })
        .collect();
    let rms = (raw.iter().map(|x| x * x).sum::<f64>() / raw.len() as f64).sqrt();
    raw.iter().map(|x| x / rms).collect()
}

impl Scenario {
    /// Resolves a designed spec: checks lengths and names, builds cell means and SDs.
    ///
    /// # Errors
    /// A usage error naming the flag: a list of the wrong length, an unknown or repeated
    /// term, a non-positive SD ratio.
    pub fn resolve(spec: &DesignedSpec) -> Result<Scenario> {
        let layout = Layout::new(factors_for(&spec.shape));
        let c = layout.n_cells();
        let order = cell_order_hint(&layout);
        let sd = match &spec.sd_ratio {
            None => vec![1.0; c],
            Some(r) => {
                if r.len() != c {
                    return Err(Error::usage(
                        format!("--sd-ratio gives {} values for {c} cells", r.len()),
                        format!("give one ratio per cell in cell order ({order})"),
                    ));
                }
                if let Some(bad) = r.iter().find(|v| !(v.is_finite() && **v > 0.0)) {
                    return Err(Error::usage(
                        format!("--sd-ratio {bad} is not a positive number"),
                        "SD ratios are positive multipliers, e.g. 1,1,2,2,4,4",
                    ));
                }
                let rms = (r.iter().map(|x| x * x).sum::<f64>() / c as f64).sqrt();
                r.iter().map(|x| x / rms).collect()
            }
        };
        let (means, effects) = match &spec.means {
            MeanSpec::Zero => (vec![0.0; c], Vec::new()),
            MeanSpec::Means(m) => {
                if m.len() != c {
                    return Err(Error::usage(
                        format!("--means gives {} values for {c} cells", m.len()),
                        format!("give one mean per cell in cell order ({order})"),
                    ));
                }
                if m.iter().any(|v| !v.is_finite()) {
                    return Err(Error::usage("--means has a value that is not a finite number", "give numbers"));
                }
                (m.clone(), Vec::new())
            }
            MeanSpec::Effects(list) => {
                let mut mu = vec![0.0; c];
                let mut seen: Vec<usize> = Vec::new();
                for (name, f) in list {
                    let Some(t) = layout.term_index(name) else {
                        let names: Vec<&str> = layout.terms.iter().map(|t| t.name.as_str()).collect();
                        return Err(Error::usage(
                            format!("--effect names the term `{name}`, which this design does not have"),
                            format!("the terms are {}", names.join(", ")),
                        ));
                    };
                    if seen.contains(&t) {
                        return Err(Error::usage(
                            format!("--effect gives the term `{name}` twice"),
                            "give each term once",
                        ));
                    }
                    seen.push(t);
                    for (m, p) in mu.iter_mut().zip(effect_pattern(&layout, &layout.terms[t].factors)) {
                        *m += f * p;
                    }
                }
                (mu, list.clone())
            }
        };
        let grand = means.iter().sum::<f64>() / c as f64;
        let null_means = vec![grand; c];
        let has_effects = varies(&means);
        Ok(Scenario { layout, means, null_means, sd, errors: spec.errors, effects, has_effects })
    }

    /// Cell means of a condition.
    pub fn condition_means(&self, effects: bool) -> &[f64] {
        if effects {
            &self.means
        } else {
            &self.null_means
        }
    }

    /// What the rate of an engine of `family` on term `t` estimates under the cell means
    /// `mu`, with the reason when the null is not exact (module docs).
    pub fn classify(&self, mu: &[f64], family: Family, t: usize) -> (RateKind, Option<String>) {
        let shape = &self.layout.shape;
        let term = &self.layout.terms[t];
        if term.factors.iter().any(|&g| !varies_along(shape, g, mu) && !varies_along(shape, g, &self.sd)) {
            return (RateKind::TypeIError, None);
        }
        if !component_is_zero(shape, &term.factors, mu) {
            return (RateKind::Power, None);
        }
        if self.errors.discretised() {
            return (
                RateKind::RejectionRate,
                Some(format!(
                    "the 1–7 composite is a nonlinear function of the latent scale, so with every factor of {} active the null holds on the latent scale only",
                    term.name
                )),
            );
        }
        let equal_sd = !varies(&self.sd);
        match family {
            Family::Means => (RateKind::TypeIError, None),
            Family::TrimmedMeans => {
                if self.errors.symmetric() || component_is_zero(shape, &term.factors, &self.sd) {
                    (RateKind::TypeIError, None)
                } else {
                    (
                        RateKind::RejectionRate,
                        Some(format!(
                            "skewed errors with cell SDs that differ along {}: the cells' trimmed means differ although their means do not",
                            term.name
                        )),
                    )
                }
            }
            Family::AlignedLocation => {
                if equal_sd {
                    (RateKind::TypeIError, None)
                } else {
                    (
                        RateKind::RejectionRate,
                        Some("unequal cell SDs: not a location-shift model, so ART's null is not exact".into()),
                    )
                }
            }
            Family::Distributions | Family::Unknown => (
                RateKind::RejectionRate,
                Some(format!(
                    "other effects or unequal SDs change the cells' distributions along every factor of {}: its null on distribution functions is not exact",
                    term.name
                )),
            ),
        }
    }
}

fn varies(v: &[f64]) -> bool {
    let scale = v.iter().fold(1.0f64, |m, x| m.max(x.abs()));
    v.iter().any(|x| (x - v[0]).abs() > ZERO_COMPONENT * scale)
}

/// `a1 b1, a1 b2, …` — the cell order for messages (at most 8 cells shown).
pub fn cell_order_hint(layout: &Layout) -> String {
    let c = layout.n_cells();
    let shown: Vec<String> = (0..c.min(8)).map(|i| layout.cell_labels(i).join(" ")).collect();
    format!("{}{}", shown.join(", "), if c > 8 { ", …" } else { "" })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(shape: &[usize], means: MeanSpec, errors: ErrorFamily, sd: Option<Vec<f64>>) -> DesignedSpec {
        DesignedSpec { shape: shape.to_vec(), means, errors, sd_ratio: sd }
    }

    #[test]
    fn parses_designs_errors_and_effects() {
        assert_eq!(parse_design("3x2").unwrap(), vec![3, 2]);
        assert_eq!(parse_design("2×2×2").unwrap(), vec![2, 2, 2]);
        assert!(parse_design("1x2").is_err());
        assert!(parse_design("2x2x2x2x2x2x2").is_err());
        assert!(parse_design("101x100").is_err());
        assert_eq!(parse_errors("t:5").unwrap(), ErrorFamily::StudentT { df: 5.0 });
        assert_eq!(parse_errors("lognormal").unwrap(), ErrorFamily::LogNormal { sigma: 0.5 });
        assert_eq!(parse_errors("likert:3").unwrap(), ErrorFamily::Likert { items: 3 });
        for bad in ["t", "t:2", "likert:2.5", "gamma", "lognormal:-1", "normal:3"] {
            assert_eq!(parse_errors(bad).unwrap_err().exit_code(), 2, "{bad}");
        }
        assert_eq!(parse_effect("A:B=0.25").unwrap(), ("A:B".to_string(), 0.25));
        assert!(parse_effect("A").is_err());
    }

    #[test]
    fn effect_patterns_have_the_stated_cohen_f() {
        let s = Scenario::resolve(&spec(
            &[3, 2],
            MeanSpec::Effects(vec![("A".into(), 0.25), ("A:B".into(), 0.1)]),
            ErrorFamily::Normal,
            None,
        ))
        .unwrap();
        let shape = &s.layout.shape;
        for (t, f) in [(0usize, 0.25), (2, 0.1)] {
            let tau = term_component(shape, &s.layout.terms[t].factors, &s.means);
            let rms = (tau.iter().map(|x| x * x).sum::<f64>() / 6.0).sqrt();
            assert!((rms - f).abs() < 1e-12, "term {t}: {rms}");
        }
        assert!(component_is_zero(shape, &[1], &s.means));
        // A: linear in the level, B-free: a1 < a2 < a3.
        assert!(s.means[0] < s.means[2] || s.means[1] < s.means[3]);
    }

    #[test]
    fn null_exactness_follows_the_module_rules() {
        let skew = ErrorFamily::LogNormal { sigma: 0.5 };
        // A and B active, unequal SDs along A only.
        let s = Scenario::resolve(&spec(
            &[2, 2],
            MeanSpec::Effects(vec![("A".into(), 0.3), ("B".into(), 0.3)]),
            skew,
            Some(vec![1.0, 1.0, 2.0, 2.0]),
        ))
        .unwrap();
        let mu = s.means.clone();
        assert_eq!(s.classify(&mu, Family::Means, 0).0, RateKind::Power);
        // A:B: both factors active, no A:B component of means.
        assert_eq!(s.classify(&mu, Family::Means, 2).0, RateKind::TypeIError);
        // σ varies along A only, so its A:B component is zero: trimmed exact.
        assert_eq!(s.classify(&mu, Family::TrimmedMeans, 2).0, RateKind::TypeIError);
        assert_eq!(s.classify(&mu, Family::AlignedLocation, 2).0, RateKind::RejectionRate);
        assert_eq!(s.classify(&mu, Family::Distributions, 2).0, RateKind::RejectionRate);
        // Null condition: B changes nothing (σ varies along A), so B and A:B are exact everywhere.
        let null = s.null_means.clone();
        assert_eq!(s.classify(&null, Family::Distributions, 1).0, RateKind::TypeIError);
        assert_eq!(s.classify(&null, Family::Distributions, 2).0, RateKind::TypeIError);
        assert_eq!(s.classify(&null, Family::TrimmedMeans, 0).0, RateKind::RejectionRate);
        // Discretised: only terms with an inactive factor are exact.
        let l = Scenario::resolve(&spec(
            &[2, 2],
            MeanSpec::Effects(vec![("A".into(), 0.3), ("B".into(), 0.3)]),
            ErrorFamily::Likert { items: 4 },
            None,
        ))
        .unwrap();
        assert_eq!(l.classify(&l.means, Family::Means, 2).0, RateKind::RejectionRate);
        let only_a = Scenario::resolve(&spec(
            &[2, 2],
            MeanSpec::Effects(vec![("A".into(), 0.3)]),
            ErrorFamily::Likert { items: 4 },
            None,
        ))
        .unwrap();
        assert_eq!(only_a.classify(&only_a.means, Family::Means, 1).0, RateKind::TypeIError);
        assert_eq!(only_a.classify(&only_a.means, Family::Means, 2).0, RateKind::TypeIError);
    }

    #[test]
    fn bad_lists_are_usage_errors() {
        let e =
            Scenario::resolve(&spec(&[3, 2], MeanSpec::Means(vec![0.0; 5]), ErrorFamily::Normal, None)).unwrap_err();
        assert!(e.to_string().contains("6 cells"), "{e}");
        let e =
            Scenario::resolve(&spec(&[3, 2], MeanSpec::Effects(vec![("C".into(), 0.2)]), ErrorFamily::Normal, None))
                .unwrap_err();
        assert!(e.to_string().contains("A, B, A:B"), "{e}");
        assert!(Scenario::resolve(&spec(&[2, 2], MeanSpec::Zero, ErrorFamily::Normal, Some(vec![1.0, 0.0, 1.0, 1.0])))
            .is_err());
        let s = Scenario::resolve(&spec(&[2, 2], MeanSpec::Zero, ErrorFamily::Normal, Some(vec![1.0, 1.0, 3.0, 3.0])))
            .unwrap();
        let rms = (s.sd.iter().map(|x| x * x).sum::<f64>() / 4.0).sqrt();
        assert!((rms - 1.0).abs() < 1e-15);
    }
}
