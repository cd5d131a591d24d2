//! `[plan]`: the budget, the metric (or the network's default), and the planner's ratios, each
//! within the range where its figures mean something.

use super::reader::{Reader, SQty, ScenarioError};
use crate::estimate::Metric;
use crate::network::Network;
use crate::plan::{FitQuantity, MetricChoice, PlanSettings, ReadingKind};
use crate::units::Dim;
use serde::Deserialize;
use toml::Spanned;

/// The most Monte Carlo samples a plan draws (each is a full analysis of the circuit).
pub const MAX_SAMPLES: f64 = 1e6;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawPlan {
    pub(crate) target_error: Option<SQty>,
    pub(crate) metric: Option<Spanned<String>>,
    pub(crate) width_ratio: Option<SQty>,
    pub(crate) edge_ratio: Option<SQty>,
    pub(crate) min_width_ratio: Option<SQty>,
    pub(crate) significance: Option<SQty>,
    pub(crate) samples: Option<SQty>,
    pub(crate) seed: Option<SQty>,
    pub(crate) settle_multiple: Option<SQty>,
    pub(crate) reading: Option<Spanned<String>>,
    pub(crate) max_test_time: Option<SQty>,
}

/// The default metric for the network when none is given; a reading at 0⁺ is refused for a
/// network whose h(0⁺) = 0 (it would be compared with zero).
pub(crate) fn settle_metric(
    rd: &Reader,
    p: Option<&RawPlan>,
    net: &Network,
    s: &mut PlanSettings,
) -> Result<(), ScenarioError> {
    let by_network = s.metric_choice == MetricChoice::ByNetwork;
    if by_network {
        s.metric = crate::plan::default_metric(net);
    }
    if s.fit_quantity != FitQuantity::TimeConstants {
        s.fit_quantity = FitQuantity::of_metric(s.metric);
    }
    if by_network {
        return Ok(());
    }
    if s.metric != Metric::Window && net.h0_negligible() && net.residues_known {
        let span = p.and_then(|p| p.metric.as_ref()).map(|m| m.span());
        return Err(rd.err(
            span.as_ref(),
            "plan.metric",
            format!(
                "\"{}\" judges the reading at the pulse's end, but h(0⁺) = 0 for this network (its \
                 response starts from zero, so that reading is compared with ≈ 0 and means nothing). Use \
                 metric = \"window\" (the error over the whole window, against the peak |h|), or leave \
                 metric out for that default",
                s.metric.name()
            ),
        ));
    }
    Ok(())
}

/// The most an unstable mode may grow over the run, as a power of e (e^200 ≈ 7·10⁸⁶: its
/// products and squares in the error figures stay finite).
pub const MAX_GROWTH: f64 = 200.0;

/// An unstable network is planned over a run of `settle_multiple` decaying time constants;
/// a mode growing past e^[`MAX_GROWTH`] over that run would overflow the figures, so the
/// scenario is refused naming the multiple that would fit.
pub(crate) fn unstable_growth(
    rd: &Reader,
    p: Option<&RawPlan>,
    net: &Network,
    s: &PlanSettings,
) -> Result<(), ScenarioError> {
    if net.stable() {
        return Ok(());
    }
    let grow = net.modes.iter().map(|m| m.pole.re).fold(0.0f64, f64::max);
    let scale = net.tau_slow().unwrap_or_else(|| {
        1.0 / net
            .modes
            .iter()
            .map(|m| m.natural_frequency())
            .filter(|&w| w > 0.0)
            .fold(f64::INFINITY, f64::min)
    });
    // The rule-of-thumb pulse is sized on the significant time scale, which a slowly growing
    // mode may make long against a fast-growing one.
    let rule_end = 2.0 * net.significance(s.significance).tau / s.width_ratio;
    let over_rule = grow * rule_end;
    if !(over_rule.is_finite() && over_rule <= MAX_GROWTH) {
        let span = p.and_then(|p| p.width_ratio.as_ref()).map(|q| q.span());
        return Err(rd.err(
            span.as_ref(),
            if span.is_some() {
                "plan.width_ratio"
            } else {
                "network"
            },
            format!(
                "the rule-of-thumb pulse (its significant time scale / {}) lasts long enough for \
                 the unstable mode to grow by e^{over_rule:.3e}, beyond the e^{MAX_GROWTH} the \
                 figures hold in f64; a width_ratio of at least {:.4e} fits",
                s.width_ratio,
                s.width_ratio * over_rule / MAX_GROWTH
            ),
        ));
    }
    let growth = grow * scale * s.settle_multiple;
    if growth.is_finite() && growth <= MAX_GROWTH {
        return Ok(());
    }
    let fits = MAX_GROWTH / (grow * scale);
    let span = p.and_then(|p| p.settle_multiple.as_ref()).map(|q| q.span());
    let key = if span.is_some() {
        "plan.settle_multiple"
    } else {
        "network"
    };
    Err(rd.err(
        span.as_ref(),
        key,
        format!(
            "the unstable mode grows by e^{growth:.3e} over a run of {} time scales, beyond the \
             e^{MAX_GROWTH} the figures hold in f64; {}",
            s.settle_multiple,
            if fits >= 1.0 {
                format!("a settle_multiple of at most {fits:.4} fits")
            } else {
                "no run of one time scale or more fits: the network grows too fast for its \
                 slowest decay"
                    .to_string()
            }
        ),
    ))
}

