//! The JSON object printed by `--json`: the outcome types serialised by their `Serialize`
//! derives, with the worded sentences (warnings, notes, the run basis, the scaling reasons)
//! added beside their numbers.

use super::words::{self, Context};
use crate::estimate::{Cursor, ErrorEstimate, Metric};
use crate::notice::{Note, Severity, Warning};
use crate::pipeline::{AssessOutcome, PlanOutcome};
use crate::plan::{Budget, NetworkFacts, Robust, RunBasis};
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::tolerance::ToleranceReport;
use crate::units::Signal;
use serde::Serialize;
use serde_json::Value;

/// A pulse with the run it is read over.
#[derive(Serialize)]
struct PulseRun<'a> {
    #[serde(flatten)]
    pulse: &'a Trapezoid,
    run: f64,
}

/// The scenario's own settings that shape every figure.
#[derive(Serialize)]
struct ScenarioEcho<'a> {
    file: &'a str,
    title: &'a Option<String>,
    drive: Signal,
    area_unit: &'static str,
    metric: Metric,
    target_error: Option<f64>,
}

impl<'a> ScenarioEcho<'a> {
    fn of(sc: &'a Scenario) -> ScenarioEcho<'a> {
        ScenarioEcho {
            file: &sc.file,
            title: &sc.title,
            drive: sc.drive,
            area_unit: sc.drive.area_unit(),
            metric: sc.plan.metric,
            target_error: sc.plan.target_error,
        }
    }
}

/// A warning with its sentence and severity beside its code and numbers.
#[derive(Serialize)]
struct WordedWarning<'a> {
    #[serde(flatten)]
    warning: &'a Warning,
    severity: Severity,
    message: String,
}

fn worded_warnings<'a>(ws: &'a [Warning], cx: &Context) -> Vec<WordedWarning<'a>> {
    ws.iter()
        .map(|w| WordedWarning {
            warning: w,
            severity: w.severity(),
            message: words::warning_text(w, cx),
        })
        .collect()
}

/// Why a bound on the first-order estimate's left-out terms is not given.
const REMAINDER_NA: &str =
    "n/a: the bound on the terms the estimate leaves out is not finite for this pulse";

/// The error estimate with every first-order figure outside its validity written as "n/a" and
/// the reason, where serde would print `null`.
fn error_with_na<S: serde::Serializer>(e: &&ErrorEstimate, s: S) -> Result<S::Ok, S::Error> {
    fn patch(v: &mut Value) {
        match v {
            Value::Object(m) => {
                if let Some(Value::Object(fo)) = m.get_mut("first_order") {
                    for (key, why) in [
                        ("t0_rel", words::FIRST_ORDER_NA),
                        ("t0_aligned_rel", words::FIRST_ORDER_NA),
                        ("t0_remainder", REMAINDER_NA),
                        ("t0_aligned_remainder", REMAINDER_NA),
                    ] {
                        if fo.get(key).is_some_and(Value::is_null) {
                            fo.insert(key.into(), Value::String(why.into()));
                        }
                    }
                }
                m.values_mut().for_each(patch);
            }
            Value::Array(a) => a.iter_mut().for_each(patch),
            _ => {}
        }
    }
    let mut v = serde_json::to_value(e).map_err(serde::ser::Error::custom)?;
    patch(&mut v);
    v.serialize(s)
}

fn worded_notes(ns: &[Note], drive: Signal) -> Vec<String> {
    ns.iter().map(|n| words::note_text(n, drive)).collect()
}

#[derive(Serialize)]
struct RuleOfThumb<'a> {
    pulse: PulseRun<'a>,
    #[serde(serialize_with = "error_with_na")]
    error: &'a ErrorEstimate,
}

#[derive(Serialize)]
struct PlanDetail<'a> {
    ideal_pulse: PulseRun<'a>,
    rule_of_thumb: RuleOfThumb<'a>,
    target: &'a Option<Budget>,
    run_basis: String,
    run_rule: &'a RunBasis,
    reading: crate::plan::ReadingKind,
}

#[derive(Serialize)]
struct Tolerances<'a> {
    #[serde(flatten)]
    report: &'a ToleranceReport,
    robust: &'a Option<Robust>,
}

/// What `plan` and `assess` both print.
#[derive(Serialize)]
struct Common<'a> {
    command: &'static str,
    scenario: ScenarioEcho<'a>,
    network: &'a NetworkFacts,
    pulse: PulseRun<'a>,
    #[serde(serialize_with = "error_with_na")]
    error: &'a ErrorEstimate,
    bench: Value,
    at: &'a [Cursor],
    warnings: Vec<WordedWarning<'a>>,
}

