//! Validation and topological diagnostics, run before any numerical work.

use std::collections::HashMap;

use super::label::Label;
use super::spec::{NetlistError, NetlistSpec, Output, Part, PartKind, Stimulus, is_ground};

/// The validated circuit: node and part indices.
pub(crate) struct Circuit {
    /// Non-ground node names, in order of first appearance.
    pub nodes: Vec<String>,
    /// Node name → index into `nodes`.
    pub node_index: HashMap<String, usize>,
    /// Lower-case part name → index into `spec.parts`.
    pub part_index: HashMap<String, usize>,
    /// Per part: whether its current is needed as an unknown (sensed or observed).
    pub needs_current: Vec<bool>,
}

impl Circuit {
    /// Index of a node, `None` for ground. The node must exist.
    pub fn node(&self, name: &str) -> Option<usize> {
        if is_ground(name) {
            None
        } else {
            Some(self.node_index[name])
        }
    }

    /// Index of a part by name (case-insensitive).
    pub fn part(&self, name: &str) -> Option<usize> {
        self.part_index.get(&name.to_lowercase()).copied()
    }
}

/// Human-readable name of the output, for errors.
pub(crate) fn output_name(output: &Output) -> String {
    match output {
        Output::Node(n) => n.clone(),
        Output::Differential(a, b) => format!("{a}−{b}"),
        Output::CurrentThrough(p) => p.clone(),
    }
}

/// Terminals of a part that carry current or sense a voltage (for connection counts).
fn terminals(kind: &PartKind) -> Vec<&str> {
    match kind {
        PartKind::Resistor { nodes, .. }
        | PartKind::Capacitor { nodes, .. }
        | PartKind::Inductor { nodes, .. }
        | PartKind::Cccs { nodes, .. }
        | PartKind::Ccvs { nodes, .. } => vec![&nodes[0], &nodes[1]],
        PartKind::Vcvs { nodes, control, .. } | PartKind::Vccs { nodes, control, .. } => {
            vec![&nodes[0], &nodes[1], &control[0], &control[1]]
        }
        PartKind::OpAmp {
            plus,
            minus,
            output,
            ..
        } => vec![plus, minus, output],
        PartKind::Coupling { .. } => vec![],
    }
}

/// Kind of a two-terminal branch for the topological checks.
#[derive(Clone, Copy, PartialEq)]
enum Branch {
    /// Fixes its voltage regardless of its current (voltage sources, op-amp outputs).
    VoltageType,
    /// Fixes its current regardless of its voltage (current sources).
    CurrentType,
    /// Relates voltage and current (R, C, L).
    Passive,
}

/// Branches of a part: (node a, node b, kind).
fn branches<'a>(
    kind: &'a PartKind,
    parts_sense_is_voltage: &dyn Fn(&str) -> bool,
) -> Vec<(&'a str, &'a str, Branch)> {
    match kind {
        PartKind::Resistor { nodes, .. }
        | PartKind::Capacitor { nodes, .. }
        | PartKind::Inductor { nodes, .. } => vec![(&nodes[0], &nodes[1], Branch::Passive)],
        PartKind::Vcvs { nodes, .. } => vec![(&nodes[0], &nodes[1], Branch::VoltageType)],
        PartKind::Ccvs { nodes, sense, .. } => {
            // A CCVS sensing a voltage-type branch (or itself) may act as an impedance; leave
            // such cases to the numerical check.
            let kind = if parts_sense_is_voltage(sense) {
                Branch::Passive
            } else {
                Branch::VoltageType
            };
            vec![(&nodes[0], &nodes[1], kind)]
        }
        PartKind::Vccs { nodes, .. } | PartKind::Cccs { nodes, .. } => {
            vec![(&nodes[0], &nodes[1], Branch::CurrentType)]
        }
        PartKind::OpAmp { output, .. } => vec![(output, "gnd", Branch::VoltageType)],
        PartKind::Coupling { .. } => vec![],
    }
}

struct UnionFind(Vec<usize>);

