//! The command line: argument definitions and dispatch. One consumer of the library.

use crate::report;
use crate::scenario::{self, Scenario};
use crate::units::{self, Dim};
use anyhow::{Context, Result, bail};
use clap::{CommandFactory, Parser, Subcommand};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

/// Plan the finite pulse that stands in for an impulse, and predict its error exactly.
#[derive(Debug, Parser)]
#[command(name = "pulseplan", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
    /// Print no report on stdout (warnings still go to stderr).
    #[arg(long, short, global = true)]
    pub quiet: bool,
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
        /// Also write the report bundle (figures, report.html, response.csv, plan.json) to
        /// out/<scenario name>/.
        #[arg(long)]
        report: bool,
        /// Folder for the report bundle instead of out/<scenario name>/ (implies --report).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Monte Carlo samples over the parts' tolerances (overrides [plan] samples).
        #[arg(long, value_name = "N")]
        samples: Option<usize>,
        /// Seed of the Monte Carlo draw (overrides [plan] seed).
        #[arg(long, value_name = "S")]
        seed: Option<u64>,
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
    Ok(outcome(warned))
}

fn outcome(warned: bool) -> Outcome {
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

/// Colour the warning codes, cautions and section headings of a text report.
fn colour_report(text: &str, warnings: &[crate::plan::Warning]) -> String {
    let mut out = String::with_capacity(text.len() + 256);
    for line in text.split_inclusive('\n') {
        let mut l = line.to_string();
        if !line.starts_with(' ') && !line.trim().is_empty() && !line.starts_with("pulseplan ") {
            let body = l.trim_end_matches('\n').to_string();
            l = format!("{}\n", paint(HEAD_STYLE, &body));
        } else {
            for w in warnings {
                let tag = format!("[{}]", w.code);
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
fn warn_stderr(warnings: &[crate::plan::Warning]) {
    let colour = colour_on(std::io::stderr().is_terminal());
    for w in warnings {
        let tag = format!("[{}]", w.code);
        let (tag, msg) = if colour {
            (
                paint(CODE_STYLE, &tag),
                w.message
                    .replace("CAUTION:", &paint(CAUTION_STYLE, "CAUTION:")),
            )
        } else {
            (tag, w.message.clone())
        };
        eprintln!("warning {tag}: {msg}");
    }
}

/// Print a report (or, when quiet, only its warnings on stderr).
fn report_out(
    text: String,
    json: bool,
    quiet: bool,
    warnings: &[crate::plan::Warning],
) -> Result<Outcome> {
    if quiet {
        warn_stderr(warnings);
        return Ok(outcome(!warnings.is_empty()));
    }
    let text = if !json && colour_on(std::io::stdout().is_terminal()) {
        colour_report(&text, warnings)
    } else {
        text
    };
    emit(text, !warnings.is_empty())
}

/// A progress bar on stderr that shows itself only on a terminal, and only once the work has
/// taken more than half a second.
struct Progress {
    bar: indicatif::ProgressBar,
    started: std::time::Instant,
    shown: bool,
    terminal: bool,
}

impl Progress {
    fn new(message: &'static str) -> Progress {
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

    fn update(&mut self, done: usize, total: usize) {
        if !self.shown && self.terminal && self.started.elapsed().as_millis() > 500 {
            self.bar
                .set_draw_target(indicatif::ProgressDrawTarget::stderr());
            self.shown = true;
        }
        self.bar.set_length(total as u64);
        self.bar.set_position(done as u64);
    }

    fn spinner(message: &'static str) -> indicatif::ProgressBar {
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

/// The commented starter scenario written by `pulseplan new NAME`.
pub fn starter_scenario(name: &str) -> String {
    let file = format!("{name}.toml");
    let title = serde_json::to_string(name).unwrap_or_else(|_| "\"starter\"".into());
    STARTER.replace("{FILE}", &file).replace("{TITLE}", &title)
}

const STARTER: &str = r#"# A pulseplan scenario. Edit the values, then run
#   pulseplan plan {FILE}             (add --report for figures and an HTML page)
# Quantities are plain SI numbers or quoted strings with a prefix and unit:
# "4.7 nF", "50 us", "10k", "1 %". The example network below is only a placeholder.
title = {TITLE}

[network]
# Give exactly ONE of the four forms.
# Form 1 (active): H(s) = gain·Π(s − z)/Π(s − p), in rad/s; complex values as "re+imj",
# conjugate pairs complete.
poles = ["-2k", "-15k+40kj", "-15k-40kj"]
zeros = ["-500", "-8k"]
gain  = "30k"
# Form 2: H(s) as polynomials in s, descending powers, SI units.
# numerator   = [1.0, 500.0]
# denominator = [1.0, 2000.0]
# Form 3: only time constants known (residues unknown; errors are given per mode).
# time_constants = ["5 ms", "80 us"]
# Form 4: a circuit. input/output are node names; ground is "0" or "gnd".
# input  = "in"
# output = "out"             # or ["a", "b"], or { current_through = "R1" }
# parts = [
#   { name = "R1", kind = "resistor",  nodes = ["in", "out"], value = "10k", tolerance = "1 %" },
#   { name = "C1", kind = "capacitor", nodes = ["out", "gnd"], value = "10n", tolerance = "5 %" },
# ]

[drive]
kind = "voltage"          # or "current" (the area is then in A·s)
area = "10 uV·s"          # pulse area; the reading is divided by it

[plan]
target_error = "0.5 %"    # error budget; remove it to get the rule of thumb only
metric = "t0-aligned"     # "t0", "t0-aligned" or "window"
# width_ratio = 100       # rule of thumb: width = fastest time scale / width_ratio
# edge_ratio = 100        # 50 % width / 10–90 % edge
# settle_multiple = 5     # run ≥ settle_multiple × slowest time constant
# min_width_ratio = 10    # never plan wider than fastest time scale / min_width_ratio

# [pulse]                 # a pulse you already have, for `pulseplan assess`
# amplitude = "5 V"
# width = "20 us"         # 50 % duration
# rise = "200 ns"         # 10–90 % transition durations
# fall = "200 ns"
# convention = "generator"  # or "ramp": width is the flat top, rise/fall the full ramps
# run = "10 ms"           # your record length

# The bench (all optional; without them the plan is for an unconstrained simulator).
# [generator]
# max_amplitude = "10 V"
# min_width = "20 ns"
# min_edge = "8 ns"
# time_step = "1 ns"
# output_resistance = "50"
# load_setting = "high-z"   # or "50"
# [capture]
# noise = "0.5 mV"          # rms at the output, one acquisition
# max_sample_rate = "2.5 GHz"
# max_points = 20_000_000
# max_averages = 1024
# [limits]
# max_input = "5 V"
# max_output = "4 V"
"#;

fn new_scenario(name: &str) -> Result<Outcome> {
    let stem = name.strip_suffix(".toml").unwrap_or(name);
    if stem.is_empty() || stem.contains(['/', '\\']) {
        bail!(InputError(format!(
            "new: \"{name}\" is not a plain scenario name (no folders; the file is NAME.toml)"
        )));
    }
    let path = PathBuf::from(format!("{stem}.toml"));
    let text = starter_scenario(stem);
    let mut f = match std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&path)
    {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            bail!(InputError(format!(
                "{} already exists: not overwriting it (choose another name or remove the file)",
                path.display()
            )))
        }
        Err(e) => {
            return Err(anyhow::Error::new(e).context(format!("cannot write {}", path.display())));
        }
    };
    use std::io::Write;
    f.write_all(text.as_bytes())
        .and_then(|()| f.sync_all())
        .with_context(|| format!("cannot write {}", path.display()))?;
    eprintln!("wrote {}", path.display());
    Ok(Outcome::Clean)
}

/// Run a parsed command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    let quiet = cli.quiet;
    match cli.command {
        Command::Plan {
            file,
            common,
            report: want_report,
            out: out_dir,
            samples,
            seed,
        } => {
            let mut sc = load(&file)?;
            if let Some(n) = samples {
                if n == 0 {
                    bail!(InputError("--samples must be at least 1".into()));
                }
                sc.plan.samples = Some(n);
            }
            if let Some(s) = seed {
                sc.plan.seed = s;
            }
            let times = parse_times(&common.at)?;
            let bar = std::sync::Mutex::new(Progress::new("tolerances"));
            let out = crate::plan::plan_with_progress(&sc, &|d, t| {
                if let Ok(mut b) = bar.lock() {
                    b.update(d, t);
                }
            });
            drop(bar);
            if want_report || out_dir.is_some() {
                let dir = out_dir.unwrap_or_else(|| Path::new("out").join(&sc.name));
                let mut bar = Progress::new("design curve");
                let mut tick = |d: usize, t: usize| bar.update(d, t);
                let opts = report::BundleOptions {
                    progress: Some(&mut tick),
                    ..Default::default()
                };
                let written =
                    report::write_bundle_with(&dir, &sc, &out, opts).with_context(|| {
                        format!("cannot write the report bundle in {}", dir.display())
                    })?;
                drop(bar);
                if !quiet {
                    eprintln!(
                        "wrote {} files to {} (open {})",
                        written.len(),
                        dir.display(),
                        dir.join("report.html").display()
                    );
                }
            }
            let cs = report::cursors(&sc.network, &out.pulse, &times);
            let text = if common.json {
                serde_json::to_string_pretty(&report::plan_json(&sc, &out, &cs))? + "\n"
            } else {
                report::plan_text(&sc, &out, &cs)
            };
            report_out(text, common.json, quiet, &out.warnings)
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
            report_out(text, common.json, quiet, &out.warnings)
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
            if points > crate::response::MAX_GRID_POINTS {
                bail!(InputError(format!(
                    "--points {points} is above the maximum of {} (the table holds six numbers a point)",
                    crate::response::MAX_GRID_POINTS
                )));
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
            let spin = if points > 200_000 {
                Progress::spinner("computing the response grid")
            } else {
                indicatif::ProgressBar::hidden()
            };
            let rows = report::response_rows(&sc.network, &pulse, run, points);
            report::write_response_csv(&csv, &rows)
                .with_context(|| format!("cannot write {}", csv.display()))?;
            spin.finish_and_clear();
            warn_stderr(&warnings);
            if quiet {
                return Ok(outcome(!warnings.is_empty()));
            }
            emit(
                format!("wrote {} rows to {}\n", rows.len(), csv.display()),
                !warnings.is_empty(),
            )
        }
        Command::New { name } => new_scenario(&name),
        Command::Completions { shell } => {
            let mut cmd = Cli::command();
            clap_complete::generate(shell, &mut cmd, "pulseplan", &mut std::io::stdout());
            Ok(Outcome::Clean)
        }
    }
}
