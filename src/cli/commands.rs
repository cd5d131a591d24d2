//! The commands: each reads its scenario, runs the pipeline and prints through `output`.

use super::args::{Common, PlanArgs};
use super::output::{
    InputError, Outcome, Progress, Worded, emit, outcome, report_out, warn_stderr,
};
use crate::report;
use crate::scenario::{self, Scenario};
use crate::units::{self, Dim};
use anyhow::{Context, Result, bail};
use std::path::Path;

fn load(file: &Path) -> Result<Scenario> {
    scenario::load(file).map_err(|e| InputError(e.to_string()).into())
}

/// A figure that came out NaN or infinite is refused rather than printed (JSON would show it
/// as `null`): the scenario lies outside what the tool computes in f64.
fn outside_f64(sc: &Scenario, path: Option<String>) -> Result<()> {
    match path {
        None => Ok(()),
        Some(p) => bail!(InputError(format!(
            "{}: network: the figures of this scenario are outside what pulseplan computes in \
             f64 ({p} came out non-finite); bring the values nearer to each other (see the \
             domain in DEVELOPERS.md)",
            sc.file
        ))),
    }
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

/// `--samples` / `--seed` into the scenario's plan settings.
fn monte_carlo(sc: &mut Scenario, samples: Option<usize>, seed: Option<u64>) -> Result<()> {
    if let Some(n) = samples {
        if n == 0 || n as f64 > scenario::MAX_SAMPLES {
            bail!(InputError(format!(
                "--samples {n}: give between 1 and {:e} Monte Carlo samples",
                scenario::MAX_SAMPLES
            )));
        }
        sc.plan.samples = Some(n);
    }
    if let Some(s) = seed {
        if sc.plan.samples.is_none() {
            bail!(InputError(
                "--seed sets the Monte Carlo draw, which needs --samples N (or [plan] samples): \
                 without it the tolerances are analysed at their corners and no seed is used"
                    .into()
            ));
        }
        sc.plan.seed = s;
    }
    Ok(())
}

/// `pulseplan plan`.
pub(crate) fn plan(a: PlanArgs, quiet: bool) -> Result<Outcome> {
    let mut sc = load(&a.file)?;
    monte_carlo(&mut sc, a.samples, a.seed)?;
    let times = parse_times(&a.common.at)?;
    let bar = std::sync::Mutex::new(Progress::new("tolerances"));
    let out = crate::pipeline::plan_with_progress(&sc, &|d, t| {
        if let Ok(mut b) = bar.lock() {
            b.update(d, t);
        }
    });
    drop(bar);
    let cs = out.prep.estimator.cursors(&out.pulse, &times);
    outside_f64(&sc, report::plan_non_finite(&sc, &out, &cs))?;
    if a.report || a.out.is_some() {
        let dir = a.out.unwrap_or_else(|| Path::new("out").join(&sc.name));
        write_bundle(&dir, &sc, &out, quiet)?;
    }
    let text = if a.common.json {
        serde_json::to_string_pretty(&report::plan_json(&sc, &out, &cs))? + "\n"
    } else {
        report::plan_text(&sc, &out, &cs)
    };
    let worded = Worded::new(&sc, &out.warnings, &out.prep.run_basis);
    report_out(text, a.common.json, quiet, &worded)
}

fn write_bundle(
    dir: &Path,
    sc: &Scenario,
    out: &crate::pipeline::PlanOutcome,
    quiet: bool,
) -> Result<()> {
    let mut bar = Progress::new("design curve");
    let mut tick = |d: usize, t: usize| bar.update(d, t);
    let opts = report::BundleOptions {
        progress: Some(&mut tick),
        ..Default::default()
    };
    let written = report::write_bundle_with(dir, sc, out, opts)
        .with_context(|| format!("cannot write the report bundle in {}", dir.display()))?;
    drop(bar);
    say_written(dir, written.len(), quiet);
    Ok(())
}

/// The line that says where a bundle went.
fn say_written(dir: &Path, files: usize, quiet: bool) {
    if !quiet {
        eprintln!(
            "wrote {files} files to {} (open {})",
            dir.display(),
            dir.join("report.html").display()
        );
    }
}

/// `pulseplan assess`; `bundle` is Some when a report bundle is asked for (with its folder,
/// when given).
pub(crate) fn assess(
    file: &Path,
    common: &Common,
    bundle: Option<Option<std::path::PathBuf>>,
    quiet: bool,
) -> Result<Outcome> {
    let sc = load(file)?;
    let times = parse_times(&common.at)?;
    let Some(given) = sc.pulse.clone() else {
        bail!(InputError(format!(
            "{}: `assess` needs a [pulse] section (amplitude, width, rise, fall)",
            sc.file
        )));
    };
    let out = crate::pipeline::assess(&sc, &given.pulse, given.run);
    let cs = out.prep.estimator.cursors(&out.pulse, &times);
    outside_f64(&sc, report::assess_non_finite(&sc, &out, &cs))?;
    if let Some(dir) = bundle {
        let dir = dir.unwrap_or_else(|| Path::new("out").join(format!("{}-assess", sc.name)));
        let written = report::write_assess_bundle(&dir, &sc, &out)
            .with_context(|| format!("cannot write the report bundle in {}", dir.display()))?;
        say_written(&dir, written.len(), quiet);
    }
    let text = if common.json {
        serde_json::to_string_pretty(&report::assess_json(&sc, &out, &cs))? + "\n"
    } else {
        report::assess_text(&sc, &out, &cs)
    };
    let worded = Worded::new(&sc, &out.warnings, &out.prep.run_basis);
    report_out(text, common.json, quiet, &worded)
}

/// `pulseplan response`.
pub(crate) fn response(
    file: &Path,
    csv: &Path,
    (points, grid): (usize, super::args::Grid),
    given: bool,
    quiet: bool,
) -> Result<Outcome> {
    let mut sc = load(file)?;
    if points < 2 {
        bail!(InputError("--points must be at least 2".into()));
    }
    if points > crate::response::MAX_GRID_POINTS {
        bail!(InputError(format!(
            "--points {points} is above the maximum of {} (the table holds six numbers a point)",
            crate::response::MAX_GRID_POINTS
        )));
    }
    // The response table needs no tolerance analysis (it is of the nominal network).
    sc.plan.tolerances = false;
    if given && sc.pulse.is_none() {
        bail!(InputError(format!(
            "{}: --given needs a [pulse] section (amplitude, width, rise, fall)",
            sc.file
        )));
    }
    let (pulse, run, warnings) = match (&sc.pulse, given) {
        (Some(g), true) => {
            let out = crate::pipeline::assess(&sc, &g.pulse, g.run);
            let w = Worded::new(&sc, &out.warnings, &out.prep.run_basis);
            (out.pulse, out.run, w)
        }
        _ => {
            let out = crate::pipeline::plan(&sc);
            let w = Worded::new(&sc, &out.warnings, &out.prep.run_basis);
            (out.pulse, out.prep.run, w)
        }
    };
    let spin = if points > 200_000 {
        Progress::spinner("computing the response grid")
    } else {
        indicatif::ProgressBar::hidden()
    };
    let logs = match grid {
        super::args::Grid::Dynamics => {
            report::log_times(&sc.network, &pulse, run, report::LOG_POINTS.min(points))
        }
        super::args::Grid::Uniform => Vec::new(),
    };
    let rows = report::response_rows(&sc.network, &pulse, run, points, &logs);
    report::write_response_csv(csv, &rows)
        .with_context(|| format!("cannot write {}", csv.display()))?;
    spin.finish_and_clear();
    warn_stderr(&warnings);
    if quiet {
        return Ok(outcome(warnings.act));
    }
    let which = if given {
        "the scenario's [pulse]"
    } else {
        "the planned pulse"
    };
    let mut msg = format!(
        "wrote {} rows to {} (response to {which}, {} wide)\n",
        rows.len(),
        csv.display(),
        units::eng(pulse.width_50(), Dim::Time)
    );
    if !sc.network.residues_known {
        msg.push_str(
            "note: only time constants are known, so the columns use unit residues (each mode e^(−t/τ), summed)\n",
        );
    }
    emit(msg, warnings.act)
}
