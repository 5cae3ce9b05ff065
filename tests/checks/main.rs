//! quorum's integration tests: one test binary, one module per feature.
//!
//! Reference values come from outside the project (scipy, statsmodels, NIST StRD,
//! published worked examples, open datasets); each module names its sources.

mod support;

mod bootstrap;
mod classical;
mod cli;
mod descriptives;
mod heteroscedastic;
mod nist;
mod rank;
mod robustness;
mod spreadsheet;
