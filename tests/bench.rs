//! The bench stage: limits are never exceeded, scaling keeps the reading, the stimulus export
//! integrates to the area, noise averages as 1/√N.

use pulseplan::bench::HAZARD_VOLTS;
use pulseplan::pipeline::plan;
use pulseplan::report::{generator_sheet, stimulus_csv};

use pulseplan::scenario::parse;

/// A small deterministic generator (SplitMix64) so the sweeps are repeatable without a crate.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }

    fn log_between(&mut self, lo: f64, hi: f64) -> f64 {
        (lo.ln() + self.next() * (hi.ln() - lo.ln())).exp()
    }
}

fn scenario_text(rng: &mut Rng) -> String {
    let w0 = rng.log_between(1e2, 1e7);
    let zeta = rng.log_between(0.02, 0.9);
    let a = rng.log_between(w0 / 1e3, w0);
    format!(
        "[network]\npoles = [\"{re:e}+{im:e}j\", \"{re:e}-{im:e}j\", \"{pa:e}\"]\ngain = {g:e}\n\
         [drive]\narea = {area:e}\n[plan]\ntarget_error = \"{budget} %\"\n{metric}\
         [generator]\nmax_amplitude = \"{amax:e}\"\nmin_width = \"{minw:e}\"\nmin_edge = \"{mine:e}\"\n\
         time_step = \"{step:e}\"\noutput_resistance = \"50\"\nload_setting = \"50\"\n\
         [capture]\nnoise = \"{noise:e}\"\nmax_sample_rate = \"2.5 GHz\"\nmax_points = 1_000_000\nmax_averages = 256\n\
         [limits]\nmax_input = \"{imax:e}\"\nmax_output = \"{omax:e}\"\n",
        re = -zeta * w0,
        im = w0 * (1.0 - zeta * zeta).sqrt(),
        pa = -a,
        g = w0 * w0 * a,
        area = rng.log_between(1e-9, 1.0),
        budget = [0.1, 0.5, 1.0, 3.0][(rng.next() * 4.0) as usize],
        // h(0⁺) = 0 for three poles and no zero: only the window metric means anything here
        // (the default when none is given).
        metric = ["metric = \"window\"\n", ""][(rng.next() * 2.0) as usize],
        amax = rng.log_between(0.5, 50.0),
        minw = rng.log_between(1e-10, 1e-6),
        mine = rng.log_between(1e-11, 1e-8),
        step = rng.log_between(1e-12, 1e-9),
        noise = rng.log_between(1e-6, 1e-2),
        imax = rng.log_between(0.1, 100.0),
        omax = rng.log_between(1e-3, 10.0),
    )
}

#[test]
fn plans_never_exceed_a_stated_limit() {
    let mut rng = Rng(20261201);
    for case in 0..40 {
        let text = scenario_text(&mut rng);
        let sc = parse("sweep.toml", "sweep", &text).unwrap();
        let out = plan(&sc);
        let b = &out.bench;
        let g = sc.bench.generator.as_ref().unwrap();
        let l = sc.bench.limits.as_ref().unwrap();
        let c = sc.bench.capture.as_ref().unwrap();
        let p = &out.pulse;
        let tol = 1.0 + 1e-9;
        let ctx = format!("case {case}:\n{text}");
        assert!(p.amplitude.abs() <= g.max_amplitude.unwrap() * tol, "{ctx}");
        assert!(p.amplitude.abs() <= l.max_input.unwrap() * tol, "{ctx}");
        assert!(
            b.amplitude.peak_output <= l.max_output.unwrap() * tol,
            "{ctx}"
        );
        assert!(p.width_50() >= g.min_width.unwrap() / tol, "{ctx}");
        assert!(p.rise_10_90() >= g.min_edge.unwrap() / tol, "{ctx}");
        assert!(
            b.capture.sample_rate <= c.max_sample_rate.unwrap() * tol,
            "{ctx}"
        );
        if let Some((f, s)) = &b.capture.split {
            assert!(
                f.points as f64 <= c.max_points.unwrap()
                    && s.points as f64 <= c.max_points.unwrap()
            );
        } else {
            assert!(b.capture.points as f64 <= c.max_points.unwrap(), "{ctx}");
        }
        // Rounding to the generator's grid never pushes a met budget over: only its
        // shortest width or fastest edge may.
        let planned = &out.ideal_pulse;
        let forced = planned.width_50() < g.min_width.unwrap() * tol
            || planned.rise_10_90() < g.min_edge.unwrap() * tol;
        if !forced {
            assert!(
                !out.warnings
                    .iter()
                    .any(|w| w.code() == "generator-too-slow"),
                "{ctx}"
            );
        }
        // Timing is on the generator's grid.
        let step = g.time_step.unwrap();
        let on_grid = |t: f64| ((t / step) - (t / step).round()).abs() < 1e-6;
        assert!(on_grid(p.width_50()) && on_grid(p.rise_10_90()), "{ctx}");
        // A hazardous amplitude always carries the caution.
        if p.amplitude.abs() > HAZARD_VOLTS {
            assert!(
                out.warnings.iter().any(|w| w.code() == "hazard-voltage"),
                "{ctx}"
            );
        }
    }
}

