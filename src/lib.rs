//! quorum: robust and nonparametric analysis of between-subjects factorial experiments.
//!
//! The library does all the work; the `quorum` binary only parses flags into a
//! [`config::Config`], calls [`analysis`] and maps errors to exit codes.
//!
//! Data flows one way (see `DEVELOPERS.md`):
//!
//! ```text
//! data::Table ─> design::Design ─> engines::* ─> analysis::Analysis ─> report::{text, json}
//! ```
//!
//! * [`data`] reads delimited text into typed columns with 1-based line provenance.
//! * [`design`] builds factors, cells, terms and the per-term quadratic forms in cell sums.
//! * [`model`] computes sums of squares of Types I–III and effect sizes.
//! * [`dist`] holds every distribution function and p-value.
//! * [`resample`] derives reproducible random streams and runs chunked parallel loops.
//! * [`engines`] holds one inference engine per file behind the [`engines::Engine`] trait.
//! * [`report`] renders the one [`analysis::Analysis`] value; it never computes statistics.
#![deny(missing_docs)]

pub mod dist;
