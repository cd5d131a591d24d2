//! Robustness: every scenario of `tests/corpus/` (reproducers of past panics, hangs and NaNs,
//! the edges of the stated domain, minimised fuzz finds) and every shipped scenario runs
//! through the binary within a time limit, exits 0, 1 or 2, never panics, prints no NaN or
//! infinity, and on exit 2 names the file and the key. A corpus file may say which key its
//! refusal names with a `# expect-key: KEY` line.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_pulseplan");

/// Debug builds are slow; a hang is anything beyond this.
const LIMIT: Duration = Duration::from_secs(10);

/// JSON fields that are `null` by design (an `Option` that is `None`), each with why. Paths
/// name array elements as `[]`. Anything else that is `null` would be a NaN or infinity that
/// serde_json wrote as `null` (the binary refuses those with exit 2 before printing).
const NULL_BY_DESIGN: &[(&str, &str)] = &[
    ("scenario.title", "the scenario has no title"),
    (
        "scenario.target_error",
        "no [plan] target_error: rule of thumb only",
    ),
    ("tolerance", "no part carries a tolerance"),
    ("plan.target", "no budget, so no budget search"),
    ("network.h0_plus", "time-constant form: residues unknown"),
    (
        "network.h0_plus_ivt",
        "time-constant form: no transfer function",
    ),
    (
        "network.modes[].residues",
        "time-constant form: residues unknown",
    ),
    ("network.settle_time", "an unstable network never settles"),
    (
        "network.modes[].time_constant",
        "an undamped mode (on the jω axis) has none",
    ),
    ("network.tau_slow", "no mode decays (an undamped tank)"),
    (
        "bench.averages",
        "no capture noise given: averaging not planned",
    ),
    ("bench.noise", "no capture noise given"),
    (
        "bench.peak_terminal",
        "no source resistance: the terminals carry the pulse itself",
    ),
    ("bench.period", "a mode does not decay: single shots only"),
    (
        "bench.timing_change",
        "the generator's time step changed nothing",
    ),
    (
        "bench.capture.split",
        "the record fits the memory in one piece",
    ),
];

fn toml_files(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    v.sort();
    v
}

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

