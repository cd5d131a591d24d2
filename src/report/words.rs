//! The words for every warning and note: one sentence each, worded once from the notice's
//! numbers and shared by the text, HTML and JSON renderers.

use crate::notice::{AmplitudeLimit, LimitHit, Note, Warning};
use crate::units::{Dim, Signal, eng, eng_plain, percent_unsigned};
use num_complex::Complex64;

fn fmt_pole(p: Complex64) -> String {
    if p.im == 0.0 {
        format!("{} rad/s", eng_plain(p.re, 4))
    } else {
        format!(
            "{} ± j{} rad/s",
            eng_plain(p.re, 4),
            eng_plain(p.im.abs(), 4)
        )
    }
}

/// A value in engineering notation followed by a compound unit: 5e-3, "V·s" → "5 mV·s".
pub fn with_unit(v: f64, unit: &str) -> String {
    format!("{}{unit}", crate::units::eng_number(v, 4))
}

/// What a renderer needs besides the notice: the drive's kind, and for the network warnings
/// the run length's basis in words.
#[derive(Debug, Clone, Copy)]
pub struct Context<'a> {
    /// Voltage or current drive.
    pub drive: Signal,
    /// The run length's basis, worded.
    pub run_basis: &'a str,
}

/// One limit, worded: "amplitude 16.19 V exceeds the circuit's largest input ([limits]
/// max_input) of 10 V".
pub fn limit_text(hit: &LimitHit, drive: Signal) -> String {
    let dim = drive.dim();
    let which = match hit.which {
        AmplitudeLimit::CircuitInput => "the circuit's largest input ([limits] max_input)",
        AmplitudeLimit::Generator => {
            "the generator's largest amplitude ([generator] max_amplitude)"
        }
        AmplitudeLimit::Safety => "the extra-low-voltage level kept to by default",
        AmplitudeLimit::DefaultLevel => "the default generator level",
        AmplitudeLimit::CircuitOutput => {
            return format!(
                "the predicted output peak {} exceeds the linear output range ([limits] max_output) {}",
                eng_plain(hit.value, 4),
                eng_plain(hit.limit, 4)
            );
        }
    };
    format!(
        "amplitude {} exceeds {which} of {}",
        eng(hit.value, dim),
        eng(hit.limit, dim)
    )
}

/// The sentence for a warning.
pub fn warning_text(w: &Warning, cx: &Context) -> String {
    match network_warning(w, cx) {
        Some(t) => t,
        None => pulse_warning(w, cx).unwrap_or_else(|| bench_warning(w, cx)),
    }
}

fn network_warning(w: &Warning, cx: &Context) -> Option<String> {
    Some(match w {
        Warning::RoundingLoss {
            amplification,
            bound,
            residue_bound,
            ..
        } => format!(
            "the modes' residues are up to {amplification:.1e} times the size of h itself and cancel in the sum, \
             or the poles are close enough to be sensitive: h(0⁺), h(t) and the error figures can be off by up to \
             {bound:.1e} of the normaliser, and a residue by up to {residue_bound:.1e} of itself"
        ),
        Warning::H0Disagrees {
            from_modes,
            from_ivt,
        } => format!(
            "h(0⁺) from the modes ({from_modes:e}) and from the initial-value theorem ({from_ivt:e}) disagree: \
             the poles are too ill-conditioned for the figures to be trusted"
        ),
        Warning::NetworkUnstable { pole, doubling } => format!(
            "pole {} is in the right half-plane: h(t) grows without bound (doubling every {}); \
             the run length is based on the {}",
            fmt_pole(*pole),
            eng(*doubling, Dim::Time),
            cx.run_basis
        ),
        Warning::NetworkMarginal { pole } => format!(
            "pole {} lies on the imaginary axis: that mode never decays; the run length is based on the {}",
            fmt_pole(*pole),
            cx.run_basis
        ),
        Warning::NetworkImproper { .. } => {
            "the numerator's degree exceeds the denominator's: h(t) holds derivatives of δ(t) \
             that no unit-area pulse can stand for; those terms are left out of every figure"
                .into()
        }
        Warning::H0Zero { peak, t_peak } => format!(
            "h(0⁺) = 0 for this network, so relative errors are given against the peak |h| ({}) at {}",
            eng_plain(*peak, 4),
            eng(*t_peak, Dim::Time)
        ),
        Warning::ToleranceCasesFailed { failures } => format!(
            "{failures} tolerance case(s) could not be analysed (the circuit became singular there); the spread covers the rest"
        ),
        _ => return None,
    })
}

