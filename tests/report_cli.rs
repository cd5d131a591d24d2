//! End-to-end tests of the CLI polish: `plan --report/--out`, `--quiet`, `new`, `completions`,
//! and plain (uncoloured) output when not on a terminal.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_pulseplan"));
    c.env_remove("NO_COLOR");
    c
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-rcli-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn run_in(dir: &Path, args: &[&str]) -> Output {
    bin().current_dir(dir).args(args).output().unwrap()
}

fn scenario(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(name)
        .display()
        .to_string()
}

const BUNDLE: [&str; 10] = [
    "stimulus.svg",
    "response.svg",
    "error.svg",
    "design.svg",
    "poles.svg",
    "report.html",
    "response.csv",
    "plan.json",
    "generator.txt",
    "stimulus.csv",
];

#[test]
fn report_goes_to_out_scenario_name_or_out_dir() {
    let dir = scratch("report");
    let file = scenario("lag-lead-compensator.toml");
    let o = run_in(&dir, &["plan", &file, "--report"]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    for f in BUNDLE {
        assert!(dir.join("out/lag-lead-compensator").join(f).exists(), "{f}");
    }
    // The text report still goes to stdout, the bundle note to stderr.
    assert!(String::from_utf8_lossy(&o.stdout).contains("Recommended pulse"));
    assert!(String::from_utf8_lossy(&o.stderr).contains("report.html"));
    // --out DIR alone implies --report; no temporary files are left behind.
    let o = run_in(&dir, &["plan", &file, "--out", "elsewhere", "--json"]);
    assert_eq!(o.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["command"], "plan");
    let names: Vec<String> = std::fs::read_dir(dir.join("elsewhere"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), BUNDLE.len(), "{names:?}");
    assert!(names.iter().all(|n| !n.ends_with(".tmp")));
}

#[test]
fn quiet_prints_no_report_but_keeps_warnings_on_stderr() {
    let dir = scratch("quiet");
    // A unit-area pulse this narrow needs a hazardous voltage: a warning (exit 1).
    let text = "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[drive]\narea = 1\n";
    std::fs::write(dir.join("hot.toml"), text).unwrap();
    let o = run_in(&dir, &["plan", "hot.toml", "--quiet"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        o.stdout.is_empty(),
        "stdout: {}",
        String::from_utf8_lossy(&o.stdout)
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("warning [hazard-voltage]"), "{err}");
    // Not a terminal: no colour escapes anywhere.
    assert!(!err.contains('\u{1b}'));
    let o = run_in(&dir, &["plan", "hot.toml"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(!o.stdout.contains(&0x1b));
    assert!(String::from_utf8_lossy(&o.stdout).contains("[hazard-voltage]"));
    // Quiet with a report: the bundle is written, nothing printed on stdout.
    let o = run_in(&dir, &["-q", "plan", "hot.toml", "--report"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(o.stdout.is_empty());
    assert!(dir.join("out/hot/report.html").exists());
    // assess too.
    let o = run_in(
        &dir,
        &["assess", &scenario("lag-lead-compensator.toml"), "--quiet"],
    );
    assert!(o.stdout.is_empty());
}

#[test]
fn new_writes_a_starter_that_parses_and_never_overwrites() {
    let dir = scratch("new");
    let o = run_in(&dir, &["new", "bench-rig"]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let path = dir.join("bench-rig.toml");
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.starts_with('#'), "commented starter");
    // It parses with the current schema, and plans cleanly.
    let sc = pulseplan::scenario::load(&path).unwrap();
    assert_eq!(sc.name, "bench-rig");
    assert_eq!(sc.title.as_deref(), Some("bench-rig"));
    let o = run_in(&dir, &["plan", "bench-rig.toml"]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    // Refuses to overwrite: exit 2, message names the file, content unchanged.
    std::fs::write(&path, "# mine\n").unwrap();
    let o = run_in(&dir, &["new", "bench-rig.toml"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("bench-rig.toml") && err.contains("already exists"),
        "{err}"
    );
    assert_eq!(std::fs::read_to_string(&path).unwrap(), "# mine\n");
    // Odd names are refused.
    let o = run_in(&dir, &["new", "a/b"]);
    assert_eq!(o.status.code(), Some(2));
    // Names with quotes still give valid TOML.
    let text = pulseplan::cli::starter_scenario("rig \"7\" \\ test");
    pulseplan::scenario::parse("x.toml", "x", &text).unwrap();
}

#[test]
fn completions_come_from_the_clap_definitions() {
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let o = bin().args(["completions", shell]).output().unwrap();
        assert_eq!(o.status.code(), Some(0), "{shell}");
        let s = String::from_utf8_lossy(&o.stdout);
        assert!(s.contains("pulseplan"), "{shell}");
        for word in ["plan", "assess", "response", "new", "report", "quiet"] {
            assert!(s.contains(word), "{shell} completion lacks {word}");
        }
    }
    let o = bin().args(["completions", "tcsh"]).output().unwrap();
    assert_eq!(o.status.code(), Some(2));
}
