//! The exports re-import: plan.json parses and agrees with the text report and the settings
//! sheet; stimulus.csv integrates to the planned area (IEEE Std 181 area = amplitude × 50 %
//! duration of the trapezoid; the trapezoid rule is exact on piecewise-linear data).

use std::process::Command;

fn eng_value(text: &str) -> f64 {
    // Parse "485 ns", "2.5 V", "1.049 µs" as printed by the reports.
    let t = text.trim();
    let split = t.find(' ').unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num.parse().unwrap();
    let unit = unit.trim();
    let mult = match unit.chars().next() {
        Some('f') => 1e-15,
        Some('p') => 1e-12,
        Some('n') => 1e-9,
        Some('µ') => 1e-6,
        Some('m') if unit.len() > 1 => 1e-3,
        Some('k') => 1e3,
        Some('M') => 1e6,
        Some('G') => 1e9,
        _ => 1.0,
    };
    v * mult
}

#[test]
fn bundle_exports_agree_with_each_other() {
    let dir = std::env::temp_dir().join(format!("pulseplan-exports-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let scenario = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/scenarios/current-driven-tank.toml"
    );
    let text = Command::new(env!("CARGO_BIN_EXE_pulseplan"))
        .args(["plan", scenario, "--out", dir.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(matches!(text.status.code(), Some(0 | 1)));
    let report = String::from_utf8(text.stdout).unwrap();
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    let pulse = &plan["pulse"];
    let width = pulse["width"].as_f64().unwrap();
    let area = pulse["area"].as_f64().unwrap();
    let amplitude = pulse["amplitude"].as_f64().unwrap();
    assert!((amplitude * width - area).abs() <= 1e-12 * area);
    // The text report prints the same width (4 significant digits).
    let line = report
        .lines()
        .skip_while(|l| !l.starts_with("Recommended pulse"))
        .find(|l| l.contains("generator view"))
        .unwrap();
    let w_text = line
        .split("width (50 %)")
        .nth(1)
        .unwrap()
        .split("   ")
        .next()
        .unwrap();
    assert!(
        (eng_value(w_text) - width).abs() <= 5e-4 * width,
        "{w_text} vs {width}"
    );
    // The settings sheet carries it too.
    let sheet = std::fs::read_to_string(dir.join("generator.txt")).unwrap();
    let w_sheet = sheet
        .lines()
        .find(|l| l.contains("pulse width (50 %)"))
        .unwrap()
        .split("pulse width (50 %)")
        .nth(1)
        .unwrap();
    assert!((eng_value(w_sheet) - width).abs() <= 5e-4 * width);
    // stimulus.csv integrates to the planned area.
    let csv = std::fs::read_to_string(dir.join("stimulus.csv")).unwrap();
    let pts: Vec<(f64, f64)> = csv
        .lines()
        .skip(1)
        .map(|l| {
            let mut it = l.split(',').map(|x| x.parse::<f64>().unwrap());
            (it.next().unwrap(), it.next().unwrap())
        })
        .collect();
    let integral: f64 = pts
        .windows(2)
        .map(|w| (w[1].0 - w[0].0) * (w[0].1 + w[1].1) / 2.0)
        .sum();
    assert!(
        (integral - area).abs() <= 1e-9 * area,
        "{integral} vs {area}"
    );
    // Every listed file exists and no temporary file is left.
    for f in [
        "report.html",
        "response.csv",
        "plan.json",
        "generator.txt",
        "stimulus.csv",
        "design.svg",
        "poles.svg",
    ] {
        assert!(dir.join(f).is_file(), "{f}");
    }
    assert!(
        std::fs::read_dir(&dir).unwrap().all(|e| !e
            .unwrap()
            .file_name()
            .to_string_lossy()
            .ends_with(".tmp"))
    );
    let _ = std::fs::remove_dir_all(&dir);
}