fn pulse_warning(w: &Warning, cx: &Context) -> Option<String> {
    Some(match w {
        Warning::BudgetUnreachable {
            metric,
            budget,
            width,
            value,
        } => format!(
            "no pulse meets the {metric} budget of {}: even {} wide gives {}; the rule-of-thumb pulse is shown instead",
            percent_unsigned(*budget),
            eng(*width, Dim::Time),
            percent_unsigned(*value)
        ),
        Warning::PulseWideForBudget {
            metric,
            value,
            budget,
        } => format!(
            "the {metric} error is {} against a budget of {}: the pulse is too wide (or its edges too slow) \
             for the reading to be trusted to that level",
            percent_unsigned(*value),
            percent_unsigned(*budget)
        ),
        Warning::PulseWideForNetwork { width, ratio, tau } => format!(
            "the 50 % width {} exceeds 1/{ratio} of the fastest significant time scale ({}): the \
             response will look like a pulse response, not like h(t)",
            eng(*width, Dim::Time),
            eng(*tau, Dim::Time)
        ),
        Warning::PulseSlowEdges { edge, width } => format!(
            "10–90 % edges of {} take more than 1/10 of the {} width (common practice, no source): \
             the pulse is closer to a triangle than a rectangle and its centroid shifts",
            eng(*edge, Dim::Time),
            eng(*width, Dim::Time)
        ),
        Warning::PulseNarrow { width, .. } => format!(
            "the width {} is below 10⁻⁶ of the fastest time scale: the reading gains nothing \
             in accuracy while the amplitude (and the noise share) grows",
            eng(*width, Dim::Time)
        ),
        Warning::RunShort { run, need } => format!(
            "the stated run of {} is shorter than the settle time {} ({}): the tail of h(t) is cut off",
            eng(*run, Dim::Time),
            eng(*need, Dim::Time),
            cx.run_basis
        ),
        Warning::HazardVoltage {
            area,
            width,
            amplitude,
            limit,
            safe_area,
        } => format!(
            "CAUTION: an area of {} in a pulse {} wide needs {} — above the {limit} V extra-low-voltage \
             limit. Consider an area of {} or less (amplitude ≤ {limit} V) and scale the reading back by \
             1/area. Hazardous voltages need appropriate equipment and insulation; follow local \
             electrical-safety rules and qualified practice.",
            with_unit(*area, cx.drive.area_unit()),
            eng(*width, Dim::Time),
            eng(*amplitude, Dim::Voltage),
            with_unit(*safe_area, cx.drive.area_unit()),
        ),
        _ => return None,
    })
}

/// A bench warning (or a fit warning), worded.
fn bench_warning(w: &Warning, cx: &Context) -> String {
    amplitude_warning(w, cx.drive.dim())
        .or_else(|| record_warning(w))
        .or_else(|| fit_warning(w))
        .unwrap_or_else(|| w.code().to_string())
}

/// The generator's and the circuit's limits on amplitude, width, output range and timing.
fn amplitude_warning(w: &Warning, dim: Dim) -> Option<String> {
    Some(match w {
        Warning::AmplitudeExceedsLimit {
            amplitude, limit, ..
        } => format!(
            "the amplitude {} exceeds the stated limit of {}",
            eng(*amplitude, dim),
            eng(*limit, dim)
        ),
        Warning::WidthBelowGenerator { width, min_width } => format!(
            "the width {} is below the generator's shortest {}",
            eng(*width, Dim::Time),
            eng(*min_width, Dim::Time)
        ),
        Warning::OutputBeyondRange { peak, max_output } => format!(
            "the predicted output peak {} exceeds the linear output range {}: reduce the amplitude by {:.3}×",
            eng_plain(*peak, 4),
            eng_plain(*max_output, 4),
            max_output / peak
        ),
        Warning::GeneratorTooSlow {
            metric,
            before,
            after,
            budget,
        } => format!(
            "the generator's timing limits move the {metric} error from {} to {}, beyond the {} budget",
            percent_unsigned(*before),
            percent_unsigned(*after),
            percent_unsigned(*budget)
        ),
        _ => return None,
    })
}

