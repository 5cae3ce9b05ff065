//! The demo: invented data compiled into the binary, so `quorum demo` needs no
//! arguments and no files. See `demo-data/README.md` for the invented scenario.

use crate::config::{Config, DataSpec, Delimiter, Format, Job, OutputSpec, Settings, Source};
use std::path::PathBuf;

/// The invented 3 × 2 field trial (irrigation × mulch on plot yield).
pub const FIELD_TRIAL: &str = include_str!("../demo-data/field-trial.csv");

/// The invented 2 × 2 × 3 usability study (layout × onboarding × device).
pub const USABILITY_STUDY: &str = include_str!("../demo-data/usability-study.tsv");

/// Folder `quorum demo` writes unless told otherwise.
pub const DEFAULT_FOLDER: &str = "quorum-demo";

/// The data description of the field-trial demo.
pub fn field_trial_spec() -> DataSpec {
    DataSpec {
        source: Source::Embedded { name: "demo-data/field-trial.csv (invented)".into(), text: FIELD_TRIAL },
        outcome: "yield_kg".into(),
        factors: vec!["irrigation".into(), "mulch".into()],
        id: Some("plot".into()),
        missing: DataSpec::default_missing(),
        delimiter: Delimiter::Auto,
        decimal_comma: false,
        levels: vec![("irrigation".into(), vec!["daily".into(), "every-2-days".into(), "weekly".into()])],
        measured: vec![],
        sheet: None,
    }
}

/// The demo run: analyze the field trial and write a report folder.
pub fn config(settings: Settings, format: Format, folder: Option<PathBuf>) -> Config {
    Config {
        job: Job::Analyze,
        data: field_trial_spec(),
        settings,
        output: OutputSpec { format, report_dir: Some(folder.unwrap_or_else(|| PathBuf::from(DEFAULT_FOLDER))) },
        command: "quorum demo".into(),
    }
}