/// A plain number within [lo, hi], or an error naming the key and the range.
fn within(
    rd: &Reader,
    q: &SQty,
    key: &str,
    (lo, hi): (f64, f64),
    what: &str,
) -> Result<f64, ScenarioError> {
    // The key's own range decides (and names itself), not the general quantity range.
    let v = rd.number_within(q, key, Dim::Number, (f64::MIN_POSITIVE, f64::MAX))?;
    if !(lo..=hi).contains(&v) {
        return Err(rd.err(
            Some(&q.span()),
            key,
            format!("{} is outside {lo:e} … {hi:e}: {what}", rd.shown(q)),
        ));
    }
    Ok(v)
}

/// The budget: a percentage above the rounding level (10⁻¹⁰ %) and below 100 %.
fn budget(rd: &Reader, q: &SQty) -> Result<f64, ScenarioError> {
    let v = rd.fraction(q, "plan.target_error")?;
    if !(1e-12..1.0).contains(&v) {
        return Err(rd.err(
            Some(&q.span()),
            "plan.target_error",
            format!(
                "{} is not a budget the figures can hold: give one between 1e-10 % and 100 %, e.g. \"1 %\"",
                rd.shown(q)
            ),
        ));
    }
    Ok(v)
}

fn metric(rd: &Reader, m: &Spanned<String>) -> Result<Metric, ScenarioError> {
    match m.get_ref().as_str() {
        "t0" => Ok(Metric::T0),
        "t0-aligned" => Ok(Metric::T0Aligned),
        "window" => Ok(Metric::Window),
        other => Err(rd.err(
            Some(&m.span()),
            "plan.metric",
            format!(
                "\"{other}\" is not a metric; use \"t0\", \"t0-aligned\" or \"window\" (or \"tau\" with \
                 reading = \"fit\")"
            ),
        )),
    }
}

fn reading(rd: &Reader, m: &Spanned<String>) -> Result<ReadingKind, ScenarioError> {
    match m.get_ref().as_str() {
        "raw" => Ok(ReadingKind::Raw),
        "aligned" => Ok(ReadingKind::Aligned),
        "fit" => Ok(ReadingKind::Fit),
        other => Err(rd.err(
            Some(&m.span()),
            "plan.reading",
            format!(
                "\"{other}\" is not a reading; use \"raw\" (y/area), \"aligned\" (y shifted by the pulse's \
                 centroid) or \"fit\" (the modal fit of `recover`, which removes the pulse exactly)"
            ),
        )),
    }
}

/// The most a planned test may last (a week): longer figures are typing slips (our choice).
const MAX_TEST_TIME: f64 = 7.0 * 86_400.0;

/// A whole number within [lo, hi].
fn whole(rd: &Reader, q: &SQty, key: &str, (lo, hi): (f64, f64)) -> Result<f64, ScenarioError> {
    let v = within(rd, q, key, (lo, hi), "give a whole number in that range")?;
    if v.fract() != 0.0 {
        return Err(rd.err(
            Some(&q.span()),
            key,
            format!("{} is not a whole number", rd.shown(q)),
        ));
    }
    Ok(v)
}