/// Noise, averages, repetition period and capture memory and rate.
fn record_warning(w: &Warning) -> Option<String> {
    Some(match w {
        Warning::NoiseBudgetUnreachable { bias, budget } => format!(
            "the pulse's bias alone ({}) uses the whole {} budget: no averaging can help",
            percent_unsigned(*bias),
            percent_unsigned(*budget)
        ),
        Warning::AveragesExceedCapture {
            needed,
            max_averages,
            budget,
            noise,
        } => format!(
            "reaching the {} budget needs {} averages (noise {} per acquisition), more than the {max_averages} the capture allows",
            percent_unsigned(*budget),
            count(*needed),
            percent_unsigned(*noise)
        ),
        Warning::SingleShotOnly => {
            "a mode does not decay, so every earlier pulse of a train would still be present: \
             run single shots, letting the circuit reset between them"
                .into()
        }
        Warning::PeriodTooShort {
            period,
            tail,
            target,
        } => format!(
            "the longest period available ({}) leaves a tail error of {} from earlier pulses, above a tenth of the budget ({})",
            eng(*period, Dim::Time),
            percent_unsigned(*tail),
            percent_unsigned(*target)
        ),
        Warning::CaptureMemory {
            points,
            interval,
            record,
            memory,
        } => format!(
            "{} points are needed to sample every {} over {}, more than the {} points of memory, and two records \
             cannot resolve every mode either: raise [capture] max_points, or shorten the run",
            count(*points),
            eng(*interval, Dim::Time),
            eng(*record, Dim::Time),
            crate::units::eng_plain(*memory, 4)
        ),
        Warning::CaptureUndersampled { samples, width } => format!(
            "at the highest sample rate only {samples:.1} samples fall across the {} pulse",
            eng(*width, Dim::Time)
        ),
        _ => return None,
    })
}

/// Why the fit's bounds cannot be given, worded.
pub fn fit_limit_text(r: crate::notice::FitLimit) -> &'static str {
    use crate::notice::FitLimit;
    match r {
        FitLimit::ResiduesUnknown => {
            "only time constants are known, so the modes' amplitudes (and the information the record holds on them) are not"
        }
        FitLimit::RepeatedPole => {
            "the network has a repeated pole, which the fit's model of distinct exponentials does not hold"
        }
        FitLimit::NonDecaying => "a mode does not decay, so no record holds all of it",
        FitLimit::Unresolved => {
            "no significant mode lasts 5 samples after the pulse at the planned sampling (a record split for memory \
             is bounded by its coarse interval): raise [capture] max_points or the sample rate"
        }
        FitLimit::Singular => {
            "the Fisher matrix is singular at the planned sampling: a mode cannot be told from the others or from the baseline"
        }
    }
}

fn fit_warning(w: &Warning) -> Option<String> {
    Some(match w {
        Warning::FitUnavailable { reason } => format!(
            "reading = \"fit\": the fit's uncertainty cannot be predicted ({}); the plan below is the raw/aligned one",
            fit_limit_text(*reason)
        ),
        Warning::FitModeUnresolved {
            pole,
            decay,
            interval,
        } => format!(
            "the mode at {} decays in {}, under {RESOLVE} samples of {} after the pulse: the fit cannot resolve it; \
             read what it contributes from the aligned reading of a narrow pulse (the budget plan), or sample faster",
            fmt_pole(*pole),
            eng(*decay, Dim::Time),
            eng(*interval, Dim::Time),
            RESOLVE = 5
        ),
        Warning::FitModeWeak {
            pole,
            relative,
            amplitude,
            noise,
        } => format!(
            "the mode at {} is too small to fit at this noise: amplitude {} at the pulse end against {} RMS per averaged \
             sample gives its time constant only to ±{}; it is left out of the fit's figures (read it from the aligned \
             reading, or raise the amplitude or the averages)",
            fmt_pole(*pole),
            eng_plain(*amplitude, 4),
            eng_plain(*noise, 4),
            percent_unsigned(*relative)
        ),
        Warning::FitOrderAmbiguous {
            first,
            second,
            separation,
            resolution,
        } => format!(
            "the poles {} and {} lie {} rad/s apart, within their summed 95 % intervals ({} rad/s): the fit may take them \
             as one mode; check the order `recover` chooses",
            fmt_pole(*first),
            fmt_pole(*second),
            eng_plain(*separation, 4),
            eng_plain(*resolution, 4)
        ),
        Warning::FitLeftOutBias { share, budget } => format!(
            "modes the fit leaves out carry up to {} of h, more than the {} budget: the fit's h(0⁺) and window figures \
             are off by up to that much; read those from the aligned reading of the budget plan",
            percent_unsigned(*share),
            percent_unsigned(*budget)
        ),
        Warning::FitBudgetUnreachable {
            best,
            budget,
            averages,
            test_time,
        } => format!(
            "the fit reaches ±{} at best within the test's limits ({averages} averages, {}), not the {} budget: raise \
             [plan] max_test_time or [capture] max_averages, lower the noise, or relax the budget",
            percent_unsigned(*best),
            eng(*test_time, Dim::Time),
            percent_unsigned(*budget)
        ),
        _ => return None,
    })
}

