//! Modified nodal analysis (Ho, Ruehli & Brennan 1975): the descriptor system
//! `E x' = A x + B u`, `y = C x`.
//!
//! Stamps are written as `Cm x' + G x = Bm u` (each KCL row: currents leaving the node through
//! its parts = current injected), then `E = Cm`, `A = −G`, `B = Bm`.

use nalgebra::{DMatrix, DVector};

use super::check::Circuit;
use super::label::Label;
use super::spec::{NetlistSpec, Output, PartKind, Stimulus};

/// The descriptor system with labels.
pub(crate) struct Descriptor {
    pub e: DMatrix<f64>,
    pub a: DMatrix<f64>,
    pub b: DVector<f64>,
    pub c: DVector<f64>,
    pub labels: Vec<Label>,
}

struct Stamper {
    cm: DMatrix<f64>,
    g: DMatrix<f64>,
}

impl Stamper {
    fn g(&mut self, r: Option<usize>, c: Option<usize>, v: f64) {
        if let (Some(r), Some(c)) = (r, c) {
            self.g[(r, c)] += v;
        }
    }
    fn cm(&mut self, r: Option<usize>, c: Option<usize>, v: f64) {
        if let (Some(r), Some(c)) = (r, c) {
            self.cm[(r, c)] += v;
        }
    }
    /// Two-terminal admittance stamp y·(va − vb) into G (or Cm when `dynamic`).
    fn admittance(&mut self, a: Option<usize>, b: Option<usize>, y: f64, dynamic: bool) {
        let f = if dynamic { Self::cm } else { Self::g };
        f(self, a, a, y);
        f(self, b, b, y);
        f(self, a, b, -y);
        f(self, b, a, -y);
    }
    /// Branch current k leaves node a and enters node b.
    fn incidence(&mut self, a: Option<usize>, b: Option<usize>, k: usize) {
        self.g(a, Some(k), 1.0);
        self.g(b, Some(k), -1.0);
    }
}

