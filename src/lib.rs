//! quorum: robust and nonparametric analysis of between-subjects factorial experiments.
//!
//! The library does all the work; the `quorum` binary only parses flags into a
//! [`config::Config`], calls [`analysis::run`] and maps errors to exit codes.
//!
//! Data flows one way (see `DEVELOPERS.md`):
//!
//! ```text
//! data::Observations ─> design::Design ─> model::Fit ─> engines::* ─> concordance
//!                                    └──> diagnostics (cell table, checks) ──┐
//!                                                     results::Analysis <────┘ ─> report::{text, json}
//! ```
//!
//! * [`data`] reads delimited text into typed columns with 1-based line provenance.
//! * [`design`] builds factors, cells, terms and the per-term quadratic forms in cell sums.
//! * [`model`] fits the full factorial model: SS of Types I–III and effect sizes.
//! * [`dist`] holds every distribution function and p-value.
//! * [`rank`] ranks, aligns and compares on ranks for the rank-based engines.
//! * [`resample`] derives reproducible random streams for resampling engines.
//! * [`engines`] holds one inference engine per file behind the [`engines::Engine`] trait.
//! * [`diagnostics`] describes cells and checks assumptions; it never decides.
//! * [`sensitivity`] reruns the engines without the points a drop rule flags (descriptive).
//! * [`concordance`] compares the engines' decisions term by term.
//! * [`followup`] probes effects: simple effects, pairwise comparisons, planned contrasts.
//! * [`concordance`] compares the engines' decisions term by term and chooses the primary engine.
//! * [`evidence`] computes what the concordance's explanations need beside the engines.
//! * [`robust`] holds trimmed-mean building blocks (Welch–James, Yuen, robust d).
//! * [`plan`] simulates power and type-I error of every engine (designed scenarios, `--like` data).
//! * [`report`] renders the one [`results::Analysis`] value; it never computes statistics.
#![deny(missing_docs)]

pub mod analysis;
pub mod concordance;
pub mod config;
pub mod data;
pub mod demo;
pub mod design;
pub mod diagnostics;
pub mod dist;
pub mod engines;
pub mod error;
pub mod evidence;
pub mod followup;
pub mod model;
pub mod multiplicity;
pub mod plan;
pub mod rank;
pub mod report;
pub mod resample;
pub mod results;
pub mod robust;
pub mod sensitivity;
pub mod summary;

pub use error::{Error, Result};