/// The sentence for a note.
pub fn note_text(n: &Note, drive: Signal) -> String {
    pulse_note(n, drive)
        .or_else(|| record_note(n))
        .or_else(|| fit_note(n))
        .unwrap_or_else(|| n.code().to_string())
}

/// Notes on the pulse: tolerance corners, the generator's timing, the area planned down.
fn pulse_note(n: &Note, drive: Signal) -> Option<String> {
    Some(match n {
        Note::TooManyCorners { parts } => format!(
            "{parts} parts carry tolerances, too many for corners: give --samples N for a Monte Carlo spread"
        ),
        Note::TimingFitted {
            width_from,
            width_to,
            edge_from,
            edge_to,
            time_step,
        } => format!(
            "generator timing: width {} → {}, edges {} → {} (limits and {} resolution)",
            eng(*width_from, Dim::Time),
            eng(*width_to, Dim::Time),
            eng(*edge_from, Dim::Time),
            eng(*edge_to, Dim::Time),
            time_step.map_or("no".into(), |t| eng(t, Dim::Time))
        ),
        Note::AreaPlannedDown {
            requested,
            area,
            read_factor,
            limits,
        } => format!(
            "area planned down from {} to {} ({}); read h(t) ≈ y(t) × {} (1/area)",
            with_unit(*requested, drive.area_unit()),
            with_unit(*area, drive.area_unit()),
            limits
                .iter()
                .map(|h| limit_text(h, drive))
                .collect::<Vec<_>>()
                .join("; "),
            eng_plain(*read_factor, 4)
        ),
        _ => return None,
    })
}

/// Notes on the record: noise, record memory, two records.
fn record_note(n: &Note) -> Option<String> {
    Some(match n {
        Note::NoiseAtPulse {
            noise,
            bias,
            best_width,
        } => format!(
            "noise: {} of the reading per acquisition; bias {}; best width for bias + noise at this amplitude: {}",
            percent_unsigned(*noise),
            percent_unsigned(*bias),
            eng(*best_width, Dim::Time)
        ),
        Note::NoiseNeedsResidues => "noise not assessed: the residues (and so the size of h) are unknown for a network given by time constants".into(),
        Note::MemoryAssumed { points } => format!(
            "no [capture] max_points given: a record memory of {} points is assumed",
            crate::units::eng_plain(*points, 4)
        ),
        Note::TwoRecords {
            needed,
            memory,
            fine_interval,
            fine_length,
            coarse_interval,
        } => format!(
            "one record would need {needed} points, more than the {} of memory: take two records, one every {} for {} \
             (the fast part) and one every {} over the whole record",
            crate::units::eng_plain(*memory, 4),
            eng(*fine_interval, Dim::Time),
            eng(*fine_length, Dim::Time),
            eng(*coarse_interval, Dim::Time)
        ),
        _ => return None,
    })
}

/// Notes on the fit reading's plan.
fn fit_note(n: &Note) -> Option<String> {
    Some(match n {
        Note::FitDirectTerm { direct } => format!(
            "h(t) holds a direct term {}·δ(t): it is not a mode, so this plan does not bound it; `recover` estimates it \
             from the samples during the pulse",
            eng_plain(*direct, 4)
        ),
        Note::FitModesLeftOut { count, share } => format!(
            "{count} mode(s) are left out of the fit (not significant, unresolved or too weak); together they carry at \
             most {} of h, within the budget",
            percent_unsigned(*share)
        ),
        Note::FewestAverages { width, bias_width } => format!(
            "with the output noise of [capture], the width needing the fewest averages for the budget is {} \
             (the bias alone would allow {})",
            eng(*width, Dim::Time),
            eng(*bias_width, Dim::Time)
        ),
        _ => return None,
    })
}

