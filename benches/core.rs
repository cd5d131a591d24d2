//! Speed targets for the core (measured here, never in timed unit tests). Measured with
//! `cargo bench --bench core` on the shared 2-core machine (load average 7–10 from other
//! builds at the time; criterion's median):
//! - an order-20 pulse response at 10⁶ output points: target ≤ 50 ms; measured 22.8 ms;
//! - the error-budget width search for order ≤ 20: target ≤ 20 ms; measured 0.61 ms (t0),
//!   0.48 ms (t0-aligned);
//! - a 1 000-part RC ladder parsed, analysed and planned: target < 1 s; measured 319 ms (the
//!   symmetric tridiagonal path; the analysis itself is a small part, the rest is the
//!   planner's window and bench figures over 500 modes).
//!
//! `python3 benches/versus.py` compares the same work with numpy/scipy side by side.

use criterion::{Criterion, criterion_group, criterion_main};
use num_complex::Complex64;
use pulseplan::estimate::Metric;
use pulseplan::network::{Network, NetworkSpec};
use pulseplan::plan::PlanSettings;
use pulseplan::plan::{prepare, tied_pulse, widest_within};
use pulseplan::response::Modal;
use std::hint::black_box;

/// An order-20 network of our own: 8 lightly to moderately damped pairs and 4 real poles,
/// spread over four decades.
fn order20() -> Network {
    let mut poles = Vec::new();
    for k in 0..8 {
        let w = 1e3 * 10f64.powf(k as f64 * 0.5);
        let zeta = 0.05 + 0.1 * k as f64;
        let p = Complex64::new(-zeta * w, w * (1.0 - zeta * zeta).sqrt());
        poles.push(p);
        poles.push(p.conj());
    }
    for k in 0..4 {
        poles.push(Complex64::new(-300.0 * 7f64.powi(k), 0.0));
    }
    let zeros = vec![Complex64::new(-50.0, 0.0), Complex64::new(-2e4, 0.0)];
    Network::from_spec(&NetworkSpec::ZeroPoleGain {
        zeros,
        poles,
        gain: 1e60,
    })
    .expect("valid demo network")
}

fn bench(c: &mut Criterion) {
    let net = order20();
    assert_eq!(net.order(), 20);
    let modal = Modal::new(&net);
    let settings = PlanSettings::default();
    let prep = prepare(&net, &settings);
    let pulse = tied_pulse(1.0, prep.tau_fast / 100.0, 100.0);
    let n = 1_000_000;
    let dt = prep.run / (n - 1) as f64;
    c.bench_function("order-20 pulse response, 1e6 points", |b| {
        b.iter(|| {
            let d = modal.drive(&pulse.breakpoints());
            black_box(d.uniform(0.0, dt, n))
        })
    });
    for metric in [Metric::T0, Metric::T0Aligned] {
        let s = PlanSettings {
            target_error: Some(0.01),
            metric,
            ..PlanSettings::default()
        };
        c.bench_function(&format!("order-20 width search ({})", metric.name()), |b| {
            b.iter(|| black_box(widest_within(&prep.estimator, &prep, &s, 0.01)))
        });
    }
}

/// Target: a 1 000-part RC ladder (order 500) is analysed and planned in under 1 s on 2 cores
/// (measured 319 ms).
fn ladder(c: &mut Criterion) {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/benches/ladder-1000.toml");
    c.bench_function("1000-part RC ladder: parse, analyse, plan", |b| {
        b.iter(|| {
            let sc = pulseplan::scenario::load(std::path::Path::new(path)).expect("bench scenario");
            black_box(pulseplan::pipeline::plan(&sc))
        })
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20);
    targets = bench
}
criterion_group! {
    name = slow;
    config = Criterion::default().sample_size(10);
    targets = ladder
}
criterion_main!(benches, slow);
