//! The fast paths agree with the one-point-at-a-time evaluation they replace, and refuse
//! input beyond their stated maxima.

use num_complex::Complex64;
use pulseplan::network::{Network, NetworkSpec};
use pulseplan::plan::tied_pulse;
use std::process::Command;

/// An order-6 network of our own: two lightly damped pairs and two real poles.
fn order6() -> Network {
    let c = Complex64::new;
    Network::from_spec(&NetworkSpec::ZeroPoleGain {
        zeros: vec![c(-300.0, 0.0)],
        poles: vec![
            c(-200.0, 3e3),
            c(-200.0, -3e3),
            c(-1e3, 2e4),
            c(-1e3, -2e4),
            c(-50.0, 0.0),
            c(-8e3, 0.0),
        ],
        gain: 1e12,
    })
    .unwrap()
}

#[test]
fn response_rows_match_pointwise_cursors() {
    // Reference: report::cursors evaluates each time exactly and independently (divided
    // differences of exp during the pulse, the free response after it).
    let net = order6();
    let pulse = tied_pulse(1e-3, 5e-6, 50.0);
    let run = 0.1;
    let rows = pulseplan::report::response_rows(&net, &pulse, run, 20_001, &[]);
    let times: Vec<f64> = rows.iter().map(|r| r[0]).collect();
    assert!(times.windows(2).all(|w| w[0] < w[1]), "sorted, no repeats");
    for b in pulse.breakpoints() {
        assert!(times.contains(&b.0), "breakpoint {} kept", b.0);
    }
    let cursors = pulseplan::estimate::cursors(&net, &pulse, &times);
    let scale = rows.iter().map(|r| r[1].abs()).fold(0.0, f64::max);
    for (r, c) in rows.iter().zip(&cursors) {
        for (got, want) in [
            (r[1], c.ideal),
            (r[2], c.predicted),
            (r[4], c.ideal_aligned),
        ] {
            assert!(
                (got - want).abs() <= 1e-12 * scale,
                "t={}: {got} vs {want}",
                r[0]
            );
        }
    }
}

#[test]
fn response_points_above_the_maximum_are_refused() {
    let dir = std::env::temp_dir().join(format!("pulseplan-fast-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let sc = dir.join("rc.toml");
    std::fs::write(&sc, "[network]\ntime_constants = [\"1 ms\"]\n").unwrap();
    let too_many = (pulseplan::response::MAX_GRID_POINTS + 1).to_string();
    let out = Command::new(env!("CARGO_BIN_EXE_pulseplan"))
        .args(["response", sc.to_str().unwrap(), "--csv"])
        .arg(dir.join("r.csv"))
        .args(["--points", &too_many])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--points") && err.contains("maximum"), "{err}");
    assert!(!dir.join("r.csv").exists());
}
