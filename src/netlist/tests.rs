//! Reference tests: each names the closed form it checks against.

use num_complex::Complex64;

use super::CircuitMode as Mode;
use super::*;

fn s(x: &str) -> String {
    x.to_string()
}
fn part(name: &str, kind: PartKind) -> Part {
    Part {
        name: s(name),
        kind,
        line: 0,
        tolerance: None,
    }
}
/// A two-terminal part between `a` and `b`, its kind made from its nodes.
fn two_terminal(name: &str, a: &str, b: &str, kind: impl FnOnce([String; 2]) -> PartKind) -> Part {
    part(name, kind([s(a), s(b)]))
}
fn r(name: &str, a: &str, b: &str, value: f64) -> Part {
    two_terminal(name, a, b, |nodes| PartKind::Resistor { nodes, value })
}
fn c(name: &str, a: &str, b: &str, value: f64) -> Part {
    two_terminal(name, a, b, |nodes| PartKind::Capacitor { nodes, value })
}
fn l(name: &str, a: &str, b: &str, value: f64) -> Part {
    two_terminal(name, a, b, |nodes| PartKind::Inductor { nodes, value })
}
fn opamp(
    name: &str,
    plus: &str,
    minus: &str,
    out: &str,
    gain: Option<f64>,
    gbw: Option<f64>,
) -> Part {
    part(
        name,
        PartKind::OpAmp {
            plus: s(plus),
            minus: s(minus),
            output: s(out),
            gain,
            gbw,
        },
    )
}
/// Spec with lines numbered from 1 in part order.
fn spec(input: &str, output: Output, stimulus: Stimulus, mut parts: Vec<Part>) -> NetlistSpec {
    for (i, p) in parts.iter_mut().enumerate() {
        p.line = i + 1;
    }
    NetlistSpec {
        input: s(input),
        output,
        source_resistance: None,
        stimulus,
        parts,
    }
}
fn vnode(n: &str) -> Output {
    Output::Node(s(n))
}
fn close(a: Complex64, b: Complex64, rel: f64) -> bool {
    (a - b).norm() <= rel * b.norm().max(1e-300)
}
fn real(x: f64) -> Complex64 {
    Complex64::new(x, 0.0)
}
/// H(s) rebuilt from the modes (for DC-gain checks).
fn eval(net: &CircuitFunction, sv: Complex64) -> Complex64 {
    let mut h = real(net.direct);
    for m in &net.modes {
        for (k, r) in m.residues.iter().enumerate() {
            h += r / (sv - m.pole).powi(k as i32 + 1);
        }
    }
    h
}
/// h(0⁺) from the modes: Σ of the first-order residues.
fn h0_plus(net: &CircuitFunction) -> f64 {
    net.modes.iter().map(|m| m.residues[0].re).sum()
}

/// Check that `sp` reduces to one state, and analyse it.
fn first_order(sp: &NetlistSpec) -> CircuitFunction {
    assert_eq!(state_space(sp).unwrap().order(), 1);
    analyse(sp).unwrap()
}
/// Check a mode's pole and leading residue, each to its relative tolerance.
fn check_mode(m: &Mode, pole: Complex64, residue: Complex64, (pole_rel, res_rel): (f64, f64)) {
    assert!(close(m.pole, pole, pole_rel), "pole {} vs {pole}", m.pole);
    assert!(
        close(m.residues[0], residue, res_rel),
        "residue {} vs {residue}",
        m.residues[0]
    );
}
fn pole_near(modes: &[Mode], p: Complex64, rel: f64) -> &Mode {
    modes
        .iter()
        .find(|m| close(m.pole, p, rel))
        .unwrap_or_else(|| {
            panic!(
                "no pole near {p}: {:?}",
                modes.iter().map(|m| m.pole).collect::<Vec<_>>()
            )
        })
}

#[test]
fn rc_first_order() {
    // Handbook closed form: RC low-pass H = (1/τ)/(s + 1/τ), τ = RC; h(0⁺) = 1/τ.
    let (rv, cv) = (4.7e3, 22e-9);
    let tau = rv * cv;
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![r("R1", "in", "out", rv), c("C1", "out", "gnd", cv)],
    );
    let net = first_order(&sp);
    assert_eq!(net.modes.len(), 1);
    check_mode(
        &net.modes[0],
        real(-1.0 / tau),
        real(1.0 / tau),
        (1e-13, 1e-12),
    );
    assert_eq!(net.modes[0].pole.im, 0.0);
    assert_eq!(net.direct, 0.0);
    assert!((net.h0_ivt - 1.0 / tau).abs() < 1e-12 / tau);
}

