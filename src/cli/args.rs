//! The command line's arguments (clap derive).

use std::path::PathBuf;

/// Plan the finite pulse that stands in for an impulse, and predict its error exactly.
#[derive(Debug, clap::Parser)]
#[command(name = "pulseplan", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
    /// Print no text report on stdout (warnings still go to stderr); --json output is still printed.
    #[arg(long, short, global = true)]
    pub quiet: bool,
}

/// Subcommands.
#[derive(Debug, clap::Subcommand)]
pub enum Command {
    /// Recommend a pulse for the scenario's network (rule of thumb, or widest within the budget).
    Plan(PlanArgs),
    /// Evaluate the pulse given in the scenario's [pulse] section.
    Assess {
        /// Scenario file (TOML).
        file: PathBuf,
        #[command(flatten)]
        common: Common,
        /// Also write the report bundle (figures, report.html, response.csv, assess.json) to
        /// out/<scenario name>-assess/.
        #[arg(long)]
        report: bool,
        /// Folder for the report bundle instead of out/<scenario name>-assess/ (implies --report).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
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
        /// Time grid: "dynamics" adds log-spaced points (up to 4000) that follow the fast
        /// dynamics to the uniform points; "uniform" keeps only the uniform ones.
        #[arg(long, value_enum, default_value_t = Grid::Dynamics)]
        grid: Grid,
        /// Use the scenario's own [pulse] instead of the planned pulse (the planned one is the
        /// default, the same pulse as the report bundle's response.csv).
        #[arg(long)]
        given: bool,
    },
    /// Recover h(t) from a capture: remove the pulse, fit the modes, compare with the model.
    Recover(super::recover::RecoverArgs),
    /// Write a commented starter scenario NAME.toml in the current folder (never overwrites).
    New {
        /// Scenario name (the file is NAME.toml).
        name: String,
    },
    /// Print a shell completion script for pulseplan (e.g. `pulseplan completions bash`).
    Completions {
        /// The shell to complete in.
        shell: clap_complete::Shell,
    },
}

/// What `plan` is asked for.
#[derive(Debug, clap::Args)]
pub struct PlanArgs {
    /// Scenario file (TOML).
    pub file: PathBuf,
    #[command(flatten)]
    pub common: Common,
    /// Also write the report bundle (figures, report.html, response.csv, plan.json) to
    /// out/<scenario name>/.
    #[arg(long)]
    pub report: bool,
    /// Folder for the report bundle instead of out/<scenario name>/ (implies --report).
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Monte Carlo samples over the parts' tolerances (overrides [plan] samples).
    #[arg(long, value_name = "N")]
    pub samples: Option<usize>,
    /// Seed of the Monte Carlo draw (overrides [plan] seed).
    #[arg(long, value_name = "S")]
    pub seed: Option<u64>,
}

/// The response table's time grid.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Grid {
    /// Uniform points over the run, plus log-spaced points following the dynamics.
    Dynamics,
    /// Uniform points only (plus the pulse's breakpoints).
    Uniform,
}

/// Options shared by `plan` and `assess`.
#[derive(Debug, clap::Args)]
pub struct Common {
    /// Print one JSON object instead of the text report.
    #[arg(long)]
    pub json: bool,
    /// Read ideal and predicted values at this instant (repeatable), e.g. --at 10us; t = 0
    /// reads h(0⁺), and negative times (before the pulse) are allowed: --at -5us.
    #[arg(long = "at", value_name = "TIME", allow_hyphen_values = true)]
    pub at: Vec<String>,
}