impl UnionFind {
    fn new(n: usize) -> Self {
        UnionFind((0..n).collect())
    }
    fn find(&mut self, i: usize) -> usize {
        let mut r = i;
        while self.0[r] != r {
            r = self.0[r];
        }
        let mut j = i;
        while self.0[j] != r {
            let next = self.0[j];
            self.0[j] = r;
            j = next;
        }
        r
    }
    /// Join; false when already joined.
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.0[ra] = rb;
        true
    }
}

fn positive(value: f64, what: &str, name: &str, line: usize) -> Result<(), NetlistError> {
    if !value.is_finite() || value <= 0.0 {
        return Err(NetlistError::new(
            Some(line),
            name,
            format!("{what} must be positive and finite, got {value:e}"),
        ));
    }
    Ok(())
}

/// Validate values, names, references and topology.
pub(crate) fn validate(spec: &NetlistSpec) -> Result<Circuit, NetlistError> {
    let parts = &spec.parts;
    let part_index = index_names(parts)?;
    for p in parts {
        check_value(p)?;
    }
    let lookup = |name: &str| part_index.get(&name.to_lowercase()).copied();
    let needs_current = check_references(spec, &lookup)?;
    let nodes = collect_nodes(parts)?;
    let NodeCounts {
        nodes,
        node_index,
        mut count,
        first_line,
    } = nodes;
    count[check_input(spec, &node_index)?] += 1;
    check_output(spec, &node_index)?;
    // Dangling nodes.
    for (k, name) in nodes.iter().enumerate() {
        if count[k] < 2 {
            return Err(NetlistError::new(
                Some(first_line[k]),
                name,
                "dangling node: only one part terminal is connected to it",
            ));
        }
    }

    let circuit = Circuit {
        nodes,
        node_index,
        part_index,
        needs_current,
    };
    topology(spec, &circuit)?;
    Ok(circuit)
}

/// Lower-case part name → index, refusing empty and duplicate names.
fn index_names(parts: &[Part]) -> Result<HashMap<String, usize>, NetlistError> {
    let mut part_index: HashMap<String, usize> = HashMap::new();
    for (i, p) in parts.iter().enumerate() {
        if p.name.trim().is_empty() {
            return Err(NetlistError::new(
                Some(p.line),
                &p.name,
                "a part needs a name",
            ));
        }
        if let Some(&j) = part_index.get(&p.name.to_lowercase()) {
            return Err(NetlistError::new(
                Some(p.line),
                &p.name,
                format!("duplicate part name (also used on line {})", parts[j].line),
            ));
        }
        part_index.insert(p.name.to_lowercase(), i);
    }
    Ok(part_index)
}

/// One part's tolerance and values: positive R, L, C, gains and bandwidths, |k| < 1.
fn check_value(p: &Part) -> Result<(), NetlistError> {
    let (name, line) = (p.name.as_str(), p.line);
    if let Some(t) = p.tolerance
        && (!t.is_finite() || !(0.0..1.0).contains(&t))
    {
        return Err(NetlistError::new(
            Some(line),
            name,
            format!("tolerance must be a fraction in [0, 1), got {t}"),
        ));
    }
    match &p.kind {
        PartKind::Resistor { value, .. } => positive(*value, "resistance", name, line)?,
        PartKind::Capacitor { value, .. } => positive(*value, "capacitance", name, line)?,
        PartKind::Inductor { value, .. } => positive(*value, "inductance", name, line)?,
        PartKind::Coupling { k, .. } => {
            if !k.is_finite() || *k == 0.0 || k.abs() >= 1.0 {
                return Err(NetlistError::new(
                    Some(line),
                    name,
                    format!("coupling coefficient must satisfy 0 < |k| < 1, got {k}"),
                ));
            }
        }
        PartKind::OpAmp {
            output, gain, gbw, ..
        } => {
            if let Some(a0) = gain {
                positive(*a0, "open-loop gain", name, line)?;
            }
            if let Some(f) = gbw {
                positive(*f, "gain-bandwidth product", name, line)?;
            }
            if is_ground(output) {
                return Err(NetlistError::new(
                    Some(line),
                    name,
                    "op-amp output is tied to ground: a loop of voltage-type branches",
                ));
            }
        }
        PartKind::Vcvs { gain, .. }
        | PartKind::Vccs { gain, .. }
        | PartKind::Cccs { gain, .. }
        | PartKind::Ccvs { gain, .. } => {
            if !gain.is_finite() {
                return Err(NetlistError::new(Some(line), name, "gain must be finite"));
            }
        }
    }
    Ok(())
}

