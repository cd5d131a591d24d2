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
            floor,
        } => format!(
            "the modes' residues are up to {amplification:.1e} times the size of h itself and cancel in the sum: \
             relative figures carry rounding of about {floor:.0e}"
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

fn bench_warning(w: &Warning, cx: &Context) -> String {
    let dim = cx.drive.dim();
    match w {
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
            "reaching the {} budget needs {needed} averages (noise {} per acquisition), more than the {max_averages} the capture allows",
            percent_unsigned(*budget),
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
        } => format!(
            "{points} points are needed to sample at {} over {}, more than the memory holds: take two records (see the capture plan)",
            eng(*interval, Dim::Time),
            eng(*record, Dim::Time)
        ),
        Warning::CaptureUndersampled { samples, width } => format!(
            "at the highest sample rate only {samples:.1} samples fall across the {} pulse",
            eng(*width, Dim::Time)
        ),
        other => other.code().to_string(),
    }
}

/// The sentence for a note.
pub fn note_text(n: &Note, drive: Signal) -> String {
    match n {
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
        Note::FewestAverages { width, bias_width } => format!(
            "with the output noise of [capture], the width needing the fewest averages for the budget is {} \
             (the bias alone would allow {})",
            eng(*width, Dim::Time),
            eng(*bias_width, Dim::Time)
        ),
    }
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
