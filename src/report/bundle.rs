//! The report bundle: a folder with the figures, the HTML report, the response CSV and the
//! plan JSON, every file written atomically.

use super::figures::{FigureOptions, plan_figures};
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

/// [`write_bundle`] with options.
pub fn write_bundle_with(
    dir: &Path,
    sc: &Scenario,
    out: &PlanOutcome,
    opts: BundleOptions<'_>,
) -> std::io::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)?;
    let mut noop = |_: usize, _: usize| {};
    let progress: &mut dyn FnMut(usize, usize) = match opts.progress {
        Some(p) => p,
        None => &mut noop,
    };
    // With output noise, the design figure also shows the noise and total curves.
    let noise_curves: Vec<super::figures::ExtraCurve> =
        match (&out.bench.noise.noise, opts.figures.extra_curves.is_empty()) {
            (Some(n), true) => vec![
                super::figures::ExtraCurve {
                    label: "noise, one acquisition".into(),
                    points: n
                        .widths
                        .iter()
                        .copied()
                        .zip(n.noise.iter().copied())
                        .collect(),
                },
                super::figures::ExtraCurve {
                    label: "bias + noise".into(),
                    points: n
                        .widths
                        .iter()
                        .copied()
                        .zip(n.total.iter().copied())
                        .collect(),
                },
            ],
            _ => Vec::new(),
        };
    let fig_opts = if noise_curves.is_empty() {
        opts.figures
    } else {
        super::figures::FigureOptions {
            extra_curves: &noise_curves,
            ..opts.figures
        }
    };
    let figures = plan_figures(sc, out, &fig_opts, progress)?;
    let mut written = Vec::new();
    for f in &figures {
        let path = dir.join(&f.file);
        super::csv_out::write_atomic(&path, f.svg.as_bytes())?;
        written.push(path);
    }
    let html = super::html::plan_html(sc, out, &figures);
    let path = dir.join("report.html");
    super::csv_out::write_atomic(&path, html.as_bytes())?;
    written.push(path);
    let rows =
        super::csv_out::response_rows(&sc.network, &out.pulse, out.prep.run, RESPONSE_POINTS);
    let path = dir.join("response.csv");
    super::csv_out::write_response_csv(&path, &rows)?;
    written.push(path);
    let json = serde_json::to_string_pretty(&super::json::plan_json(sc, out, &[]))
        .map_err(std::io::Error::other)?;
    let path = dir.join("plan.json");
    super::csv_out::write_atomic(&path, (json + "\n").as_bytes())?;
    written.push(path);
    let sheet = super::sheet::generator_sheet(sc, out);
    let path = dir.join("generator.txt");
    super::csv_out::write_atomic(&path, sheet.as_bytes())?;
    written.push(path);
    let unit = match sc.drive {
        crate::units::Signal::Voltage => "V",
        crate::units::Signal::Current => "A",
    };
    let path = dir.join("stimulus.csv");
    super::csv_out::write_atomic(
        &path,
        super::sheet::stimulus_csv(&out.bench, unit).as_bytes(),
    )?;
    written.push(path);
    Ok(written)
}
