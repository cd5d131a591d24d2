//! The command line: argument definitions and dispatch. One consumer of the library.

use crate::report;
use crate::scenario::{self, Scenario};
use crate::units::{self, Dim};
use anyhow::{Context, Result, bail};
use clap::{Parser, Subcommand};
use std::path::{Path, PathBuf};

/// Plan the finite pulse that stands in for an impulse, and predict its error exactly.
#[derive(Debug, Parser)]
#[command(name = "pulseplan", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Recommend a pulse for the scenario's network (rule of thumb, or widest within the budget).
    Plan {
        /// Scenario file (TOML).
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
    /// Evaluate the pulse given in the scenario's [pulse] section.
    Assess {
        /// Scenario file (TOML).
        file: PathBuf,
        #[command(flatten)]
        common: Common,
    },
    /// Write the ideal and predicted responses on a time grid to CSV.
    Response {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Output CSV path.
        #[arg(long, value_name = "PATH")]
        csv: PathBuf,
        /// Number of uniform grid points over the run (breakpoints are added).
        #[arg(long, default_value_t = 2001)]
        points: usize,
        /// Use the planned pulse even when the scenario has a [pulse] section.
        #[arg(long)]
        planned: bool,
    },
}

/// Options shared by `plan` and `assess`.
#[derive(Debug, clap::Args)]
pub struct Common {
    /// Print one JSON object instead of the text report.
    #[arg(long)]
    pub json: bool,
    /// Read ideal and predicted values at this instant (repeatable), e.g. --at 10us.
    #[arg(long = "at", value_name = "TIME")]
    pub at: Vec<String>,
}

/// What a run produced: whether it carried warnings (exit code 1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Ran cleanly.
    Clean,
    /// Ran, with warnings.
    Warned,
}

/// Bad input (exit code 2): the message is already complete.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct InputError(pub String);

fn load(file: &Path) -> Result<Scenario> {
    scenario::load(file).map_err(|e| InputError(e.to_string()).into())
}

fn parse_times(texts: &[String]) -> Result<Vec<f64>> {
    texts
        .iter()
        .map(|t| {
            units::parse_quantity(t, Dim::Time)
                .map_err(|e| InputError(format!("--at {t}: {e}")).into())
        })
        .collect()
}

fn emit(text: String, warned: bool) -> Result<Outcome> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.flush()?;
    Ok(if warned {
        Outcome::Warned
    } else {
        Outcome::Clean
    })
}

/// Run a parsed command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Plan { file, common } => {
            let sc = load(&file)?;
            let times = parse_times(&common.at)?;
            let out = crate::plan::plan(&sc);
            let cs = report::cursors(&sc.network, &out.pulse, &times);
            let text = if common.json {
                serde_json::to_string_pretty(&report::plan_json(&sc, &out, &cs))? + "\n"
            } else {
                report::plan_text(&sc, &out, &cs)
            };
            emit(text, !out.warnings.is_empty())
        }
        Command::Assess { file, common } => {
            let sc = load(&file)?;
            let times = parse_times(&common.at)?;
            let Some(given) = sc.pulse.clone() else {
                bail!(InputError(format!(
                    "{}:1: pulse: `assess` needs a [pulse] section (amplitude, width, rise, fall)",
                    sc.file
                )));
            };
            let out = crate::plan::assess(&sc, &given.pulse, given.run);
            let cs = report::cursors(&sc.network, &out.pulse, &times);
            let text = if common.json {
                serde_json::to_string_pretty(&report::assess_json(&sc, &out, &cs))? + "\n"
            } else {
                report::assess_text(&sc, &out, &cs)
            };
            emit(text, !out.warnings.is_empty())
        }
        Command::Response {
            file,
            csv,
            points,
            planned,
        } => {
            let sc = load(&file)?;
            if points < 2 {
                bail!(InputError("--points must be at least 2".into()));
            }
            let (pulse, run, warnings) = match (&sc.pulse, planned) {
                (Some(g), false) => {
                    let out = crate::plan::assess(&sc, &g.pulse, g.run);
                    (out.pulse, out.run, out.warnings)
                }
                _ => {
                    let out = crate::plan::plan(&sc);
                    (out.pulse, out.prep.run, out.warnings)
                }
            };
            let rows = report::response_rows(&sc.network, &pulse, run, points);
            report::write_response_csv(&csv, &rows)
                .with_context(|| format!("cannot write {}", csv.display()))?;
            for w in &warnings {
                eprintln!("warning [{}]: {}", w.code, w.message);
            }
            emit(
                format!("wrote {} rows to {}\n", rows.len(), csv.display()),
                !warnings.is_empty(),
            )
        }
    }
}
