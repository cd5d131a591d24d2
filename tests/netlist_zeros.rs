//! Zeros of circuits, against closed forms.

use pulseplan::scenario::parse;

fn zeros_of(text: &str) -> Vec<(f64, f64)> {
    let sc = parse("z.toml", "z", text).unwrap();
    sc.network.zeros.iter().map(|z| (z.re, z.im)).collect()
}

#[test]
fn lag_lead_zero_is_one_over_r1c1() {
    // R1 ∥ C1 in series, R2 to ground: H = (1 + sR1C1)·R2/(R1 + R2 + sR1C1R2) has its zero at
    // s = −1/(R1C1) (voltage-divider closed form).
    let text = "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n\
        { name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"47k\" },\n\
        { name = \"C1\", kind = \"capacitor\", nodes = [\"in\", \"out\"], value = \"22n\" },\n\
        { name = \"R2\", kind = \"resistor\", nodes = [\"out\", \"gnd\"], value = \"10k\" },\n]\n";
    let z = zeros_of(text);
    assert_eq!(z.len(), 1);
    let want = -1.0 / (47e3 * 22e-9);
    // The reduction of a capacitor from input to output leaves ~1e-8 in D and the residue.
    assert!(
        ((z[0].0 - want) / want).abs() < 1e-7 && z[0].1 == 0.0,
        "{z:?}"
    );
}

#[test]
fn series_rlc_across_r_has_a_zero_at_the_origin() {
    // Output across R of a series RLC: H = (R/L)s/(s² + (R/L)s + 1/LC), one zero at s = 0
    // (handbook band-pass form).
    let text = "[network]\ninput = \"in\"\noutput = \"b\"\nparts = [\n\
        { name = \"L1\", kind = \"inductor\", nodes = [\"in\", \"a\"], value = \"1m\" },\n\
        { name = \"C1\", kind = \"capacitor\", nodes = [\"a\", \"b\"], value = \"1u\" },\n\
        { name = \"R1\", kind = \"resistor\", nodes = [\"b\", \"gnd\"], value = \"10\" },\n]\n";
    assert_eq!(zeros_of(text), vec![(0.0, 0.0)]);
}

#[test]
fn rc_low_pass_has_no_finite_zero() {
    // 1/(1 + sRC): no finite zeros (handbook closed form).
    let text = "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n\
        { name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"1k\" },\n\
        { name = \"C1\", kind = \"capacitor\", nodes = [\"out\", \"gnd\"], value = \"1u\" },\n]\n";
    assert!(zeros_of(text).is_empty());
}

#[test]
fn biproper_circuit_keeps_full_accuracy() {
    // R1 ∥ C1 from an ideal source to the output, R2 to ground: H = 1 − (1/(C1R2))/(s + p) with
    // p = (R1 + R2)/(R1C1R2) (partial fractions of the divider): D = 1, residue −1/(C1R2), and
    // h(0⁺) = −1/(C1R2). The input-derivative path of the reduction must not cost digits.
    let text = "[network]\ninput = \"in\"\noutput = \"out\"\nparts = [\n\
        { name = \"R1\", kind = \"resistor\", nodes = [\"in\", \"out\"], value = \"47k\" },\n\
        { name = \"C1\", kind = \"capacitor\", nodes = [\"in\", \"out\"], value = \"22n\" },\n\
        { name = \"R2\", kind = \"resistor\", nodes = [\"out\", \"gnd\"], value = \"10k\" },\n]\n";
    let sc = parse("b.toml", "b", text).unwrap();
    let net = &sc.network;
    let (r1, c1, r2) = (47e3, 22e-9, 10e3);
    let res = -1.0 / (c1 * r2);
    let pole = -(r1 + r2) / (r1 * c1 * r2);
    assert!((net.direct - 1.0).abs() < 1e-13);
    assert!(((net.modes[0].pole.re - pole) / pole).abs() < 1e-13);
    assert!(((net.modes[0].residues[0].re - res) / res).abs() < 1e-13);
    assert!(((net.h0_ivt - res) / res).abs() < 1e-13);
}
