//! The bench settings: `[generator]`, `[capture]`, `[limits]` as typed limits, the load setting
//! of a generator's display, the extra-low-voltage level, and what every bench step is given.

use crate::plan::PlanSettings;
use crate::units::Signal;

/// The usual extra-low-voltage limit for a pulse generator's output: 60 V (the common touch-safe
/// DC figure for safety extra-low voltage; recalled from memory of common practice, no source checked).
pub const HAZARD_VOLTS: f64 = 60.0;

/// Which load the generator's amplitude display assumes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LoadSetting {
    /// The display shows the open-circuit voltage.
    HighZ,
    /// The display shows the voltage across a matched 50 Ω load.
    Fifty,
}

impl LoadSetting {
    /// Name as written in scenarios and sheets.
    pub fn name(self) -> &'static str {
        match self {
            LoadSetting::HighZ => "high-z",
            LoadSetting::Fifty => "50",
        }
    }
}

/// `[generator]`: the pulse source's limits.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Generator {
    /// Largest amplitude it delivers into the load it sees (V or A).
    pub max_amplitude: Option<f64>,
    /// Shortest 50 % width, s.
    pub min_width: Option<f64>,
    /// Fastest 10–90 % edge, s.
    pub min_edge: Option<f64>,
    /// Slowest 10–90 % edge, s.
    pub max_edge: Option<f64>,
    /// Timing resolution: width, edges and period are multiples of it, s.
    pub time_step: Option<f64>,
    /// Longest period, s.
    pub max_period: Option<f64>,
    /// Output (source) resistance, Ω.
    pub output_resistance: Option<f64>,
    /// Load the display assumes.
    pub load_setting: Option<LoadSetting>,
}

/// `[capture]`: the recording instrument.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Capture {
    /// RMS noise at the output in one acquisition.
    pub noise: Option<f64>,
    /// Highest sample rate, samples/s.
    pub max_sample_rate: Option<f64>,
    /// Record memory, points.
    pub max_points: Option<f64>,
    /// Most averages it can take.
    pub max_averages: Option<f64>,
}

/// `[limits]`: the circuit under test.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Limits {
    /// Largest input it tolerates / stays linear at.
    pub max_input: Option<f64>,
    /// Linear output range (peak).
    pub max_output: Option<f64>,
}

/// Everything the bench sections say (all optional: absent means an unconstrained simulator).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Bench {
    /// `[generator]`.
    pub generator: Option<Generator>,
    /// `[capture]`.
    pub capture: Option<Capture>,
    /// `[limits]`.
    pub limits: Option<Limits>,
}

/// Load resistance the "50" setting assumes, Ω.
pub const MATCHED_LOAD: f64 = 50.0;

impl Generator {
    /// Ratio of the amplitude at a high-impedance circuit input to the amplitude the
    /// generator's display shows. With the "50" setting the display assumes a matched load,
    /// v_load = v_open·50/(50 + R_out) (voltage divider), so an unloaded input sees
    /// (50 + R_out)/50 times the display: twice it for a 50 Ω source.
    pub fn open_over_display(&self) -> f64 {
        match (self.load_setting, self.output_resistance) {
            (Some(LoadSetting::Fifty), Some(r)) => (MATCHED_LOAD + r) / MATCHED_LOAD,
            (Some(LoadSetting::Fifty), None) => 2.0,
            _ => 1.0,
        }
    }

    /// Round a time to the timing resolution (nearest multiple, at least one step).
    pub fn round_time(&self, t: f64) -> f64 {
        match self.time_step {
            Some(step) if step > 0.0 => ((t / step).round().max(1.0)) * step,
            _ => t,
        }
    }

    /// Round a time to the resolution while staying within [lo, hi]: the nearest multiple,
    /// moved one step inwards when rounding crossed a limit (lo winning when no multiple fits).
    pub fn fit_time(&self, t: f64, lo: f64, hi: f64) -> f64 {
        let Some(step) = self.time_step.filter(|&s| s > 0.0) else {
            return t;
        };
        let mut r = self.round_time(t);
        if r > hi * (1.0 + 1e-12) {
            r = ((hi / step + 1e-9).floor() * step).max(step);
        }
        // The lower limit wins when no multiple lies in [lo, hi] (a generator limit is hard).
        if r < lo * (1.0 - 1e-12) {
            r = (lo / step - 1e-9).ceil() * step;
        }
        r
    }
}

/// What the bench stage needs to know besides the pulse: the drive, the plan settings and the
/// bench sections.
#[derive(Debug, Clone, Copy)]
pub struct BenchInput<'a> {
    /// Voltage or current drive.
    pub drive: Signal,
    /// `[plan]`.
    pub plan: &'a PlanSettings,
    /// How the area is chosen (a fixed level limits the amplitude like a generator would).
    pub area: crate::plan::AreaRule,
    /// `[generator]`, `[capture]`, `[limits]`.
    pub bench: &'a Bench,
    /// Whether the residues (and so the size of h) are known.
    pub residues_known: bool,
    /// For a circuit driven through a source resistance: the transfer from the source's
    /// open-circuit voltage to the circuit's input terminals (None: the source drives the
    /// terminals directly).
    pub terminal: Option<&'a crate::network::Network>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fifty_ohm_setting_doubles_into_high_impedance() {
        // Voltage divider: a 50 Ω source set for a 50 Ω load shows v_open/2, so an unloaded input
        // sees twice the display; a 600 Ω source shows v_open·50/650.
        let g = Generator {
            output_resistance: Some(50.0),
            load_setting: Some(LoadSetting::Fifty),
            ..Generator::default()
        };
        assert_eq!(g.open_over_display(), 2.0);
        let g = Generator {
            output_resistance: Some(600.0),
            ..g
        };
        assert!((g.open_over_display() - 13.0).abs() < 1e-15);
        let g = Generator {
            load_setting: Some(LoadSetting::HighZ),
            ..g
        };
        assert_eq!(g.open_over_display(), 1.0);
    }
}