/// The run length's basis, worded.
pub fn run_basis_text(b: &crate::plan::RunBasis) -> String {
    use crate::plan::RunBasis;
    match *b {
        RunBasis::Settle { settle, multiple } => format!(
            "time until |h| stays below 0.1 % of its peak ({}), longer than {multiple} × τ_slow",
            eng(settle, Dim::Time)
        ),
        RunBasis::TimeConstants { multiple, tau } => {
            format!(
                "{multiple} × slowest time constant ({})",
                eng(tau, Dim::Time)
            )
        }
        RunBasis::DecayingModes { multiple, tau } => format!(
            "{multiple} × slowest decaying time constant ({}); the non-decaying modes never settle",
            eng(tau, Dim::Time)
        ),
        RunBasis::SlowestScale { multiple, scale } => format!(
            "{multiple} × slowest time scale 1/|p| ({}); no mode decays",
            eng(scale, Dim::Time)
        ),
    }
}

/// The cap that stopped a budget search, worded with the setting that caused it.
pub fn cap_text(cap: &crate::plan::Cap, width: f64) -> String {
    match cap {
        crate::plan::Cap::MinWidthRatio { ratio } => format!(
            "capped by [plan] min_width_ratio = {ratio} at (fastest significant time scale)/{ratio} = {}",
            eng(width, Dim::Time)
        ),
        crate::plan::Cap::RunLength { run } => format!(
            "capped at the run length {} (a pulse no longer than the record it is read in)",
            eng(*run, Dim::Time)
        ),
    }
}

/// The budget search in one sentence.
pub fn budget_text(budget: Option<&crate::plan::Budget>, s: &crate::plan::PlanSettings) -> String {
    use crate::plan::Target;
    let Some(b) = budget else {
        return "No error budget given ([plan] target_error): the rule-of-thumb pulse is recommended."
            .into();
    };
    let head = format!(
        "Error budget {} on the {} error",
        percent_unsigned(s.target_error.unwrap_or(0.0)),
        s.metric.name()
    );
    let widening = b.widening.unwrap_or(1.0);
    match &b.target {
        Target::Met { width, value } => format!(
            "{head}: the widest pulse within it is {} wide (error {}), {widening:.2}× the rule-of-thumb width.",
            eng(*width, Dim::Time),
            percent_unsigned(*value)
        ),
        Target::Capped { width, value, cap } => format!(
            "{head} would allow a wider pulse; the width is {} (error {}), {widening:.2}× the rule-of-thumb width.",
            cap_text(cap, *width),
            percent_unsigned(*value)
        ),
        Target::Unreachable { width, value } => format!(
            "{head} cannot be met: even {} wide gives {}. The rule-of-thumb pulse is shown.",
            eng(*width, Dim::Time),
            percent_unsigned(*value)
        ),
    }
}

/// A signed relative error, or "0" when it is within ten times the rounding level of the
/// computation (the figure is zero to the accuracy it has).
pub fn relative(v: f64, floor: f64) -> String {
    if v.abs() <= 10.0 * floor {
        "0".into()
    } else {
        crate::units::percent(v)
    }
}

/// The same for a magnitude (window maximum, RMS).
pub fn magnitude(v: f64, floor: f64) -> String {
    if v.abs() <= 10.0 * floor {
        "0".into()
    } else {
        percent_unsigned(v)
    }
}

/// Why a first-order estimate is not shown.
pub const FIRST_ORDER_NA: &str = "n/a: the terms it leaves out exceed 10 % of it (the pulse is not short against the local time scale of h)";

/// A first-order estimate, or "n/a" with the reason outside its validity.
pub fn first_order_text(v: Option<f64>, floor: f64) -> String {
    match v {
        Some(v) => relative(v, floor),
        None => FIRST_ORDER_NA.into(),
    }
}

