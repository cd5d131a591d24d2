//! Speed target for reading a capture back (measured here, never in timed unit tests):
//! a 10⁷-sample, two-channel capture (time, output, stimulus) read, conditioned and fitted
//! in ≤ 2 s on 2 cores.
//!
//! The capture is made once, in setup, into target/bench-data/: a circuit of our own (a real
//! pole and a damped pair) driven by a 10 µs trapezoid, sampled every 1 ns over 10 ms with
//! 1 ms of pre-trigger, white noise, an offset and a recorded stimulus.

use criterion::{Criterion, criterion_group, criterion_main};
use num_complex::Complex64;
use pulseplan::measure::{self, ChannelRef, ReadOptions, RecoverSettings};
use pulseplan::network::{Network, NetworkSpec};
use pulseplan::pulse::{Convention, Trapezoid};
use pulseplan::response::Modal;
use std::hint::black_box;
use std::io::Write;
use std::path::PathBuf;

const SAMPLES: usize = 10_000_000;
const STEP: f64 = 1e-9;
const PRE: f64 = 1e-3;

fn network() -> Network {
    let pair = Complex64::new(-2.0e3, 1.5e4);
    Network::from_spec(&NetworkSpec::ZeroPoleGain {
        zeros: vec![Complex64::new(-4.0e3, 0.0)],
        poles: vec![Complex64::new(-1.0e3, 0.0), pair, pair.conj()],
        gain: 3.0e8,
    })
    .expect("valid bench network")
}

fn pulse() -> Trapezoid {
    Trapezoid::from_convention(2.0, 10e-6, 80e-9, 80e-9, Convention::Generator)
        .expect("valid pulse")
}

/// A 64-bit LCG (Knuth's MMIX constants) with Box–Muller: reproducible noise without a crate.
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn gauss(&mut self) -> f64 {
        let (a, b) = (self.uniform(), self.uniform());
        (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
    }
}

fn capture_file() -> PathBuf {
    let dir = PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/target/bench-data"));
    let path = dir.join("capture-1e7.csv");
    if path.exists() {
        return path;
    }
    std::fs::create_dir_all(&dir).expect("bench data folder");
    let net = network();
    let modal = Modal::new(&net);
    let p = pulse();
    let driven = modal.drive(&p.breakpoints());
    let start = ((PRE / STEP).round() as usize).min(SAMPLES);
    let clean = driven.uniform(0.0, STEP, SAMPLES - start);
    let peak = clean.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let mut noise = Noise(20240601);
    let tmp = dir.join("capture-1e7.csv.tmp");
    let mut w = std::io::BufWriter::new(std::fs::File::create(&tmp).expect("bench file"));
    writeln!(w, "time (s),out (V),stim (V)").expect("write");
    for i in 0..SAMPLES {
        let t = i as f64 * STEP - PRE;
        let y = if i >= start { clean[i - start] } else { 0.0 };
        let out = y + 0.02 + 1e-3 * peak * noise.gauss();
        let stim = p.value(t) + 1e-3 * p.amplitude * noise.gauss();
        writeln!(w, "{t:.9e},{out:.6e},{stim:.6e}").expect("write");
    }
    w.flush().expect("flush");
    drop(w);
    std::fs::rename(&tmp, &path).expect("rename");
    path
}

fn bench(c: &mut Criterion) {
    let path = capture_file();
    let net = network();
    let settings = RecoverSettings {
        model: Some(net),
        ..RecoverSettings::new(pulse())
    };
    let opts = ReadOptions {
        channel: Some(ChannelRef::Name("out".into())),
        stimulus: Some(ChannelRef::Name("stim".into())),
        interval: None,
    };
    let cap = measure::read(&path, &opts).expect("bench capture");
    assert_eq!(cap.len(), SAMPLES);
    let rec = measure::recover(&cap, &settings).expect("bench recovery");
    eprintln!(
        "bench capture: {} modes, τ = {:?}, rows {} (blocks of {})",
        rec.modes.len(),
        rec.modes
            .iter()
            .map(|m| m.time_constant.value)
            .collect::<Vec<_>>(),
        rec.fit.rows,
        rec.fit.block
    );
    c.bench_function(
        "recover: read + condition + fit, 1e7 samples x 2 channels",
        |b| {
            b.iter(|| {
                let cap = measure::read(&path, &opts).expect("bench capture");
                black_box(measure::recover(&cap, &settings).expect("bench recovery"))
            })
        },
    );
    c.bench_function("recover: condition + fit only, 1e7 samples", |b| {
        b.iter(|| black_box(measure::recover(&cap, &settings).expect("bench recovery")))
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(10);
    targets = bench
}
criterion_main!(benches);
