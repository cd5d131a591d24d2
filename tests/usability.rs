//! What a bench user reads must be usable as printed: one test per defect seen when trying the
//! tool as a new user (each failed before its fix). Closed forms are named beside the checks.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_pulseplan"))
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-use-{}-{name}", std::process::id()));
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

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn json(args: &[&str]) -> (Value, Output) {
    let o = run(args);
    let v = serde_json::from_slice(&o.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {}{}", stdout(&o), stderr(&o)));
    (v, o)
}

/// An N-section RC ladder, R per section from `in`, C per node to ground, output at the far end.
fn ladder(n: usize, tail: &str) -> String {
    let mut parts = Vec::new();
    let mut prev = "in".to_string();
    for k in 1..=n {
        let node = format!("n{k}");
        parts.push(format!(
            "  {{ name = \"R{k}\", kind = \"resistor\", nodes = [\"{prev}\", \"{node}\"], value = \"50\" }},"
        ));
        parts.push(format!(
            "  {{ name = \"C{k}\", kind = \"capacitor\", nodes = [\"{node}\", \"gnd\"], value = \"100p\" }},"
        ));
        prev = node;
    }
    format!(
        "[network]\ninput = \"in\"\noutput = \"n{n}\"\nparts = [\n{}\n]\n{tail}",
        parts.join("\n")
    )
}

#[test]
fn item1_the_budget_governs_and_a_cap_is_named() {
    let dir = scratch("budget");
    let tail =
        "[drive]\narea = \"1 uV·s\"\n[plan]\ntarget_error = \"0.5 %\"\nmetric = \"window\"\n";
    let f = write(&dir, "ladder.toml", &ladder(20, tail));
    let (v, _) = json(&["plan", f.to_str().unwrap(), "--json"]);
    let tau = v["network"]["tau_fast_significant"].as_f64().unwrap();
    let width = v["pulse"]["width"].as_f64().unwrap();
    let target = &v["plan"]["target"];
    // The widest pulse within the budget, not τ/10: the window error sits at the budget.
    assert_eq!(target["capped"], false, "{target}");
    assert!(
        width > 2.0 * tau / 10.0,
        "width {width} vs τ/10 = {}",
        tau / 10.0
    );
    let err = v["error"]["window"]["max_rel"].as_f64().unwrap();
    assert!((err - 0.005).abs() < 1e-6, "{err}");
    // With the user's own cap, the report names the setting that capped it.
    let tail = format!("{tail}min_width_ratio = 10\n");
    let f = write(&dir, "capped.toml", &ladder(20, &tail));
    let (v, o) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert_eq!(
        v["plan"]["target"]["capped_by"]["setting"],
        "min_width_ratio"
    );
    let text = stdout(&run(&["plan", f.to_str().unwrap()]));
    assert!(
        text.contains("capped by [plan] min_width_ratio = 10"),
        "{text}"
    );
    assert!(matches!(o.status.code(), Some(0 | 1)));
}

#[test]
fn item2_h0_zero_gets_the_window_metric_and_no_exit_1() {
    let dir = scratch("h0");
    // 1/((s+1k)(s+10k)): relative degree 2, so h(0⁺) = 0 (initial-value theorem).
    let net =
        "[network]\npoles = [\"-1k\", \"-10k\"]\ngain = \"10M\"\n[drive]\narea = \"1 uV·s\"\n";
    let f = write(&dir, "lp.toml", net);
    let (v, o) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert_eq!(v["scenario"]["metric"], "window");
    let h0 = v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|w| w["code"] == "h0-zero")
        .expect("the h0-zero note");
    assert_eq!(h0["severity"], "info");
    assert_eq!(
        o.status.code(),
        Some(0),
        "an informational note keeps exit 0"
    );
    // Asking for a reading at 0⁺ there is refused, naming the key and its line.
    for metric in ["t0", "t0-aligned"] {
        let text = format!("{net}[plan]\ntarget_error = \"1 %\"\nmetric = \"{metric}\"\n");
        let f = write(&dir, &format!("{metric}.toml"), &text);
        let o = run(&["plan", f.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2));
        assert!(stderr(&o).contains(":8: plan.metric:"), "{}", stderr(&o));
        assert!(stderr(&o).contains("window"));
    }
    // A network with h(0⁺) ≠ 0 defaults to the raw reading at 0⁺.
    let f = write(&dir, "rc.toml", "[network]\ntime_constants = [\"1 ms\"]\n");
    let (v, _) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert_eq!(v["scenario"]["metric"], "t0");
}