#[test]
fn rc_with_source_resistance_and_current_stimulus() {
    // Handbook closed forms: Thévenin source Rs in series gives τ = (Rs + R)C;
    // a Norton current source with Rs in parallel with C gives Z = Rs/(1 + sRsC), τ = RsC.
    let (rs, rv, cv) = (50.0, 950.0, 1e-6);
    let mut sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![r("R1", "in", "out", rv), c("C1", "out", "gnd", cv)],
    );
    sp.source_resistance = Some(rs);
    let net = analyse(&sp).unwrap();
    let tau = (rs + rv) * cv;
    check_mode(
        &net.modes[0],
        real(-1.0 / tau),
        real(1.0 / tau),
        (1e-13, 1e-12),
    );

    let mut sp = spec(
        "n",
        vnode("n"),
        Stimulus::Current,
        vec![c("C1", "n", "gnd", cv)],
    );
    sp.source_resistance = Some(rs);
    let net = analyse(&sp).unwrap();
    check_mode(
        &net.modes[0],
        real(-1.0 / (rs * cv)),
        real(1.0 / cv),
        (1e-13, 1e-12),
    );
}

#[test]
fn rl_first_order_with_direct_term() {
    // Handbook closed form: RL high-pass (output across L) H = sL/(R + sL) = 1 − (R/L)/(s + R/L):
    // D = 1, residue −R/L, τ = L/R; h(0⁺) of the strictly proper part = −R/L.
    let (rv, lv) = (330.0, 10e-3);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![r("R1", "in", "out", rv), l("L1", "out", "gnd", lv)],
    );
    let net = analyse(&sp).unwrap();
    let a = rv / lv;
    assert_eq!(net.modes.len(), 1);
    check_mode(&net.modes[0], real(-a), real(-a), (1e-13, 1e-12));
    assert!((net.direct - 1.0).abs() < 1e-13);
    assert!((net.h0_ivt + a).abs() < 1e-12 * a);
    // The current through L1 (in → out → L1 → ground): i = u/(R + sL), residue 1/L.
    let mut sp = sp;
    sp.output = Output::CurrentThrough(s("l1"));
    let net = analyse(&sp).unwrap();
    assert!(close(net.modes[0].residues[0], real(1.0 / lv), 1e-12));
}

#[test]
fn series_rlc() {
    // Handbook closed form: series RLC, output across C: H = ω0²/(s² + 2ζω0 s + ω0²),
    // ω0 = 1/√(LC), ζ = (R/2)√(C/L); poles −ζω0 ± jω0√(1−ζ²), residue ω0²/(2jω_d).
    let (rv, lv, cv) = (27.0, 2.2e-3, 68e-9);
    let sp = spec(
        "in",
        vnode("b"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "a", rv),
            l("L1", "a", "b", lv),
            c("C1", "b", "gnd", cv),
        ],
    );
    let net = analyse(&sp).unwrap();
    let w0 = 1.0 / (lv * cv).sqrt();
    let zeta = rv / 2.0 * (cv / lv).sqrt();
    let wd = w0 * (1.0 - zeta * zeta).sqrt();
    let p = Complex64::new(-zeta * w0, wd);
    assert_eq!(net.modes.len(), 2);
    assert_eq!(net.modes[0].pole, net.modes[1].pole.conj());
    assert!(net.modes[0].pole.im > 0.0);
    assert!(close(net.modes[0].pole, p, 1e-12));
    let res = w0 * w0 / Complex64::new(0.0, 2.0 * wd);
    assert!(close(net.modes[0].residues[0], res, 1e-10));
    assert_eq!(net.modes[1].residues[0], net.modes[0].residues[0].conj());
    assert_eq!(net.h0_ivt, 0.0);
    assert!(((-net.modes[0].pole.re / net.modes[0].pole.norm()) - zeta).abs() < 1e-12);
}

