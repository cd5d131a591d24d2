//! What the command line prints: the report on stdout (coloured on a terminal), warnings on
//! stderr, the exit outcome, and a progress bar for long steps.

use crate::report;
use crate::scenario::Scenario;
use anyhow::Result;
use std::io::IsTerminal;

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

pub(crate) fn emit(text: String, warned: bool) -> Result<Outcome> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.flush()?;
    Ok(outcome(warned))
}

pub(crate) fn outcome(warned: bool) -> Outcome {
    if warned {
        Outcome::Warned
    } else {
        Outcome::Clean
    }
}

/// Colour only on a terminal, and never when NO_COLOR is set to a non-empty value.
fn colour_on(is_terminal: bool) -> bool {
    is_terminal && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty())
}

const CODE_STYLE: anstyle::Style = anstyle::Style::new()
    .fg_color(Some(anstyle::Color::Ansi(anstyle::AnsiColor::Yellow)))
    .bold();
const CAUTION_STYLE: anstyle::Style = anstyle::Style::new()
    .fg_color(Some(anstyle::Color::Ansi(anstyle::AnsiColor::Red)))
    .bold();
const HEAD_STYLE: anstyle::Style = anstyle::Style::new().bold();

fn paint(style: anstyle::Style, text: &str) -> String {
    format!("{style}{text}{style:#}")
}

/// Warnings worded for the terminal, with whether any needs the user's action.
pub struct Worded {
    /// (code, sentence) per warning.
    pub lines: Vec<(&'static str, String)>,
    /// True when any warning needs action (exit code 1).
    pub act: bool,
}

impl Worded {
    pub(crate) fn new(
        sc: &Scenario,
        warnings: &[crate::notice::Warning],
        run_basis: &crate::plan::RunBasis,
    ) -> Worded {
        let basis = report::words::run_basis_text(run_basis);
        let cx = report::words::Context {
            drive: sc.drive,
            run_basis: &basis,
        };
        Worded {
            lines: warnings
                .iter()
                .map(|w| (w.code(), report::words::warning_text(w, &cx)))
                .collect(),
            act: crate::notice::needs_action(warnings),
        }
    }
}

/// Colour the warning codes, cautions and section headings of a text report.
fn colour_report(text: &str, warnings: &Worded) -> String {
    let mut out = String::with_capacity(text.len() + 256);
    for line in text.split_inclusive('\n') {
        let mut l = line.to_string();
        if !line.starts_with(' ') && !line.trim().is_empty() && !line.starts_with("pulseplan ") {
            let body = l.trim_end_matches('\n').to_string();
            l = format!("{}\n", paint(HEAD_STYLE, &body));
        } else {
            for (code, _) in &warnings.lines {
                let tag = format!("[{code}]");
                if l.contains(&tag) {
                    l = l.replacen(&tag, &paint(CODE_STYLE, &tag), 1);
                }
            }
            l = l.replace("CAUTION:", &paint(CAUTION_STYLE, "CAUTION:"));
        }
        out.push_str(&l);
    }
    out
}

/// Print warnings to stderr as `warning [code]: message`.
pub(crate) fn warn_stderr(warnings: &Worded) {
    let colour = colour_on(std::io::stderr().is_terminal());
    for (code, message) in &warnings.lines {
        let tag = format!("[{code}]");
        let (tag, msg) = if colour {
            (
                paint(CODE_STYLE, &tag),
                message.replace("CAUTION:", &paint(CAUTION_STYLE, "CAUTION:")),
            )
        } else {
            (tag, message.clone())
        };
        eprintln!("warning {tag}: {msg}");
    }
}

/// Print a report (or, when quiet, only its warnings on stderr).
pub(crate) fn report_out(
    text: String,
    json: bool,
    quiet: bool,
    warnings: &Worded,
) -> Result<Outcome> {
    // --quiet silences the human report; JSON is for a program, so it is still printed (and
    // the warnings, which it carries, are not repeated on stderr).
    if quiet && !json {
        warn_stderr(warnings);
        return Ok(outcome(warnings.act));
    }
    let text = if !json && colour_on(std::io::stdout().is_terminal()) {
        colour_report(&text, warnings)
    } else {
        text
    };
    emit(text, warnings.act)
}

/// A progress bar on stderr that shows itself only on a terminal, and only once the work has
/// taken more than half a second.
pub(crate) struct Progress {
    bar: indicatif::ProgressBar,
    started: std::time::Instant,
    shown: bool,
    terminal: bool,
}

impl Progress {
    pub(crate) fn new(message: &'static str) -> Progress {
        let bar = indicatif::ProgressBar::hidden();
        bar.set_style(
            indicatif::ProgressStyle::with_template("{msg:>14} [{bar:32}] {pos}/{len} ({eta})")
                .expect("a valid template")
                .progress_chars("=> "),
        );
        bar.set_message(message);
        Progress {
            bar,
            started: std::time::Instant::now(),
            shown: false,
            terminal: std::io::stderr().is_terminal(),
        }
    }

    pub(crate) fn update(&mut self, done: usize, total: usize) {
        if !self.shown && self.terminal && self.started.elapsed().as_millis() > 500 {
            self.bar
                .set_draw_target(indicatif::ProgressDrawTarget::stderr());
            self.shown = true;
        }
        self.bar.set_length(total as u64);
        self.bar.set_position(done as u64);
    }

    pub(crate) fn spinner(message: &'static str) -> indicatif::ProgressBar {
        if !std::io::stderr().is_terminal() {
            return indicatif::ProgressBar::hidden();
        }
        let s = indicatif::ProgressBar::new_spinner();
        s.set_message(message);
        s.enable_steady_tick(std::time::Duration::from_millis(120));
        s
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.bar.finish_and_clear();
    }
}
