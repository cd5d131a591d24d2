//! Timing: width and edges within the generator's range, rounded to its resolution, and what
//! that does to the error.

use super::settings::Generator;
use crate::estimate::{ErrorEstimate, Estimator};
use crate::notice::{Note, Warning};
use crate::plan::PlanSettings;
use crate::pulse::{Convention, TEN_NINETY, Trapezoid};
use serde::Serialize;

/// The pulse after the generator's timing limits.
#[derive(Debug, Clone, PartialEq)]
pub struct TimingFit {
    /// The pulse (same area).
    pub pulse: Trapezoid,
    /// What changed, when anything did.
    pub note: Option<Note>,
}

/// The metric before and after the bench changed the pulse's timing.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TimingChange {
    /// Metric of the planned pulse (fraction).
    pub before: f64,
    /// Metric of the delivered pulse (fraction).
    pub after: f64,
}

/// Width and edges within the generator's limits, rounded to its resolution; the area is kept.
pub fn fit(planned: &Trapezoid, gen_: &Generator) -> TimingFit {
    let width0 = planned.width_50();
    let edge0 = planned.rise_10_90().max(planned.fall_10_90());
    let lo_edge = gen_.min_edge.unwrap_or(0.0);
    let hi_edge = gen_.max_edge.unwrap_or(f64::INFINITY);
    // Rounding to the resolution never widens the pulse nor slows its edges beyond the plan
    // (the budget search returned the widest width meeting the budget); only the generator's
    // shortest width and fastest edge can.
    let edge_want = edge0.clamp(lo_edge, hi_edge);
    let edge = gen_.fit_time(edge_want, lo_edge, edge_want);
    // A trapezoid needs width ≥ full ramp (no negative flat top).
    let lo_width = gen_.min_width.unwrap_or(0.0).max(edge / TEN_NINETY);
    let width_want = width0.max(lo_width);
    let width = gen_.fit_time(width_want, lo_width, width_want);
    let note = (width != width0 || edge != edge0).then_some(Note::TimingFitted {
        width_from: width0,
        width_to: width,
        edge_from: edge0,
        edge_to: edge,
        time_step: gen_.time_step,
    });
    let amplitude = planned.area() / width;
    let pulse = Trapezoid::from_convention(amplitude, width, edge, edge, Convention::Generator)
        .unwrap_or(*planned);
    TimingFit { pulse, note }
}

/// The metric before and after, when the delivered pulse's timing differs from the plan's.
pub fn change(
    est: &Estimator,
    s: &PlanSettings,
    planned: &Trapezoid,
    delivered: &Trapezoid,
    estimate: &ErrorEstimate,
    run: f64,
) -> Option<TimingChange> {
    let changed = delivered.width_50() != planned.width_50()
        || delivered.rise != planned.rise
        || delivered.fall != planned.fall;
    changed.then(|| TimingChange {
        before: est.metric(planned, s.metric, run),
        after: estimate.metric(s.metric),
    })
}

/// A warning when the timing limits push the error beyond the budget.
pub fn too_slow(s: &PlanSettings, change: Option<TimingChange>) -> Option<Warning> {
    let (c, budget) = (change?, s.target_error?);
    (c.after > budget).then_some(Warning::GeneratorTooSlow {
        metric: s.metric.name(),
        before: c.before,
        after: c.after,
        budget,
    })
}