#[test]
fn parallel_rlc_current_driven() {
    // Handbook closed form: parallel RLC driven by a current: Z = (s/C)/(s² + s/(RC) + 1/(LC)),
    // ω0 = 1/√(LC), ζ = (1/(2R))√(L/C); h(0⁺) = 1/C (initial-value theorem).
    let (rv, lv, cv) = (1.5e3, 4.7e-3, 10e-9);
    let sp = spec(
        "n",
        vnode("n"),
        Stimulus::Current,
        vec![
            r("R1", "n", "gnd", rv),
            l("L1", "n", "gnd", lv),
            c("C1", "n", "gnd", cv),
        ],
    );
    let net = analyse(&sp).unwrap();
    let w0 = 1.0 / (lv * cv).sqrt();
    let zeta = 1.0 / (2.0 * rv) * (lv / cv).sqrt();
    let p = Complex64::new(-zeta * w0, w0 * (1.0 - zeta * zeta).sqrt());
    assert!(close(net.modes[0].pole, p, 1e-12));
    assert!((net.h0_ivt - 1.0 / cv).abs() < 1e-12 / cv);
    assert!((h0_plus(&net) - 1.0 / cv).abs() < 1e-9 / cv);
    // Residue of (s/C)/((s−p)(s−p*)) at p: p/(C(p − p*)).
    let res = p / (cv * (p - p.conj()));
    assert!(close(net.modes[0].residues[0], res, 1e-10));
}

#[test]
fn sallen_key_unity_gain_low_pass() {
    // Handbook closed form, unity-gain Sallen–Key low-pass: in –R1– a –R2– b, C1 from a to the
    // output (feedback), C2 from b to ground, ideal follower b → out:
    // H = 1/(R1R2C1C2 s² + C2(R1+R2) s + 1), ω0 = 1/√(R1R2C1C2), Q = √(R1R2C1C2)/(C2(R1+R2)).
    let (r1, r2, c1, c2) = (12e3, 15e3, 4.7e-9, 1.2e-9);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "a", r1),
            r("R2", "a", "b", r2),
            c("C1", "a", "out", c1),
            c("C2", "b", "gnd", c2),
            opamp("U1", "b", "out", "out", None, None),
        ],
    );
    let net = analyse(&sp).unwrap();
    let w0 = 1.0 / (r1 * r2 * c1 * c2).sqrt();
    let q = (r1 * r2 * c1 * c2).sqrt() / (c2 * (r1 + r2));
    assert_eq!(net.modes.len(), 2);
    let p = net.modes[0].pole;
    assert!((p.norm() - w0).abs() < 1e-12 * w0);
    assert!((-p.norm() / (2.0 * p.re) - q).abs() < 1e-12 * q);
    // Unit DC gain.
    assert!((eval(&net, real(0.0)) - real(1.0)).norm() < 1e-12);
}

#[test]
fn finite_gbw_adds_the_fast_pole() {
    // Closed form: follower with A(s) = A0/(1 + s/ωp), ωp = 2π·GBW/A0, has
    // H = A/(1 + A) = A0ωp/(s + ωp(1 + A0)): pole −ωp(1 + A0), DC gain A0/(1 + A0).
    // Behind an RC (pole −1/RC) the two poles simply multiply.
    let (rv, cv, a0, gbw) = (10e3, 10e-9, 2e5, 1e6);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "p", rv),
            c("C1", "p", "gnd", cv),
            opamp("U1", "p", "out", "out", Some(a0), Some(gbw)),
        ],
    );
    let net = analyse(&sp).unwrap();
    let wp = 2.0 * std::f64::consts::PI * gbw / a0;
    assert_eq!(net.modes.len(), 2);
    pole_near(&net.modes, real(-1.0 / (rv * cv)), 1e-12);
    pole_near(&net.modes, real(-wp * (1.0 + a0)), 1e-12);
    assert!((eval(&net, real(0.0)).re - a0 / (1.0 + a0)).abs() < 1e-12);
    // Finite gain alone, no pole: the RC pole only, DC gain A0/(1 + A0).
    let mut sp2 = sp.clone();
    sp2.parts[2] = opamp("U1", "p", "out", "out", Some(a0), None);
    let net = analyse(&sp2).unwrap();
    assert_eq!(net.modes.len(), 1);
    assert!((eval(&net, real(0.0)).re - a0 / (1.0 + a0)).abs() < 1e-12);
    // GBW alone (integrator model): pole at −2π·GBW, unit DC gain.
    sp2.parts[2] = opamp("U1", "p", "out", "out", None, Some(gbw));
    let net = analyse(&sp2).unwrap();
    pole_near(&net.modes, real(-2.0 * std::f64::consts::PI * gbw), 1e-12);
    assert!((eval(&net, real(0.0)).re - 1.0).abs() < 1e-12);
}