#[test]
fn item3_first_order_estimate_only_inside_its_validity() {
    let dir = scratch("first");
    // A pulse 1/100 of the one time constant: inside (remainder ~ x³, x = 0.01).
    let ok = "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[pulse]\namplitude = \"1 V\"\n\
              width = \"10 us\"\nrise = \"0 s\"\nfall = \"0 s\"\n";
    let f = write(&dir, "ok.toml", ok);
    let (v, _) = json(&["assess", f.to_str().unwrap(), "--json"]);
    let first = v["error"]["first_order"]["t0_rel"].as_f64().unwrap();
    let exact = v["error"]["t0"]["rel"].as_f64().unwrap();
    // (1 − e^(−x))/x − 1 = −x/2 + x²/6 − … (Taylor series of the closed form).
    assert!(
        (first - exact).abs() < 0.01 * exact.abs(),
        "{first} vs {exact}"
    );
    // A pulse as long as the faster of two time constants: outside, printed as n/a.
    let wide = "[network]\npoles = [\"-1k\", \"-1M\"]\nzeros = [\"-2k\"]\ngain = \"1M\"\n[pulse]\n\
                amplitude = \"1 V\"\nwidth = \"1 us\"\nrise = \"0 s\"\nfall = \"0 s\"\n";
    let f = write(&dir, "wide.toml", wide);
    let (v, _) = json(&["assess", f.to_str().unwrap(), "--json"]);
    // n/a with its reason, in JSON as in the text (never a bare null).
    assert!(
        v["error"]["first_order"]["t0_rel"]
            .as_str()
            .is_some_and(|s| s.starts_with("n/a: ") && s.contains("leaves out")),
        "{}",
        v["error"]
    );
    let text = stdout(&run(&["assess", f.to_str().unwrap()]));
    assert!(text.contains("first-order estimate n/a"), "{text}");
    assert!(!text.contains("e+"), "no runaway figures: {text}");
}

#[test]
fn item4_one_width_with_noise_and_the_others_as_context() {
    let dir = scratch("noise");
    // A generator limited to 1 V and a noisy capture: the width is a trade of bias and noise.
    let text = "[network]\npoles = [\"-10k+60kj\", \"-10k-60kj\"]\nzeros = [\"-5k\"]\ngain = \"60k\"\n\
                [drive]\narea = \"10 uV·s\"\n[plan]\ntarget_error = \"1 %\"\nmetric = \"window\"\n\
                [generator]\nmax_amplitude = \"1 V\"\n[capture]\nnoise = \"2 mV\"\nmax_averages = 100000\n";
    let f = write(&dir, "n.toml", text);
    let out = stdout(&run(&["plan", f.to_str().unwrap()]));
    let noise: Vec<&str> = out.lines().filter(|l| l.contains("is used")).collect();
    assert_eq!(noise.len(), 1, "{out}");
    assert!(noise[0].contains("Context:"), "{}", noise[0]);
    assert!(!out.contains("best width for bias + noise"), "{out}");
}

#[test]
fn item5_the_voltage_at_the_input_terminals() {
    let dir = scratch("terminal");
    // A 50 Ω source into 54 Ω (R_in to ground) with a small capacitor beyond a 10 kΩ resistor:
    // the terminals see v·54/104 for a pulse long against R·C (resistive divider).
    let text = "[network]\ninput = \"in\"\noutput = \"out\"\nsource_resistance = \"50\"\nparts = [\n\
                { name = \"Rin\", kind = \"resistor\", nodes = [\"in\", \"gnd\"], value = \"54\" },\n\
                { name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"10k\" },\n\
                { name = \"C1\", kind = \"capacitor\", nodes = [\"out\", \"gnd\"], value = \"1n\" },\n]\n\
                [drive]\narea = \"100 uV·s\"\n[plan]\ntarget_error = \"1 %\"\n\
                [generator]\nmax_amplitude = \"10 V\"\n[limits]\nmax_input = \"6 V\"\n";
    let f = write(&dir, "t.toml", text);
    let (v, _) = json(&["plan", f.to_str().unwrap(), "--json"]);
    let amp = v["pulse"]["amplitude"].as_f64().unwrap();
    let term = v["bench"]["peak_terminal"].as_f64().unwrap();
    let divider = 1.0 / (1.0 / 54.0 + 1.0 / 10050.0);
    let want = amp * divider / (divider + 50.0);
    assert!((term - want).abs() < 1e-3 * want, "{term} vs {want}");
    assert!(
        term <= 6.0 * (1.0 + 1e-9),
        "max_input is checked at the terminals: {term}"
    );
    let out = stdout(&run(&["plan", f.to_str().unwrap()]));
    assert!(out.contains("open-circuit level"), "{out}");
    let b = dir.join("bundle");
    run(&["plan", f.to_str().unwrap(), "--out", b.to_str().unwrap()]);
    let sheet = std::fs::read_to_string(b.join("generator.txt")).unwrap();
    assert!(!sheet.contains("high-z Ω"), "{sheet}");
    assert!(
        sheet.contains("at the circuit's input terminals"),
        "{sheet}"
    );
}

