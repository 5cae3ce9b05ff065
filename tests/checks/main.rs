//! quorum's integration tests: one test binary, one module per feature.
//!
//! Reference values come from outside the project (scipy, statsmodels, NIST StRD,
//! published worked examples, open datasets); each module names its sources.

mod dist;
mod followup;
mod support;

mod bad_inputs;
mod bootstrap;
mod browser;
mod calibration;
mod classical;
mod cli;
mod concordance;
mod descriptives;
mod diagnostics;
mod heteroscedastic;
mod invariance;
mod nist;
mod permutation;
mod plan;
mod rank;
mod report;
mod robustness;
mod sensitivity;
mod spreadsheet;
