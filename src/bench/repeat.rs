//! Repetition: the error that the earlier pulses of a train add, and the period that keeps it
//! below a tenth of the budget.

use super::settings::Generator;
use crate::estimate::{Estimator, Metric};
use crate::notice::Warning;
use crate::pulse::Trapezoid;
use serde::Serialize;

/// Relative error the earlier pulses of a train with this period add: (at the reading t = end,
/// largest over [end, end + run]). `None` when a mode does not decay.
pub fn tail_error(est: &Estimator, pulse: &Trapezoid, period: f64, run: f64) -> Option<(f64, f64)> {
    let after = est.modal().drive(&pulse.breakpoints()).after_end();
    let tail = after.periodic_tail(period)?;
    let scale = 1.0 / (pulse.area() * est.normaliser());
    let end = pulse.end();
    let at_end = (tail.at(end) * scale).abs();
    let n = 2000;
    let span = run.max(end);
    let dt = span / (n - 1) as f64;
    let max = tail
        .uniform(end, dt, n)
        .iter()
        .map(|v| (v * scale).abs())
        .fold(at_end, f64::max);
    Some((at_end, max))
}

/// The outcome of choosing a repetition period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeriodChoice {
    /// Period, s (a multiple of the generator's time step when it has one).
    pub period: f64,
    /// Tail error it leaves for the chosen metric (relative).
    pub tail: f64,
    /// The tail target (a tenth of the budget).
    pub target: f64,
    /// Whether the target is met within the generator's longest period.
    pub met: bool,
}

/// Shortest period ≥ run whose tail error stays below a tenth of the budget, growing by 10 %
/// steps; capped by the generator's longest period. `None` when a mode does not decay.
pub fn choose_period(
    est: &Estimator,
    pulse: &Trapezoid,
    run: f64,
    budget: f64,
    metric: Metric,
    generator: Option<&Generator>,
) -> Option<PeriodChoice> {
    let target = budget / 10.0;
    let max_period = generator
        .and_then(|g| g.max_period)
        .unwrap_or(f64::INFINITY);
    let round_up = |t: f64| match generator.and_then(|g| g.time_step) {
        Some(step) if step > 0.0 => (t / step).ceil() * step,
        _ => t,
    };
    let pick = |tails: (f64, f64)| match metric {
        Metric::Window => tails.1,
        _ => tails.0,
    };
    let mut period = round_up(run.max(2.0 * pulse.end()));
    for _ in 0..400 {
        let tail = pick(tail_error(est, pulse, period, run)?);
        if tail <= target {
            return Some(PeriodChoice {
                period,
                tail,
                target,
                met: true,
            });
        }
        let next = round_up(period * 1.1);
        if next > max_period {
            let capped = if max_period.is_finite() {
                max_period
            } else {
                period
            };
            let tail = pick(tail_error(est, pulse, capped, run)?);
            return Some(PeriodChoice {
                period: capped,
                tail,
                target,
                met: tail <= target,
            });
        }
        period = next;
    }
    let tail = pick(tail_error(est, pulse, period, run)?);
    Some(PeriodChoice {
        period,
        tail,
        target,
        met: tail <= target,
    })
}

/// Warnings about the repetition: single shots only, or a period too short for the budget.
pub fn warnings(period: Option<&PeriodChoice>) -> Option<Warning> {
    match period {
        None => Some(Warning::SingleShotOnly),
        Some(p) if !p.met => Some(Warning::PeriodTooShort {
            period: p.period,
            tail: p.tail,
            target: p.target,
        }),
        _ => None,
    }
}
