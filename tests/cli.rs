//! End-to-end tests of the `pulseplan` binary: exit codes, messages, JSON fields, cursors and
//! CSV output, checked against closed forms named beside each check.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_pulseplan"))
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-cli-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().unwrap()
}

fn json_of(out: &Output) -> Value {
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "not JSON ({e}): {}\n{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        )
    })
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

#[test]
fn malformed_files_exit_2_naming_key_and_line() {
    let dir = scratch("bad");
    // (file text, expected key in the message, expected line)
    let cases: &[(&str, &str, usize)] = &[
        (
            "title = \"x\"\n[network]\npoles = [\"-1k\"]\ngain = \"4.7 nf\"\n",
            "network.gain",
            4,
        ),
        (
            "title = \"no network\"\n[drive]\nkind = \"voltage\"\n",
            "network",
            1,
        ),
        (
            "[network]\ntime_constants = [\"1 ms\"]\n\npoles = [\"-3\"]\n",
            "network.poles",
            4,
        ),
        (
            "[network]\npoles = [\"-1k+2kj\", \"-1k-2.5kj\"]\n",
            "network.poles[0]",
            2,
        ),
        (
            "[network]\nnumerator = [1]\ndenominator = [0.0, 0]\n",
            "network.denominator",
            3,
        ),
        (
            "[network]\nnumerator = [1]\ndenominator = [1, nan]\n",
            "network.denominator[1]",
            3,
        ),
        (
            "[network]\npoles = [\"-5\"]\n[plan]\nmetric = \"peak\"\n",
            "plan.metric",
            4,
        ),
        (
            "[network]\npoles = [\"-5\"]\n[plan]\ntarget_eror = \"1 %\"\n",
            "(syntax)",
            4,
        ),
        (
            "[network]\npoles = [\"-5\"]\n[pulse]\namplitude = \"1 V\"\nwidth = \"1 ns\"\nrise = \"5 ns\"\nfall = \"5 ns\"\n",
            "pulse.width",
            5,
        ),
    ];
    for (i, (text, key, line)) in cases.iter().enumerate() {
        let f = write(&dir, &format!("bad{i}.toml"), text);
        let out = run(&["assess", f.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "case {i}: {err}");
        assert!(
            err.contains(&format!("bad{i}.toml:{line}:")),
            "case {i} line: {err}"
        );
        assert!(err.contains(key), "case {i} key {key}: {err}");
        assert!(!err.contains("panicked"), "case {i}: {err}");
    }
}

#[test]
fn demo_scenarios_plan_with_complete_json() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    let mut seen = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().and_then(|e| e.to_str()) != Some("toml") {
            continue;
        }
        seen += 1;
        let out = run(&["plan", path.to_str().unwrap(), "--json"]);
        assert!(matches!(out.status.code(), Some(0 | 1)), "{path:?}");
        let v = json_of(&out);
        for key in [
            "/network/modes/0/pole",
            "/network/modes/0/multiplicity",
            "/network/modes/0/time_constant",
            "/network/modes/0/natural_frequency",
            "/network/modes/0/damping",
            "/network/direct",
            "/network/tau_fast",
            "/network/tau_slow",
            "/network/stable",
            "/pulse/amplitude",
            "/pulse/area",
            "/pulse/width",
            "/pulse/flat",
            "/pulse/rise",
            "/pulse/fall",
            "/pulse/rise_10_90",
            "/pulse/fall_10_90",
            "/pulse/centroid",
            "/pulse/end",
            "/pulse/run",
            "/error/t0/reading",
            "/error/t0/ideal",
            "/error/t0/abs",
            "/error/t0/rel",
            "/error/t0_aligned/rel",
            "/error/window/max_rel",
            "/error/window/rms_rel",
            "/error/normalised_by",
            "/warnings",
        ] {
            assert!(v.pointer(key).is_some(), "{path:?} lacks {key}");
        }
        // Warnings decide the exit code: 1 exactly when one needs the user's action
        // (informational ones such as h0-zero do not).
        let warned = v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["severity"] == "act");
        assert_eq!(out.status.code(), Some(if warned { 1 } else { 0 }));
        // The initial-value theorem and the modes must agree (a disagreement is a bug).
        if let (Some(a), Some(b)) = (
            v["network"]["h0_plus"].as_f64(),
            v["network"]["h0_plus_ivt"].as_f64(),
        ) {
            let scale = v["network"]["peak"].as_f64().unwrap();
            assert!((a - b).abs() <= 1e-9 * scale, "{path:?}: {a} vs {b}");
        }
    }
    assert!(seen >= 5);
}