/// References to parts (couplings, sensed currents, the output current); per part whether its
/// current is needed as an unknown.
fn check_references(
    spec: &NetlistSpec,
    lookup: &dyn Fn(&str) -> Option<usize>,
) -> Result<Vec<bool>, NetlistError> {
    let parts = &spec.parts;
    let mut needs_current = vec![false; parts.len()];
    let mut couplings: HashMap<(usize, usize), usize> = HashMap::new();
    for (i, p) in parts.iter().enumerate() {
        match &p.kind {
            PartKind::Coupling { inductors, .. } => {
                let key = coupled_pair(parts, p, inductors, lookup)?;
                if let Some(&other) = couplings.get(&key) {
                    return Err(NetlistError::new(
                        Some(p.line),
                        &p.name,
                        format!(
                            "the same two inductors are already coupled by '{}'",
                            parts[other].name
                        ),
                    ));
                }
                couplings.insert(key, i);
            }
            PartKind::Cccs { sense, .. } | PartKind::Ccvs { sense, .. } => {
                let Some(j) = lookup(sense) else {
                    return Err(NetlistError::new(
                        Some(p.line),
                        sense,
                        format!("'{}' senses the current of an unknown part", p.name),
                    ));
                };
                if matches!(parts[j].kind, PartKind::Coupling { .. }) {
                    return Err(NetlistError::new(
                        Some(p.line),
                        sense,
                        format!("'{}' senses a coupling, which carries no current", p.name),
                    ));
                }
                needs_current[j] = true;
            }
            _ => {}
        }
    }
    if let Output::CurrentThrough(name) = &spec.output {
        let Some(j) = lookup(name) else {
            return Err(NetlistError::new(
                None,
                name,
                "the output is the current through an unknown part",
            ));
        };
        if matches!(parts[j].kind, PartKind::Coupling { .. }) {
            return Err(NetlistError::new(
                Some(parts[j].line),
                name,
                "the output is the current through a coupling, which carries no current",
            ));
        }
        needs_current[j] = true;
    }
    Ok(needs_current)
}

/// The two inductors of a coupling (lower index first): both known, inductors, and different.
fn coupled_pair(
    parts: &[Part],
    p: &Part,
    inductors: &[String; 2],
    lookup: &dyn Fn(&str) -> Option<usize>,
) -> Result<(usize, usize), NetlistError> {
    let mut idx = [0usize; 2];
    for (slot, l) in inductors.iter().enumerate() {
        let Some(j) = lookup(l) else {
            return Err(NetlistError::new(
                Some(p.line),
                l,
                format!("coupling '{}' refers to an unknown part", p.name),
            ));
        };
        if !matches!(parts[j].kind, PartKind::Inductor { .. }) {
            return Err(NetlistError::new(
                Some(p.line),
                l,
                format!(
                    "coupling '{}' refers to a part that is not an inductor",
                    p.name
                ),
            ));
        }
        idx[slot] = j;
    }
    if idx[0] == idx[1] {
        return Err(NetlistError::new(
            Some(p.line),
            &p.name,
            "a coupling needs two different inductors",
        ));
    }
    Ok((idx[0].min(idx[1]), idx[0].max(idx[1])))
}

/// The non-ground nodes with their connection counts and the line that first names each.
struct NodeCounts {
    nodes: Vec<String>,
    node_index: HashMap<String, usize>,
    count: Vec<usize>,
    first_line: Vec<usize>,
}

