//! A seeded, structure-aware fuzzer over scenario files, in-process on the library pipeline.
//!
//! Seeds are the shipped scenarios and `tests/corpus/`; each input is one seed with one to
//! three mutations (a number replaced by an extreme such as 1e308, 5e-324, -0 or 1e-300, or
//! scaled by decades; a line dropped or duplicated; a part kind swapped; a node renamed; a
//! byte flipped). Each input is parsed and, when accepted, planned (and assessed when it has a
//! `[pulse]`), rendered as text and JSON and, for every eighth input, drawn as figures, in a
//! thread of its own: it must not panic, must finish within the time limit, and must carry no
//! NaN or infinity in its JSON figures (`report::plan_non_finite`).
//!
//! The default run is short (`PULSEPLAN_FUZZ_CASES`, default 240). A long run:
//!
//!     PULSEPLAN_FUZZ_CASES=1000000 cargo test --release --test fuzz -- --nocapture
//!
//! (`PULSEPLAN_FUZZ_SEED` picks another sequence, `PULSEPLAN_FUZZ_SECONDS` stops after that
//! many seconds.) Failing inputs are written to `target/fuzz-failures/`; minimised, they go
//! into `tests/corpus/`, which `tests/robust.rs` replays through the binary.

use pulseplan::{pipeline, report, scenario};
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

/// xorshift64*: a small, fixed, seedable generator (Vigna 2016).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

const EXTREMES: &[&str] = &[
    "1e308",
    "5e-324",
    "-0.0",
    "1e-300",
    "1e30",
    "1e-30",
    "-1e30",
    "0",
    "1",
    "-1",
    "2.2250738585072014e-308",
    "1.7976931348623157e308",
    "9007199254740993",
    "\"1e31\"",
    "\"-1e-31 s\"",
    "\"4.7 nF\"",
    "\"1e30k\"",
    "\"1e-30p\"",
    "\"-0 %\"",
    "\"100 %\"",
    "\"1e308 %\"",
    "\"1.0000001\"",
    "\"inf\"",
    "nan",
    "inf",
];

const KINDS: &[&str] = &[
    "\"resistor\"",
    "\"capacitor\"",
    "\"inductor\"",
    "\"opamp\"",
    "\"coupling\"",
];

/// Byte ranges of the numbers in the text (digits with their sign, point and exponent).
fn numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if b[i].is_ascii_digit() {
            let mut s = i;
            if s > 0 && (b[s - 1] == b'-' || b[s - 1] == b'+') {
                s -= 1;
            }
            let mut e = i;
            while e < b.len()
                && (b[e].is_ascii_digit()
                    || b[e] == b'.'
                    || b[e] == b'_'
                    || ((b[e] == b'e' || b[e] == b'E')
                        && e + 1 < b.len()
                        && (b[e + 1].is_ascii_digit() || b[e + 1] == b'-' || b[e + 1] == b'+'))
                    || ((b[e] == b'-' || b[e] == b'+') && (b[e - 1] == b'e' || b[e - 1] == b'E')))
            {
                e += 1;
            }
            out.push((s, e));
            i = e;
        } else {
            i += 1;
        }
    }
    out
}

fn replace(text: &str, (s, e): (usize, usize), with: &str) -> String {
    format!("{}{}{}", &text[..s], with, &text[e..])
}

