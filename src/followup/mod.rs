//! Follow-ups: simple effects, pairwise comparisons, planned contrasts and trends,
//! each by classical and robust methods, with multiplicity control (METHODS §9).
//!
//! A significant interaction is where probing starts: the effect of one factor within
//! each level (combination) of others, then which cells differ. quorum answers each
//! question with the same families of methods as its engines, so a reader sees whether
//! a follow-up survives the assumptions failing:
//!
//! * `simple.rs`: simple effects with L = ⊗_f (H if f ∈ S; e'_level if f ∈ R; 1'/a
//!   otherwise) (METHODS §9.1) — classical F with the full model's pooled error and with
//!   the slice's own error, HC Wald (`engines::hc`), Welch–James on trimmed means
//!   (`robust`), and a permutation test restricted to the slice (`permutation.rs`);
//! * `pairwise.rs`: Tukey–Kramer, Games–Howell, Yuen / trimmed contrasts, ART-C
//!   (`rank::artc`), within slices and for marginal means (METHODS §9.2, §5.3);
//! * `contrasts.rs`: planned contrasts and orthogonal-polynomial trends;
//! * `crate::multiplicity`: Holm, Hochberg, Benjamini–Hochberg, Bonferroni (METHODS §9.4);
//! * `nct.rs`: the noncentral t for Hedges' g intervals (not in `dist`).
//!
//! Every test reuses the engines' building blocks (`model::wald::WaldForm`,
//! `engines::hc`, `robust`, `rank::artc`), so a follow-up and the omnibus test of the
//! same engine can never disagree on conventions. Degenerate cells make one method's row
//! `not_applicable` naming the cell; the other methods carry on. [`automatic`] picks the
//! follow-ups `analyze` runs from the concordance; [`probe`] runs what `quorum probe`
//! asks for.

pub mod contrasts;
pub mod nct;
pub mod pairwise;
pub mod permutation;
pub mod simple;

use crate::config::{Config, Settings, SsType};
use crate::design::forms::{SsForms, DENSE_CELL_LIMIT};
use crate::design::Design;
use crate::diagnostics::cells;
use crate::engines::hc;
use crate::error::{Error, Result};
use crate::model::Fit;
pub use crate::multiplicity::{self, Adjust};
use crate::results::{
    CellSummary, Concordance, Decision, FactorSummary, Followup, InputSummary, Reproducibility, SliceLevel, Verdict,
};
use crate::robust::TrimmedCell;
pub use contrasts::{ContrastSpec, PlannedContrast};
use serde::Serialize;

/// What `quorum probe` is asked to do (validated names; factor indices are resolved
/// against the design in [`probe`]).
#[derive(Debug, Clone, Default)]
pub struct ProbeSpec {
    /// Factors of the effect to probe (one factor, or several for an interaction effect).
    pub effect: Vec<String>,
    /// Conditioning factors (empty: pairwise comparisons of marginal means only).
    pub at: Vec<String>,
    /// Also probe the other way round (the `at` factors' effect at each level of the effect's).
    pub both_ways: bool,
    /// Planned contrasts (`--contrast "A: 1,-1,0"`).
    pub contrasts: Vec<ContrastSpec>,
    /// Factors with ordered numeric levels to test for polynomial trends (`--trend A`).
    pub trends: Vec<String>,
}

/// The schema id of `quorum probe --format json`.
pub const PROBE_SCHEMA: &str = "quorum.probe/1";

/// Settings that shaped the follow-ups.
#[derive(Debug, Clone, Serialize)]
pub struct ProbeSettings {
    /// Significance level of the decisions.
    pub alpha: f64,
    /// Confidence level of intervals.
    pub ci_level: f64,
    /// Trimming proportion of the trimmed-means methods.
    pub trim: f64,
    /// HC covariance type of the `hc` method.
    pub hc: String,
    /// Multiplicity adjustment within each family.
    pub adjustment: String,
    /// Random permutations per slice (before any extension).
    pub permutations: u64,
    /// Upper limit of the extension near α.
    pub max_permutations: u64,
    /// Seed of the permutation streams.
    pub seed: u64,
}

