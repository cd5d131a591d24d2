//! The command line: argument definitions ([`args`]), the commands ([`commands`]), what they
//! print ([`output`]) and the starter scenario ([`starter`]). One consumer of the library.

mod args;
mod commands;
mod output;
mod recover;
mod starter;

pub use args::{Cli, Command, Common, Grid, PlanArgs};
pub use output::{InputError, Outcome, Worded};
pub use recover::{RecoverArgs, settings_from_scenario};
pub use starter::starter_scenario;

use anyhow::Result;
use clap::CommandFactory;

/// On SIGINT or SIGTERM, remove the temporary files and folders still being written (outputs
/// are renamed into place only when complete, so nothing half-written remains), then exit
/// with 130.
pub fn install_interrupt_cleanup() {
    let _ = ctrlc::set_handler(|| {
        crate::report::files::remove_pending();
        std::process::exit(130);
    });
}

/// Run a parsed command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    let quiet = cli.quiet;
    match cli.command {
        Command::Plan(args) => commands::plan(args, quiet),
        Command::Assess {
            file,
            common,
            report,
            out,
        } => {
            let bundle = (report || out.is_some()).then_some(out);
            commands::assess(&file, &common, bundle, quiet)
        }
        Command::Response {
            file,
            csv,
            points,
            grid,
            given,
        } => commands::response(&file, &csv, (points, grid), given, quiet),
        Command::Recover(args) => recover::run(&args, quiet),
        Command::New { name } => starter::new_scenario(&name),
        Command::Completions { shell } => {
            let mut cmd = Cli::command();
            clap_complete::generate(shell, &mut cmd, "pulseplan", &mut std::io::stdout());
            Ok(Outcome::Clean)
        }
    }
}