/// One mutation of the text.
fn mutate(text: &str, rng: &mut Rng) -> String {
    let lines: Vec<&str> = text.lines().collect();
    match rng.below(9) {
        0..=2 => {
            let nums = numbers(text);
            if nums.is_empty() {
                return text.to_string();
            }
            let at = nums[rng.below(nums.len())];
            let word = &text[at.0..at.1];
            // Inside a string the replacement must stay inside it (no quotes).
            let inside = text[..at.0].matches('"').count() % 2 == 1;
            let pick = EXTREMES[rng.below(EXTREMES.len())];
            let with = if inside {
                pick.trim_matches('"').to_string()
            } else {
                pick.to_string()
            };
            if rng.below(3) == 0 {
                // Scale by decades instead.
                let k = rng.below(80) as i32 - 40;
                let scaled = format!("{word}e{k}");
                return replace(text, at, &scaled.replace("ee", "e"));
            }
            replace(text, at, &with)
        }
        3 => {
            if lines.is_empty() {
                return text.to_string();
            }
            let i = rng.below(lines.len());
            let mut v = lines.clone();
            v.remove(i);
            v.join("\n")
        }
        4 => {
            if lines.is_empty() {
                return text.to_string();
            }
            let i = rng.below(lines.len());
            let mut v = lines.clone();
            v.insert(i, lines[i]);
            v.join("\n")
        }
        5 => {
            let found: Vec<usize> = KINDS
                .iter()
                .flat_map(|k| text.match_indices(k).map(|(i, _)| i).collect::<Vec<_>>())
                .collect();
            if found.is_empty() {
                return text.to_string();
            }
            let at = found[rng.below(found.len())];
            let len = KINDS
                .iter()
                .find(|k| text[at..].starts_with(**k))
                .map_or(0, |k| k.len());
            replace(text, (at, at + len), KINDS[rng.below(KINDS.len())])
        }
        6 => {
            // Rename one quoted node-like name (gnd, in, out, n1…) to another or a new one.
            let names = [
                "\"gnd\"", "\"in\"", "\"out\"", "\"n1\"", "\"n2\"", "\"tank\"",
            ];
            let found: Vec<(usize, usize)> = names
                .iter()
                .flat_map(|n| {
                    text.match_indices(n)
                        .map(|(i, m)| (i, i + m.len()))
                        .collect::<Vec<_>>()
                })
                .collect();
            if found.is_empty() {
                return text.to_string();
            }
            let at = found[rng.below(found.len())];
            let to = ["\"gnd\"", "\"x9\"", "\"in\"", "\"out\"", "\"0\"", "\"\""];
            replace(text, at, to[rng.below(to.len())])
        }
        7 => {
            if text.is_empty() {
                return text.to_string();
            }
            let mut bytes = text.as_bytes().to_vec();
            let i = rng.below(bytes.len());
            bytes[i] = b" -+.e0123456789\"[]{}=,#\nxkMmunp%"[rng.below(32)];
            String::from_utf8_lossy(&bytes).into_owned()
        }
        _ => {
            // Append a duplicated or extreme [plan]/[drive]/[capture] key.
            let extra = [
                "\n[plan]\nsamples = 1e6\n",
                "\n[plan]\nwidth_ratio = 1e9\nedge_ratio = 1.2500001\n",
                "\n[plan]\nsettle_multiple = 1000\n",
                "\n[drive]\narea = 1e30\n",
                "\n[drive]\narea = 1e-30\n",
                "\n[capture]\nmax_points = 1e15\nmax_sample_rate = \"1e30\"\n",
                "\n[generator]\ntime_step = \"1e30\"\nmax_amplitude = \"1e-30\"\n",
                "\n[pulse]\namplitude = 1e-30\nwidth = 1e30\nrise = 0\nfall = 0\n",
                "\n[limits]\nmax_input = 1e-30\nmax_output = 1e-30\n",
            ];
            format!("{text}{}", extra[rng.below(extra.len())])
        }
    }
}

/// What one input did.
enum Verdict {
    Refused,
    Planned,
    Failed(String),
}

/// Parse, plan (and assess), render; the error text on a non-finite figure.
fn exercise(text: &str, figures: bool) -> Verdict {
    let Ok(mut sc) = scenario::parse("fuzz.toml", "fuzz", text) else {
        return Verdict::Refused;
    };
    // Monte Carlo cost is linear in the stated samples (capped at 1e6 by the domain); the
    // fuzzer looks for failures, not for the cost of a large stated draw.
    if sc.plan.samples.is_some_and(|n| n > 200) {
        sc.plan.samples = Some(200);
    }
    let out = pipeline::plan(&sc);
    let cs = out
        .prep
        .estimator
        .cursors(&out.pulse, &[0.0, out.prep.run / 3.0]);
    if let Some(p) = report::plan_non_finite(&sc, &out, &cs) {
        return Verdict::Failed(format!("plan: {p} is not finite"));
    }
    let _ = report::plan_text(&sc, &out, &cs);
    let _ = serde_json::to_string(&report::plan_json(&sc, &out, &cs));
    if figures {
        let opts = report::figures::FigureOptions {
            design_points: 12,
            ..Default::default()
        };
        if let Ok(f) = report::figures::plan_figures(&sc, &out, &opts, &mut |_, _| {}) {
            let _ = report::plan_html(&sc, &out, &f);
        }
    }
    if let Some(g) = sc.pulse.clone() {
        let a = pipeline::assess(&sc, &g.pulse, g.run);
        let cs = a.prep.estimator.cursors(&a.pulse, &[0.0]);
        if let Some(p) = report::assess_non_finite(&sc, &a, &cs) {
            return Verdict::Failed(format!("assess: {p} is not finite"));
        }
        let _ = report::assess_text(&sc, &a, &cs);
        if figures {
            let _ = report::figures::assess_figures(&sc, &a);
        }
    }
    Verdict::Planned
}