#[test]
fn limited_amplitude_scales_area_not_reading() {
    // Linearity: with the amplitude held at the limit, area = A_lim × width and y/area reads the
    // same h as the unlimited plan (unit-area-at-limited-amplitude scaling).
    let base =
        "[network]\nnumerator = [5000]\ndenominator = [1, 5000]\n[plan]\ntarget_error = \"1 %\"\n";
    let free = plan(&parse("a.toml", "a", base).unwrap());
    let limited_text = format!("{base}[generator]\nmax_amplitude = \"3 V\"\n");
    let limited = plan(&parse("b.toml", "b", &limited_text).unwrap());
    let p = &limited.pulse;
    assert!((p.amplitude - 3.0).abs() < 1e-12);
    assert!((p.area() - 3.0 * p.width_50()).abs() < 1e-18);
    assert!((limited.bench.amplitude.scaling.read_factor - 1.0 / p.area()).abs() < 1e-9 / p.area());
    let (r1, r2) = (free.estimate.t0.reading, limited.estimate.t0.reading);
    assert!(((r1 - r2) / r1).abs() < 1e-12, "{r1} vs {r2}");
}

#[test]
fn stimulus_export_integrates_to_the_area() {
    // The trapezoid's area equals the integral of its piecewise-linear corners (trapezoid rule
    // is exact for piecewise-linear data).
    let text = "[network]\npoles = [\"-1k\", \"-30k\"]\ngain = 3e7\n[drive]\narea = \"2 mV·s\"\n\
                [generator]\nmax_amplitude = \"8 V\"\ntime_step = \"1 ns\"\n";
    let sc = parse("s.toml", "s", text).unwrap();
    let out = plan(&sc);
    let csv = stimulus_csv(&out.bench, "V");
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
    assert!((integral - out.pulse.area()).abs() < 1e-9 * out.pulse.area());
    assert!(pts.windows(2).all(|w| w[1].0 >= w[0].0));
    let sheet = generator_sheet(&sc, &out);
    assert!(sheet.contains("pulse width (50 %)"));
    assert!(sheet.contains("RAMP VIEW"));
}

#[test]
fn white_noise_averages_down_as_root_n() {
    // White-noise averaging: the mean of N independent samples of rms σ has rms σ/√N (a
    // property of independent variances). Checked by a seeded simulation (Box–Muller).
    let mut rng = Rng(7);
    let sigma = 0.5e-3;
    for n in [1usize, 4, 64] {
        let trials = 4000;
        let mut sum_sq = 0.0;
        for _ in 0..trials {
            let mut acc = 0.0;
            for _ in 0..n {
                let (u1, u2) = (rng.next().max(1e-300), rng.next());
                acc += sigma * (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos();
            }
            let mean = acc / n as f64;
            sum_sq += mean * mean;
        }
        let rms = (sum_sq / trials as f64).sqrt();
        let want = sigma / (n as f64).sqrt();
        assert!((rms / want - 1.0).abs() < 0.06, "N={n}: {rms} vs {want}");
    }
    // And the plan's averaging count follows the same law: N = ⌈(noise/room)²⌉.
    let text = "[network]\nnumerator = [5000]\ndenominator = [1, 5000]\n[plan]\ntarget_error = \"1 %\"\n\
                [generator]\nmax_amplitude = \"1 V\"\n[capture]\nnoise = \"2 mV\"\nmax_averages = 100000\n";
    let out = plan(&parse("n.toml", "n", text).unwrap());
    let b = &out.bench;
    let noise_one = 2e-3 / (out.pulse.area() * out.prep.estimator.normaliser());
    let room = 0.01 - out.estimate.metric(pulseplan::estimate::Metric::T0);
    let n = b.noise.averages.unwrap() as f64;
    assert!(noise_one / n.sqrt() <= room * (1.0 + 1e-12));
    assert!(
        noise_one / (n - 1.0).max(1.0).sqrt() > room || n == 1.0,
        "n={n} noise={noise_one} room={room}"
    );
}