/// Run the binary, killing it after [`LIMIT`].
fn run(args: &[&str]) -> Run {
    let dir = tempdir();
    let mut child = Command::new(BIN)
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("NO_COLOR", "1")
        .stdout(Stdio::from(std::fs::File::create(dir.join("out")).unwrap()))
        .stderr(Stdio::from(std::fs::File::create(dir.join("err")).unwrap()))
        .spawn()
        .unwrap();
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > LIMIT {
            let _ = child.kill();
            let _ = child.wait();
            panic!("pulseplan {args:?} ran over {LIMIT:?} (a hang)");
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let r = Run {
        code: status.code().unwrap_or(-1),
        stdout: std::fs::read_to_string(dir.join("out")).unwrap_or_default(),
        stderr: std::fs::read_to_string(dir.join("err")).unwrap_or_default(),
    };
    let _ = std::fs::remove_dir_all(&dir);
    r
}

fn tempdir() -> PathBuf {
    use std::sync::atomic::{AtomicUsize, Ordering};
    static N: AtomicUsize = AtomicUsize::new(0);
    let d = std::env::temp_dir().join(format!(
        "pulseplan-robust-{}-{}",
        std::process::id(),
        N.fetch_add(1, Ordering::Relaxed)
    ));
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Every `null` in the document, by path (array elements as `[]`).
fn null_paths(v: &Value, path: &str, out: &mut Vec<String>) {
    match v {
        Value::Null => out.push(path.to_string()),
        Value::Object(m) => {
            for (k, x) in m {
                let p = if path.is_empty() {
                    k.clone()
                } else {
                    format!("{path}.{k}")
                };
                null_paths(x, &p, out);
            }
        }
        Value::Array(a) => {
            for x in a {
                null_paths(x, &format!("{path}[]"), out);
            }
        }
        _ => {}
    }
}

/// A word that is a non-finite number as Rust or a report would print it.
fn non_finite_word(text: &str) -> Option<String> {
    text.split(|c: char| !(c.is_ascii_alphanumeric() || c == '+' || c == '-'))
        .map(|w| w.trim_start_matches(['+', '-']))
        .find(|w| {
            let l = w.to_ascii_lowercase();
            l == "nan" || l == "inf" || l == "infinity"
        })
        .map(str::to_string)
}

fn expected_key(file: &Path) -> Option<String> {
    std::fs::read_to_string(file).ok()?.lines().find_map(|l| {
        l.strip_prefix("# expect-key:")
            .map(|k| k.trim().to_string())
    })
}

/// One command on one file: bounded, no panic, no non-finite text, JSON nulls only by design,
/// and on exit 2 the file and a key named.
fn check(file: &Path, args: &[&str], failures: &mut Vec<String>) {
    let name = file.to_string_lossy().into_owned();
    let mut all = args.to_vec();
    all.push(&name);
    let r = run(&all);
    let what = format!("pulseplan {}", all.join(" "));
    if ![0, 1, 2].contains(&r.code) {
        failures.push(format!("{what}: exit {} ({})", r.code, r.stderr.trim()));
        return;
    }
    if r.stderr.contains("panicked") || r.stderr.contains("RUST_BACKTRACE") {
        failures.push(format!("{what}: panic: {}", r.stderr.trim()));
    }
    if let Some(w) = non_finite_word(&r.stdout) {
        failures.push(format!("{what}: stdout carries \"{w}\""));
    }
    if r.code == 2 {
        // file:line: key: message
        let first = r.stderr.lines().next().unwrap_or("");
        let rest = first
            .strip_prefix("error: ")
            .and_then(|s| s.strip_prefix(name.as_str()));
        let keyed = rest.is_some_and(|s| {
            let mut parts = s.splitn(4, ": ");
            let line = parts.next().unwrap_or("");
            (line.starts_with(':') && parts.next().is_some_and(|k| !k.is_empty()))
                || line.is_empty() && parts.next().is_some_and(|k| !k.is_empty())
        });
        if !keyed {
            failures.push(format!("{what}: exit 2 without file and key: {first}"));
        }
        if let Some(k) = expected_key(file)
            && !first.contains(&format!(": {k}: "))
        {
            failures.push(format!("{what}: exit 2 does not name {k}: {first}"));
        }
    } else if let Some(k) = expected_key(file) {
        failures.push(format!(
            "{what}: exit {} where a refusal of {k} was expected",
            r.code
        ));
    }
    if args.contains(&"--json") && r.code != 2 {
        match serde_json::from_str::<Value>(&r.stdout) {
            Err(e) => failures.push(format!("{what}: not JSON: {e}")),
            Ok(v) => {
                let mut nulls = Vec::new();
                null_paths(&v, "", &mut nulls);
                for n in nulls {
                    if !NULL_BY_DESIGN.iter().any(|(p, _)| *p == n) {
                        failures.push(format!("{what}: {n} is null (a NaN or ∞?)"));
                    }
                }
            }
        }
    }
}

fn has_pulse(file: &Path) -> bool {
    std::fs::read_to_string(file)
        .unwrap()
        .lines()
        .any(|l| l.trim_start().starts_with("[pulse]"))
}

fn check_all(files: &[PathBuf], with_bundle: bool) {
    let mut failures = Vec::new();
    for f in files {
        check(f, &["plan"], &mut failures);
        check(f, &["plan", "--json"], &mut failures);
        if with_bundle {
            let d = tempdir();
            let out = d.join("bundle");
            let out = out.to_string_lossy().into_owned();
            check(f, &["plan", "--quiet", "--out", &out], &mut failures);
            let _ = std::fs::remove_dir_all(&d);
        }
        if has_pulse(f) {
            check(f, &["assess", "--json"], &mut failures);
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn corpus_is_bounded_finite_and_named() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/corpus");
    check_all(&toml_files(&dir), true);
}

#[test]
fn shipped_scenarios_carry_no_non_finite_figure() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    check_all(&toml_files(&dir), false);
}

#[test]
fn response_of_an_unstable_network_and_huge_point_counts() {
    let d = tempdir();
    let csv = d.join("r.csv").to_string_lossy().into_owned();
    let r = run(&[
        "response",
        "tests/corpus/unstable-response.toml",
        "--csv",
        &csv,
    ]);
    assert!([0, 1].contains(&r.code), "{}", r.stderr);
    let text = std::fs::read_to_string(&csv).unwrap();
    assert!(non_finite_word(&text).is_none(), "non-finite CSV cell");
    let r = run(&[
        "response",
        "tests/corpus/edge-tiny-pole.toml",
        "--csv",
        &csv,
        "--points",
        "10000000000",
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--points"), "{}", r.stderr);
    let r = run(&[
        "plan",
        "tests/corpus/edge-rc-tiny-source.toml",
        "--samples",
        "18446744073709551615",
    ]);
    assert_eq!(r.code, 2);
    assert!(r.stderr.contains("--samples"), "{}", r.stderr);
    let _ = std::fs::remove_dir_all(&d);
}

fn poles_of(json: &Value) -> Vec<(f64, f64)> {
    json["network"]["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| {
            (
                m["pole"][0].as_f64().unwrap(),
                m["pole"][1].as_f64().unwrap(),
            )
        })
        .collect()
}

/// R1 = 1e12 Ω, C1 = 1 F, R2 = 1 mΩ, C2 = 1 pF: poles 27 decades apart. Closed form of the
/// two-section RC ladder (node equations by hand): H(s) = 1/(a s² + b s + 1) with
/// a = R1C1R2C2, b = R1C1 + R2C2 + R1C2; the roots in the cancellation-free form
/// s_slow = −2/(b + √(b² − 4a)), s_fast = −(b + √(b² − 4a))/(2a).
#[test]
fn poles_27_decades_apart_match_the_closed_form() {
    let r = run(&["plan", "--json", "tests/corpus/poles-27-decades.toml"]);
    assert!([0, 1].contains(&r.code), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let (r1, c1, r2, c2) = (1e12, 1.0, 1e-3, 1e-12);
    let a: f64 = r1 * c1 * r2 * c2;
    let b: f64 = r1 * c1 + r2 * c2 + r1 * c2;
    let d = (b * b - 4.0 * a).sqrt();
    let slow = -2.0 / (b + d);
    let fast = -(b + d) / (2.0 * a);
    let mut got: Vec<f64> = poles_of(&v).iter().map(|p| p.0).collect();
    got.sort_by(|x, y| y.total_cmp(x));
    assert_eq!(got.len(), 2);
    assert!(
        ((got[0] - slow) / slow).abs() < 1e-9,
        "slow {} vs {slow}",
        got[0]
    );
    assert!(
        ((got[1] - fast) / fast).abs() < 1e-9,
        "fast {} vs {fast}",
        got[1]
    );
}

/// The order-8 denominator with coefficients 3e-10 … 3.8e9: every reported pole is a root to
/// within rounding (backward error |d(p)| / Σ|d_k||p|^k below 1e-10, the standard measure of
/// a computed root), and the count is the degree.
#[test]
fn wide_coefficient_order8_poles_are_roots() {
    let r = run(&[
        "plan",
        "--json",
        "tests/corpus/order8-wide-coefficients.toml",
    ]);
    assert!([0, 1].contains(&r.code), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).unwrap();
    let den = [3e-10, 0.0, 0.0, 4.1e-3, 0.0, 2.7e2, 0.0, 1.9e6, 3.8e9];
    let modes = v["network"]["modes"].as_array().unwrap();
    let count: u64 = modes
        .iter()
        .map(|m| m["multiplicity"].as_u64().unwrap())
        .sum();
    assert_eq!(count, 8);
    for (re, im) in poles_of(&v) {
        let p = num_complex::Complex64::new(re, im);
        let (mut val, mut scale) = (num_complex::Complex64::new(0.0, 0.0), 0.0);
        for &c in &den {
            val = val * p + c;
            scale = scale * p.norm() + c.abs();
        }
        assert!(
            val.norm() / scale < 1e-10,
            "pole {p}: backward error {}",
            val.norm() / scale
        );
    }
}
