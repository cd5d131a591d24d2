//! Warnings and notes, shared by every stage: a stable code and the numbers behind it (SI
//! units, fractions for relative figures). No words live here: each renderer (text, HTML,
//! JSON) words a notice once, from its fields.
//!
//! A [`Warning`] is something the user must act on (exit code 1) unless its [`Severity`] is
//! [`Severity::Info`]; a [`Note`] says what the planner changed and why, and never changes the
//! exit code.

use num_complex::Complex64;
use serde::Serialize;

/// How much a warning matters for the exit code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// The user must act on it: exit code 1.
    Act,
    /// Informational: printed among the warnings' neighbours, exit code unchanged.
    Info,
}

/// Which stated limit an amplitude ran into.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AmplitudeLimit {
    /// `[generator] max_amplitude`.
    Generator,
    /// `[limits] max_input`.
    CircuitInput,
    /// `[limits] max_output` (through the predicted output peak).
    CircuitOutput,
    /// The extra-low-voltage level the planner keeps to unless the generator is stated to go higher.
    Safety,
    /// The default generator level used when `[drive] area` is not given.
    DefaultLevel,
}

/// A limit the planned amplitude ran into: the value that exceeded it and the limit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LimitHit {
    /// Which limit.
    pub which: AmplitudeLimit,
    /// The value that exceeded it (amplitude, or output peak for the output range).
    pub value: f64,
    /// The limit.
    pub limit: f64,
}