#[test]
fn item6_capture_plans_one_can_buy() {
    // The stiff demo: a 2 s slow pole and a 2 µs resonance; no memory stated → 10 M assumed.
    let dir = scratch("capture");
    let text = "[network]\npoles = [\"-0.5\", \"-300k+400kj\", \"-300k-400kj\"]\nzeros = [\"-2\"]\n\
                gain = \"62.5G\"\n[drive]\narea = \"20 uV·s\"\n[plan]\ntarget_error = \"0.05 %\"\n";
    let f = write(&dir, "s.toml", text);
    let (v, _) = json(&["plan", f.to_str().unwrap(), "--json"]);
    let c = &v["bench"]["capture"];
    assert_eq!(c["memory_assumed"], true);
    let split = c["split"].as_array().expect("two records");
    for r in split {
        assert!(r["points"].as_f64().unwrap() <= 1e7, "{r}");
    }
    assert_eq!(c["split_resolves"], true);
    let notes = v["bench"]["notes"].to_string();
    assert!(notes.contains("10 M points is assumed"), "{notes}");
    // The same with a tiny memory cannot be had: then it is a warning.
    let f = write(
        &dir,
        "tiny.toml",
        &format!("{text}[capture]\nmax_points = 1000\n"),
    );
    let (v, o) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert!(v["warnings"].to_string().contains("capture-memory"));
    assert_eq!(o.status.code(), Some(1));
}

#[test]
fn item7_safe_defaults() {
    let dir = scratch("defaults");
    // No area, no generator: the stated default level, not a 100 kV pulse.
    let f = write(&dir, "rc.toml", "[network]\ntime_constants = [\"1 us\"]\n");
    let (v, o) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert_eq!(v["pulse"]["amplitude"].as_f64(), Some(5.0));
    assert_eq!(o.status.code(), Some(0));
    // A unit area written by the user is honoured (read factor 1).
    let f = write(
        &dir,
        "unit.toml",
        "[network]\ntime_constants = [\"1 us\"]\n[drive]\narea = 1\n",
    );
    let (v, _) = json(&["plan", f.to_str().unwrap(), "--json"]);
    assert_eq!(v["pulse"]["area"].as_f64(), Some(1.0));
    assert_eq!(v["bench"]["scaling"]["read_factor"].as_f64(), Some(1.0));
}

#[test]
fn item8_units_everywhere_with_the_sign() {
    let dir = scratch("units");
    // Current drive into a parallel RC (transimpedance): h in V/(A·s), output in volts; a
    // negative gain makes the output negative.
    let text = "[network]\nnumerator = [-1e9]\ndenominator = [1, 1e6]\n[drive]\nkind = \"current\"\n\
                area = \"1 nA·s\"\n";
    let f = write(&dir, "i.toml", text);
    let out = stdout(&run(&["plan", f.to_str().unwrap(), "--at", "1us"]));
    assert!(out.contains("V/(A·s)"), "{out}");
    assert!(
        !out.contains(" /s"),
        "no bare /s for a current drive: {out}"
    );
    let peaks = out
        .lines()
        .find(|l| l.contains("predicted output"))
        .unwrap();
    assert!(peaks.contains("-") && peaks.contains("V "), "{peaks}");
    assert!(out.contains("Cursors (h and y/area in V/(A·s))"), "{out}");
    assert!(!out.contains("-0.000"), "{out}");
    // The figures say the same unit.
    let b = dir.join("bundle");
    run(&["plan", f.to_str().unwrap(), "--out", b.to_str().unwrap()]);
    let svg = std::fs::read_to_string(b.join("response.svg")).unwrap();
    assert!(svg.contains("V/(A·s)"), "response.svg lacks the unit");
    assert!(!svg.contains("(1/s)"));
    // A residue's rounding-level real part is not printed as a figure.
    let osc = "[network]\npoles = [\"-1+1Gj\", \"-1-1Gj\"]\ngain = \"1G\"\n";
    let f = write(&dir, "osc.toml", osc);
    let out = stdout(&run(&["plan", f.to_str().unwrap()]));
    let row = out
        .lines()
        .find(|l| l.contains("j1 G") || l.contains("j1.0 G"))
        .unwrap_or("");
    assert!(!row.contains("µ +"), "{row}");
}

