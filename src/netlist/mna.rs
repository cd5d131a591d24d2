//! Modified nodal analysis (Ho, Ruehli & Brennan 1975): the descriptor system
//! `E x' = A x + B u`, `y = C x`.
//!
//! Stamps are written as `Cm x' + G x = Bm u` (each KCL row: currents leaving the node through
//! its parts = current injected), then `E = Cm`, `A = −G`, `B = Bm`.
//!
//! The stamps are kept as a list of entries, each a law of one part's main value (its R, C
//! or L, a coupling's k, a source's or op-amp's gain), so that a variant with other values
//! (a tolerance sample) is filled in without looking up names or cloning the netlist.

use nalgebra::{DMatrix, DVector};

use super::check::Circuit;
use super::label::Label;
use super::spec::{NetlistSpec, Output, Part, PartKind, Stimulus};

/// The descriptor system with labels.
pub(crate) struct Descriptor {
    pub e: DMatrix<f64>,
    pub a: DMatrix<f64>,
    pub b: DVector<f64>,
    pub c: DVector<f64>,
    pub labels: Vec<Label>,
}

/// How a stamp entry depends on the part values.
#[derive(Clone, Copy)]
enum Law {
    /// A fixed number (incidences, the stimulus, an op-amp's 1/ωt).
    Fixed(f64),
    /// `sign · value` of part `part` (a capacitance, −L, a gain).
    Value { part: usize, sign: f64 },
    /// `sign / value` of part `part` (a conductance, an op-amp's 1/A₀).
    Inverse { part: usize, sign: f64 },
    /// `−k·√(L₁L₂)` of a coupling `part` between the inductors `l1` and `l2`.
    Mutual { part: usize, l1: usize, l2: usize },
}

impl Law {
    fn eval(self, values: &[f64]) -> f64 {
        match self {
            Law::Fixed(v) => v,
            Law::Value { part, sign } => sign * values[part],
            Law::Inverse { part, sign } => sign * (1.0 / values[part]),
            Law::Mutual { part, l1, l2 } => -(values[part] * (values[l1] * values[l2]).sqrt()),
        }
    }
}

/// One entry added into Cm (`dynamic`) or G at (row, col).
#[derive(Clone, Copy)]
struct Entry {
    dynamic: bool,
    row: usize,
    col: usize,
    law: Law,
}

/// The stamps of a validated netlist: entries in the order they are summed, the input and
/// output vectors (value-free) and the unknowns' labels.
pub(crate) struct Stamps {
    entries: Vec<Entry>,
    b: DVector<f64>,
    c: DVector<f64>,
    labels: Vec<Label>,
}

/// The main value of a part, the one a tolerance scales: R, C or L, a coupling's k, a
/// source's gain, an op-amp's open-loop gain (`NaN` for an op-amp without one, which no
/// stamp reads).
pub(crate) fn main_value(part: &Part) -> f64 {
    match &part.kind {
        PartKind::Resistor { value, .. }
        | PartKind::Capacitor { value, .. }
        | PartKind::Inductor { value, .. } => *value,
        PartKind::Coupling { k, .. } => *k,
        PartKind::Vcvs { gain, .. }
        | PartKind::Vccs { gain, .. }
        | PartKind::Cccs { gain, .. }
        | PartKind::Ccvs { gain, .. } => *gain,
        PartKind::OpAmp { gain, .. } => gain.unwrap_or(f64::NAN),
    }
}

/// The main values of every part of a netlist, in part order.
pub(crate) fn main_values(spec: &NetlistSpec) -> Vec<f64> {
    spec.parts.iter().map(main_value).collect()
}

/// Collects the entries while the stamps are written.
struct Stamper {
    entries: Vec<Entry>,
}

impl Stamper {
    fn put(&mut self, dynamic: bool, r: Option<usize>, c: Option<usize>, law: Law) {
        if let (Some(row), Some(col)) = (r, c) {
            self.entries.push(Entry {
                dynamic,
                row,
                col,
                law,
            });
        }
    }
    fn g(&mut self, r: Option<usize>, c: Option<usize>, v: f64) {
        self.put(false, r, c, Law::Fixed(v));
    }
    /// Two-terminal admittance stamp y·(va − vb) into G (or Cm when `dynamic`); `y(sign)` is
    /// the law of `sign·y`.
    fn admittance(
        &mut self,
        a: Option<usize>,
        b: Option<usize>,
        dynamic: bool,
        y: &dyn Fn(f64) -> Law,
    ) {
        self.put(dynamic, a, a, y(1.0));
        self.put(dynamic, b, b, y(1.0));
        self.put(dynamic, a, b, y(-1.0));
        self.put(dynamic, b, a, y(-1.0));
    }
    /// Branch current k leaves node a and enters node b.
    fn incidence(&mut self, a: Option<usize>, b: Option<usize>, k: usize) {
        self.g(a, Some(k), 1.0);
        self.g(b, Some(k), -1.0);
    }
    /// A branch that sets `v(a) − v(b)` (row k): the incidence and the row's `va − vb`.
    fn voltage_branch(&mut self, a: Option<usize>, b: Option<usize>, k: usize) {
        self.incidence(a, b, k);
        self.g(Some(k), a, 1.0);
        self.g(Some(k), b, -1.0);
    }
}