/// Nodes and connection counts of the parts' terminals, refusing empty node names.
fn collect_nodes(parts: &[Part]) -> Result<NodeCounts, NetlistError> {
    let mut nodes: Vec<String> = Vec::new();
    let mut node_index: HashMap<String, usize> = HashMap::new();
    let mut count: Vec<usize> = Vec::new();
    let mut first_line: Vec<usize> = Vec::new();
    for p in parts {
        for t in terminals(&p.kind) {
            if t.trim().is_empty() {
                return Err(NetlistError::new(Some(p.line), &p.name, "empty node name"));
            }
            if is_ground(t) {
                continue;
            }
            let k = *node_index.entry(t.to_string()).or_insert_with(|| {
                nodes.push(t.to_string());
                count.push(0);
                first_line.push(p.line);
                nodes.len() - 1
            });
            count[k] += 1;
        }
    }
    Ok(NodeCounts {
        nodes,
        node_index,
        count,
        first_line,
    })
}

/// The input node (connected, not ground) and the source resistance; returns the node's index.
fn check_input(
    spec: &NetlistSpec,
    node_index: &HashMap<String, usize>,
) -> Result<usize, NetlistError> {
    if is_ground(&spec.input) {
        return Err(NetlistError::new(
            None,
            &spec.input,
            "the input cannot be ground",
        ));
    }
    let Some(&input) = node_index.get(&spec.input) else {
        return Err(NetlistError::new(
            None,
            &spec.input,
            "the input node is not connected to any part",
        ));
    };
    match spec.source_resistance {
        Some(r) if !r.is_finite() || r < 0.0 => {
            return Err(NetlistError::new(
                None,
                &spec.input,
                format!("source resistance must be finite and not negative, got {r}"),
            ));
        }
        Some(r) if r == 0.0 && spec.stimulus == Stimulus::Current => {
            return Err(NetlistError::new(
                None,
                &spec.input,
                "a zero source resistance in parallel with the current stimulus shorts the input",
            ));
        }
        _ => {}
    }
    Ok(input)
}

/// The output nodes: connected, and not a trivial H(s) = 0.
fn check_output(
    spec: &NetlistSpec,
    node_index: &HashMap<String, usize>,
) -> Result<(), NetlistError> {
    let out_nodes: Vec<&String> = match &spec.output {
        Output::Node(n) => vec![n],
        Output::Differential(a, b) => vec![a, b],
        Output::CurrentThrough(_) => vec![],
    };
    for n in &out_nodes {
        if !is_ground(n) && !node_index.contains_key(n.as_str()) {
            return Err(NetlistError::new(
                None,
                n,
                "the output node is not connected to any part",
            ));
        }
    }
    match &spec.output {
        Output::Node(n) if is_ground(n) => Err(NetlistError::new(
            None,
            n,
            "the output node is ground: H(s) = 0",
        )),
        Output::Differential(a, b) if a == b || (is_ground(a) && is_ground(b)) => Err(
            NetlistError::new(None, a, "the two output nodes are the same: H(s) = 0"),
        ),
        _ => Ok(()),
    }
}

/// Loops of voltage-type branches, cut-sets of current sources and floating subcircuits.
fn topology(spec: &NetlistSpec, circuit: &Circuit) -> Result<(), NetlistError> {
    let parts = &spec.parts;
    let sense_is_voltage = |sense: &str| {
        circuit.part(sense).is_some_and(|j| {
            matches!(
                parts[j].kind,
                PartKind::Vcvs { .. } | PartKind::Ccvs { .. } | PartKind::OpAmp { .. }
            )
        })
    };
    voltage_loops(spec, circuit, &sense_is_voltage)?;
    held_by_current_sources(spec, circuit, &sense_is_voltage)
}

/// Index of a node for the union-find, 0 for ground.
fn uf_index(circuit: &Circuit, name: &str) -> usize {
    circuit.node(name).map_or(0, |k| k + 1)
}

