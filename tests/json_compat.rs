//! The `--json` of every shipped scenario against the JSON the tool printed before its
//! modules were reorganised (tests/golden/pre-refactor, written by the release binary of
//! commit 294730c with `plan FILE --json --at 1us --at 50us` and `assess FILE --json --at 1us`).
//!
//! Every field the old JSON had must still be there, with the same JSON type (scripts read
//! these names); new fields may be added. Numbers are compared only where the plan's
//! behaviour has not been changed on purpose since (see `VALUE_CHECKED`); the reorganisation
//! itself (commit 6aefa15) was checked value by value against every field.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_pulseplan"))
}

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn kind(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "bool",
        Value::Number(_) => "number",
        Value::String(_) => "string",
        Value::Array(_) => "array",
        Value::Object(_) => "object",
    }
}

/// Parts of the JSON whose numbers the plan's later changes of behaviour (the budget governs
/// the width, the default metric, the first-order estimate's validity, the capture memory)
/// leave untouched: the network's figures. Elsewhere only names and types are held fixed.
const VALUE_CHECKED: &[&str] = &["network"];

/// Relative agreement asked of the numbers. The reorganisation itself held every field to
/// 1e-12; since then the circuit eigensolver moved to faer and the peak of h is found from the
/// modes, which moves last digits (ladder residues ~1e-11, t_peak ~1e-8 where the old search
/// only located a flat maximum to √ε). The reference suite checks these against mpmath.
const REL: f64 = 1e-7;

/// Walk the old JSON: every key must exist in the new one with the same type; with `values`,
/// numbers must agree to 1e-12 relative and strings and booleans exactly.
/// A figure that is not available: `null`, or the "n/a: reason" string the JSON now writes
/// where a figure cannot be given (the first-order estimate outside its validity).
fn absent(v: &Value) -> bool {
    v.is_null() || v.as_str().is_some_and(|s| s.starts_with("n/a"))
}

fn compare(old: &Value, new: &Value, path: &str, values: bool, out: &mut Vec<String>) {
    let null_ok = absent(old) || absent(new);
    if (values || !null_ok) && kind(old) != kind(new) {
        out.push(format!("{path}: was {} now {}", kind(old), kind(new)));
        return;
    }
    match (old, new) {
        (Value::Object(a), Value::Object(b)) => {
            for (k, va) in a {
                match b.get(k) {
                    Some(vb) => compare(va, vb, &format!("{path}.{k}"), values, out),
                    None => out.push(format!("{path}.{k}: missing")),
                }
            }
        }
        (Value::Array(a), Value::Array(b)) => {
            if values && a.len() != b.len() {
                out.push(format!("{path}: length {} now {}", a.len(), b.len()));
            }
            for (i, (va, vb)) in a.iter().zip(b).enumerate() {
                compare(va, vb, &format!("{path}[{i}]"), values, out);
            }
        }
        (Value::Number(a), Value::Number(b)) if values => {
            let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
            if (a - b).abs() > REL * a.abs().max(b.abs()) + 1e-300 {
                out.push(format!("{path}: {a} now {b}"));
            }
        }
        (a, b) if values && a != b => out.push(format!("{path}: {a} now {b}")),
        _ => {}
    }
}

/// Warnings are compared as a set of codes with their messages, whatever their order.
fn sorted_warnings(v: &mut Value) {
    if let Some(Value::Array(ws)) = v.get_mut("warnings") {
        ws.sort_by_key(|w| w["code"].as_str().unwrap_or("").to_string());
    }
}

fn run_json(args: &[&str]) -> Value {
    let out = bin().args(args).current_dir(root()).output().unwrap();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn goldens() -> Vec<(PathBuf, String, &'static str)> {
    let dir = root().join("tests/golden/pre-refactor");
    let mut out = Vec::new();
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_string_lossy().into_owned();
        let (stem, cmd) = if let Some(s) = name.strip_suffix(".plan.json") {
            (s.to_string(), "plan")
        } else if let Some(s) = name.strip_suffix(".assess.json") {
            (s.to_string(), "assess")
        } else {
            continue;
        };
        out.push((p, stem, cmd));
    }
    out.sort();
    out
}

fn check(values: bool) {
    let mut problems = Vec::new();
    for (path, stem, cmd) in goldens() {
        let mut old: Value =
            serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        let scenario = format!("scenarios/{stem}.toml");
        let mut new = match cmd {
            "plan" => run_json(&["plan", &scenario, "--json", "--at", "1us", "--at", "50us"]),
            _ => run_json(&["assess", &scenario, "--json", "--at", "1us"]),
        };
        sorted_warnings(&mut old);
        sorted_warnings(&mut new);
        let mut out = Vec::new();
        if values {
            for key in VALUE_CHECKED {
                compare(
                    &old[key],
                    &new[key],
                    &format!("{stem}.{cmd}.{key}"),
                    true,
                    &mut out,
                );
            }
        } else {
            compare(&old, &new, &format!("{stem}.{cmd}"), false, &mut out);
        }
        problems.extend(out);
    }
    assert!(Path::new(&root()).exists());
    assert!(problems.is_empty(), "{}", problems.join("\n"));
}

#[test]
fn every_old_field_is_still_there_with_its_type() {
    check(false);
}

#[test]
fn network_figures_unchanged() {
    check(true);
}
