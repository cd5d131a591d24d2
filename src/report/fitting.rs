//! The fit reading's plan, worded once for the text and HTML reports: a summary, the
//! predicted intervals, and the three plans side by side.

use super::words::{self, Units};
use crate::fitplan::{FitPlan, IntervalOf, Which};
use crate::plan::FitQuantity;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned};

/// The fit plan as lines and cells.
pub struct FitWords {
    /// Heading.
    pub heading: String,
    /// Summary lines.
    pub summary: Vec<String>,
    /// Predicted intervals: quantity, value ± half-width, relative.
    pub intervals: Vec<[String; 3]>,
    /// Heading of the comparison.
    pub compare_heading: String,
    /// Column heads of the comparison.
    pub columns: [String; 8],
    /// One row per plan.
    pub rows: Vec<[String; 8]>,
    /// What the comparison says.
    pub verdict: String,
}

fn quantity_text(q: FitQuantity) -> &'static str {
    match q {
        FitQuantity::TimeConstants => "each significant mode's time constant (relative to it)",
        FitQuantity::H0 => "h(0⁺) (relative to the normaliser)",
        FitQuantity::Window => "h(t) over the window (relative to the normaliser)",
    }
}

fn plan_name(w: Which) -> &'static str {
    match w {
        Which::RuleOfThumb => "rule of thumb",
        Which::Budget => "budget plan",
        Which::Fit => "fit plan",
    }
}

fn interval_cells(fp: &FitPlan, u: &Units) -> Vec<[String; 3]> {
    fp.intervals
        .iter()
        .map(|iv| {
            let (what, value, half) = match iv.of {
                IntervalOf::TimeConstant { pole } => (
                    format!(
                        "time constant of the pole {} rad/s",
                        words::complex_text(pole)
                    ),
                    eng(iv.value, Dim::Time),
                    eng(iv.half_width, Dim::Time),
                ),
                IntervalOf::H0 => (
                    "h(0⁺)".to_string(),
                    u.h_value(iv.value),
                    u.h_value(iv.half_width),
                ),
                IntervalOf::WindowWidest { at } => (
                    format!(
                        "h(t) where its interval is widest, t = {}",
                        eng(at, Dim::Time)
                    ),
                    u.h_value(iv.value),
                    u.h_value(iv.half_width),
                ),
            };
            let rel = if iv.delivered {
                format!("±{}", percent_unsigned(iv.relative))
            } else {
                format!(
                    "±{} (not delivered by the fit: see the warnings)",
                    percent_unsigned(iv.relative)
                )
            };
            [what, format!("{value} ± {half}"), rel]
        })
        .collect()
}

/// A ratio as a bench reader takes it in: 2.35, 383, 2.48e10.
fn ratio_text(f: f64) -> String {
    if f < 10.0 {
        format!("{f:.2}")
    } else if f < 1e4 {
        format!("{f:.0}")
    } else {
        format!("{f:.2e}")
    }
}

/// Word the fit plan.
pub fn fit_words(fp: &FitPlan, sc: &Scenario) -> FitWords {
    let u = Units::of(sc.drive, sc.output);
    let test = eng(fp.test_time, Dim::Time);
    FitWords {
        heading: "Fit reading (reading = \"fit\": `recover` fits the modes after the pulse and removes the pulse \
                  exactly, so noise, not width, limits it)"
            .into(),
        summary: summary_lines(fp, &u, &test),
        intervals: interval_cells(fp, &u),
        compare_heading: format!(
            "The same budget side by side (raw/aligned plans read by the {} error they were planned for{}; bias + \
             95 % noise)",
            sc.plan.metric.name(),
            match fp.quantity {
                FitQuantity::TimeConstants => ", the nearest a raw reading has to a time constant",
                _ => "",
            }
        ),
        columns: [
            "plan".into(),
            "reading".into(),
            "width".into(),
            "amplitude".into(),
            "bias".into(),
            "noise per acquisition".into(),
            "averages for the budget".into(),
            format!("interval at {test}"),
        ],
        rows: comparison_rows(fp, sc),
        verdict: verdict_text(fp),
    }
}

/// The summary: the budget and noise, the plan's averages and prediction, the longest test.
fn summary_lines(fp: &FitPlan, u: &Units, test: &str) -> Vec<String> {
    let budget_source = if fp.budget_stated {
        "[plan] target_error"
    } else {
        "the default, no target_error given"
    };
    let mut summary = vec![
        format!(
            "budget {} ({budget_source}) on the 95 % interval of {}; output noise {} RMS per acquisition ([capture] noise)",
            percent_unsigned(fp.budget),
            quantity_text(fp.quantity),
            u.output_value(fp.noise)
        ),
        format!(
            "plan: {} average(s), test time {test} (averages × period); predicted ±{} — {}",
            fp.averages,
            percent_unsigned(fp.predicted),
            if fp.met {
                "within the budget"
            } else if !fp.delivered {
                "but the fit cannot deliver this quantity here (see the warnings): read it from the budget plan"
            } else {
                "the budget is not reached (see the warnings)"
            }
        ),
    ];
    if let Some(t) = fp.max_test_time {
        summary.push(format!(
            "longest test allowed: {} ([plan] max_test_time)",
            eng(t, Dim::Time)
        ));
    }
    summary
}

/// One row per plan of the comparison.
fn comparison_rows(fp: &FitPlan, sc: &Scenario) -> Vec<[String; 8]> {
    let dim = sc.drive.dim();
    fp.comparison
        .iter()
        .map(|r| {
            [
                plan_name(r.plan).to_string(),
                r.reading.name().to_string(),
                eng(r.width, Dim::Time),
                eng(r.amplitude, dim),
                if r.plan == Which::Fit {
                    "0 (removed)".into()
                } else {
                    percent_unsigned(r.bias)
                },
                format!("±{}", percent_unsigned(r.noise)),
                r.averages.map_or("never (bias over budget)".into(), |n| {
                    if r.plan == Which::Fit && !fp.met {
                        format!("{n} (limit)")
                    } else {
                        n.to_string()
                    }
                }),
                format!("±{}", percent_unsigned(r.at_equal_time)),
            ]
        })
        .collect()
}

/// What the comparison says: how much narrower or cheaper the fit plan is, or why not.
fn verdict_text(fp: &FitPlan) -> String {
    let mut verdict = format!(
        "at equal test time the fit plan's interval is {}× narrower than the budget plan's",
        ratio_text(fp.narrower_interval)
    );
    if let Some(f) = fp.fewer_averages {
        verdict = format!(
            "the fit plan reaches the budget with {}× fewer averages than the budget plan; {verdict}",
            ratio_text(f)
        );
    }
    if !fp.delivered {
        verdict = "no comparison holds: the fit cannot deliver the planned quantity here (see the warnings)".into();
    } else if fp.narrower_interval < 10.0 && fp.fewer_averages.is_none_or(|f| f < 10.0) {
        verdict.push_str(
            " — less than 10×: the raw/aligned reading's noise is already small at this amplitude, or the limits \
             hold the wide pulse's amplitude down",
        );
    }
    verdict
}
