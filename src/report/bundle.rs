//! The report bundle: a folder with the figures, the HTML report, the response CSV and the
//! plan JSON, every file written atomically.

use super::figures::{ExtraCurve, FigureOptions, plan_figures};
use super::files::AtomicDir;
use crate::pipeline::PlanOutcome;
use crate::scenario::Scenario;
use std::path::{Path, PathBuf};

/// Uniform points in the bundle's response.csv (breakpoints are added).
pub const RESPONSE_POINTS: usize = 2001;

/// Choices for [`write_bundle_with`].
#[derive(Default)]
pub struct BundleOptions<'a> {
    /// Figure choices (design-curve extras, significant modes).
    pub figures: FigureOptions<'a>,
    /// Called as `(done, total)` while the design curve is swept.
    pub progress: Option<&'a mut dyn FnMut(usize, usize)>,
}

/// Write the bundle for a plan into `dir` (created if needed): stimulus.svg, response.svg,
/// error.svg, design.svg, poles.svg, report.html, response.csv, plan.json, generator.txt and
/// stimulus.csv. Returns the paths written, in that order.
pub fn write_bundle(dir: &Path, sc: &Scenario, out: &PlanOutcome) -> std::io::Result<Vec<PathBuf>> {
    write_bundle_with(dir, sc, out, BundleOptions::default())
}

/// The noise and total curves the design figure shows beside the bias, with output noise.
fn noise_curves(out: &PlanOutcome) -> Vec<ExtraCurve> {
    let Some(n) = &out.bench.noise.noise else {
        return Vec::new();
    };
    let pair = |ys: &[f64]| n.widths.iter().copied().zip(ys.iter().copied()).collect();
    vec![
        ExtraCurve {
            label: "noise, one acquisition".into(),
            points: pair(&n.noise),
        },
        ExtraCurve {
            label: "bias + noise".into(),
            points: pair(&n.total),
        },
    ]
}

/// [`write_bundle`] with options. The folder is written whole or not at all: every file goes
/// into a temporary sibling folder that replaces `dir` in one rename at the end.
pub fn write_bundle_with(
    dir: &Path,
    sc: &Scenario,
    out: &PlanOutcome,
    opts: BundleOptions<'_>,
) -> std::io::Result<Vec<PathBuf>> {
    let mut noop = |_: usize, _: usize| {};
    let progress: &mut dyn FnMut(usize, usize) = match opts.progress {
        Some(p) => p,
        None => &mut noop,
    };
    let extra = noise_curves(out);
    let fig_opts = if extra.is_empty() || !opts.figures.extra_curves.is_empty() {
        opts.figures
    } else {
        FigureOptions {
            extra_curves: &extra,
            ..opts.figures
        }
    };
    let figures = plan_figures(sc, out, &fig_opts, progress)?;
    let bundle = AtomicDir::new(dir)?;
    let mut written = Vec::new();
    for f in &figures {
        written.push(bundle.write(&f.file, f.svg.as_bytes())?);
    }
    let html = super::html::plan_html(sc, out, &figures);
    written.push(bundle.write("report.html", html.as_bytes())?);
    let logs = super::csv_out::log_times(
        &sc.network,
        &out.pulse,
        out.prep.run,
        super::csv_out::LOG_POINTS.min(RESPONSE_POINTS),
    );
    let rows = super::csv_out::response_rows(
        &sc.network,
        &out.pulse,
        out.prep.run,
        RESPONSE_POINTS,
        &logs,
    );
    super::csv_out::write_response_csv(&bundle.path("response.csv"), &rows)?;
    written.push(bundle.final_path("response.csv"));
    let json = serde_json::to_string_pretty(&super::json::plan_json(sc, out, &[]))
        .map_err(std::io::Error::other)?;
    written.push(bundle.write("plan.json", (json + "\n").as_bytes())?);
    let sheet = super::sheet::generator_sheet(sc, out);
    written.push(bundle.write("generator.txt", sheet.as_bytes())?);
    let stimulus = super::sheet::stimulus_csv(&out.bench, sc.drive.symbol());
    written.push(bundle.write("stimulus.csv", stimulus.as_bytes())?);
    bundle.commit()?;
    Ok(written)
}

/// Write the bundle for an assessment into `dir`, whole or not at all: stimulus.svg,
/// response.svg, error.svg, poles.svg, report.html, response.csv (the given pulse) and
/// assess.json. Returns the paths written.
pub fn write_assess_bundle(
    dir: &Path,
    sc: &Scenario,
    out: &crate::pipeline::AssessOutcome,
) -> std::io::Result<Vec<PathBuf>> {
    let figures = super::figures::assess_figures(sc, out)?;
    let bundle = AtomicDir::new(dir)?;
    let mut written = Vec::new();
    for f in &figures {
        written.push(bundle.write(&f.file, f.svg.as_bytes())?);
    }
    let html = super::html::assess_html(sc, out, &figures);
    written.push(bundle.write("report.html", html.as_bytes())?);
    let logs = super::csv_out::log_times(
        &sc.network,
        &out.pulse,
        out.run,
        super::csv_out::LOG_POINTS.min(RESPONSE_POINTS),
    );
    let rows =
        super::csv_out::response_rows(&sc.network, &out.pulse, out.run, RESPONSE_POINTS, &logs);
    super::csv_out::write_response_csv(&bundle.path("response.csv"), &rows)?;
    written.push(bundle.final_path("response.csv"));
    let json = serde_json::to_string_pretty(&super::json::assess_json(sc, out, &[]))
        .map_err(std::io::Error::other)?;
    written.push(bundle.write("assess.json", (json + "\n").as_bytes())?);
    bundle.commit()?;
    Ok(written)
}
