//! End-to-end tests of `pulseplan recover`: the shipped demo capture, an exact noiseless
//! capture made here from a closed form, and bad files (exit 2 naming file:line:column).

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_pulseplan"))
        .args(args)
        .output()
        .unwrap()
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-recover-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn json_of(out: &Output) -> Value {
    serde_json::from_slice(&out.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {}", String::from_utf8_lossy(&out.stderr)))
}

fn repo(p: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join(p)
        .display()
        .to_string()
}

#[test]
fn demo_capture_names_the_part_that_is_off() {
    // scenarios/captures/make_demo_capture.py built the circuit with R2 = 10.4 kΩ (+4 %).
    let out = run(&[
        "recover",
        &repo("scenarios/captures/passive-lag-lead-r2-high.csv"),
        "--scenario",
        &repo("scenarios/passive-lag-lead.toml"),
        "--channel",
        "out",
        "--json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j = json_of(&out);
    let c = &j["comparison"];
    assert_eq!(c["verdict"], "inconsistent");
    assert_eq!(c["parts"]["culprit"], "R2");
    let best = &c["parts"]["single"][0];
    let (value, std) = (
        best["value"]["value"].as_f64().unwrap(),
        best["value"]["std"].as_f64().unwrap(),
    );
    assert!((value - 10.4e3).abs() < 5.0 * std, "R2 {value} ± {std}");
    let codes: Vec<&str> = j["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["code"].as_str().unwrap())
        .collect();
    assert!(codes.contains(&"model-inconsistent"), "{codes:?}");
}

/// y(t) of r/(s + a) driven by a rectangle of amplitude A over [0, w] (handbook closed
/// form: (rA/a)(1 − e^(−at)) during the pulse, (rA/a)(e^(aw) − 1)e^(−at) after it).
fn rectangle_response(r: f64, a: f64, amp: f64, w: f64, t: f64) -> f64 {
    if t <= 0.0 {
        0.0
    } else if t < w {
        r * amp / a * (1.0 - (-a * t).exp())
    } else {
        r * amp / a * ((a * w).exp() - 1.0) * (-a * t).exp()
    }
}

#[test]
fn exact_capture_gives_exact_modes_and_band_csv() {
    let dir = scratch("exact");
    let (r, a, amp, w) = (2000.0, 500.0, 4.0, 1e-3);
    let sc = dir.join("s.toml");
    std::fs::write(
        &sc,
        "[network]\npoles = [\"-500\"]\ngain = 2000\n[drive]\nkind = \"voltage\"\narea = \"4 mV·s\"\n\
         [pulse]\namplitude = 4\nwidth = 1e-3\nrise = 0\nfall = 0\nconvention = \"ramp\"\n",
    )
    .unwrap();
    let mut text = String::from("time [ms]\tv [mV]\n");
    for k in -200..3000 {
        let t = k as f64 * 5e-6;
        text.push_str(&format!(
            "{:.15e}\t{:.15e}\n",
            t * 1e3,
            1e3 * rectangle_response(r, a, amp, w, t)
        ));
    }
    let cap = dir.join("c.tsv");
    std::fs::write(&cap, text).unwrap();
    let csv = dir.join("h.csv");
    let out = run(&[
        "recover",
        cap.to_str().unwrap(),
        "--scenario",
        sc.to_str().unwrap(),
        "--json",
        "--csv",
        csv.to_str().unwrap(),
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j = json_of(&out);
    let m = &j["modes"][0];
    // The closed form above is the model itself: pole −500 rad/s, residue 2000 /s.
    assert!((m["pole_re"]["value"].as_f64().unwrap() + a).abs() < 1e-7 * a);
    assert!((j["h0"]["value"].as_f64().unwrap() - r).abs() < 1e-7 * r);
    assert_eq!(j["comparison"]["verdict"], "consistent");
    let rows = std::fs::read_to_string(&csv).unwrap();
    let mut lines = rows.lines();
    assert!(
        lines
            .next()
            .unwrap()
            .starts_with("t_s,h_fit_per_s,h_low_per_s,h_high_per_s")
    );
    for l in lines.take(50) {
        let v: Vec<f64> = l.split(',').take(4).map(|x| x.parse().unwrap()).collect();
        let h = r * (-a * v[0]).exp();
        assert!(
            (v[1] - h).abs() < 1e-6 * r && v[2] <= v[1] && v[1] <= v[3],
            "{l}"
        );
    }
}

#[test]
fn bad_captures_exit_2_naming_the_place() {
    let dir = scratch("bad");
    let sc = repo("scenarios/lag-lead-compensator.toml");
    let cases = [
        ("t,y\n0,1\n1e-6,oops\n", ":3:2:"),
        ("t,y\n0,1\n1e-6,inf\n", ":3:2:"),
        ("t,y\n0,1\n-1e-6,1\n", ":3:1:"),
        ("t;y\n0;1\n", ":2:2:"),
    ];
    for (k, (text, place)) in cases.iter().enumerate() {
        let p = dir.join(format!("bad{k}.csv"));
        std::fs::write(&p, text).unwrap();
        let out = run(&["recover", p.to_str().unwrap(), "--scenario", &sc]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{text:?}: {err}");
        assert!(
            err.contains(&format!("bad{k}.csv{place}")),
            "{text:?}: {err}"
        );
    }
}
