//! Inference engines: one file per engine, each behind the [`Engine`] trait.
//!
//! Every engine tests the Type III (sum-to-zero) hypothesis of every term and returns
//! one [`TermResult`] per term in canonical order; a term it cannot test carries
//! `not_applicable` with the reason. One engine failing never stops the others: only
//! a failed internal consistency check (exit 4) aborts the run.
//!
//! Adding an engine: write `engines/<name>.rs` with a unit struct implementing
//! [`Engine`], and add one line to [`registry`].

pub mod art;
pub mod bootstrap;
pub mod classical;
pub mod hc;
pub mod permutation;
pub mod rank_ats;
pub mod studentized_permutation;
pub mod trimmed;

use crate::config::Settings;
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::error::Result;
use crate::model::Fit;
use crate::results::{EngineResult, TermResult};
use rayon::prelude::*;

/// What every engine receives: the design, the fitted full model, the Type III forms
/// and the settings.
pub struct Context<'a> {
    /// The design with its data in canonical order.
    pub design: &'a Design,
    /// The full factorial fit.
    pub fit: &'a Fit,
    /// Type III quadratic forms of every term.
    pub forms: &'a SsForms,
    /// Shared settings.
    pub settings: &'a Settings,
}

/// An inference engine.
pub trait Engine: Sync + Send {
    /// Stable id used in `--engines` and in the results (DESIGN.md).
    fn id(&self) -> &'static str;

    /// Runs the engine on every term.
    ///
    /// # Errors
    /// Only a failed internal consistency check; anything else is `not_applicable` data.
    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult>;
}

/// Every engine quorum has, in report order.
pub fn registry() -> Vec<Box<dyn Engine>> {
    vec![
        Box::new(classical::Classical),
        Box::new(hc::Hc),
        Box::new(trimmed::Trimmed),
        Box::new(permutation::Permutation),
        Box::new(studentized_permutation::StudentizedPermutation),
        Box::new(art::Art),
        Box::new(rank_ats::RankAts),
        Box::new(bootstrap::Bootstrap),
    ]
}

/// Ids of every engine, in report order.
pub fn ids() -> Vec<&'static str> {
    registry().iter().map(|e| e.id()).collect()
}

/// Runs the engines named in `settings.engines` (in registry order), in parallel.
///
/// # Errors
/// The first internal consistency failure of any engine.
pub fn run_selected(ctx: &Context<'_>) -> Result<Vec<EngineResult>> {
    let chosen: Vec<Box<dyn Engine>> =
        registry().into_iter().filter(|e| ctx.settings.engines.iter().any(|id| id == e.id())).collect();
    chosen.par_iter().map(|e| e.run(ctx)).collect()
}

/// Every term marked not applicable with the same reason (an engine that cannot run at all).
pub fn all_not_applicable(design: &Design, reason: &str) -> Vec<TermResult> {
    design.terms().iter().map(|t| TermResult::not_applicable(&t.name, reason)).collect()
}