/// Uniform RC ladder: ideal source → R → n1 (C to ground) → R → n2 (C) … → nN (C), open end.
fn ladder(n: usize, rv: f64, cv: f64) -> NetlistSpec {
    let mut parts = Vec::new();
    for k in 1..=n {
        let prev = if k == 1 {
            s("in")
        } else {
            format!("n{}", k - 1)
        };
        parts.push(r(&format!("R{k}"), &prev, &format!("n{k}"), rv));
        parts.push(c(&format!("C{k}"), &format!("n{k}"), "gnd", cv));
    }
    spec(
        "in",
        Output::Node(format!("n{n}")),
        Stimulus::Voltage,
        parts,
    )
}

/// Derivation: with v0 = u, C v_j' = (v_{j−1} − 2v_j + v_{j+1})/R and, at the open end,
/// C v_N' = (v_{N−1} − v_N)/R, so A = (1/RC)·(−M), M = tridiag(−1, 2, −1) with M_NN = 1.
/// Trying v_j = sin(jθ) satisfies every row but the last with μ = 2 − 2cos θ; the last row
/// then demands sin((N+1)θ) = sin(Nθ), i.e. θ_k = (2k−1)π/(2N+1), k = 1..N. Hence
/// λ_k = −(2/RC)(1 − cos θ_k) = −(4/RC)·sin²(θ_k/2) (closed form of this tridiagonal
/// matrix; the sine form keeps full relative accuracy for the slow poles).
fn check_ladder(n: usize) {
    let (rv, cv) = (1e3, 1e-9);
    let net = analyse(&ladder(n, rv, cv)).unwrap();
    assert_eq!(net.order(), n);
    let mut got: Vec<f64> = net.modes.iter().map(|m| m.pole.re).collect();
    assert!(
        net.modes
            .iter()
            .all(|m| m.pole.im == 0.0 && m.multiplicity() == 1)
    );
    got.sort_by(|a, b| b.total_cmp(a));
    let k0 = 1.0 / (rv * cv);
    let want = |k: usize| {
        let theta = (2 * k + 1) as f64 * std::f64::consts::PI / (2 * n + 1) as f64;
        -4.0 * k0 * (theta / 2.0).sin().powi(2)
    };
    for (k, g) in got.iter().enumerate() {
        assert!(
            (g - want(k)).abs() <= 1e-12 * 4.0 * k0,
            "k={k}: {g} vs {}",
            want(k)
        );
    }
    // The slowest pole to 1e-12 relative, however stiff the ladder.
    let rel = ((got[0] - want(0)) / want(0)).abs();
    assert!(
        rel <= 1e-12,
        "slowest pole {} vs {}: {rel:e}",
        got[0],
        want(0)
    );
    // DC gain 1 (open-ended ladder), relative degree N so h(0⁺) = 0.
    assert!((eval(&net, real(0.0)).re - 1.0).abs() < 1e-8);
    assert_eq!(net.h0_ivt, 0.0);
}

#[test]
fn rc_ladder_eigenvalues() {
    check_ladder(40);
}

/// 500 sections = 1 000 parts (the symmetric tridiagonal path keeps this quick).
#[test]
fn rc_ladder_1000_parts() {
    check_ladder(500);
}

/// 1 600 sections: eigenvalues spread over 6.6 decades. Slow in a debug build:
/// `cargo test --release -- --ignored`.
#[test]
#[ignore]
fn rc_ladder_3200_parts() {
    check_ladder(1600);
}