/// A warning: a stable code (the serialised `code` field) with its numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "kebab-case")]
pub enum Warning {
    /// Large residues cancel in the modal sum: relative figures carry rounding.
    #[serde(rename = "network-ill-conditioned")]
    RoundingLoss {
        /// Σ|r| relative to the size of h (the amplification of rounding).
        amplification: f64,
        /// Relative rounding level of every figure.
        floor: f64,
        /// A-priori bound on the error of h(0⁺), h(t) and the error figures, relative to the
        /// normaliser (`network::accuracy`).
        bound: f64,
        /// A-priori bound on the worst residue's error, relative to that residue.
        residue_bound: f64,
    },
    /// h(0⁺) from the modes and from the initial-value theorem disagree.
    #[serde(rename = "network-ill-conditioned")]
    H0Disagrees {
        /// From the residues, 1/s.
        from_modes: f64,
        /// From the initial-value theorem, 1/s.
        from_ivt: f64,
    },
    /// A pole in the right half-plane.
    NetworkUnstable {
        /// The pole, rad/s.
        pole: Complex64,
        /// Doubling time ln 2/Re p, s.
        doubling: f64,
    },
    /// A pole on the imaginary axis.
    NetworkMarginal {
        /// The pole, rad/s.
        pole: Complex64,
    },
    /// Numerator degree above the denominator's: δ-derivative terms are left out.
    NetworkImproper {
        /// Coefficients of s, s², … beyond D.
        coefficients: Vec<f64>,
    },
    /// h(0⁺) = 0: relative figures use the peak |h| (informational).
    H0Zero {
        /// Peak |h|, units of h.
        peak: f64,
        /// Its time, s.
        t_peak: f64,
    },
    /// Some tolerance cases could not be analysed.
    ToleranceCasesFailed {
        /// How many.
        failures: usize,
    },
    /// No width meets the budget.
    BudgetUnreachable {
        /// Metric name.
        metric: &'static str,
        /// The budget (fraction).
        budget: f64,
        /// Narrowest width tried, s.
        width: f64,
        /// Its error (fraction).
        value: f64,
    },
    /// The pulse's error exceeds the budget.
    PulseWideForBudget {
        /// Metric name.
        metric: &'static str,
        /// Error (fraction).
        value: f64,
        /// Budget (fraction).
        budget: f64,
    },
    /// The width exceeds τ/ratio (no budget vouches for it).
    PulseWideForNetwork {
        /// 50 % width, s.
        width: f64,
        /// The ratio the width is held against.
        ratio: f64,
        /// Fastest significant time scale, s.
        tau: f64,
    },
    /// Edges slower than a tenth of the width.
    PulseSlowEdges {
        /// Slower 10–90 % edge, s.
        edge: f64,
        /// 50 % width, s.
        width: f64,
    },
    /// Far narrower than any time scale of h needs.
    PulseNarrow {
        /// 50 % width, s.
        width: f64,
        /// Fastest significant time scale, s.
        tau: f64,
    },
    /// The stated run is shorter than h needs to settle.
    RunShort {
        /// Stated run, s.
        run: f64,
        /// Run needed, s.
        need: f64,
    },
    /// The amplitude is above the extra-low-voltage level.
    HazardVoltage {
        /// Area, V·s.
        area: f64,
        /// 50 % width, s.
        width: f64,
        /// Amplitude at the circuit, V.
        amplitude: f64,
        /// The level, V.
        limit: f64,
        /// The largest area at that level for this width, V·s.
        safe_area: f64,
    },
    /// The given pulse's amplitude exceeds a stated limit.
    #[serde(rename = "pulse-exceeds-limit")]
    AmplitudeExceedsLimit {
        /// Amplitude, V or A.
        amplitude: f64,
        /// The limit, V or A.
        limit: f64,
        /// Which limit.
        which: AmplitudeLimit,
    },
    /// The given pulse is narrower than the generator can make.
    #[serde(rename = "pulse-exceeds-limit")]
    WidthBelowGenerator {
        /// 50 % width, s.
        width: f64,
        /// The generator's shortest, s.
        min_width: f64,
    },
    /// The predicted output peak exceeds the linear range.
    OutputBeyondRange {
        /// Predicted peak, V or A.
        peak: f64,
        /// Linear range, V or A.
        max_output: f64,
    },
    /// The generator's timing limits push the error beyond the budget.
    GeneratorTooSlow {
        /// Metric name.
        metric: &'static str,
        /// Error before the timing limits (fraction).
        before: f64,
        /// After (fraction).
        after: f64,
        /// Budget (fraction).
        budget: f64,
    },
    /// The pulse's bias alone uses the whole budget.
    NoiseBudgetUnreachable {
        /// Bias (fraction).
        bias: f64,
        /// Budget (fraction).
        budget: f64,
    },
    /// More averages than the capture allows.
    AveragesExceedCapture {
        /// Averages needed.
        needed: u64,
        /// The capture's most.
        max_averages: f64,
        /// Budget (fraction).
        budget: f64,
        /// Noise per acquisition (fraction of the reading).
        noise: f64,
    },
    /// A mode does not decay: no pulse train.
    SingleShotOnly,
    /// The longest period leaves too much tail.
    PeriodTooShort {
        /// Period, s.
        period: f64,
        /// Tail error (fraction).
        tail: f64,
        /// Its target (fraction).
        target: f64,
    },
    /// The record does not fit the memory, and two records cannot resolve every mode either.
    CaptureMemory {
        /// Points needed.
        points: u64,
        /// Sample interval, s.
        interval: f64,
        /// Record length, s.
        record: f64,
        /// Memory worked to, points.
        memory: f64,
    },
    /// Too few samples across the pulse.
    CaptureUndersampled {
        /// Samples across the 50 % width.
        samples: f64,
        /// 50 % width, s.
        width: f64,
    },
    /// `reading = "fit"` asked for, but the fit's bounds cannot be given: the plan is the
    /// raw/aligned one.
    FitUnavailable {
        /// Why.
        reason: FitLimit,
    },
    /// A mode decays within a few samples after the pulse: the record cannot resolve it.
    FitModeUnresolved {
        /// Pole, rad/s.
        pole: Complex64,
        /// Its decay time 1/|Re p|, s.
        decay: f64,
        /// Sample interval, s.
        interval: f64,
    },
    /// A mode too small against the noise for the fit to give its time constant.
    FitModeWeak {
        /// Pole, rad/s.
        pole: Complex64,
        /// Predicted 95 % half-width of its time constant, relative.
        relative: f64,
        /// Its output amplitude at the pulse end.
        amplitude: f64,
        /// Noise per averaged sample (σ/√N).
        noise: f64,
    },
    /// Two poles closer than their predicted intervals: the fit may take them as one.
    FitOrderAmbiguous {
        /// First pole, rad/s.
        first: Complex64,
        /// Second pole, rad/s.
        second: Complex64,
        /// |p₁ − p₂|, rad/s.
        separation: f64,
        /// Sum of their 95 % half-widths, rad/s.
        resolution: f64,
    },
    /// Modes the fit leaves out (not significant, unresolved or too weak) carry more of h than
    /// the budget: the fit's h(0⁺)/window figures are off by up to their share.
    FitLeftOutBias {
        /// Σ weight·|r| of the left-out modes over the normaliser.
        share: f64,
        /// Budget.
        budget: f64,
    },
    /// The budget is not reached by the fit within the test's limits.
    FitBudgetUnreachable {
        /// Best predicted 95 % half-width, relative.
        best: f64,
        /// Budget.
        budget: f64,
        /// Averages at that plan.
        averages: u64,
        /// Test time at that plan, s.
        test_time: f64,
    },
}