/// Everything `quorum probe` reports (its own JSON object, schema [`PROBE_SCHEMA`]).
#[derive(Debug, Clone, Serialize)]
pub struct ProbeReport {
    /// Always [`PROBE_SCHEMA`].
    pub schema: &'static str,
    /// What was read.
    pub input: InputSummary,
    /// Outcome column.
    pub outcome: String,
    /// Factors and levels.
    pub factors: Vec<FactorSummary>,
    /// The cell table (outcome units).
    pub cells: Vec<CellSummary>,
    /// Settings.
    pub settings: ProbeSettings,
    /// Simple effects and pairwise comparisons, one entry per direction probed.
    pub followup: Vec<Followup>,
    /// Planned contrasts and trend contrasts.
    pub contrasts: Vec<PlannedContrast>,
    /// Version, seed, threads and command.
    pub reproducibility: Reproducibility,
}

/// The shared inputs of every follow-up: design, fit, Type III forms (for ART-C),
/// settings, the trimmed summaries and HC variances of every cell.
pub struct Probe<'a> {
    /// The design.
    pub design: &'a Design,
    /// The full factorial fit.
    pub fit: &'a Fit,
    /// Type III forms (ART-C fits the full factorial to ranks with them).
    pub forms: SsForms,
    /// Settings (α, confidence level, trimming, HC type, permutations, seed, adjustment).
    pub settings: &'a Settings,
    /// Trimmed summaries of every cell at `settings.trim`.
    pub trimmed: Vec<TrimmedCell>,
    /// Sandwich variances of the cell means (`settings.hc`); NaN for n < 2.
    pub hc_v: Vec<f64>,
}

