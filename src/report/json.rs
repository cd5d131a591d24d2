//! The JSON object printed by `--json`.

use super::Cursor;
use crate::bench::BenchPlan;
use crate::estimate::{ErrorEstimate, Reading};
use crate::network::Network;
use crate::plan::{AssessOutcome, PlanOutcome, Prepared, Target, Warning};
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use serde_json::{Value, json};

fn c2(z: num_complex::Complex64) -> Value {
    json!([z.re, z.im])
}

fn finite(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

/// The network part of the JSON.
pub fn network_json(net: &Network, prep: &Prepared) -> Value {
    let modes: Vec<Value> = net
        .modes
        .iter()
        .enumerate()
        .map(|(i, m)| {
            json!({
                "pole": c2(m.pole),
                "multiplicity": m.multiplicity(),
                "residues": if net.residues_known {
                    Value::Array(m.residues.iter().map(|&r| c2(r)).collect())
                } else { Value::Null },
                "time_constant": finite(m.time_constant()),
                "natural_frequency": m.natural_frequency(),
                "damping": m.damping().map_or(Value::Null, |d| json!(d)),
                "share": prep.shares[i],
                "significant": prep.significant[i],
            })
        })
        .collect();
    json!({
        "form": net.form.name(),
        "order": net.order(),
        "modes": modes,
        "zeros": net.zeros.iter().map(|&z| c2(z)).collect::<Vec<_>>(),
        "direct": net.direct,
        "improper": net.improper,
        "residues_known": net.residues_known,
        "h0_plus": if net.residues_known { json!(net.h0_plus()) } else { Value::Null },
        "h0_plus_ivt": if net.residues_known { json!(net.h0_ivt) } else { Value::Null },
        "peak": prep.shape.peak,
        "t_peak": prep.shape.t_peak,
        "settle_time": prep.shape.settle,
        "tau_fast": prep.tau_fast,
        "tau_fast_significant": prep.tau_plan,
        "tau_slow": prep.tau_slow,
        "stable": net.stable(),
    })
}

/// The pulse part of the JSON (both the generator and the ramp view).
pub fn pulse_json(p: &Trapezoid, run: f64) -> Value {
    json!({
        "amplitude": p.amplitude,
        "area": p.area(),
        "width": p.width_50(),
        "flat": p.flat,
        "rise": p.rise,
        "fall": p.fall,
        "rise_10_90": p.rise_10_90(),
        "fall_10_90": p.fall_10_90(),
        "centroid": p.centroid(),
        "sigma": p.variance().sqrt(),
        "end": p.end(),
        "run": run,
    })
}

fn reading_json(r: &Reading) -> Value {
    json!({"reading": r.reading, "ideal": r.ideal, "abs": r.abs, "rel": r.rel})
}

/// The error part of the JSON.
pub fn error_json(e: &ErrorEstimate) -> Value {
    let mut v = json!({
        "t0": reading_json(&e.t0),
        "t0_aligned": reading_json(&e.t0_aligned),
        "window": {"max_rel": e.window.max_rel, "t_max": e.window.t_max, "rms_rel": e.window.rms_rel},
        "normalised_by": e.normalised_by.name(),
        "normaliser": e.normaliser,
        "rounding_floor": e.floor,
        "first_order": {
            "t0_rel": e.first_order.t0_rel,
            "t0_aligned_rel": e.first_order.t0_aligned_rel,
            "sigma": e.first_order.sigma,
        },
    });
    if !e.per_mode.is_empty() {
        v["per_mode"] = Value::Array(
            e.per_mode
                .iter()
                .map(|(tau, m)| {
                    json!({
                        "time_constant": tau,
                        "t0_rel": m.t0.rel,
                        "t0_aligned_rel": m.t0_aligned.rel,
                        "window_max_rel": m.window.max_rel,
                        "window_rms_rel": m.window.rms_rel,
                    })
                })
                .collect(),
        );
        v["normalised_by"] = json!("each mode's own h(0+)");
    }
    v
}

fn cursors_json(cs: &[Cursor]) -> Value {
    Value::Array(
        cs.iter()
            .map(|c| {
                json!({
                    "t": c.t, "ideal": c.ideal, "ideal_aligned": c.ideal_aligned,
                    "predicted": c.predicted, "difference": c.predicted - c.ideal,
                    "difference_aligned": c.predicted - c.ideal_aligned,
                })
            })
            .collect(),
    )
}

fn warnings_json(w: &[Warning]) -> Value {
    serde_json::to_value(w).unwrap_or(Value::Null)
}

fn scenario_json(sc: &Scenario) -> Value {
    json!({
        "file": sc.file,
        "title": sc.title,
        "drive": match sc.drive { crate::scenario::DriveKind::Voltage => "voltage", _ => "current" },
        "area_unit": sc.drive.area_unit(),
        "metric": sc.plan.metric.name(),
        "target_error": sc.plan.target_error,
    })
}

/// The bench part of the JSON: limits applied, noise curves, period and capture.
pub fn bench_json(b: &BenchPlan) -> Value {
    let noise = b.noise.as_ref().map_or(Value::Null, |n| {
        json!({
            "widths": n.widths, "bias": n.bias, "noise": n.noise, "total": n.total,
            "best_width": n.best_width, "best_bias": n.best_bias, "best_noise": n.best_noise,
        })
    });
    let period = b.period.as_ref().map_or(
        Value::Null,
        |p| json!({"period": p.period, "tail": p.tail, "target": p.target, "met": p.met}),
    );
    let c = &b.capture;
    let split = c.split.map_or(Value::Null, |(f, s)| {
        json!([
            {"interval": f.interval, "length": f.length, "points": f.points},
            {"interval": s.interval, "length": s.length, "points": s.points},
        ])
    });
    json!({
        "display_amplitude": b.display_amplitude,
        "open_over_display": b.open_over_display,
        "scaling": {
            "requested_area": b.scaling.requested_area,
            "area": b.scaling.area,
            "read_factor": b.scaling.read_factor(),
            "reasons": b.scaling.reasons,
        },
        "peak_input": b.peak_input,
        "peak_output": b.peak_output,
        "timing_change": b.timing_change.map(|(before, after)| json!({"before": before, "after": after})),
        "period": period,
        "noise": noise,
        "averages": b.averages,
        "capture": {
            "sample_interval": c.sample_interval,
            "sample_rate": c.sample_rate,
            "pre_trigger": c.pre_trigger,
            "record_length": c.record_length,
            "points": c.points,
            "averages": c.averages,
            "fits_memory": c.fits_memory,
            "split": split,
            "samples_across_pulse": c.samples_across_pulse,
            "trigger": "generator sync output, rising edge",
        },
        "notes": b.notes,
    })
}

/// The tolerance part of the JSON.
pub fn tolerance_json(out: &PlanOutcome) -> Value {
    let Some(t) = &out.tolerance else {
        return Value::Null;
    };
    let spread =
        |s: &crate::tolerance::Spread| json!({"nominal": s.nominal, "min": s.min, "max": s.max});
    let method = match t.method {
        crate::tolerance::Method::Corners { count } => json!({"kind": "corners", "cases": count}),
        crate::tolerance::Method::MonteCarlo { samples, seed } => {
            json!({"kind": "monte-carlo", "cases": samples, "seed": seed, "distribution": "uniform within each tolerance band"})
        }
    };
    json!({
        "method": method,
        "tau_fast_significant": spread(&t.tau_fast),
        "tau_slow": spread(&t.tau_slow),
        "h0_plus": spread(&t.h0),
        "failures": t.failures,
        "sensitivity": t.sensitivities.iter().map(|s| json!({
            "part": s.part, "tolerance": s.tolerance,
            "d_tau_fast": s.tau_fast, "d_tau_slow": s.tau_slow, "d_h0_plus": s.h0,
            "influence": s.influence(),
        })).collect::<Vec<_>>(),
        "robust": out.robust.map(|r| json!({
            "nominal_width": r.nominal_width, "width": r.width,
            "nominal_run": r.nominal_run, "run": r.run,
        })),
    })
}

/// JSON for `plan`.
pub fn plan_json(sc: &Scenario, out: &PlanOutcome, cs: &[Cursor]) -> Value {
    let target = match &out.target {
        None => Value::Null,
        Some(Target::Met { width, value }) => {
            json!({"met": true, "width": width, "value": value, "widening": out.widening})
        }
        Some(Target::Capped { width, value }) => {
            json!({"met": true, "capped": true, "width": width, "value": value, "widening": out.widening})
        }
        Some(Target::Unreachable { width, value }) => {
            json!({"met": false, "narrowest_tried": width, "value": value})
        }
    };
    json!({
        "command": "plan",
        "scenario": scenario_json(sc),
        "network": network_json(&sc.network, &out.prep),
        "pulse": pulse_json(&out.pulse, out.prep.run),
        "error": error_json(&out.estimate),
        "bench": bench_json(&out.bench),
        "tolerance": tolerance_json(out),
        "notes": out.notes,
        "plan": {
            "ideal_pulse": pulse_json(&out.ideal_pulse, out.prep.run),
            "rule_of_thumb": {
                "pulse": pulse_json(&out.rule, out.prep.run),
                "error": error_json(&out.rule_estimate),
            },
            "target": target,
            "run_basis": out.prep.run_basis,
        },
        "at": cursors_json(cs),
        "warnings": warnings_json(&out.warnings),
    })
}

/// JSON for `assess`.
pub fn assess_json(sc: &Scenario, out: &AssessOutcome, cs: &[Cursor]) -> Value {
    json!({
        "command": "assess",
        "scenario": scenario_json(sc),
        "network": network_json(&sc.network, &out.prep),
        "pulse": pulse_json(&out.pulse, out.run),
        "error": error_json(&out.estimate),
        "bench": bench_json(&out.bench),
        "at": cursors_json(cs),
        "warnings": warnings_json(&out.warnings),
    })
}