fn seeds() -> Vec<(String, String)> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut out = Vec::new();
    for dir in ["scenarios", "tests/corpus"] {
        let mut files: Vec<PathBuf> = std::fs::read_dir(root.join(dir))
            .unwrap()
            .map(|e| e.unwrap().path())
            .filter(|p| p.extension().is_some_and(|x| x == "toml"))
            .collect();
        files.sort();
        for f in files {
            let name = f.file_stem().unwrap().to_string_lossy().into_owned();
            out.push((name, std::fs::read_to_string(&f).unwrap()));
        }
    }
    out
}

fn env_u64(key: &str, default: u64) -> u64 {
    std::env::var(key)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

#[test]
fn mutated_scenarios_never_panic_hang_or_print_non_finite_figures() {
    let cases = env_u64("PULSEPLAN_FUZZ_CASES", 240);
    let seconds = env_u64("PULSEPLAN_FUZZ_SECONDS", u64::MAX);
    let mut rng = Rng(env_u64("PULSEPLAN_FUZZ_SEED", 0x5eed_2024_0bad_cafe) | 1);
    // 2 s per input in release; unoptimised builds are some ten times slower.
    let limit = if cfg!(debug_assertions) {
        Duration::from_secs(30)
    } else {
        Duration::from_secs(2)
    };
    let seeds = seeds();
    let fail_dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/fuzz-failures");
    let start = Instant::now();
    let (mut refused, mut planned, mut slowest) = (0u64, 0u64, Duration::ZERO);
    let mut failures = Vec::new();
    let quiet_hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    let mut done = 0;
    for case in 0..cases {
        if start.elapsed().as_secs() >= seconds {
            break;
        }
        let (name, base) = &seeds[rng.below(seeds.len())];
        let mut text = base.clone();
        for _ in 0..=rng.below(3) {
            text = mutate(&text, &mut rng);
        }
        let figures = case % 8 == 0;
        let (tx, rx) = mpsc::channel();
        let input = text.clone();
        let t0 = Instant::now();
        std::thread::spawn(move || {
            let r = std::panic::catch_unwind(|| exercise(&input, figures));
            let _ = tx.send(r);
        });
        let verdict = match rx.recv_timeout(limit) {
            Ok(Ok(v)) => v,
            Ok(Err(p)) => {
                let msg = p
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default();
                Verdict::Failed(format!("panic: {msg}"))
            }
            Err(_) => Verdict::Failed(format!("took over {limit:?}")),
        };
        slowest = slowest.max(t0.elapsed().min(limit));
        done += 1;
        match verdict {
            Verdict::Refused => refused += 1,
            Verdict::Planned => planned += 1,
            Verdict::Failed(why) => {
                let _ = std::fs::create_dir_all(&fail_dir);
                let file = fail_dir.join(format!("{name}-{case}.toml"));
                let _ = std::fs::write(&file, &text);
                failures.push(format!("{}: {why}", file.display()));
                if failures.len() >= 20 || why.starts_with("took") {
                    break;
                }
            }
        }
    }
    std::panic::set_hook(quiet_hook);
    eprintln!(
        "fuzz: {done} inputs in {:.1} s ({planned} planned, {refused} refused, slowest {:.2} s), {} failures",
        start.elapsed().as_secs_f64(),
        slowest.as_secs_f64(),
        failures.len()
    );
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