/// Unit-area rectangle of width w (ideal edges) into a/(s+a): y(t) = (1 − e^(−at))/w during the
/// pulse and (1 − e^(−aw))e^(−a(t−w))/w after it (handbook closed form of the RC low-pass).
fn rc_rectangle(a: f64, w: f64, t: f64) -> f64 {
    if t <= w {
        -(-a * t).exp_m1() / w
    } else {
        -(-a * w).exp_m1() * (-a * (t - w)).exp() / w
    }
}

#[test]
fn cursors_match_rc_closed_form() {
    let dir = scratch("rc");
    let (a, w) = (2000.0, 20e-6);
    let f = write(
        &dir,
        "rc.toml",
        "[network]\nnumerator = [2000]\ndenominator = [1, 2000]\n\
         [pulse]\namplitude = \"50 kV\"\nwidth = \"20 us\"\nrise = \"0\"\nfall = \"0\"\nconvention = \"ramp\"\n",
    );
    let out = run(&[
        "assess",
        f.to_str().unwrap(),
        "--json",
        "--at",
        "5us",
        "--at",
        "20 µs",
        "--at",
        "1ms",
    ]);
    let v = json_of(&out);
    for c in v["at"].as_array().unwrap() {
        let t = c["t"].as_f64().unwrap();
        let want = rc_rectangle(a, w, t);
        assert!(rel(c["predicted"].as_f64().unwrap(), want) < 1e-12, "t={t}");
        let ideal = a * (-a * t).exp();
        assert!(rel(c["ideal"].as_f64().unwrap(), ideal) < 1e-12);
    }
    // Reading at 0⁺: h(0⁺)·(1 − e^(−x))/x with x = a·w.
    let x = a * w;
    let reading = v["error"]["t0"]["reading"].as_f64().unwrap();
    assert!(rel(reading, a * (-(-x).exp_m1()) / x) < 1e-12);
    // A 50 kV amplitude is hazardous: the caution must be there.
    let codes: Vec<&str> = v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["code"].as_str().unwrap())
        .collect();
    assert!(codes.contains(&"hazard-voltage"), "{codes:?}");
    assert_eq!(out.status.code(), Some(1));
}

#[test]
fn lag_lead_reading_matches_partial_fractions() {
    // (s + z)/(s + p) = 1 + (z − p)/(s + p): h(0⁺) = z − p (partial fractions); a rectangle of
    // width w reads (z − p)(1 − e^(−pw))/(pw) at its end, the direct term adding nothing there.
    let dir = scratch("laglead");
    let (z, p, w) = (150.0, 1200.0, 30e-6);
    let f = write(
        &dir,
        "ll.toml",
        "[network]\nnumerator = [1, 150]\ndenominator = [1, 1200]\n\
         [pulse]\namplitude = \"10 V\"\nwidth = \"30us\"\nrise = \"0 s\"\nfall = \"0 s\"\nconvention = \"ramp\"\n",
    );
    let v = json_of(&run(&["assess", f.to_str().unwrap(), "--json"]));
    assert_eq!(v["network"]["direct"].as_f64(), Some(1.0));
    let h0 = v["network"]["h0_plus"].as_f64().unwrap();
    assert!(rel(h0, z - p) < 1e-13);
    let x = p * w;
    let want = (z - p) * (-(-x).exp_m1()) / x;
    assert!(rel(v["error"]["t0"]["reading"].as_f64().unwrap(), want) < 1e-12);
}