impl<'a> Probe<'a> {
    /// Prepares the shared inputs.
    ///
    /// # Errors
    /// Exit 3 when the design has more cells than the dense contrast forms allow.
    pub fn new(design: &'a Design, fit: &'a Fit, settings: &'a Settings) -> Result<Probe<'a>> {
        if design.n_cells() > DENSE_CELL_LIMIT {
            return Err(Error::impossible(format!(
                "follow-ups use dense contrast matrices and are limited to {DENSE_CELL_LIMIT} cells; the design has {}",
                design.n_cells()
            )));
        }
        let forms = SsForms::new(&design.layout, &fit.n, SsType::Three)?;
        let trimmed = (0..design.n_cells()).map(|c| TrimmedCell::new(design.cell_values(c), settings.trim)).collect();
        let hc_v = hc::cell_variances(&fit.n, &fit.ss_within, settings.hc);
        Ok(Probe { design, fit, forms, settings, trimmed, hc_v })
    }

    /// Name of a factor set, e.g. `A:B`.
    pub fn set_name(&self, set: &[usize]) -> String {
        set.iter().map(|&f| self.design.factors()[f].name.as_str()).collect::<Vec<_>>().join(":")
    }

    /// Every level combination of `set` (row-major, last factor fastest).
    pub fn combinations(&self, set: &[usize]) -> Vec<Vec<usize>> {
        let shape = self.design.shape();
        let mut out = vec![Vec::new()];
        for &f in set {
            out = out
                .into_iter()
                .flat_map(|p: Vec<usize>| (0..shape[f]).map(move |l| [p.clone(), vec![l]].concat()))
                .collect();
        }
        out
    }

    /// The slice labels of a level combination of `set`.
    pub fn slice_levels(&self, set: &[usize], combo: &[usize]) -> Vec<SliceLevel> {
        set.iter()
            .zip(combo)
            .map(|(&f, &l)| SliceLevel {
                factor: self.design.factors()[f].name.clone(),
                level: self.design.factors()[f].levels[l].clone(),
            })
            .collect()
    }

    /// Level labels of a combination of `set`.
    pub fn labels(&self, set: &[usize], combo: &[usize]) -> Vec<String> {
        set.iter().zip(combo).map(|(&f, &l)| self.design.factors()[f].levels[l].clone()).collect()
    }

    /// True when cell `c` lies in the slice `combo` of `set`.
    pub fn in_slice(&self, c: usize, set: &[usize], combo: &[usize]) -> bool {
        let lv = self.design.layout.cell_levels(c);
        set.iter().zip(combo).all(|(&f, &l)| lv[f] == l)
    }

    /// A decision from an adjusted p.
    pub fn decide(&self, p_adjusted: Option<f64>) -> Option<Decision> {
        p_adjusted.map(|p| Decision::from_p(p, self.settings.alpha))
    }
}

/// A slice name for people, e.g. `B=b1, C=c2` (or `all` for no conditioning).
pub fn slice_name(slice: &[SliceLevel]) -> String {
    if slice.is_empty() {
        return "marginal means".into();
    }
    slice.iter().map(|s| format!("{}={}", s.factor, s.level)).collect::<Vec<_>>().join(", ")
}

/// Factor indices of names, sorted; `what` names the flag for messages.
///
/// # Errors
/// A usage error for an unknown or repeated name.
pub fn resolve(design: &Design, names: &[String], what: &str) -> Result<Vec<usize>> {
    let mut out = Vec::new();
    for name in names {
        let f = design.factors().iter().position(|x| x.name == *name).ok_or_else(|| {
            Error::usage(
                format!("{what} names `{name}`, which is not one of the factors"),
                format!(
                    "the factors are {}",
                    design.factors().iter().map(|f| f.name.as_str()).collect::<Vec<_>>().join(", ")
                ),
            )
        })?;
        if out.contains(&f) {
            return Err(Error::usage(format!("{what} names `{name}` twice"), "name each factor once"));
        }
        out.push(f);
    }
    out.sort_unstable();
    Ok(out)
}

/// The full probe of one effect S at the conditioning set R: simple effects by every
/// method and pairwise comparisons within every slice; with R empty, pairwise
/// comparisons of S's marginal means.
///
/// # Errors
/// A usage error when S is empty or overlaps R; an internal error from a failed ART-C
/// alignment check.
pub fn follow(probe: &Probe<'_>, effect: &[usize], at: &[usize], origin: &str) -> Result<Followup> {
    if effect.is_empty() {
        return Err(Error::usage("no effect to probe", "name the effect's factors with --effect"));
    }
    if let Some(&f) = effect.iter().find(|f| at.contains(f)) {
        return Err(Error::usage(
            format!("factor `{}` is both the effect and a conditioning factor", probe.design.factors()[f].name),
            "--effect and --at must name different factors",
        ));
    }
    let adjust = probe.settings.adjust;
    let mut notes = vec![format!(
        "p-values adjusted within each family with {}: a family is one method's tests over the slices, or one method's comparisons within one slice",
        adjust.describe()
    )];
    let others: Vec<usize> =
        (0..probe.design.factors().len()).filter(|f| !effect.contains(f) && !at.contains(f)).collect();
    if !others.is_empty() {
        notes.push(format!(
            "means are averaged (unweighted) over {}; Games–Howell and Yuen need single cells and are replaced by the heteroscedastic trimmed contrast",
            probe.set_name(&others)
        ));
    }
    let tests = if at.is_empty() { Vec::new() } else { simple::simple_effects(probe, effect, at)? };
    let pairwise = pairwise::comparisons(probe, effect, at)?;
    if !at.is_empty() {
        notes.push(permutation::KEY_NOTE.to_string());
    }
    Ok(Followup {
        effect: probe.set_name(effect),
        at: at.iter().map(|&f| probe.design.factors()[f].name.clone()).collect(),
        tests,
        pairwise,
        origin: origin.to_string(),
        adjustment: adjust.id().to_string(),
        notes,
    })
}

/// The follow-ups `analyze` runs after the concordance: for every interaction whose
/// verdict is `holds` or `method-dependent`, each of its factors at every level
/// combination of the term's other factors (both directions for a two-way
/// interaction; factors outside the term are averaged); for every such main effect
/// with more than two levels, pairwise comparisons of its marginal means.
///
/// # Errors
/// An internal error from a failed ART-C alignment check; exit 3 above the dense limit.
pub fn automatic(
    design: &Design,
    fit: &Fit,
    settings: &Settings,
    concordance: &[Concordance],
) -> Result<Vec<Followup>> {
    let wanted: Vec<&Concordance> =
        concordance.iter().filter(|c| matches!(c.verdict, Verdict::Holds | Verdict::MethodDependent)).collect();
    if wanted.is_empty() {
        return Ok(Vec::new());
    }
    if design.n_cells() > DENSE_CELL_LIMIT {
        // Said in the results rather than left out silently.
        let why = format!(
            "not run: follow-ups use dense contrast matrices and are limited to {DENSE_CELL_LIMIT} cells; the design has {}",
            design.n_cells()
        );
        return Ok(wanted
            .iter()
            .map(|c| Followup {
                effect: c.term.clone(),
                at: Vec::new(),
                tests: Vec::new(),
                pairwise: Vec::new(),
                origin: format!(
                    "term {} is {}",
                    c.term,
                    if c.verdict == Verdict::Holds { "holds" } else { "method-dependent" }
                ),
                adjustment: settings.adjust.id().to_string(),
                notes: vec![why.clone()],
            })
            .collect());
    }
    let probe = Probe::new(design, fit, settings)?;
    let mut out = Vec::new();
    for c in wanted {
        let Some(t) = design.layout.term_index(&c.term) else { continue };
        let term = &design.terms()[t];
        let verdict = match c.verdict {
            Verdict::Holds => "holds",
            _ => "method-dependent",
        };
        let origin = format!("term {} is {verdict}", term.name);
        if term.factors.len() >= 2 {
            for &f in &term.factors {
                let at: Vec<usize> = term.factors.iter().copied().filter(|&g| g != f).collect();
                out.push(follow(&probe, &[f], &at, &origin)?);
            }
        } else if design.shape()[term.factors[0]] > 2 {
            out.push(follow(&probe, &term.factors, &[], &origin)?);
        }
    }
    Ok(out)
}

/// Runs `quorum probe`: reads the data, builds the design, and probes as `spec` asks.
///
/// # Errors
/// Input errors (exit 2), an impossible analysis (exit 3), a failed internal check (exit 4).
pub fn probe(config: &Config, spec: &ProbeSpec) -> Result<ProbeReport> {
    let obs = crate::data::read(&config.data)?;
    let design = Design::build(&obs, &config.data)?;
    let input = InputSummary {
        path: obs.source.clone(),
        rows_read: obs.rows_read,
        rows_used: design.n_obs(),
        dropped: obs.dropped.clone(),
    };
    let mut builder = rayon::ThreadPoolBuilder::new();
    if let Some(t) = config.settings.threads {
        builder = builder.num_threads(t);
    }
    let pool = builder
        .build()
        .map_err(|e| Error::usage(format!("cannot start worker threads: {e}"), "use fewer --threads"))?;
    pool.install(|| probe_design(config, &design, input, spec))
}

/// [`probe`] on a design that is already built.
///
/// # Errors
/// As [`probe`].
pub fn probe_design(config: &Config, design: &Design, input: InputSummary, spec: &ProbeSpec) -> Result<ProbeReport> {
    design.check_testable()?;
    let settings = &config.settings;
    let fit = Fit::new(design);
    let probe = Probe::new(design, &fit, settings)?;
    let effect = resolve(design, &spec.effect, "--effect")?;
    let at = resolve(design, &spec.at, "--at")?;
    if spec.effect.is_empty() && !spec.at.is_empty() {
        return Err(Error::usage(
            "--at needs --effect",
            "name the effect to test within each level of the --at factors",
        ));
    }
    if spec.effect.is_empty() && spec.contrasts.is_empty() && spec.trends.is_empty() {
        return Err(Error::usage(
            "nothing to probe",
            "name an effect with --effect (and --at for simple effects), or give --contrast or --trend",
        ));
    }
    if spec.both_ways && at.is_empty() {
        return Err(Error::usage("--both-ways needs --at", "name the conditioning factors with --at"));
    }
    let mut followup = Vec::new();
    if !effect.is_empty() {
        followup.push(follow(&probe, &effect, &at, "requested")?);
        if spec.both_ways {
            followup.push(follow(&probe, &at, &effect, "requested (--both-ways)")?);
        }
    }
    let mut planned = contrasts::planned(&probe, &spec.contrasts)?;
    for name in &spec.trends {
        let f = resolve(design, std::slice::from_ref(name), "--trend")?[0];
        planned.extend(contrasts::trend(&probe, f)?);
    }
    Ok(ProbeReport {
        schema: PROBE_SCHEMA,
        input,
        outcome: design.outcome.clone(),
        factors: design
            .factors()
            .iter()
            .map(|f| FactorSummary { name: f.name.clone(), levels: f.levels.clone(), measured: f.measured })
            .collect(),
        cells: cells::cell_table(design, settings.trim, settings.ci_level),
        settings: ProbeSettings {
            alpha: settings.alpha,
            ci_level: settings.ci_level,
            trim: settings.trim,
            hc: settings.hc.label().to_string(),
            adjustment: settings.adjust.id().to_string(),
            permutations: settings.permutations,
            max_permutations: settings.max_permutations,
            seed: settings.seed,
        },
        followup,
        contrasts: planned,
        reproducibility: Reproducibility {
            version: env!("CARGO_PKG_VERSION").to_string(),
            seed: settings.seed,
            threads: rayon::current_num_threads(),
            command: config.command.clone(),
        },
    })
}