#[test]
fn coupled_inductor_transformer() {
    // Closed form of the 2×2 mesh system: source → R1 → primary L1, secondary L2 loaded by R2,
    // M = k√(L1L2): det [[R1 + sL1, sM], [sM, R2 + sL2]] = 0 gives
    // (L1L2 − M²)s² + (R1L2 + R2L1)s + R1R2 = 0 (two real poles).
    let (r1, r2, l1, l2, k) = (50.0, 200.0, 1e-3, 4e-3, 0.8);
    let mut parts = vec![
        r("R1", "in", "p", r1),
        l("L1", "p", "gnd", l1),
        l("L2", "s", "gnd", l2),
        r("R2", "s", "gnd", r2),
    ];
    parts.push(part(
        "K1",
        PartKind::Coupling {
            inductors: [s("L1"), s("L2")],
            k,
        },
    ));
    let sp = spec("in", vnode("s"), Stimulus::Voltage, parts);
    let net = analyse(&sp).unwrap();
    let m = k * (l1 * l2).sqrt();
    let (a, b, cc) = (l1 * l2 - m * m, r1 * l2 + r2 * l1, r1 * r2);
    let disc = (b * b - 4.0 * a * cc).sqrt();
    let p1 = (-b - disc) / (2.0 * a);
    let p2 = cc / (a * p1); // product of roots, avoids cancellation
    assert_eq!(net.modes.len(), 2);
    pole_near(&net.modes, real(p1), 1e-12);
    pole_near(&net.modes, real(p2), 1e-12);
    // Secondary voltage: V2 = −R2·I2, I2 = −sM·U/det, so H = sMR2/det: h(0⁺) = MR2/(L1L2 − M²).
    assert!((net.h0_ivt - m * r2 / a).abs() < 1e-10 * m * r2 / a);
    assert!((h0_plus(&net) - m * r2 / a).abs() < 1e-8 * m * r2 / a);
}

#[test]
fn buffered_double_pole() {
    // Derivation: two identical RC low-passes separated by an ideal unity buffer multiply:
    // H = (a/(s + a))², a = 1/RC, an exact double pole with Laurent coefficients r1 = 0,
    // r2 = a² (h(t) = a²·t·e^(−at)); the state matrix has a Jordan block.
    let (rv, cv) = (2.2e3, 15e-9);
    let sp = spec(
        "in",
        vnode("c"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "a", rv),
            c("C1", "a", "gnd", cv),
            opamp("U1", "a", "b", "b", None, None),
            r("R2", "b", "c", rv),
            c("C2", "c", "gnd", cv),
        ],
    );
    let net = analyse(&sp).unwrap();
    let a = 1.0 / (rv * cv);
    assert_eq!(net.modes.len(), 1, "{:?}", net.modes);
    let m = &net.modes[0];
    assert_eq!(m.multiplicity(), 2);
    assert_eq!(m.pole.im, 0.0);
    assert!(close(m.pole, real(-a), 1e-9));
    assert!(m.residues[0].norm() < 1e-6 * a, "{:?}", m.residues);
    assert!(close(m.residues[1], real(a * a), 1e-7), "{:?}", m.residues);
    assert_eq!(net.h0_ivt, 0.0);
}

#[test]
fn semisimple_double_eigenvalue_is_a_simple_pole() {
    // Two identical RC sections driven in parallel, output across the first: the second is
    // invisible, so H = a/(s + a) with one simple pole (handbook closed form of the RC).
    let (rv, cv) = (1e3, 1e-6);
    let sp = spec(
        "in",
        vnode("a"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "a", rv),
            c("C1", "a", "gnd", cv),
            r("R2", "in", "b", rv),
            c("C2", "b", "gnd", cv),
        ],
    );
    let net = analyse(&sp).unwrap();
    assert_eq!(net.order(), 1, "{:?}", net.modes);
    assert!(close(net.modes[0].residues[0], real(1e3), 1e-10));
}

#[test]
fn capacitor_across_source_reduces_the_order() {
    // A capacitor straight across the ideal source is a capacitor–voltage-source loop: it holds
    // no independent state, so only the RC's pole −1/RC remains (handbook RC closed form).
    let (rv, cv) = (1e3, 1e-6);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![
            c("C0", "in", "gnd", 47e-9),
            r("R1", "in", "out", rv),
            c("C1", "out", "gnd", cv),
        ],
    );
    let net = first_order(&sp);
    check_mode(&net.modes[0], real(-1e3), real(1e3), (1e-12, 1e-12));
    // Its current is C0·u' + …: improper, refused by state_space, kept by analyse
    // (the current into the network is u·(sC0 + 1/(R + 1/sC1)): s-coefficient C0).
    let mut sp2 = sp.clone();
    sp2.output = Output::CurrentThrough(s("C0"));
    let e = state_space(&sp2).unwrap_err();
    assert!(e.message.contains("improper"), "{e}");
}