/// Loops of voltage-type branches (with the stimulus when it is an ideal voltage source).
fn voltage_loops(
    spec: &NetlistSpec,
    circuit: &Circuit,
    sense_is_voltage: &dyn Fn(&str) -> bool,
) -> Result<(), NetlistError> {
    let idx = |name: &str| uf_index(circuit, name);
    let ideal_source =
        spec.stimulus == Stimulus::Voltage && spec.source_resistance.is_none_or(|r| r == 0.0);
    let mut uf = UnionFind::new(circuit.nodes.len() + 1);
    if ideal_source {
        uf.union(idx(&spec.input), 0);
    }
    for p in &spec.parts {
        for (a, b, kind) in branches(&p.kind, sense_is_voltage) {
            if kind == Branch::VoltageType && !uf.union(idx(a), idx(b)) {
                let what = if ideal_source {
                    "voltage sources, op-amp outputs and the stimulus source"
                } else {
                    "voltage sources and op-amp outputs"
                };
                return Err(NetlistError::new(
                    Some(p.line),
                    &p.name,
                    format!("closes a loop of {what}: the loop current is undetermined (singular)"),
                ));
            }
        }
    }
    Ok(())
}

/// Cut-sets of current sources / floating subcircuits: contract every branch that relates
/// node voltages; a component without ground is held only by current sources and
/// high-impedance inputs.
fn held_by_current_sources(
    spec: &NetlistSpec,
    circuit: &Circuit,
    sense_is_voltage: &dyn Fn(&str) -> bool,
) -> Result<(), NetlistError> {
    let n = circuit.nodes.len() + 1; // index 0 is ground
    let idx = |name: &str| uf_index(circuit, name);
    let mut uf = UnionFind::new(n);
    if spec.stimulus == Stimulus::Voltage || spec.source_resistance.is_some() {
        uf.union(idx(&spec.input), 0);
    }
    for p in &spec.parts {
        for (a, b, kind) in branches(&p.kind, sense_is_voltage) {
            if kind != Branch::CurrentType {
                uf.union(idx(a), idx(b));
            }
        }
    }
    let comp: Vec<usize> = (0..n).map(|k| uf.find(k)).collect();
    let ground = comp[0];
    let mut reported = vec![false; n];
    for k in 1..n {
        let root = comp[k];
        if root == ground || reported[root] {
            continue;
        }
        reported[root] = true;
        let in_comp = |name: &str| !is_ground(name) && comp[idx(name)] == root;
        let members: Vec<&str> = (1..n)
            .filter(|&j| comp[j] == root)
            .map(|j| circuit.nodes[j - 1].as_str())
            .collect();
        if let Some(err) = ungrounded_component(spec, &members, &in_comp) {
            return Err(err);
        }
    }
    Ok(())
}

/// The error for one component without a path to ground (its nodes `members`), naming the
/// current source or stimulus that holds it or calling it floating; `None` when a VCCS
/// sensing its own component may act as a conductance (left to the numerical check).
fn ungrounded_component(
    spec: &NetlistSpec,
    members: &[&str],
    in_comp: &dyn Fn(&str) -> bool,
) -> Option<NetlistError> {
    let parts = &spec.parts;
    // Current sources on the boundary.
    let mut sources: Vec<(&str, usize)> = Vec::new();
    let mut maybe_conductance = false;
    if spec.stimulus == Stimulus::Current && in_comp(&spec.input) {
        sources.push(("stimulus", 0));
    }
    for p in parts {
        match &p.kind {
            PartKind::Vccs { nodes, control, .. } if in_comp(&nodes[0]) != in_comp(&nodes[1]) => {
                sources.push((&p.name, p.line));
                if in_comp(&control[0]) || in_comp(&control[1]) {
                    maybe_conductance = true;
                }
            }
            PartKind::Cccs { nodes, .. } if in_comp(&nodes[0]) != in_comp(&nodes[1]) => {
                sources.push((&p.name, p.line));
            }
            _ => {}
        }
    }
    if maybe_conductance {
        return None;
    }
    let list = members.join(", ");
    if let Some(&(name, line)) = sources.iter().find(|s| s.0 != "stimulus") {
        return Some(NetlistError::new(
            Some(line),
            name,
            format!(
                "cut-set of current sources: node(s) {list} connect to the rest of the \
                 circuit only through current sources, so their voltages are undetermined"
            ),
        ));
    }
    if !sources.is_empty() {
        return Some(NetlistError::new(
            None,
            &spec.input,
            format!(
                "cut-set of current sources: the current stimulus drives node(s) {list}, \
                 which have no other path to ground"
            ),
        ));
    }
    let line = parts
        .iter()
        .find(|p| terminals(&p.kind).iter().any(|t| in_comp(t)))
        .map(|p| p.line);
    Some(NetlistError::new(
        line,
        members[0],
        format!(
            "floating subcircuit: node(s) {list} have no path to ground through any part \
             (only high-impedance inputs), so their voltages are undetermined"
        ),
    ))
}

