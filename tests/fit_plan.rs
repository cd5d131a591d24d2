//! `[plan] reading = "fit"` through the binary: the plan it prints, its limits and its
//! refusals. The bound itself is checked against closed forms in `src/fisher.rs` and against
//! the spread `recover` achieves in tests/recovery/check_fit_plan.py.

use serde_json::Value;
use std::path::PathBuf;
use std::process::{Command, Output};

fn scenario(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-fit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_pulseplan"))
        .args(args)
        .output()
        .unwrap()
}

fn plan_json(path: &std::path::Path) -> (Value, Output) {
    let o = run(&["plan", path.to_str().unwrap(), "--json"]);
    let v = serde_json::from_slice(&o.stdout).unwrap_or_else(|e| {
        panic!(
            "not JSON ({e}): {}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        )
    });
    (v, o)
}

/// The warnings' codes.
fn codes(v: &Value) -> Vec<&str> {
    v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w["code"].as_str())
        .collect()
}

/// One pole at −1000 rad/s (τ = 1 ms) with unit DC gain, read by the fit (an invented demo).
const ONE_POLE: &str = "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n\
[plan]\nreading = \"fit\"\ntarget_error = \"0.1 %\"\n[capture]\nnoise = \"1 mV\"\n";

#[test]
fn fit_plan_prints_intervals_and_the_comparison() {
    let (v, o) = plan_json(&scenario("one.toml", ONE_POLE));
    assert!(
        o.status.code().unwrap() <= 1,
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let fp = &v["fit_plan"];
    assert_eq!(v["plan"]["reading"], "fit");
    assert_eq!(fp["quantity"], "h0");
    assert!(fp["met"].as_bool().unwrap());
    // The predicted figure meets the budget at the planned averages.
    assert!(fp["predicted"].as_f64().unwrap() <= 1e-3);
    let rows = fp["comparison"].as_array().unwrap();
    assert_eq!(rows.len(), 3);
    assert_eq!(rows[2]["plan"], "fit");
    // The recommended pulse is the fit plan's, and wider than the rule of thumb's τ/100.
    let width = v["pulse"]["width"].as_f64().unwrap();
    assert!((width - rows[2]["width"].as_f64().unwrap()).abs() < 1e-12 * width);
    assert!(width > 1e-5, "width {width}");
    // A time constant interval for the one mode, relative to τ = 1 ms.
    let tau = fp["intervals"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["of"] == "time_constant")
        .unwrap();
    assert!((tau["value"].as_f64().unwrap() - 1e-3).abs() < 1e-12);
    // The record keeps 1000 samples before the pulse for the noise and baseline.
    let cap = &v["bench"]["capture"];
    let pre = cap["pre_trigger"].as_f64().unwrap() / cap["sample_interval"].as_f64().unwrap();
    assert!(pre >= 999.0, "pre-trigger samples {pre}");
    let text = String::from_utf8_lossy(
        &run(&["plan", scenario("one.toml", ONE_POLE).to_str().unwrap()]).stdout,
    )
    .into_owned();
    assert!(text.contains("Fit reading"), "{text}");
    assert!(text.contains("fewer averages"), "{text}");
}

#[test]
fn max_test_time_bounds_the_averages() {
    let text = ONE_POLE.replace(
        "target_error = \"0.1 %\"",
        "target_error = \"0.0001 %\"\nmax_test_time = \"50 ms\"",
    );
    let (v, o) = plan_json(&scenario("limited.toml", &text));
    let fp = &v["fit_plan"];
    assert!(fp["test_time"].as_f64().unwrap() <= 0.05 * (1.0 + 1e-12));
    assert!(!fp["met"].as_bool().unwrap());
    assert_eq!(
        o.status.code(),
        Some(1),
        "an unreachable budget is a warning to act on"
    );
    let codes = codes(&v);
    assert!(codes.contains(&"fit-budget-unreachable"), "{codes:?}");
}

#[test]
fn refusals_name_the_key() {
    let no_noise =
        "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[plan]\nreading = \"fit\"\n";
    let o = run(&["plan", scenario("nonoise.toml", no_noise).to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("plan.reading") && err.contains("[capture] noise"),
        "{err}"
    );

    let tau_raw =
        "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[plan]\nmetric = \"tau\"\n";
    let o = run(&["plan", scenario("tauraw.toml", tau_raw).to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("plan.metric"));

    let bad = ONE_POLE.replace("reading = \"fit\"", "reading = \"fitted\"");
    let o = run(&["plan", scenario("bad.toml", &bad).to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("plan.reading"));
}

#[test]
fn networks_the_fit_cannot_bound_keep_the_raw_plan_and_say_why() {
    // A repeated pole and a network known only by its time constants.
    for (name, net) in [
        ("double.toml", "poles = [\"-1k\", \"-1k\"]\ngain = \"1M\""),
        ("taus.toml", "time_constants = [\"1 ms\"]"),
    ] {
        let text =
            format!("[network]\n{net}\n[plan]\nreading = \"fit\"\n[capture]\nnoise = \"1 mV\"\n");
        let (v, _) = plan_json(&scenario(name, &text));
        assert!(v.get("fit_plan").is_none(), "{name}");
        let codes = codes(&v);
        assert!(codes.contains(&"fit-unavailable"), "{name}: {codes:?}");
    }
}

#[test]
fn time_constant_metric_plans_on_the_slowest_uncertainty() {
    // Two real poles; the fit's budget applies to each time constant's relative interval.
    let text = "[network]\npoles = [\"-1k\", \"-20k\"]\ngain = \"20M\"\n[plan]\nreading = \"fit\"\n\
metric = \"tau\"\ntarget_error = \"1 %\"\n[capture]\nnoise = \"1 mV\"\n";
    let (v, _) = plan_json(&scenario("two.toml", text));
    let fp = &v["fit_plan"];
    assert_eq!(fp["quantity"], "time_constants");
    let worst = fp["intervals"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|i| i["of"] == "time_constant")
        .map(|i| i["relative"].as_f64().unwrap())
        .fold(0.0, f64::max);
    assert!((worst - fp["predicted"].as_f64().unwrap()).abs() <= 1e-9 * worst);
    assert!(worst <= 0.01);
}