#[test]
fn capacitor_loop_with_source_gives_direct_term() {
    // Capacitive divider across the source: out = u·C1/(C1 + C2) at once, plus the RC
    // discharge through R2 across C2: H = C1/(C1+C2) · s/(s + 1/(R2(C1+C2))) (by hand):
    // D = C1/(C1+C2), pole −1/(R2(C1+C2)), residue −D/(R2(C1+C2)).
    let (c1, c2, r2) = (1e-6, 3e-6, 1e3);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![
            c("C1", "in", "out", c1),
            c("C2", "out", "gnd", c2),
            r("R2", "out", "gnd", r2),
        ],
    );
    let net = analyse(&sp).unwrap();
    let d = c1 / (c1 + c2);
    let a = 1.0 / (r2 * (c1 + c2));
    assert!((net.direct - d).abs() < 1e-13);
    check_mode(&net.modes[0], real(-a), real(-d * a), (1e-12, 1e-12));
}

#[test]
fn inductor_in_series_with_current_source_reduces_the_order() {
    // Inductor–current-source cut-set: the stimulus fixes the inductor current, so only the
    // RC at the far end is a state: Z = (1/C)/(s + 1/RC) (handbook closed form).
    let (rv, cv) = (2e3, 5e-9);
    let sp = spec(
        "n",
        vnode("m"),
        Stimulus::Current,
        vec![
            l("L1", "n", "m", 1e-3),
            r("R1", "m", "gnd", rv),
            c("C1", "m", "gnd", cv),
        ],
    );
    let net = first_order(&sp);
    check_mode(
        &net.modes[0],
        real(-1.0 / (rv * cv)),
        real(1.0 / cv),
        (1e-12, 1e-12),
    );
}

#[test]
fn controlled_sources() {
    // Inverting amplifier with an ideal op-amp and a feedback capacitor (lossy integrator):
    // H = −(R2/R1)/(1 + sR2C) (handbook closed form): pole −1/(R2C), residue −1/(R1C).
    let (r1, r2, cv) = (1e3, 10e3, 1e-9);
    let sp = spec(
        "in",
        vnode("out"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "m", r1),
            r("R2", "m", "out", r2),
            c("C1", "m", "out", cv),
            opamp("U1", "gnd", "m", "out", None, None),
        ],
    );
    let net = analyse(&sp).unwrap();
    assert!(close(net.modes[0].pole, real(-1.0 / (r2 * cv)), 1e-12));
    assert!(close(
        net.modes[0].residues[0],
        real(-1.0 / (r1 * cv)),
        1e-12
    ));

    // The same RC sensed by a CCCS (gain g) into a load RL: v = −g·RL·i_C... by hand:
    // i(C1) = C·v' with v = u/(1+sRC) → i(C1) = (1/R)·s/(s + 1/RC) → out = −g·RL·i? The CCCS
    // drives g·i from nodes[0] = "o" to ground, so v(o) = −g·RL·i(C1):
    // H = −(g·RL/R)(1 − a/(s + a)), a = 1/RC: D = −gRL/R, residue gRL·a/R.
    let (rv, cv, g, rl) = (1e3, 1e-6, 3.0, 500.0);
    let sp = spec(
        "in",
        vnode("o"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "x", rv),
            c("C1", "x", "gnd", cv),
            part(
                "F1",
                PartKind::Cccs {
                    nodes: [s("o"), s("gnd")],
                    sense: s("c1"),
                    gain: g,
                },
            ),
            r("RL", "o", "gnd", rl),
        ],
    );
    let net = analyse(&sp).unwrap();
    let a = 1.0 / (rv * cv);
    assert!((net.direct + g * rl / rv).abs() < 1e-12);
    assert!(close(
        net.modes[0].residues[0],
        real(g * rl * a / rv),
        1e-12
    ));

    // VCVS of gain 2 buffering an RC and a CCVS: v = g·i(R1) across a load:
    // by hand, V(x) = u·a/(s + a) → VCVS out = 2·V(x): residue 2a.
    let sp = spec(
        "in",
        vnode("y"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "x", rv),
            c("C1", "x", "gnd", cv),
            part(
                "E1",
                PartKind::Vcvs {
                    nodes: [s("y"), s("gnd")],
                    control: [s("x"), s("gnd")],
                    gain: 2.0,
                },
            ),
            r("RL", "y", "gnd", rl),
        ],
    );
    let net = analyse(&sp).unwrap();
    assert!(close(net.modes[0].residues[0], real(2.0 * a), 1e-12));
    // CCVS sensing R1: i(R1) = (u − v)/R = (1/R)(1 − a/(s + a)): D = g/R, residue −g·a/R.
    let sp = spec(
        "in",
        vnode("y"),
        Stimulus::Voltage,
        vec![
            r("R1", "in", "x", rv),
            c("C1", "x", "gnd", cv),
            part(
                "H1",
                PartKind::Ccvs {
                    nodes: [s("y"), s("gnd")],
                    sense: s("R1"),
                    gain: 100.0,
                },
            ),
            r("RL", "y", "gnd", rl),
        ],
    );
    let net = analyse(&sp).unwrap();
    assert!((net.direct - 100.0 / rv).abs() < 1e-12);
    assert!(close(
        net.modes[0].residues[0],
        real(-100.0 * a / rv),
        1e-12
    ));
    // VCCS as a transconductor into an RC load: i = gm·u flows from ground into "z":
    // Z = (1/C)/(s + 1/RC) → residue gm/C.
    let gm = 2e-3;
    let sp = spec(
        "in",
        vnode("z"),
        Stimulus::Voltage,
        vec![
            r("Rin", "in", "gnd", 1e3),
            part(
                "G1",
                PartKind::Vccs {
                    nodes: [s("gnd"), s("z")],
                    control: [s("in"), s("gnd")],
                    gain: gm,
                },
            ),
            r("R2", "z", "gnd", rv),
            c("C2", "z", "gnd", cv),
        ],
    );
    let net = analyse(&sp).unwrap();
    assert!(close(net.modes[0].residues[0], real(gm / cv), 1e-12));
}

