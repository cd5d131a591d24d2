//! pulseplan command-line entry point: parse, dispatch, print the error chain, exit.
//! Exit codes: 0 fine, 1 ran with warnings, 2 bad input or failure.

use clap::Parser;
use pulseplan::cli::{self, Cli, Outcome};
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = Cli::parse();
    cli::install_interrupt_cleanup();
    match cli::run(cli) {
        Ok(Outcome::Clean) => ExitCode::from(0),
        Ok(Outcome::Warned) => ExitCode::from(1),
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::from(0);
            }
            let colour = std::io::IsTerminal::is_terminal(&std::io::stderr())
                && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty());
            let style = anstyle::Style::new()
                .fg_color(Some(anstyle::AnsiColor::Red.into()))
                .bold();
            if colour {
                eprintln!("{style}error:{style:#} {err}");
            } else {
                eprintln!("error: {err}");
            }
            for cause in err.chain().skip(1) {
                eprintln!("  caused by: {cause}");
            }
            ExitCode::from(2)
        }
    }
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
