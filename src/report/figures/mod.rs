//! Figures as SVG text: the stimulus, the ideal and predicted responses, the error after the
//! pulse, the design curve (error against pulse width) and the pole map.
//!
//! Drawn with plotters' SVG backend only (text stays SVG `<text>`: no font files are read).
//! Every figure carries a `<metadata id="pulseplan-figure">` block that states, per panel, the
//! pixel positions of the axis ends and the scales, and per series its stroke colour, so tests
//! (and anyone re-reading a figure) can map drawn points back to data.
//!
//! House style (our own): light background, series told apart by lightness, width and dash so
//! the figures read in greyscale; legends sit in their own strip above the panels and never
//! cover data.

pub mod axis;
pub mod canvas;
mod design;
mod error;
mod place;
mod poles;
mod readings;
mod response;
mod stimulus;

pub use axis::{Axis, Scale};
pub use design::{DesignCurve, ExtraCurve, design_curve, design_svg};
pub use error::error_svg;
pub use poles::poles_svg;
pub use readings::readings_svg;
pub use response::response_svg;
pub use stimulus::stimulus_svg;

pub use canvas::{WIDTH, decimate, hex};

use std::io;

/// One finished figure: its file name, a caption for the report, and the SVG text.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// File name, e.g. `response.svg`.
    pub file: String,
    /// One-sentence caption.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}

/// Choices for the figure set; the defaults suit every shipped scenario.
#[derive(Debug, Clone, Copy, Default)]
pub struct FigureOptions<'a> {
    /// Widths swept for the design curve (0: 160, or 64 above order 20).
    pub design_points: usize,
    /// Further curves for the design figure (noise, total…).
    pub extra_curves: &'a [ExtraCurve],
    /// Per-mode significance flags for the pole map (`None`: the planner's own).
    pub significant: Option<&'a [bool]>,
}

/// All five figures for a plan, in report order. `progress(done, total)` follows the
/// design-curve sweep, the only part that may take a while.
pub fn plan_figures(
    sc: &crate::scenario::Scenario,
    out: &crate::pipeline::PlanOutcome,
    opts: &FigureOptions<'_>,
    progress: &mut dyn FnMut(usize, usize),
) -> io::Result<Vec<Figure>> {
    let run = out.prep.run;
    let n = if opts.design_points == 0 {
        // Each width costs a full estimate; big networks get a coarser (still smooth) sweep.
        if sc.network.order() <= 20 { 160 } else { 64 }
    } else {
        opts.design_points
    };
    let dc = design_curve(sc, out, n, progress);
    let mut figs = vec![
        Figure {
            file: "stimulus.svg".into(),
            caption: "The recommended pulse with its amplitude, 50 % width, centroid and \
                      10–90 % edges; the edges are enlarged below."
                .into(),
            svg: stimulus_svg(&out.pulse, sc.drive)?,
        },
        Figure {
            file: "response.svg".into(),
            caption: "Ideal impulse response h(t) and the predicted response to the pulse, \
                      divided by its area, over the run and in a zoom on the fastest time scales."
                .into(),
            svg: response_svg(sc, &out.prep, &out.pulse, run)?,
        },
        Figure {
            file: "error.svg".into(),
            caption: "Error after the pulse, raw and allowing for the pulse's delay (its \
                      centroid), relative to the normaliser, on a logarithmic time axis."
                .into(),
            svg: error_svg(sc, &out.prep, &out.pulse, run)?,
        },
        Figure {
            file: "design.svg".into(),
            caption: "How the budgeted error grows with the pulse width (edges tied to the \
                      width), with the budget, the rule-of-thumb width and the planned width."
                .into(),
            svg: design_svg(&dc, opts.extra_curves)?,
        },
        Figure {
            file: "poles.svg".into(),
            caption: "Poles and zeros of the network function, each mode labelled with its \
                      time scales."
                .into(),
            svg: poles_svg(
                &sc.network,
                opts.significant.or(Some(out.prep.significant.as_slice())),
            )?,
        },
    ];
    if let Some(fp) = &out.fit {
        figs.push(Figure {
            file: "readings.svg".into(),
            caption: "The three readings against pulse width at the fit plan's test time: raw and aligned \
                      (bias + 95 % noise) and the modal fit (its 95 % Cramér–Rao interval), with the budget \
                      and the three plans' widths."
                .into(),
            svg: readings_svg(fp)?,
        });
    }
    Ok(figs)
}

/// The figures for `assess`: the given pulse, the responses, the error after it and the pole
/// map (no design curve: nothing was planned).
pub fn assess_figures(
    sc: &crate::scenario::Scenario,
    out: &crate::pipeline::AssessOutcome,
) -> io::Result<Vec<Figure>> {
    let (prep, pulse, run) = (&out.prep, &out.pulse, out.run);
    Ok(vec![
        Figure {
            file: "stimulus.svg".into(),
            caption: "The pulse assessed ([pulse]) with its amplitude, 50 % width, centroid and \
                      10–90 % edges; the edges are enlarged below."
                .into(),
            svg: stimulus_svg(pulse, sc.drive)?,
        },
        Figure {
            file: "response.svg".into(),
            caption: "Ideal impulse response h(t) and the predicted response to the pulse, \
                      divided by its area."
                .into(),
            svg: response_svg(sc, prep, pulse, run)?,
        },
        Figure {
            file: "error.svg".into(),
            caption: "Error after the pulse, raw and allowing for the pulse's delay (its \
                      centroid), relative to the normaliser, on a logarithmic time axis."
                .into(),
            svg: error_svg(sc, prep, pulse, run)?,
        },
        Figure {
            file: "poles.svg".into(),
            caption: "Poles and zeros of the network function, each mode labelled with its \
                      time scales."
                .into(),
            svg: poles_svg(&sc.network, Some(prep.significant.as_slice()))?,
        },
    ])
}