// ---------------------------------------------------------------- diagnostics

fn rc() -> Vec<Part> {
    vec![r("R1", "in", "out", 1e3), c("C1", "out", "gnd", 1e-6)]
}

fn err(sp: &NetlistSpec) -> NetlistError {
    let e = analyse(sp).unwrap_err();
    assert_eq!(state_space(sp).unwrap_err(), e);
    e
}

#[test]
fn dangling_node() {
    let mut parts = rc();
    parts.push(r("R2", "out", "x", 1e3));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("x", Some(3)));
    assert!(e.message.contains("dangling"));
}

#[test]
fn unknown_nodes_and_parts() {
    let e = err(&spec("inp", vnode("out"), Stimulus::Voltage, rc()));
    assert_eq!(e.culprit, "inp");
    let e = err(&spec("in", vnode("o"), Stimulus::Voltage, rc()));
    assert_eq!(e.culprit, "o");
    let e = err(&spec(
        "in",
        Output::Differential(s("out"), s("q")),
        Stimulus::Voltage,
        rc(),
    ));
    assert_eq!(e.culprit, "q");
    let e = err(&spec(
        "in",
        Output::CurrentThrough(s("R9")),
        Stimulus::Voltage,
        rc(),
    ));
    assert_eq!(e.culprit, "R9");
    let mut parts = rc();
    parts.push(part(
        "F1",
        PartKind::Cccs {
            nodes: [s("out"), s("gnd")],
            sense: s("R7"),
            gain: 1.0,
        },
    ));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("R7", Some(3)));
    let mut parts = rc();
    parts.push(l("L1", "out", "gnd", 1e-3));
    parts.push(part(
        "K1",
        PartKind::Coupling {
            inductors: [s("L1"), s("L9")],
            k: 0.5,
        },
    ));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("L9", Some(4)));
    let mut parts = rc();
    parts.push(l("L1", "out", "gnd", 1e-3));
    parts.push(part(
        "K1",
        PartKind::Coupling {
            inductors: [s("L1"), s("R1")],
            k: 0.5,
        },
    ));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert!(e.message.contains("not an inductor"));
}

#[test]
fn duplicate_names() {
    let mut parts = rc();
    parts.push(r("r1", "out", "gnd", 1e3));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("r1", Some(3)));
    assert!(e.message.contains("duplicate"));
}

