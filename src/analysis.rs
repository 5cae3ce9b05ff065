//! Running a whole analysis: read, build the design, describe, run the engines,
//! compare them, and return the one [`Analysis`] value every renderer reads.

use crate::concordance;
use crate::config::{Config, Job};
use crate::data;
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::diagnostics::{self, cells};
use crate::engines::{self, Context};
use crate::error::{Error, Result};
use crate::model::Fit;
use crate::results::{Analysis, DesignSummary, FactorSummary, InputSummary, Reproducibility, SCHEMA};

/// Runs the job described by `config`.
///
/// # Errors
/// Input errors (exit 2), impossible analyses (exit 3) and failed internal checks (exit 4).
pub fn run(config: &Config) -> Result<Analysis> {
    let obs = data::read(&config.data)?;
    let design = Design::build(&obs, &config.data)?;
    let input = InputSummary {
        path: obs.source.clone(),
        rows_read: obs.rows_read,
        rows_used: design.n_obs(),
        dropped: obs.dropped.clone(),
    };
    let pool = thread_pool(config.settings.threads)?;
    pool.install(|| analyse_design(config, &design, input))
}

/// Runs the job on a design that is already built.
///
/// # Errors
/// As [`run`].
pub fn analyse_design(config: &Config, design: &Design, input: InputSummary) -> Result<Analysis> {
    let settings = &config.settings;
    if config.job == Job::Analyze {
        design.check_testable()?;
    }
    let fit = Fit::new(design);
    let plot_axes = diagnostics::plotdata::InteractionAxes::resolve(design, &settings.plot_axes)?;
    let summary = DesignSummary {
        outcome: design.outcome.clone(),
        factors: design
            .factors()
            .iter()
            .map(|f| FactorSummary { name: f.name.clone(), levels: f.levels.clone(), measured: f.measured })
            .collect(),
        balanced: design.is_balanced(),
        cells: cells::cell_table(design, settings.trim, settings.ci_level),
        marginal_means: cells::marginal_means(design, &fit, settings.ci_level),
    };
    // The residual plots read every observation but depend on nothing below, so they
    // are drawn beside the diagnostics.
    let (diagnosis, residual_plots) = rayon::join(
        || diagnostics::diagnose(design, &fit, settings.seed),
        || diagnostics::plotdata::residual_plots(design, &fit),
    );
    let calibration = match (config.job, settings.calibration) {
        (Job::Analyze, Some(sims)) => Some(crate::plan::calibrate(design, settings, sims)?),
        _ => None,
    };
    let terms: Vec<String> = design.terms().iter().map(|t| t.name.clone()).collect();
    let (engine_results, evidence, primary) = match config.job {
        Job::Analyze => {
            let forms = SsForms::new(&design.layout, &fit.n, crate::config::SsType::Three)?;
            let ctx = Context { design, fit: &fit, forms: &forms, settings };
            let results = engines::run_selected(&ctx)?;
            let evidence = crate::evidence::compute(design, settings);
            // The primary engine is chosen from the flags and the engines that ran,
            // before any p-value is read (METHODS §11.2).
            let primary = concordance::primary::choose(&concordance::primary::Inputs {
                flags: &diagnosis.diagnostics.flags,
                cell_sizes: &design.cell_sizes(),
                engines: &results,
                fixed: settings.primary.as_deref(),
            });
            (results, evidence, Some(primary))
        }
        _ => (Vec::new(), Vec::new(), None),
    };
    let inputs = concordance::Inputs { primary: primary.as_ref(), evidence: &evidence, alpha: settings.alpha };
    let mut concordance = match config.job {
        Job::Analyze => concordance::compare(&terms, &engine_results, &inputs),
        _ => Vec::new(),
    };
    // Sensitivity variant without the points of the drop rule (descriptive). Its
    // concordance keeps the main analysis's primary engine (pre-specified).
    let mut sensitivity = match (config.job, diagnosis.removal(settings.drop_rule)) {
        (Job::Analyze, Some(removal)) => {
            let mut v = crate::sensitivity::variant(design, settings, removal, &engine_results, &concordance)?;
            let reduced_evidence = if removal.rows.is_empty() {
                evidence.clone()
            } else {
                design
                    .without_observations(&removal.rows)
                    .map(|d| crate::evidence::compute(&d, settings))
                    .unwrap_or_default()
            };
            let v_inputs = concordance::Inputs { evidence: &reduced_evidence, ..inputs };
            v.concordance = concordance::compare(&terms, &v.engines, &v_inputs);
            vec![v]
        }
        _ => Vec::new(),
    };
    let explain = concordance::explain::Inputs {
        alpha: settings.alpha,
        primary: primary.as_ref(),
        flags: &diagnosis.diagnostics.flags,
        variance_ratio: diagnosis.diagnostics.variance_ratio,
        engines: &engine_results,
        variant: None,
    };
    for v in &mut sensitivity {
        let e = concordance::explain::Inputs { engines: &v.engines, ..explain };
        concordance::explain::annotate(&mut v.concordance, &e);
    }
    let variant =
        sensitivity.first().map(|v| concordance::explain::Variant { lines: &v.rows_removed, rows: &v.concordance });
    concordance::explain::annotate(&mut concordance, &concordance::explain::Inputs { variant, ..explain });
    // Follow-ups of the terms that hold or are method-dependent (METHODS §9).
    let followup = match config.job {
        Job::Analyze => crate::followup::automatic(design, &fit, settings, &concordance)?,
        _ => Vec::new(),
    };
    let plot_data = diagnostics::plotdata::assemble(
        design,
        &fit,
        &summary.cells,
        plot_axes,
        settings.ci_level,
        &engine_results,
        residual_plots,
    );
    let diagnostics = diagnosis.diagnostics;
    Ok(Analysis {
        schema: SCHEMA,
        input,
        design: summary,
        diagnostics,
        engines: engine_results,
        concordance,
        sensitivity,
        followup,
        reproducibility: Reproducibility {
            version: env!("CARGO_PKG_VERSION").to_string(),
            seed: settings.seed,
            threads: rayon::current_num_threads(),
            command: config.command.clone(),
        },
        calibration,
        primary_engine: primary,
        plot_data: Some(plot_data),
    })
}

fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool> {
    let mut builder = rayon::ThreadPoolBuilder::new();
    if let Some(t) = threads {
        builder = builder.num_threads(t);
    }
    builder.build().map_err(|e| {
        Error::usage(format!("cannot start {} worker threads: {e}", threads.unwrap_or(0)), "use fewer --threads")
    })
}