#[test]
fn item9_messages() {
    let dir = scratch("messages");
    let net = "[network]\ntime_constants = [\"1 ms\"]\n";
    let cases: &[(&str, &str)] = &[
        (
            "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n{ name = \"L1\", kind = \"inductor\", nodes = [\"in\", \"out\"], value = \"250 mh\" },\n{ name = \"R1\", kind = \"resistor\", nodes = [\"out\", \"gnd\"], value = \"1k\" },\n]\n",
            "did you mean \"mH\"",
        ),
        (
            "[network]\ntime_constants = [\"1 ms\"]\n[plan]\ntarget_error = 0.5\n",
            "\"0.5 %\"",
        ),
        (
            "[network]\ntime_constants = [\"1 ms\"]\n[drive]\nkind = \"current\"\narea = \"1 mV·s\"\n",
            "A·s",
        ),
        ("[network]\ntime_constants = [-1e-7]\n", "-1e-7"),
        ("", "or a netlist"),
        (
            "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n{ name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"1k\" },\n{ name = \"R1\", kind = \"capacitor\", nodes = [\"out\", \"gnd\"], value = \"1n\" },\n]\n",
            "network.parts",
        ),
        (
            "[network]\ntime_constants = [\"1 ms\"]\n[pulse]\namplitude = \"1 V\"\nwidth = \"1 us\"\n",
            "pulse.rise: is required",
        ),
    ];
    for (i, (text, want)) in cases.iter().enumerate() {
        let f = write(&dir, &format!("m{i}.toml"), text);
        let o = run(&["assess", f.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2), "case {i}: {}", stderr(&o));
        assert!(stderr(&o).contains(want), "case {i}: {}", stderr(&o));
    }
    assert!(
        !stderr(&run(&[
            "assess",
            &format!("{}", dir.join("m0.toml").display())
        ]))
        .contains("-0.0000")
    );
    // A missing file names the file and the reason, with no made-up line.
    let o = run(&["plan", "nothere.toml"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("nothere.toml: cannot read the scenario file"),
        "{}",
        stderr(&o)
    );
    assert!(!stderr(&o).contains(":1:"));
    let _ = net;
}

#[test]
fn item10_flags() {
    let dir = scratch("flags");
    let f = write(
        &dir,
        "rc.toml",
        "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n",
    );
    let f = f.to_str().unwrap();
    // --seed alone is refused rather than ignored.
    assert_eq!(run(&["plan", f, "--seed", "3"]).status.code(), Some(2));
    // --json --quiet still prints the JSON.
    let (v, _) = json(&["plan", f, "--json", "--quiet", "--at", "0", "--at", "-5us"]);
    // At t = 0 the ideal is h(0⁺) = 1000 /s (initial-value theorem), before it zero.
    assert_eq!(v["at"][0]["ideal"].as_f64(), Some(1000.0));
    assert_eq!(v["at"][1]["t"].as_f64(), Some(-5e-6));
    assert_eq!(v["at"][1]["ideal"].as_f64(), Some(0.0));
    // `response` uses the same (planned) pulse as the bundle's response.csv.
    let g = write(
        &dir,
        "given.toml",
        "[network]\nnumerator = [1000]\ndenominator = [1, 1000]\n[pulse]\namplitude = \"1 V\"\n\
         width = \"1 ms\"\nrise = \"0 s\"\nfall = \"0 s\"\n",
    );
    let b = dir.join("bundle");
    run(&["plan", g.to_str().unwrap(), "--out", b.to_str().unwrap()]);
    let csv = dir.join("r.csv");
    let o = run(&[
        "response",
        g.to_str().unwrap(),
        "--csv",
        csv.to_str().unwrap(),
    ]);
    assert!(stdout(&o).contains("the planned pulse"), "{}", stdout(&o));
    let mine = std::fs::read_to_string(&csv).unwrap();
    let bundle = std::fs::read_to_string(b.join("response.csv")).unwrap();
    assert_eq!(mine, bundle);
    // A stiff network: the default grid follows the dynamics, so the 2 µs resonance of a
    // 10 s record is sampled (a uniform grid of 2001 points steps 5 ms at a time).
    let stiff = write(
        &dir,
        "stiff.toml",
        "[network]\npoles = [\"-0.5\", \"-300k+400kj\", \"-300k-400kj\"]\nzeros = [\"-2\"]\ngain = \"62.5G\"\n",
    );
    run(&[
        "response",
        stiff.to_str().unwrap(),
        "--csv",
        csv.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&csv).unwrap();
    let near = text
        .lines()
        .skip(1)
        .filter_map(|l| l.split(',').next()?.parse::<f64>().ok())
        .filter(|t| (1e-6..1e-5).contains(t))
        .count();
    assert!(near >= 50, "{near} rows between 1 and 10 µs");
    // assess writes its own bundle.
    let ab = dir.join("assess-bundle");
    let o = run(&["assess", g.to_str().unwrap(), "--out", ab.to_str().unwrap()]);
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr(&o));
    for f in [
        "report.html",
        "assess.json",
        "response.csv",
        "stimulus.svg",
        "error.svg",
    ] {
        assert!(ab.join(f).is_file(), "{f} missing");
    }
    let html = std::fs::read_to_string(ab.join("report.html")).unwrap();
    assert!(html.contains("Pulse assessed"));
    // Time constants only: the unit residues are said.
    let t = write(&dir, "tc.toml", "[network]\ntime_constants = [\"1 ms\"]\n");
    let o = run(&[
        "response",
        t.to_str().unwrap(),
        "--csv",
        csv.to_str().unwrap(),
    ]);
    assert!(stdout(&o).contains("unit residues"), "{}", stdout(&o));
}

#[test]
fn item12_names_of_our_own() {
    let dir = scratch("names");
    let cases: &[(&str, &str)] = &[
        (
            "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n{ name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"1meg\" },\n{ name = \"C1\", kind = \"capacitor\", nodes = [\"out\", \"gnd\"], value = \"1n\" },\n]\n",
            "\"M\" for mega",
        ),
        (
            "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n{ name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"1k\" },\n{ name = \"C1\", kind = \"capacitor\", nodes = [\"out\", \"0\"], value = \"1n\" },\n]\n",
            "write \"gnd\"",
        ),
    ];
    for (i, (text, want)) in cases.iter().enumerate() {
        let f = write(&dir, &format!("n{i}.toml"), text);
        let o = run(&["plan", f.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2), "case {i}");
        assert!(stderr(&o).contains(want), "case {i}: {}", stderr(&o));
    }
    // "ground" names the ground node too.
    let ok = "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n{ name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"1k\" },\n{ name = \"C1\", kind = \"capacitor\", nodes = [\"out\", \"ground\"], value = \"1n\" },\n]\n";
    let f = write(&dir, "ok.toml", ok);
    assert!(matches!(
        run(&["plan", f.to_str().unwrap()]).status.code(),
        Some(0 | 1)
    ));
}

#[test]
fn shipped_demos_stay_below_60_v_and_exit_0_without_action() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_none_or(|x| x != "toml") {
            continue;
        }
        let (v, o) = json(&["plan", p.to_str().unwrap(), "--json"]);
        let amp = v["pulse"]["amplitude"].as_f64().unwrap().abs();
        if v["scenario"]["drive"] == "voltage" {
            assert!(amp <= 60.0, "{p:?}: {amp} V");
        }
        let act: Vec<&Value> = v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|w| w["severity"] == "act")
            .collect();
        assert_eq!(
            o.status.code(),
            Some(if act.is_empty() { 0 } else { 1 }),
            "{p:?}"
        );
        assert!(act.is_empty(), "{p:?} needs action: {act:?}");
    }
}