#[test]
fn bad_values() {
    for (p, what) in [
        (r("R2", "out", "gnd", 0.0), "resistance"),
        (c("C2", "out", "gnd", -1e-9), "capacitance"),
        (l("L2", "out", "gnd", 0.0), "inductance"),
        (r("R2", "out", "gnd", f64::NAN), "resistance"),
    ] {
        let name = p.name.clone();
        let mut parts = rc();
        parts.push(p);
        let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
        assert_eq!((e.culprit.as_str(), e.line), (name.as_str(), Some(3)));
        assert!(e.message.contains(what), "{e}");
    }
    for k in [0.0, 1.0, -1.2] {
        let mut parts = rc();
        parts.push(l("L1", "out", "gnd", 1e-3));
        parts.push(l("L2", "out", "gnd", 1e-3));
        parts.push(part(
            "K1",
            PartKind::Coupling {
                inductors: [s("L1"), s("L2")],
                k,
            },
        ));
        let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
        assert_eq!((e.culprit.as_str(), e.line), ("K1", Some(5)));
    }
}

#[test]
fn loop_of_voltage_sources() {
    // An op-amp output straight across the ideal stimulus source.
    let mut parts = rc();
    parts.push(opamp("U1", "out", "in", "in", None, None));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("U1", Some(3)));
    assert!(e.message.contains("loop"));
    // Two VCVS in parallel.
    let mut parts = rc();
    parts.push(part(
        "E1",
        PartKind::Vcvs {
            nodes: [s("y"), s("gnd")],
            control: [s("out"), s("gnd")],
            gain: 1.0,
        },
    ));
    parts.push(part(
        "E2",
        PartKind::Vcvs {
            nodes: [s("y"), s("gnd")],
            control: [s("in"), s("gnd")],
            gain: 1.0,
        },
    ));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("E2", Some(4)));
}

#[test]
fn cut_set_of_current_sources() {
    // A VCCS feeding a node that only an op-amp input listens to.
    let mut parts = rc();
    parts.push(part(
        "G1",
        PartKind::Vccs {
            nodes: [s("gnd"), s("x")],
            control: [s("out"), s("gnd")],
            gain: 1e-3,
        },
    ));
    parts.push(opamp("U1", "x", "y", "y", None, None));
    parts.push(r("RL", "y", "gnd", 1e3));
    let e = err(&spec("in", vnode("y"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("G1", Some(3)));
    assert!(e.message.contains("cut-set"));
    // The current stimulus into a node held only by a current source's output.
    let parts = vec![
        part(
            "G1",
            PartKind::Vccs {
                nodes: [s("n"), s("gnd")],
                control: [s("m"), s("gnd")],
                gain: 1e-3,
            },
        ),
        r("R1", "m", "gnd", 1e3),
        c("C1", "m", "gnd", 1e-9),
        part(
            "F1",
            PartKind::Cccs {
                nodes: [s("gnd"), s("m")],
                sense: s("R1"),
                gain: 0.5,
            },
        ),
    ];
    let e = err(&spec("n", vnode("m"), Stimulus::Current, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("G1", Some(1)));
}

#[test]
fn op_amp_without_feedback() {
    // Output drives only a load; the inputs see the divider and ground: v₊ = v₋ cannot hold.
    let parts = vec![
        r("R1", "in", "a", 1e3),
        r("R2", "a", "gnd", 1e3),
        c("C1", "a", "gnd", 1e-9),
        opamp("U1", "a", "gnd", "o", None, None),
        r("R3", "o", "gnd", 1e3),
    ];
    let e = err(&spec("in", vnode("o"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("U1", Some(4)), "{e}");
    assert!(e.message.contains("feedback"));
}

#[test]
fn floating_subcircuit() {
    let mut parts = rc();
    parts.push(r("R5", "x", "y", 1e3));
    parts.push(c("C5", "x", "y", 1e-9));
    let e = err(&spec("in", vnode("out"), Stimulus::Voltage, parts));
    assert_eq!((e.culprit.as_str(), e.line), ("x", Some(3)));
    assert!(e.message.contains("floating"));
    // A node reached only through op-amp and controlled-source inputs.
    let mut parts = rc();
    parts.push(opamp("U1", "p", "o", "o", None, None));
    parts.push(part(
        "E1",
        PartKind::Vcvs {
            nodes: [s("q"), s("gnd")],
            control: [s("p"), s("gnd")],
            gain: 1.0,
        },
    ));
    parts.push(r("RL", "q", "o", 1e3));
    let e = err(&spec("in", vnode("o"), Stimulus::Voltage, parts));
    assert_eq!(e.culprit, "p");
}

#[test]
fn error_display_names_line_and_culprit() {
    let e = NetlistError::new(Some(7), "R3", "resistance must be positive");
    assert_eq!(e.to_string(), "line 7: 'R3': resistance must be positive");
}