/// Name the culprit of a singular circuit from the null vectors of its pencil.
pub(crate) fn explain_singular(
    spec: &NetlistSpec,
    circuit: &Circuit,
    labels: &[Label],
    right: &[f64],
    left: &[f64],
) -> NetlistError {
    let free = dominant(right);
    let dep = dominant(left);
    let detail = singular_detail(spec, circuit, labels, &free, &dep);
    let part_of = |i: usize| match labels[i] {
        Label::Current(j) => Some(j),
        _ => None,
    };
    // An op-amp whose output current or output node is free.
    let opamp = free.iter().chain(dep.iter()).find_map(|&i| {
        let j = part_of(i)?;
        matches!(spec.parts[j].kind, PartKind::OpAmp { .. }).then_some(j)
    });
    if let Some(j) = opamp {
        let p = &spec.parts[j];
        return NetlistError::new(
            Some(p.line),
            &p.name,
            format!(
                "op-amp without working feedback: the circuit equations are singular ({detail})"
            ),
        );
    }
    for &i in &free {
        if let Label::Node(k) = labels[i] {
            let name = &circuit.nodes[k];
            let line = spec
                .parts
                .iter()
                .find(|p| terminals(&p.kind).contains(&name.as_str()))
                .map(|p| p.line);
            return NetlistError::new(
                line,
                name,
                format!(
                    "the voltage at this node is undetermined (floating, no DC path, or held \
                     only by current sources): the circuit equations are singular ({detail})"
                ),
            );
        }
    }
    if let Some(j) = free.iter().find_map(|&i| part_of(i)) {
        let p = &spec.parts[j];
        return NetlistError::new(
            Some(p.line),
            &p.name,
            format!(
                "the current in this part is undetermined: the circuit equations are singular ({detail})"
            ),
        );
    }
    NetlistError::new(
        None,
        &spec.input,
        format!("the circuit equations are singular ({detail})"),
    )
}

/// Entries of a null vector within 0.3 of its largest, largest first.
fn dominant(v: &[f64]) -> Vec<usize> {
    let max = v.iter().copied().fold(0.0, f64::max);
    let mut big: Vec<usize> = (0..v.len()).filter(|&i| v[i] >= 0.3 * max).collect();
    big.sort_by(|&a, &b| v[b].total_cmp(&v[a]));
    big
}

/// "undetermined: …; dependent: …" naming up to four unknowns and four equations.
fn singular_detail(
    spec: &NetlistSpec,
    circuit: &Circuit,
    labels: &[Label],
    free: &[usize],
    dep: &[usize],
) -> String {
    let describe = |l: Label| match l {
        Label::Node(k) => format!("the voltage at node '{}'", circuit.nodes[k]),
        Label::Current(j) => format!("the current in '{}'", spec.parts[j].name),
        Label::SourceNode => "the voltage behind the source resistance".to_string(),
        Label::SourceCurrent => "the stimulus source's current".to_string(),
    };
    let equation = |l: Label| match l {
        Label::Node(k) => format!("KCL at node '{}'", circuit.nodes[k]),
        Label::Current(j) => format!("the equation of '{}'", spec.parts[j].name),
        Label::SourceNode => "KCL behind the source resistance".to_string(),
        Label::SourceCurrent => "the stimulus source's equation".to_string(),
    };
    let free_text: Vec<String> = free.iter().take(4).map(|&i| describe(labels[i])).collect();
    let dep_text: Vec<String> = dep.iter().take(4).map(|&i| equation(labels[i])).collect();
    format!(
        "undetermined: {}; dependent: {}",
        free_text.join(", "),
        dep_text.join(", ")
    )
}