#[derive(Serialize)]
struct PlanDoc<'a> {
    #[serde(flatten)]
    common: Common<'a>,
    tolerance: Option<Tolerances<'a>>,
    notes: Vec<String>,
    notices: &'a [Note],
    plan: PlanDetail<'a>,
    /// The plan for the fit reading, with `reading = "fit"`.
    #[serde(skip_serializing_if = "Option::is_none")]
    fit_plan: Option<&'a crate::fitplan::FitPlan>,
}

/// The fields both commands share, for one prepared network, pulse and bench view.
#[allow(clippy::too_many_arguments)]
fn common<'a>(
    command: &'static str,
    sc: &'a Scenario,
    prep: &'a crate::plan::Prepared,
    pulse: PulseRun<'a>,
    error: &'a ErrorEstimate,
    bench: &crate::bench::BenchPlan,
    at: &'a [Cursor],
    warnings: &'a [Warning],
) -> Common<'a> {
    let basis = words::run_basis_text(&prep.run_basis);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    Common {
        command,
        scenario: ScenarioEcho::of(sc),
        network: &prep.facts,
        pulse,
        error,
        bench: bench_json(bench, sc.drive),
        at,
        warnings: worded_warnings(warnings, &cx),
    }
}

/// The bench part: the derived fields plus the worded scaling reasons and notes.
fn bench_json(b: &crate::bench::BenchPlan, drive: Signal) -> Value {
    let mut v = serde_json::to_value(b).unwrap_or(Value::Null);
    let reasons: Vec<String> = b
        .amplitude
        .scaling
        .reasons
        .iter()
        .map(|h| words::limit_text(h, drive))
        .collect();
    v["scaling"]["reasons"] = reasons.into();
    v["notes"] = worded_notes(&b.notes, drive).into();
    v["notices"] = serde_json::to_value(&b.notes).unwrap_or(Value::Null);
    v
}

/// JSON for `plan`.
pub fn plan_json(sc: &Scenario, out: &PlanOutcome, cs: &[Cursor]) -> Value {
    serde_json::to_value(plan_doc(sc, out, cs)).unwrap_or(Value::Null)
}

/// The path of the first NaN or infinite figure `plan --json` would carry (JSON would show it
/// as `null`), or `None` when every figure is finite.
pub fn plan_non_finite(sc: &Scenario, out: &PlanOutcome, cs: &[Cursor]) -> Option<String> {
    super::finite::first_non_finite(&out.bench)
        .map(|p| format!("bench.{p}"))
        .or_else(|| super::finite::first_non_finite(&plan_doc(sc, out, cs)))
}

/// The path of the first NaN or infinite figure `assess --json` would carry.
pub fn assess_non_finite(sc: &Scenario, out: &AssessOutcome, cs: &[Cursor]) -> Option<String> {
    super::finite::first_non_finite(&out.bench)
        .map(|p| format!("bench.{p}"))
        .or_else(|| super::finite::first_non_finite(&assess_doc(sc, out, cs)))
}

fn plan_doc<'a>(sc: &'a Scenario, out: &'a PlanOutcome, cs: &'a [Cursor]) -> PlanDoc<'a> {
    let run = out.prep.run;
    let pulse = PulseRun {
        pulse: &out.pulse,
        run,
    };
    let common = common(
        "plan",
        sc,
        &out.prep,
        pulse,
        &out.estimate,
        &out.bench,
        cs,
        &out.warnings,
    );
    PlanDoc {
        common,
        tolerance: out.tolerance.as_ref().map(|report| Tolerances {
            report,
            robust: &out.robust,
        }),
        notes: worded_notes(&out.notes, sc.drive),
        notices: &out.notes,
        plan: PlanDetail {
            ideal_pulse: PulseRun {
                pulse: &out.ideal_pulse,
                run,
            },
            rule_of_thumb: RuleOfThumb {
                pulse: PulseRun {
                    pulse: &out.rule,
                    run,
                },
                error: &out.rule_estimate,
            },
            target: &out.budget,
            run_basis: words::run_basis_text(&out.prep.run_basis),
            run_rule: &out.prep.run_basis,
            reading: sc.plan.reading,
        },
        fit_plan: out.fit.as_ref(),
    }
}

/// JSON for `assess`.
pub fn assess_json(sc: &Scenario, out: &AssessOutcome, cs: &[Cursor]) -> Value {
    serde_json::to_value(assess_doc(sc, out, cs)).unwrap_or(Value::Null)
}

fn assess_doc<'a>(sc: &'a Scenario, out: &'a AssessOutcome, cs: &'a [Cursor]) -> Common<'a> {
    let pulse = PulseRun {
        pulse: &out.pulse,
        run: out.run,
    };
    common(
        "assess",
        sc,
        &out.prep,
        pulse,
        &out.estimate,
        &out.bench,
        cs,
        &out.warnings,
    )
}