/// The unknowns: node voltages, then branch currents where a part needs one, then the
/// stimulus source's node and current. Returns the labels, each part's current index, and
/// the source node and current.
fn unknowns(
    spec: &NetlistSpec,
    circuit: &Circuit,
) -> (Vec<Label>, Vec<Option<usize>>, Option<usize>, Option<usize>) {
    let mut labels: Vec<Label> = (0..circuit.nodes.len()).map(Label::Node).collect();
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
    let (source_node, source_current) = match (spec.stimulus, rs) {
        (Stimulus::Voltage, Some(_)) => {
            labels.push(Label::SourceNode);
            labels.push(Label::SourceCurrent);
            (Some(labels.len() - 2), Some(labels.len() - 1))
        }
        (Stimulus::Voltage, None) => {
            labels.push(Label::SourceCurrent);
            (circuit.node(&spec.input), Some(labels.len() - 1))
        }
        (Stimulus::Current, _) => (None, None),
    };
    (labels, current, source_node, source_current)
}

impl Stamps {
    /// The stamps of a validated netlist.
    pub(crate) fn new(spec: &NetlistSpec, circuit: &Circuit) -> Stamps {
        let (labels, current, source_node, source_current) = unknowns(spec, circuit);
        let n = labels.len();
        let mut st = Stamper {
            entries: Vec::new(),
        };
        let mut b = DVector::zeros(n);
        let rs = spec.source_resistance.filter(|&r| r > 0.0);
        let input = circuit.node(&spec.input);
        match spec.stimulus {
            Stimulus::Voltage => {
                let k = source_current.expect("a voltage stimulus has a source current");
                st.incidence(source_node, None, k);
                st.g(Some(k), source_node, 1.0);
                b[k] = 1.0;
                if let Some(r) = rs {
                    st.admittance(source_node, input, false, &|s| Law::Fixed(s * (1.0 / r)));
                }
            }
            Stimulus::Current => {
                b[input.expect("the input of a current stimulus is not ground")] = 1.0;
                if let Some(r) = rs {
                    st.admittance(input, None, false, &|s| Law::Fixed(s * (1.0 / r)));
                }
            }
        }
        for (i, p) in spec.parts.iter().enumerate() {
            stamp_part(&mut st, circuit, &current, i, p);
        }
        Stamps {
            entries: st.entries,
            b,
            c: output_row(spec, circuit, &current, n),
            labels,
        }
    }

    /// Number of unknowns.
    pub(crate) fn order(&self) -> usize {
        self.labels.len()
    }

    /// Fill `e` and `a` (n × n, overwritten) for the part values `values` (one per part, as
    /// [`main_values`] lists them).
    pub(crate) fn fill(&self, values: &[f64], e: &mut DMatrix<f64>, a: &mut DMatrix<f64>) {
        e.fill(0.0);
        a.fill(0.0);
        for en in &self.entries {
            let v = en.law.eval(values);
            if en.dynamic {
                e[(en.row, en.col)] += v;
            } else {
                a[(en.row, en.col)] += v;
            }
        }
        // G was summed into `a`; A = −G.
        a.neg_mut();
    }

    /// The input and output vectors.
    pub(crate) fn io(&self) -> (&DVector<f64>, &DVector<f64>) {
        (&self.b, &self.c)
    }

    /// The descriptor system for the part values `values`.
    pub(crate) fn descriptor(&self, values: &[f64]) -> Descriptor {
        let n = self.order();
        let (mut e, mut a) = (DMatrix::zeros(n, n), DMatrix::zeros(n, n));
        self.fill(values, &mut e, &mut a);
        Descriptor {
            e,
            a,
            b: self.b.clone(),
            c: self.c.clone(),
            labels: self.labels.clone(),
        }
    }
}

