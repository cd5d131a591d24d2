//! `pulseplan recover`: read captures back, recover h(t), compare with the scenario's model.
//! The command-line glue; the renderers (text, JSON, CSV) are in [`crate::report::recovery`].

use crate::measure::{self, ChannelRef, ReadOptions, RecoverSettings, Recovery};
use crate::report::recovery::{render, to_json, word, write_csv};
use crate::scenario::{self, Scenario};
use crate::units::{self, Dim};
use anyhow::{Context, Result, bail};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};

/// Arguments of `recover`.
#[derive(Debug, clap::Args)]
pub struct RecoverArgs {
    /// Capture file(s): CSV, semicolon or tab separated text from a scope or simulator.
    #[arg(required = true, num_args = 1..)]
    pub captures: Vec<PathBuf>,
    /// Scenario file (TOML) describing the circuit and the pulse.
    #[arg(long, value_name = "FILE")]
    pub scenario: PathBuf,
    /// Output channel: header name or number (1 = first column after time/index).
    #[arg(long, value_name = "NAME|N")]
    pub channel: Option<String>,
    /// Channel that recorded the pulse itself (its 50 % crossing sets time zero).
    #[arg(long, value_name = "NAME|N")]
    pub stimulus: Option<String>,
    /// Sample interval for an index column, e.g. 10ns (overrides the file's metadata).
    #[arg(long, value_name = "TIME")]
    pub interval: Option<String>,
    /// Capture time at which the pulse starts, e.g. 1.5us (unless a stimulus channel says).
    #[arg(long, value_name = "TIME")]
    pub t0: Option<String>,
    /// Number of modes to fit (a conjugate pair counts as two), instead of choosing.
    #[arg(long, value_name = "N")]
    pub order: Option<usize>,
    /// Print JSON (one object; an array for several captures).
    #[arg(long)]
    pub json: bool,
    /// Write the recovered h(t) with its 95 % band on the capture's grid (one capture only).
    #[arg(long, value_name = "PATH")]
    pub csv: Option<PathBuf>,
}

/// Bad input: the message is complete (exit code 2).
fn input_error(msg: String) -> anyhow::Error {
    super::output::InputError(msg).into()
}

/// The recovery's settings from a scenario. The one place that asks the planner: the pulse
/// applied is the scenario's `[pulse]`, else the planned pulse; the run and the planned
/// pre-trigger come from the same plan.
pub fn settings_from_scenario(sc: &Scenario) -> RecoverSettings {
    let (pulse, given, run, pre) = match &sc.pulse {
        Some(g) => {
            let out = crate::pipeline::assess(sc, &g.pulse, g.run);
            (g.pulse, true, out.run, out.bench.capture.pre_trigger)
        }
        None => {
            let out = crate::pipeline::plan(sc);
            (
                out.pulse,
                false,
                out.prep.run,
                out.bench.capture.pre_trigger,
            )
        }
    };
    let netlist = match &sc.network_spec {
        crate::network::NetworkSpec::Netlist(n) => Some(n.clone()),
        _ => None,
    };
    RecoverSettings {
        pulse_given: given,
        model: Some(sc.network.clone()),
        netlist,
        pre_trigger: Some(pre),
        run: Some(run),
        ..RecoverSettings::new(pulse)
    }
}

fn time_arg(flag: &str, v: &Option<String>) -> Result<Option<f64>> {
    v.as_ref()
        .map(|t| {
            units::parse_quantity(t, Dim::Time).map_err(|e| input_error(format!("{flag} {t}: {e}")))
        })
        .transpose()
}

/// Run `recover`.
pub fn run(args: &RecoverArgs, quiet: bool) -> Result<super::output::Outcome> {
    let sc = scenario::load(&args.scenario).map_err(|e| input_error(e.to_string()))?;
    if args.csv.is_some() && args.captures.len() > 1 {
        bail!(input_error("--csv takes one capture".into()));
    }
    let interval = time_arg("--interval", &args.interval)?;
    if interval.is_some_and(|i| i <= 0.0) {
        bail!(input_error("--interval must be positive".into()));
    }
    let mut settings = settings_from_scenario(&sc);
    settings.t0 = time_arg("--t0", &args.t0)?;
    settings.order = args.order;
    let opts = ReadOptions {
        channel: args.channel.as_deref().map(ChannelRef::parse),
        stimulus: args.stimulus.as_deref().map(ChannelRef::parse),
        interval,
    };
    let mut warned = false;
    let mut json = Vec::new();
    let mut text = String::new();
    for path in &args.captures {
        let (cap, rec) = recover_one(path, &opts, &settings)?;
        warned |= !rec.warnings.is_empty();
        if let Some(csv) = &args.csv {
            write_csv(csv, &cap, &rec)
                .with_context(|| format!("cannot write {}", csv.display()))?;
        }
        if args.json {
            json.push(to_json(&rec, &sc));
        } else {
            text.push_str(&render(&rec, &sc));
        }
        if quiet {
            for w in &rec.warnings {
                eprintln!("warning [{}]: {}", w.code(), word(w, &sc));
            }
        }
    }
    if !quiet {
        let out = if args.json {
            let v = if json.len() == 1 {
                json.remove(0)
            } else {
                serde_json::Value::Array(json)
            };
            serde_json::to_string_pretty(&v)? + "\n"
        } else {
            text
        };
        use std::io::Write;
        let mut o = std::io::stdout().lock();
        o.write_all(out.as_bytes())?;
        o.flush()?;
    }
    Ok(if warned {
        super::output::Outcome::Warned
    } else {
        super::output::Outcome::Clean
    })
}

fn recover_one(
    path: &Path,
    opts: &ReadOptions,
    s: &RecoverSettings,
) -> Result<(measure::Capture, Recovery)> {
    let spin = spinner(path);
    let cap = measure::read(path, opts).map_err(|e| input_error(e.to_string()))?;
    let rec = measure::recover(&cap, s).map_err(|e| match e {
        measure::RecoverError::Capture(c) => input_error(c.to_string()),
        measure::RecoverError::Settings(m) => input_error(format!("{}: {m}", path.display())),
        other => anyhow::Error::new(other).context(format!("{}", path.display())),
    })?;
    spin.finish_and_clear();
    Ok((cap, rec))
}

/// A spinner on stderr for large captures on a terminal (hidden otherwise).
fn spinner(path: &Path) -> indicatif::ProgressBar {
    let big = std::fs::metadata(path).is_ok_and(|m| m.len() > 20 << 20);
    if !big || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let s = indicatif::ProgressBar::new_spinner();
    s.set_message(format!("reading and fitting {}", path.display()));
    s.enable_steady_tick(std::time::Duration::from_millis(120));
    s
}
