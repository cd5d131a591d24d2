//! Tolerance samples analysed on the nominal's split with the small-order eigensolver
//! (`Validated::analyse_values`) against the same variants analysed from scratch by the full
//! path (`netlist::analyse`: SVD reduction, faer's eigen-decomposition, descriptor polish):
//! poles, residues and h(0⁺) must agree to 1e-12 relative (two orderings of the same exact
//! computation; the bound the speed work promised for "the same numbers as before").

use pulseplan::netlist::{self, CircuitFunction, NetlistSpec, Validated};
use pulseplan::network::NetworkSpec;

fn netlist_of(path: &str) -> NetlistSpec {
    let file = format!("{}/{path}", env!("CARGO_MANIFEST_DIR"));
    match pulseplan::scenario::load(std::path::Path::new(&file))
        .expect(path)
        .network_spec
    {
        NetworkSpec::Netlist(spec) => spec,
        _ => panic!("{path} is not a netlist"),
    }
}

/// A reproducible factor in [1 − t, 1 + t] (a 64-bit LCG, Knuth MMIX constants).
fn factor(state: &mut u64, t: f64) -> f64 {
    *state = state
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    let u = (*state >> 11) as f64 / (1u64 << 53) as f64;
    1.0 + t * (2.0 * u - 1.0)
}

fn h0(f: &CircuitFunction) -> f64 {
    f.modes.iter().map(|m| m.residues[0].re).sum()
}

fn compare(path: &str, samples: usize) {
    let spec = netlist_of(path);
    let validated = Validated::new(&spec).expect(path);
    let base = netlist::main_values(&spec);
    let mut state = 7u64;
    for s in 0..samples {
        let values: Vec<f64> = spec
            .parts
            .iter()
            .zip(&base)
            .map(|(p, &v)| match p.tolerance {
                Some(t) if t > 0.0 => v * factor(&mut state, t),
                _ => v,
            })
            .collect();
        let fast = validated.analyse_values(&values).expect("projected");
        let full = netlist::analyse(&netlist::with_values(&spec, &values)).expect("from scratch");
        assert_eq!(
            fast.modes.len(),
            full.modes.len(),
            "{path} sample {s}: mode count"
        );
        let rmax = full
            .modes
            .iter()
            .map(|m| m.residues[0].norm())
            .fold(0.0, f64::max);
        for (a, b) in fast.modes.iter().zip(&full.modes) {
            let dp = (a.pole - b.pole).norm() / b.pole.norm();
            let dr = (a.residues[0] - b.residues[0]).norm() / rmax;
            assert!(
                dp < 1e-12,
                "{path} sample {s}: pole {} vs {} ({dp:.1e})",
                a.pole,
                b.pole
            );
            assert!(
                dr < 1e-12,
                "{path} sample {s}: residue {} vs {} ({dr:.1e})",
                a.residues[0],
                b.residues[0]
            );
        }
        let (ha, hb) = (h0(&fast), h0(&full));
        assert!(
            (ha - hb).abs() <= 1e-12 * rmax,
            "{path} sample {s}: h0 {ha} vs {hb}"
        );
        assert!((fast.direct - full.direct).abs() <= 1e-12 * full.direct.abs().max(rmax * 1e-300));
    }
}

#[test]
fn active_filter_benchmark_samples_match_the_full_reduction() {
    compare("benches/data/active-filter-10.toml", 300);
}

#[test]
fn shipped_toleranced_circuits_match_the_full_reduction() {
    for path in [
        "scenarios/active-lowpass-gbw.toml",
        "scenarios/active-lowpass-ideal.toml",
        "scenarios/current-driven-tank.toml",
        "scenarios/passive-lag-lead.toml",
        "scenarios/rc-line-ladder.toml",
        "scenarios/valve-positioner-fit.toml",
    ] {
        compare(path, 100);
    }
}