/// The noise line: the width the plan uses and why, with the other widths as labelled context.
pub fn noise_text(
    b: &crate::bench::BenchPlan,
    noise: f64,
    bias: f64,
    best_width: f64,
    fewest: Option<&Note>,
) -> String {
    let width = eng(b.pulse.width_50(), Dim::Time);
    let budget = percent_unsigned(b.budget);
    let avg = match b.noise.averages {
        Some(1) => format!("1 acquisition meets the {budget} budget"),
        Some(n) => format!("{n} averages meet the {budget} budget"),
        None => format!("no number of averages meets the {budget} budget"),
    };
    let why = match fewest {
        Some(Note::FewestAverages { bias_width, .. }) => format!(
            "width {width} is used: the widest that needs the fewest averages (the bias alone would allow {})",
            eng(*bias_width, Dim::Time)
        ),
        _ => format!(
            "width {width} is used: the widest the bias budget allows, and no narrower pulse needs fewer averages"
        ),
    };
    format!(
        "{why}; per acquisition the noise is {} of the reading and the bias {}: {avg}. Context: at this amplitude, \
         bias + noise in one acquisition would be least at {}",
        percent_unsigned(noise),
        percent_unsigned(bias),
        eng(best_width, Dim::Time)
    )
}

/// How the area was chosen, in words.
pub fn area_rule_text(rule: &crate::plan::AreaRule, drive: Signal) -> String {
    match *rule {
        crate::plan::AreaRule::Given { area } => {
            format!(
                "{} as given ([drive] area)",
                with_unit(area, drive.area_unit())
            )
        }
        crate::plan::AreaRule::FromLevel { level } => format!(
            "planned from the default generator level {} × the width (no [drive] area given; write one to fix the area)",
            eng(level, drive.dim())
        ),
    }
}

/// The units every figure of h carries, derived from the drive's and the output's kinds.
#[derive(Debug, Clone)]
pub struct Units {
    /// Drive kind.
    pub drive: Signal,
    /// Output kind.
    pub output: Signal,
    /// Unit of h(t): "/s", "V/(A·s)", "A/(V·s)".
    pub h: String,
    /// Unit of the k-th Laurent coefficient, written with k: "1/s^k", "V/(A·s^k)".
    pub residue: String,
}

impl Units {
    /// The units for a scenario's drive and output.
    pub fn of(drive: Signal, output: Signal) -> Units {
        let residue = if drive == output {
            "1/s^k".to_string()
        } else {
            format!("{}/({}·s^k)", output.symbol(), drive.symbol())
        };
        Units {
            drive,
            output,
            h: crate::units::h_unit(drive, output),
            residue,
        }
    }

    /// A value of h with its unit: "25.021 k/s", "-157.5 /s", "3.2 mV/(A·s)".
    pub fn h_value(&self, v: f64) -> String {
        format!("{}{}", crate::units::eng_number(v, 5), self.h)
    }

    /// An output value with its unit and sign: "-962.4 mV".
    pub fn output_value(&self, v: f64) -> String {
        eng(v, self.output.dim())
    }
}

/// A complex number in engineering notation, a part below 10⁻¹⁰ of the whole printed as
/// nothing (it is rounding, not a figure): "-300 k ± j400 k", "j611.23 G".
pub fn complex_text(z: Complex64) -> String {
    let tiny = 1e-10 * z.norm();
    let re = if z.re.abs() <= tiny { 0.0 } else { z.re };
    let im = if z.im.abs() <= tiny { 0.0 } else { z.im };
    let num = |v: f64| crate::units::eng_plain(v, 5);
    match (re == 0.0, im == 0.0) {
        (_, true) => num(re),
        (true, false) => format!("{}j{}", if im < 0.0 { "−" } else { "" }, num(im.abs())),
        (false, false) => format!(
            "{} {} j{}",
            num(re),
            if im < 0.0 { "−" } else { "+" },
            num(im.abs())
        ),
    }
}

/// A signed figure with three decimals, "0" when it rounds to zero (never "-0.000").
pub fn signed3(v: f64) -> String {
    if v.abs() < 5e-4 {
        "0".into()
    } else {
        format!("{v:+.3}")
    }
}

/// A count as printed: a count that saturated at the largest 64-bit integer is said to be
/// beyond it rather than printed as if exact.
fn count(n: u64) -> String {
    if n == u64::MAX {
        format!("more than {:.1e}", u64::MAX as f64)
    } else {
        n.to_string()
    }
}
