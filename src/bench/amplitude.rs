//! Amplitude and range: the generator's and the circuit's input limits, the circuit's linear
//! output range, the generator display's load setting, and the voltage caution.

use super::settings::{BenchInput, HAZARD_VOLTS};
use crate::notice::{AmplitudeLimit, LimitHit, Note, Warning};
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::response::Modal;
use crate::units::Signal;
use serde::Serialize;

/// Why the area was scaled.
pub type ScaleReason = LimitHit;

/// How the pulse's area was scaled to respect the limits.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Scaling {
    /// Area the plan asked for.
    pub requested_area: f64,
    /// Area delivered.
    pub area: f64,
    /// h(t) ≈ y(t) × this (1/area).
    pub read_factor: f64,
    /// The limits that changed it (empty when it did not).
    #[serde(rename = "limits")]
    pub reasons: Vec<ScaleReason>,
}

/// The amplitude step's figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AmplitudeFit {
    /// Amplitude to set on the generator's display (its load setting taken into account).
    pub display_amplitude: f64,
    /// Amplitude at the circuit / display amplitude.
    pub open_over_display: f64,
    /// Area scaling.
    pub scaling: Scaling,
    /// Predicted peak of the source's level: the pulse amplitude (the open-circuit level when
    /// the circuit is driven through a source resistance).
    pub peak_input: f64,
    /// Predicted peak |v| at the circuit's input terminals, when a source resistance lies
    /// between the source and the terminals (None otherwise: the terminals see `peak_input`).
    pub peak_terminal: Option<f64>,
    /// Predicted peak |y| at the output over the run (direct-term copy included).
    pub peak_output: f64,
    /// The output's value at that peak, with its sign.
    pub output_extreme: f64,
}

/// The amplitude step's result: the pulse, its figures, and what it raised.
#[derive(Debug, Clone, PartialEq)]
pub struct AmplitudeStep {
    /// The pulse with its amplitude fitted.
    pub pulse: Trapezoid,
    /// Figures.
    pub fit: AmplitudeFit,
    /// Warnings.
    pub warnings: Vec<Warning>,
    /// Notes.
    pub notes: Vec<Note>,
}

/// The output's largest excursion over [0, run] for a pulse, with its sign (direct term
/// included while the input is non-zero).
pub fn peak_output(prep: &Prepared, pulse: &Trapezoid, run: f64) -> f64 {
    extreme_of(prep.estimator.modal(), prep.tau_fast, pulse, run)
}

/// Peak |y(t)| of a modal realization's response over [0, run].
pub fn peak_of(modal: &Modal, tau_fast: f64, pulse: &Trapezoid, run: f64) -> f64 {
    extreme_of(modal, tau_fast, pulse, run).abs()
}

/// The value of largest magnitude of a modal realization's response over [0, run], signed: 201
/// points across the pulse, 4000 uniform and 401 geometric (from `tau_fast`/1000) after it.
pub fn extreme_of(modal: &Modal, tau_fast: f64, pulse: &Trapezoid, run: f64) -> f64 {
    let d = modal.drive(&pulse.breakpoints());
    let end = pulse.end();
    let inside = (0..=200).map(|k| d.at(end * k as f64 / 200.0));
    let span = (run - end).max(end);
    let n = 4000;
    let after = d.after_end();
    let uniform = after.uniform(end, span / (n - 1) as f64, n);
    let start = (tau_fast * 1e-3).min(span / 10.0);
    let ratio = (span / start).powf(1.0 / 400.0);
    let geometric = (0..=400).map(|k| after.at(end + start * ratio.powi(k)));
    inside
        .chain(uniform.iter().copied())
        .chain(geometric)
        .fold(
            0.0,
            |best: f64, v| if v.abs() > best.abs() { v } else { best },
        )
}

/// The amplitude limit that applies to the source's level: the smaller of the generator's and
/// the circuit input's (the latter referred back through the source resistance: the terminals
/// see `terminal_ratio` × the source level at their peak).
fn input_limit(inp: &BenchInput, terminal_ratio: f64) -> Option<(AmplitudeLimit, f64)> {
    let g = inp.bench.generator.as_ref().and_then(|g| g.max_amplitude);
    let c = inp
        .bench
        .limits
        .as_ref()
        .and_then(|l| l.max_input)
        .map(|m| m / terminal_ratio);
    match (g, c) {
        (Some(g), Some(c)) if c <= g => Some((AmplitudeLimit::CircuitInput, c)),
        (Some(g), _) => Some((AmplitudeLimit::Generator, g)),
        (None, Some(c)) => Some((AmplitudeLimit::CircuitInput, c)),
        (None, None) => None,
    }
}

/// What the limits did to the amplitude: the limits that scaled it (adapting) or the
/// warnings (checking).
#[derive(Default)]
struct Limited {
    reasons: Vec<LimitHit>,
    warnings: Vec<Warning>,
}