/// Why the modal fit's bounds cannot be given.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum FitLimit {
    /// Only time constants are known: the amplitudes, hence the information, are not.
    ResiduesUnknown,
    /// A repeated pole: the fit's model of distinct exponentials does not hold it.
    RepeatedPole,
    /// A mode that does not decay.
    NonDecaying,
    /// The Fisher matrix is singular at this sampling (a mode not identifiable).
    Singular,
    /// No significant mode lasts a few samples after the pulse at the planned sampling.
    Unresolved,
}

impl Warning {
    /// The stable code.
    pub fn code(&self) -> &'static str {
        match self {
            Warning::RoundingLoss { .. } | Warning::H0Disagrees { .. } => "network-ill-conditioned",
            Warning::NetworkUnstable { .. } => "network-unstable",
            Warning::NetworkMarginal { .. } => "network-marginal",
            Warning::NetworkImproper { .. } => "network-improper",
            Warning::H0Zero { .. } => "h0-zero",
            Warning::ToleranceCasesFailed { .. } => "tolerance-cases-failed",
            Warning::BudgetUnreachable { .. } => "budget-unreachable",
            Warning::PulseWideForBudget { .. } => "pulse-wide-for-budget",
            Warning::PulseWideForNetwork { .. } => "pulse-wide-for-network",
            Warning::PulseSlowEdges { .. } => "pulse-slow-edges",
            Warning::PulseNarrow { .. } => "pulse-narrow",
            Warning::RunShort { .. } => "run-short",
            Warning::HazardVoltage { .. } => "hazard-voltage",
            Warning::AmplitudeExceedsLimit { .. } | Warning::WidthBelowGenerator { .. } => {
                "pulse-exceeds-limit"
            }
            Warning::OutputBeyondRange { .. } => "output-beyond-range",
            Warning::GeneratorTooSlow { .. } => "generator-too-slow",
            Warning::NoiseBudgetUnreachable { .. } => "noise-budget-unreachable",
            Warning::AveragesExceedCapture { .. } => "averages-exceed-capture",
            Warning::SingleShotOnly => "single-shot-only",
            Warning::PeriodTooShort { .. } => "period-too-short",
            Warning::CaptureMemory { .. } => "capture-memory",
            Warning::CaptureUndersampled { .. } => "capture-undersampled",
            Warning::FitUnavailable { .. } => "fit-unavailable",
            Warning::FitModeUnresolved { .. } => "fit-mode-unresolved",
            Warning::FitModeWeak { .. } => "fit-mode-weak",
            Warning::FitOrderAmbiguous { .. } => "fit-order-ambiguous",
            Warning::FitLeftOutBias { .. } => "fit-left-out-bias",
            Warning::FitBudgetUnreachable { .. } => "fit-budget-unreachable",
        }
    }

    /// Whether the user must act on it.
    pub fn severity(&self) -> Severity {
        match self {
            Warning::H0Zero { .. } => Severity::Info,
            _ => Severity::Act,
        }
    }
}