/// `[plan]` with defaults applied. The ratios are held to ranges where the planner's figures
/// stay finite and meaningful (a width of 10⁻³⁰⁰ of a time scale, a run of 10⁻³²⁴ time
/// constants, 10⁹ Monte Carlo samples are refused by name).
pub(crate) fn plan_settings(
    rd: &Reader,
    p: Option<&RawPlan>,
) -> Result<PlanSettings, ScenarioError> {
    let mut s = PlanSettings::default();
    let Some(p) = p else { return Ok(s) };
    if let Some(q) = &p.target_error {
        s.target_error = Some(budget(rd, q)?);
    }
    if let Some(r) = &p.reading {
        s.reading = reading(rd, r)?;
    }
    if let Some(m) = &p.metric {
        plan_metric(rd, m, &mut s)?;
    }
    if let Some(q) = &p.max_test_time {
        s.max_test_time = Some(max_test_time(rd, q)?);
    }
    plan_ratios(rd, p, &mut s)?;
    if let Some(q) = &p.samples {
        s.samples = Some(whole(rd, q, "plan.samples", (1.0, MAX_SAMPLES))? as usize);
    }
    if let Some(q) = &p.seed {
        s.seed = whole(rd, q, "plan.seed", (0.0, 2f64.powi(53)))? as u64;
    }
    if let Some(q) = &p.significance {
        let v = rd.fraction(q, "plan.significance")?;
        if !(0.0..1.0).contains(&v) {
            return Err(rd.err(
                Some(&q.span()),
                "plan.significance",
                "must be between 0 and 100 %",
            ));
        }
        s.significance = v;
    }
    Ok(s)
}

/// `metric`: "tau" (the fit's time constants, only with reading = "fit") or an error metric.
fn plan_metric(
    rd: &Reader,
    m: &Spanned<String>,
    s: &mut PlanSettings,
) -> Result<(), ScenarioError> {
    if m.get_ref() == "tau" {
        if s.reading != ReadingKind::Fit {
            return Err(rd.err(
                Some(&m.span()),
                "plan.metric",
                "\"tau\" (the time constants' interval) is a figure of the modal fit: set reading = \"fit\" \
                 in [plan], or use \"t0\", \"t0-aligned\" or \"window\"",
            ));
        }
        s.fit_quantity = FitQuantity::TimeConstants;
    } else {
        s.metric_choice = MetricChoice::Given;
        s.metric = metric(rd, m)?;
    }
    Ok(())
}

/// `max_test_time`: a positive time up to [`MAX_TEST_TIME`].
fn max_test_time(rd: &Reader, q: &SQty) -> Result<f64, ScenarioError> {
    let v = rd.number(q, "plan.max_test_time", Dim::Time)?;
    if !(v > 0.0 && v <= MAX_TEST_TIME) {
        return Err(rd.err(
            Some(&q.span()),
            "plan.max_test_time",
            format!(
                "{} is not a test length: give a positive time up to a week, e.g. \"10 s\"",
                rd.shown(q)
            ),
        ));
    }
    Ok(v)
}

/// The width, least width and edge ratios and the settle multiple, each within its range.
fn plan_ratios(rd: &Reader, p: &RawPlan, s: &mut PlanSettings) -> Result<(), ScenarioError> {
    let ratio = "a ratio of the fastest time scale to the width";
    if let Some(q) = &p.width_ratio {
        s.width_ratio = within(rd, q, "plan.width_ratio", (1.0, 1e9), ratio)?;
    }
    if let Some(q) = &p.min_width_ratio {
        s.min_width_ratio = Some(within(rd, q, "plan.min_width_ratio", (1e-3, 1e9), ratio)?);
    }
    if let Some(q) = &p.edge_ratio {
        s.edge_ratio = within(
            rd,
            q,
            "plan.edge_ratio",
            (1.25, 1e9),
            "width / 10–90 % edge",
        )?;
        if s.edge_ratio <= 1.25 {
            return Err(rd.err(
                Some(&q.span()),
                "plan.edge_ratio",
                "must exceed 1.25: slower edges leave no flat top at the 50 % width",
            ));
        }
    }
    if let Some(q) = &p.settle_multiple {
        let what = "the run in slowest time constants";
        s.settle_multiple = within(rd, q, "plan.settle_multiple", (1.0, 1e3), what)?;
    }
    Ok(())
}