#[test]
fn series_rlc_modes_match_closed_form() {
    // Series RLC, output across C: 1/(LC s² + RC s + 1): ω0 = 1/√(LC), ζ = (R/2)√(C/L)
    // (handbook closed form).
    let dir = scratch("rlc");
    let (r, l, c): (f64, f64, f64) = (20.0, 2.2e-3, 100e-9);
    let text = format!(
        "[network]\nnumerator = [1]\ndenominator = [{:e}, {:e}, 1]\n",
        l * c,
        r * c
    );
    let f = write(&dir, "rlc.toml", &text);
    let v = json_of(&run(&["plan", f.to_str().unwrap(), "--json"]));
    let w0 = 1.0 / (l * c).sqrt();
    let zeta = r / 2.0 * (c / l).sqrt();
    let m = &v["network"]["modes"][0];
    assert!(rel(m["natural_frequency"].as_f64().unwrap(), w0) < 1e-12);
    assert!(rel(m["damping"].as_f64().unwrap(), zeta) < 1e-10);
    assert!(rel(v["network"]["tau_fast"].as_f64().unwrap(), 1.0 / w0) < 1e-12);
    assert!(
        rel(
            v["network"]["tau_slow"].as_f64().unwrap(),
            1.0 / (zeta * w0)
        ) < 1e-10
    );
    // h(0⁺) = 0 (initial-value theorem: relative degree 2), so figures are against the peak.
    assert_eq!(v["network"]["h0_plus"].as_f64(), Some(0.0));
    assert_eq!(v["error"]["normalised_by"].as_str(), Some("peak"));
}

#[test]
fn response_csv_is_complete_and_exact() {
    let dir = scratch("csv");
    let (a, w) = (2000.0, 20e-6);
    let f = write(
        &dir,
        "rc.toml",
        "[network]\nnumerator = [2000]\ndenominator = [1, 2000]\n\
         [pulse]\namplitude = \"50 V\"\nwidth = \"20 us\"\nrise = \"0\"\nfall = \"0\"\nconvention = \"ramp\"\n",
    );
    let csv_path = dir.join("resp.csv");
    let out = run(&[
        "response",
        f.to_str().unwrap(),
        "--csv",
        csv_path.to_str().unwrap(),
        "--points",
        "501",
        "--given",
    ]);
    assert!(matches!(out.status.code(), Some(0 | 1)));
    let text = std::fs::read_to_string(&csv_path).unwrap();
    let mut lines = text.lines();
    assert!(lines.next().unwrap().starts_with("t,ideal,predicted,error"));
    let mut rows = 0;
    for line in lines {
        let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let (t, ideal, pred, err) = (v[0], v[1], v[2], v[3]);
        let want = rc_rectangle(a, w, t);
        if t > 0.0 {
            assert!((pred - want).abs() <= 1e-12 * a, "t={t}: {pred} vs {want}");
            assert!((ideal - a * (-a * t).exp()).abs() <= 1e-12 * a);
        }
        assert!((err - (pred - ideal)).abs() <= 1e-12 * a);
        rows += 1;
    }
    assert!(rows >= 501);
    // No temporary file is left beside the output.
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
        .collect();
    assert!(leftovers.is_empty());
    // An unwritable destination is an error (exit 2), not a half-written file.
    let bad = dir.join("no-such-dir").join("x.csv");
    let out = run(&[
        "response",
        f.to_str().unwrap(),
        "--csv",
        bad.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(!bad.exists());
}

#[test]
fn time_constant_network_reports_per_mode() {
    // Each τ is a real pole with unknown residue: per-mode relative errors; for a
    // near-rectangular unit-area pulse each reads (1 − e^(−x))/x − 1 with x = w/τ
    // (handbook closed form), to within the tiny edges' effect.
    let dir = scratch("tc");
    let f = write(
        &dir,
        "tc.toml",
        "[network]\ntime_constants = [\"10 ms\", \"100 us\"]\n[drive]\narea = \"10 uV·s\"\n\
         [pulse]\namplitude = \"5 V\"\nwidth = \"2 us\"\nrise = \"1 ps\"\nfall = \"1 ps\"\n",
    );
    let v = json_of(&run(&["assess", f.to_str().unwrap(), "--json"]));
    assert!(v["network"]["h0_plus"].is_null());
    let per = v["error"]["per_mode"].as_array().unwrap();
    assert_eq!(per.len(), 2);
    for m in per {
        let tau = m["time_constant"].as_f64().unwrap();
        let x = 2e-6 / tau;
        let want = -(-x).exp_m1() / x - 1.0;
        assert!((m["t0_rel"].as_f64().unwrap() - want).abs() < 1e-6 * x);
    }
}