/// True when any warning needs the user's action (exit code 1).
pub fn needs_action(warnings: &[Warning]) -> bool {
    warnings.iter().any(|w| w.severity() == Severity::Act)
}

/// A note: what the planner changed, and why, with the numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "kebab-case")]
pub enum Note {
    /// Too many toleranced parts for corners.
    TooManyCorners {
        /// Toleranced parts.
        parts: usize,
    },
    /// The generator's timing limits and resolution moved the width and edges.
    TimingFitted {
        /// Width before, s.
        width_from: f64,
        /// Width after, s.
        width_to: f64,
        /// Edge before, s.
        edge_from: f64,
        /// Edge after, s.
        edge_to: f64,
        /// The generator's timing resolution, s (None: none stated).
        time_step: Option<f64>,
    },
    /// The area was planned down to respect limits.
    AreaPlannedDown {
        /// Area asked for, V·s or A·s.
        requested: f64,
        /// Area delivered.
        area: f64,
        /// 1/area.
        read_factor: f64,
        /// The limits that set it.
        limits: Vec<LimitHit>,
    },
    /// The noise figures at the delivered pulse.
    NoiseAtPulse {
        /// Noise per acquisition (fraction of the reading).
        noise: f64,
        /// Bias (fraction).
        bias: f64,
        /// Width minimising bias + noise at this amplitude, s.
        best_width: f64,
    },
    /// Noise cannot be assessed without residues.
    NoiseNeedsResidues,
    /// No `[capture] max_points`: a memory was assumed.
    MemoryAssumed {
        /// Points assumed.
        points: f64,
    },
    /// One record would not fit the memory: a fine and a coarse record are planned instead.
    TwoRecords {
        /// Points one record would need.
        needed: u64,
        /// Memory, points.
        memory: f64,
        /// Fine record's sample interval, s.
        fine_interval: f64,
        /// Fine record's length, s.
        fine_length: f64,
        /// Coarse record's sample interval, s (it spans the whole record).
        coarse_interval: f64,
    },
    /// The width needing the fewest averages replaced the bias-only width.
    FewestAverages {
        /// Chosen width, s.
        width: f64,
        /// What the bias alone would allow, s.
        bias_width: f64,
    },
    /// The network has a direct term D·δ(t): not a mode, so the fit's plan does not bound it.
    FitDirectTerm {
        /// D.
        direct: f64,
    },
    /// Modes the fit leaves out, whose share of h stays within the budget.
    FitModesLeftOut {
        /// How many (conjugate pairs once).
        count: usize,
        /// Σ weight·|r| over the normaliser.
        share: f64,
    },
}

impl Note {
    /// The stable code.
    pub fn code(&self) -> &'static str {
        match self {
            Note::TooManyCorners { .. } => "too-many-corners",
            Note::TimingFitted { .. } => "timing-fitted",
            Note::AreaPlannedDown { .. } => "area-planned-down",
            Note::NoiseAtPulse { .. } => "noise-at-pulse",
            Note::NoiseNeedsResidues => "noise-needs-residues",
            Note::FewestAverages { .. } => "fewest-averages",
            Note::MemoryAssumed { .. } => "memory-assumed",
            Note::TwoRecords { .. } => "two-records",
            Note::FitDirectTerm { .. } => "fit-direct-term",
            Note::FitModesLeftOut { .. } => "fit-modes-left-out",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn serialised_code_is_the_stable_code() {
        // The JSON's `code` field and `code()` must agree for every shape of variant.
        let cases = [
            Warning::RoundingLoss {
                amplification: 1e3,
                floor: 1e-13,
                bound: 2e-7,
                residue_bound: 1e-9,
            },
            Warning::SingleShotOnly,
            Warning::WidthBelowGenerator {
                width: 1e-9,
                min_width: 2e-8,
            },
            Warning::H0Zero {
                peak: 1.0,
                t_peak: 1e-3,
            },
        ];
        for w in cases {
            let v = serde_json::to_value(&w).unwrap();
            assert_eq!(v["code"], w.code());
        }
        let n = Note::NoiseNeedsResidues;
        assert_eq!(serde_json::to_value(&n).unwrap()["code"], n.code());
    }
}