/// Write the stamps of part `i`.
fn stamp_part(st: &mut Stamper, circuit: &Circuit, current: &[Option<usize>], i: usize, p: &Part) {
    let node = |name: &str| circuit.node(name);
    let k = current[i];
    let branch = || k.expect("validated: this part has a branch current");
    let value = |sign: f64| Law::Value { part: i, sign };
    match &p.kind {
        PartKind::Resistor { nodes, .. } | PartKind::Capacitor { nodes, .. } => {
            let dynamic = matches!(p.kind, PartKind::Capacitor { .. });
            stamp_store_or_resistor(st, node(&nodes[0]), node(&nodes[1]), k, i, dynamic);
        }
        PartKind::Inductor { nodes, .. } => {
            // va − vb − L i' − Σ M i_j' = 0.
            let k = branch();
            st.voltage_branch(node(&nodes[0]), node(&nodes[1]), k);
            st.put(true, Some(k), Some(k), value(-1.0));
        }
        PartKind::Coupling { inductors, .. } => {
            let l1 = circuit.part(&inductors[0]).expect("validated coupling");
            let l2 = circuit.part(&inductors[1]).expect("validated coupling");
            let m = Law::Mutual { part: i, l1, l2 };
            st.put(true, current[l1], current[l2], m);
            st.put(true, current[l2], current[l1], m);
        }
        PartKind::OpAmp {
            plus,
            minus,
            output,
            gain,
            gbw,
        } => {
            // Branch from output to ground; row: [vout'/ωt] + [vout/A0] − (v+ − v−) = 0.
            let k = branch();
            let out = node(output);
            st.incidence(out, None, k);
            st.g(Some(k), node(plus), -1.0);
            st.g(Some(k), node(minus), 1.0);
            if gain.is_some() {
                st.put(false, Some(k), out, Law::Inverse { part: i, sign: 1.0 });
            }
            if let Some(f) = gbw {
                let inv_wt = 1.0 / (2.0 * std::f64::consts::PI * f);
                st.put(true, Some(k), out, Law::Fixed(inv_wt));
            }
        }
        PartKind::Vcvs { nodes, control, .. } => {
            let k = branch();
            st.voltage_branch(node(&nodes[0]), node(&nodes[1]), k);
            st.put(false, Some(k), node(&control[0]), value(-1.0));
            st.put(false, Some(k), node(&control[1]), value(1.0));
        }
        PartKind::Ccvs { nodes, sense, .. } => {
            let k = branch();
            let s = current[circuit.part(sense).expect("validated sense")];
            st.voltage_branch(node(&nodes[0]), node(&nodes[1]), k);
            st.put(false, Some(k), s, value(-1.0));
        }
        PartKind::Vccs { nodes, control, .. } => {
            let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
            let (c0, c1) = (node(&control[0]), node(&control[1]));
            controlled_current(st, a, bn, k, &[(c0, value(1.0)), (c1, value(-1.0))]);
        }
        PartKind::Cccs { nodes, sense, .. } => {
            let s = current[circuit.part(sense).expect("validated sense")];
            let (a, bn) = (node(&nodes[0]), node(&nodes[1]));
            controlled_current(st, a, bn, k, &[(s, value(1.0))]);
        }
    }
}

/// A resistor (conductance 1/R) or capacitor (C, into Cm) `i` between nodes a and b: an
/// admittance stamp, or through its branch current k when that is an unknown.
fn stamp_store_or_resistor(
    st: &mut Stamper,
    a: Option<usize>,
    b: Option<usize>,
    k: Option<usize>,
    i: usize,
    dynamic: bool,
) {
    let y = |sign: f64| {
        if dynamic {
            Law::Value { part: i, sign }
        } else {
            Law::Inverse { part: i, sign }
        }
    };
    match k {
        None => st.admittance(a, b, dynamic, &y),
        Some(k) => {
            // y·(va − vb) (or y·(va' − vb')) − i = 0.
            st.incidence(a, b, k);
            st.put(dynamic, Some(k), a, y(1.0));
            st.put(dynamic, Some(k), b, y(-1.0));
            st.g(Some(k), Some(k), -1.0);
        }
    }
}

/// A current `Σ law·x(col)` from node a through the part to node b: into the KCL rows
/// directly, or through the part's own branch current k when that is an unknown.
fn controlled_current(
    st: &mut Stamper,
    a: Option<usize>,
    b: Option<usize>,
    k: Option<usize>,
    terms: &[(Option<usize>, Law)],
) {
    let neg = |law: Law| match law {
        Law::Value { part, sign } => Law::Value { part, sign: -sign },
        other => other,
    };
    match k {
        None => {
            for &(col, law) in terms {
                st.put(false, a, col, law);
            }
            for &(col, law) in terms {
                st.put(false, b, col, neg(law));
            }
        }
        Some(k) => {
            st.incidence(a, b, k);
            for &(col, law) in terms {
                st.put(false, Some(k), col, law);
            }
            st.g(Some(k), Some(k), -1.0);
        }
    }
}

/// The output row C.
fn output_row(
    spec: &NetlistSpec,
    circuit: &Circuit,
    current: &[Option<usize>],
    n: usize,
) -> DVector<f64> {
    let node = |name: &str| circuit.node(name);
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
            let j = circuit.part(name).expect("validated output part");
            c[current[j].expect("an observed part has a branch current")] = 1.0;
        }
    }
    c
}

/// Assemble the descriptor system of a validated netlist.
pub(crate) fn assemble(spec: &NetlistSpec, circuit: &Circuit) -> Descriptor {
    Stamps::new(spec, circuit).descriptor(&main_values(spec))
}
