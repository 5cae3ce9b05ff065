//! The `quorum` binary: parse flags, run the library, print, map errors to exit codes.
//!
//! Exit codes (README "Exit codes"): 0 success; 2 usage or input error; 3 analysis
//! impossible on these data; 4 failed internal consistency check (a bug).

mod cli;
mod plan_cli;

use clap::Parser;
use quorum::config::Format;
use quorum::error::Error;
use quorum::report::{folder, renderer_with, Detail, RenderOptions};
use std::io::{self, IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let mut msg = format!("error: {e}");
            let mut source = std::error::Error::source(&e);
            while let Some(s) = source {
                msg.push_str(&format!("\n  caused by: {s}"));
                source = s.source();
            }
            eprintln!("{msg}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}

fn run(cli: cli::Cli) -> Result<(), Error> {
    match &cli.command {
        cli::Command::Completions { shell } => return shell_integration(Some(*shell)),
        cli::Command::Manpage => return shell_integration(None),
        _ => {}
    }
    let cli = match cli.command {
        cli::Command::Plan(args) => return plan_cli::plan(args, command_line()),
        cli::Command::Merge(args) => return plan_cli::merge(args, command_line()),
        cli::Command::Probe(args) => return probe(args),
        command => cli::Cli { command },
    };
    let detail = if cli.details() { Detail::Full } else { Detail::Summary };
    let config = cli.into_config(command_line())?;
    let analysis = quorum::analysis::run(&config)?;
    let input = match &config.data.source {
        quorum::config::Source::File(p) => Some(p.clone()),
        _ => None,
    };
    if let Some(dir) = &config.output.report_dir {
        folder::write_report(dir, &analysis, input.as_deref())?;
    }
    let mut stdout = io::stdout().lock();
    let options = RenderOptions { colour: colour_wanted(), detail };
    let printed =
        renderer_with(config.output.format, options).render(&analysis, &mut stdout).and_then(|_| stdout.flush());
    match printed {
        // A closed pipe (`quorum … | head`) is not an error.
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => {}
        Err(e) => return Err(Error::Io { path: "<stdout>".into(), action: "writing", source: e }),
        Ok(()) => {}
    }
    if let (Some(dir), Format::Text) = (&config.output.report_dir, config.output.format) {
        eprintln!("report folder: {}", display_dir(dir));
    }
    Ok(())
}

/// `quorum probe`: its own report, text or JSON, on stdout.
fn probe(args: cli::ProbeArgs) -> Result<(), Error> {
    let (config, spec) = args.into_config(command_line())?;
    let report = quorum::followup::probe(&config, &spec)?;
    let mut stdout = io::stdout().lock();
    let printed = quorum::report::followup_text::render_probe(&report, config.output.format, &mut stdout)
        .and_then(|_| stdout.flush());
    match printed {
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Error::Io { path: "<stdout>".into(), action: "writing", source: e }),
        Ok(()) => Ok(()),
    }
}

/// Completion script for `shell`, or the man page when `shell` is None, on stdout.
fn shell_integration(shell: Option<clap_complete::Shell>) -> Result<(), Error> {
    use clap::CommandFactory;
    let mut cmd = cli::Cli::command();
    let mut stdout = io::stdout().lock();
    let written = match shell {
        Some(shell) => {
            clap_complete::generate(shell, &mut cmd, "quorum", &mut stdout);
            Ok(())
        }
        None => clap_mangen::Man::new(cmd).render(&mut stdout),
    };
    written.map_err(|e| Error::Io { path: "<stdout>".into(), action: "writing", source: e })
}

/// Colour only on a terminal, and never when `NO_COLOR` is set to a non-empty value
/// (no-color.org) or the terminal is `dumb`.
fn colour_wanted() -> bool {
    let set = |name: &str| std::env::var_os(name).is_some_and(|v| !v.is_empty());
    io::stdout().is_terminal() && !set("NO_COLOR") && std::env::var_os("TERM").is_none_or(|t| t != "dumb")
}

fn display_dir(dir: &std::path::Path) -> String {
    let p: PathBuf = dir.to_path_buf();
    format!("{}/", p.display())
}

/// The command as typed, quoted where a shell would need it (for the reproducibility block).
fn command_line() -> String {
    std::env::args()
        .enumerate()
        .map(|(i, a)| {
            let a = if i == 0 { "quorum".to_string() } else { a };
            if !a.is_empty() && a.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=,:+@".contains(c)) {
                a
            } else {
                format!("'{}'", a.replace('\'', "'\\''"))
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}