/// Assemble the descriptor system of a validated netlist.
pub(crate) fn assemble(spec: &NetlistSpec, circuit: &Circuit) -> Descriptor {
    let nn = circuit.nodes.len();
    let mut labels: Vec<Label> = (0..nn).map(Label::Node).collect();
    let node = |name: &str| circuit.node(name);
    // Branch-current unknowns.
    let mut current: Vec<Option<usize>> = vec![None; spec.parts.len()];
    for (i, p) in spec.parts.iter().enumerate() {
        let needs = match p.kind {
            PartKind::Inductor { .. }
            | PartKind::Vcvs { .. }
            | PartKind::Ccvs { .. }
            | PartKind::OpAmp { .. } => true,
            PartKind::Coupling { .. } => false,
            _ => circuit.needs_current[i],
        };
        if needs {
            current[i] = Some(labels.len());
            labels.push(Label::Current(i));
        }
    }
    let rs = spec.source_resistance.filter(|&r| r > 0.0);
    let input = node(&spec.input);
    let (source_node, source_current) = match (spec.stimulus, rs) {
        (Stimulus::Voltage, Some(_)) => {
            labels.push(Label::SourceNode);
            labels.push(Label::SourceCurrent);
            (Some(labels.len() - 2), Some(labels.len() - 1))
        }
        (Stimulus::Voltage, None) => {
            labels.push(Label::SourceCurrent);
            (input, Some(labels.len() - 1))
        }
        (Stimulus::Current, _) => (None, None),
    };
    let n = labels.len();
    let mut st = Stamper {
        cm: DMatrix::zeros(n, n),
        g: DMatrix::zeros(n, n),
    };
    let mut b = DVector::zeros(n);

    // Stimulus.
    match spec.stimulus {
        Stimulus::Voltage => {
            let k = source_current.unwrap();
            st.incidence(source_node, None, k);
            st.g(Some(k), source_node, 1.0);
            b[k] = 1.0;
            if let Some(r) = rs {
                st.admittance(source_node, input, 1.0 / r, false);
            }
        }
        Stimulus::Current => {
            b[input.unwrap()] = 1.0;
            if let Some(r) = rs {
                st.admittance(input, None, 1.0 / r, false);
            }
        }
    }

    // Parts.
    for (i, p) in spec.parts.iter().enumerate() {
        let k = current[i];
        match &p.kind {
            PartKind::Resistor { nodes, value } | PartKind::Capacitor { nodes, value } => {
                let dynamic = matches!(p.kind, PartKind::Capacitor { .. });
                let y = if dynamic { *value } else { 1.0 / value };
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                match k {
                    None => st.admittance(a, bn, y, dynamic),
                    Some(k) => {
                        // y·(va − vb) (or y·(va' − vb')) − i = 0.
                        st.incidence(a, bn, k);
                        let f = if dynamic { Stamper::cm } else { Stamper::g };
                        f(&mut st, Some(k), a, y);
                        f(&mut st, Some(k), bn, -y);
                        st.g(Some(k), Some(k), -1.0);
                    }
                }
            }
            PartKind::Inductor { nodes, value } => {
                // va − vb − L i' − Σ M i_j' = 0.
                let k = k.unwrap();
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                st.incidence(a, bn, k);
                st.g(Some(k), a, 1.0);
                st.g(Some(k), bn, -1.0);
                st.cm(Some(k), Some(k), -value);
            }
            PartKind::Coupling { inductors, k: kc } => {
                let i1 = circuit.part(&inductors[0]).unwrap();
                let i2 = circuit.part(&inductors[1]).unwrap();
                let l = |j: usize| match spec.parts[j].kind {
                    PartKind::Inductor { value, .. } => value,
                    _ => unreachable!("validated"),
                };
                let m = kc * (l(i1) * l(i2)).sqrt();
                st.cm(current[i1], current[i2], -m);
                st.cm(current[i2], current[i1], -m);
            }
            PartKind::OpAmp {
                plus,
                minus,
                output,
                gain,
                gbw,
            } => {
                // Branch from output to ground; row: [vout'/ωt] + [vout/A0] − (v+ − v−) = 0.
                let k = k.unwrap();
                let out = node(output);
                st.incidence(out, None, k);
                st.g(Some(k), node(plus), -1.0);
                st.g(Some(k), node(minus), 1.0);
                if let Some(a0) = gain {
                    st.g(Some(k), out, 1.0 / a0);
                }
                if let Some(f) = gbw {
                    st.cm(Some(k), out, 1.0 / (2.0 * std::f64::consts::PI * f));
                }
            }
            PartKind::Vcvs {
                nodes,
                control,
                gain,
            } => {
                let k = k.unwrap();
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                st.incidence(a, bn, k);
                st.g(Some(k), a, 1.0);
                st.g(Some(k), bn, -1.0);
                st.g(Some(k), node(&control[0]), -gain);
                st.g(Some(k), node(&control[1]), *gain);
            }
            PartKind::Ccvs { nodes, sense, gain } => {
                let k = k.unwrap();
                let s = current[circuit.part(sense).unwrap()];
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                st.incidence(a, bn, k);
                st.g(Some(k), a, 1.0);
                st.g(Some(k), bn, -1.0);
                st.g(Some(k), s, -gain);
            }
            PartKind::Vccs {
                nodes,
                control,
                gain,
            } => {
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                let (c0, c1) = (node(&control[0]), node(&control[1]));
                match k {
                    None => {
                        st.g(a, c0, *gain);
                        st.g(a, c1, -gain);
                        st.g(bn, c0, -gain);
                        st.g(bn, c1, *gain);
                    }
                    Some(k) => {
                        st.incidence(a, bn, k);
                        st.g(Some(k), c0, *gain);
                        st.g(Some(k), c1, -gain);
                        st.g(Some(k), Some(k), -1.0);
                    }
                }
            }
            PartKind::Cccs { nodes, sense, gain } => {
                let s = current[circuit.part(sense).unwrap()];
                let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
                match k {
                    None => {
                        st.g(a, s, *gain);
                        st.g(bn, s, -gain);
                    }
                    Some(k) => {
                        st.incidence(a, bn, k);
                        st.g(Some(k), s, *gain);
                        st.g(Some(k), Some(k), -1.0);
                    }
                }
            }
        }
    }

    // Output.
    let mut c = DVector::zeros(n);
    match &spec.output {
        Output::Node(name) => {
            if let Some(k) = node(name) {
                c[k] += 1.0;
            }
        }
        Output::Differential(p, q) => {
            if let Some(k) = node(p) {
                c[k] += 1.0;
            }
            if let Some(k) = node(q) {
                c[k] -= 1.0;
            }
        }
        Output::CurrentThrough(name) => {
            let j = circuit.part(name).unwrap();
            c[current[j].unwrap()] = 1.0;
        }
    }
    Descriptor {
        e: st.cm,
        a: -st.g,
        b,
        c,
        labels,
    }
}