/// The input limit on the source's level (stated at the terminals for the circuit's own).
fn apply_input_limit(
    inp: &BenchInput,
    pulse: &mut Trapezoid,
    terminal_ratio: f64,
    adapt: bool,
    out: &mut Limited,
) {
    let Some((which, lim)) = input_limit(inp, terminal_ratio) else {
        return;
    };
    // Within a part per million of the limit (a timing fit that keeps the area moves the
    // amplitude by about that much; no generator sets its level finer): at the limit, not
    // over it.
    if pulse.amplitude.abs() <= lim * (1.0 + 1e-6) {
        return;
    }
    let at = if which == AmplitudeLimit::CircuitInput {
        terminal_ratio
    } else {
        1.0
    };
    if adapt {
        out.reasons.push(LimitHit {
            which,
            value: pulse.amplitude * at,
            limit: lim * at,
        });
        pulse.amplitude = lim.copysign(pulse.amplitude);
    } else if pulse.amplitude.abs() > lim * (1.0 + 1e-12) {
        out.warnings.push(Warning::AmplitudeExceedsLimit {
            amplitude: pulse.amplitude * at,
            limit: lim * at,
            which,
        });
    }
}

/// The output's linear range: scale the pulse into it (adapting) or warn. Returns the output's
/// extreme after any scaling.
fn apply_output_range(
    inp: &BenchInput,
    prep: &Prepared,
    pulse: &mut Trapezoid,
    adapt: bool,
    out: &mut Limited,
) -> f64 {
    let extreme = peak_output(prep, pulse, prep.run);
    let peak = extreme.abs();
    let max_out = inp.bench.limits.as_ref().and_then(|l| l.max_output);
    let Some(max_out) = max_out.filter(|&m| peak > m) else {
        return extreme;
    };
    if !adapt {
        out.warnings.push(Warning::OutputBeyondRange {
            peak,
            max_output: max_out,
        });
        return extreme;
    }
    out.reasons.push(LimitHit {
        which: AmplitudeLimit::CircuitOutput,
        value: peak,
        limit: max_out,
    });
    let k = max_out / peak;
    pulse.amplitude *= k;
    extreme * k
}

/// Peak at the terminals per unit source amplitude (linear, so one evaluation serves); 1 when
/// the source drives the terminals directly.
fn terminal_ratio(inp: &BenchInput, prep: &Prepared, timed: &Trapezoid) -> f64 {
    inp.terminal.map_or(1.0, |net| {
        let unit = Trapezoid {
            amplitude: 1.0,
            ..*timed
        };
        peak_of(&Modal::new(net), prep.tau_fast, &unit, prep.run).max(f64::MIN_POSITIVE)
    })
}

/// Fit the amplitude to the limits (`adapt`), or only check it (`adapt` false).
pub fn fit(
    inp: &BenchInput,
    prep: &Prepared,
    timed: &Trapezoid,
    requested_area: f64,
    adapt: bool,
) -> AmplitudeStep {
    let mut pulse = *timed;
    let mut lim = Limited::default();
    let ratio = terminal_ratio(inp, prep, timed);
    apply_input_limit(inp, &mut pulse, ratio, adapt, &mut lim);
    let extreme = apply_output_range(inp, prep, &mut pulse, adapt, &mut lim);
    let mut warnings = lim.warnings;
    if !adapt {
        let min_width = inp.bench.generator.as_ref().and_then(|g| g.min_width);
        if let Some(w) = min_width.filter(|&w| pulse.width_50() < w) {
            warnings.push(Warning::WidthBelowGenerator {
                width: pulse.width_50(),
                min_width: w,
            });
        }
    }
    let scaling = Scaling {
        requested_area,
        area: pulse.area(),
        read_factor: 1.0 / pulse.area(),
        reasons: lim.reasons,
    };
    let notes = (!scaling.reasons.is_empty())
        .then(|| Note::AreaPlannedDown {
            requested: requested_area,
            area: scaling.area,
            read_factor: scaling.read_factor,
            limits: scaling.reasons.clone(),
        })
        .into_iter()
        .collect();
    warnings.extend(hazard(inp.drive, &pulse));
    let open_over_display = match inp.drive {
        Signal::Voltage => inp
            .bench
            .generator
            .as_ref()
            .map_or(1.0, |g| g.open_over_display()),
        Signal::Current => 1.0,
    };
    let fit = AmplitudeFit {
        display_amplitude: pulse.amplitude / open_over_display,
        open_over_display,
        scaling,
        peak_input: pulse.amplitude.abs(),
        peak_terminal: inp.terminal.map(|_| pulse.amplitude.abs() * ratio),
        peak_output: extreme.abs(),
        output_extreme: extreme,
    };
    AmplitudeStep {
        pulse,
        fit,
        warnings,
        notes,
    }
}

/// The caution for a voltage pulse above the extra-low-voltage level.
pub fn hazard(drive: Signal, pulse: &Trapezoid) -> Option<Warning> {
    (drive == Signal::Voltage && pulse.amplitude.abs() > HAZARD_VOLTS).then(|| {
        Warning::HazardVoltage {
            area: pulse.area(),
            width: pulse.width_50(),
            amplitude: pulse.amplitude,
            limit: HAZARD_VOLTS,
            safe_area: pulse.area() * HAZARD_VOLTS / pulse.amplitude.abs(),
        }
    })
}
