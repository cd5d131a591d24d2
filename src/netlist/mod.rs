//! Netlists: a circuit of parts, reduced to a state space and then to modes.
//!
//! # Pipeline
//!
//! 1. [`check`](self) — values, names and references are validated and the topology is
//!    checked for singular structures (dangling nodes, loops of voltage-type branches,
//!    cut-sets of current sources, floating subcircuits). Every error names its culprit (a
//!    part or node) and, where there is one, the part's source line.
//! 2. Modified nodal analysis (Ho, Ruehli & Brennan 1975) assembles a descriptor system
//!    `E x' = A x + B u`, `y = C x` whose unknowns are the node voltages plus one branch
//!    current for every inductor, voltage-type element (controlled voltage sources, op-amp
//!    outputs, the stimulus source) and every part whose current is sensed or observed.
//! 3. The descriptor system is reduced to a state space by orthogonal transformations only:
//!    an SVD of `E` (block by block, using its sparsity) splits dynamic and algebraic
//!    unknowns; the algebraic ones are eliminated through an SVD of their block (Schur
//!    complement). Where that block is singular (capacitor loops with voltage sources,
//!    inductor cut-sets with current sources) the resulting constraints on the dynamic
//!    unknowns are solved for, which lowers the order, and the unknowns they fix are
//!    differentiated; derivatives of the input are tracked exactly and finally removed from
//!    the state equation by a change of state. A remaining derivative in the output means an
//!    improper network function.
//! 4. Modes come from the dense eigen-decomposition of `A` (faer): residues of simple poles
//!    from right and left eigenvectors; clusters of numerically indistinguishable eigenvalues
//!    (Jordan blocks, e.g. buffered identical sections) get their Laurent coefficients from
//!    contour integrals of the resolvent, evaluated by the trapezoid rule on a circle around
//!    the cluster.
//!
//! Circuits of resistors and capacitors alone, observed as a node voltage, skip steps 2–4:
//! their nodal pencil is symmetric-definite and [`symmetric`](self) solves it as a symmetric
//! eigenproblem. The result is the stage's own [`CircuitFunction`]; the `network` stage
//! above turns it into a `Network`.
//!
//! # Conventions
//!
//! * Ground is the node `0` or `gnd` (any case). Other node names are case-sensitive; part
//!   names are matched without regard to case.
//! * The current *through* a part (for [`Output::CurrentThrough`] and for the `sense` of a
//!   current-controlled source) flows from `nodes[0]` through the part to `nodes[1]`. For an
//!   op-amp the branch runs from its output node to ground, so its current is the current
//!   flowing *into* the op-amp's output terminal (minus the current it delivers).
//! * A voltage-controlled current source drives `gain·(v(control[0]) − v(control[1]))` from
//!   `nodes[0]` through itself to `nodes[1]` (out of `nodes[0]`, into `nodes[1]`); a CCCS
//!   likewise drives `gain·i(sense)`. Controlled voltage sources set
//!   `v(nodes[0]) − v(nodes[1])`.
//! * Coupled inductors: both `nodes[0]` terminals are the dotted ends; `M = k·√(L₁L₂)`, and a
//!   negative `k` reverses the sense.
//! * [`Stimulus::Voltage`]: an ideal source `u` from `input` to ground, or, with
//!   `source_resistance = R_s > 0`, the source behind `R_s` in series (Thévenin).
//!   `R_s = 0` is the ideal source.
//! * [`Stimulus::Current`]: a current `u` flowing from ground into `input`, with
//!   `source_resistance` (if given, > 0) in parallel from `input` to ground (Norton).
//! * Op-amps: `gain = None, gbw = None` is the ideal nullor (`v₊ = v₋`, output current free);
//!   `gain = A₀` alone is a finite gain `v_out = A₀(v₊ − v₋)` with no pole; `gain` and `gbw`
//!   give the one-pole model `A(s) = A₀/(1 + s·A₀/(2π·gbw))`; `gbw` alone is the integrator
//!   limit `A(s) = 2π·gbw/s`.

mod check;
mod dense;
mod function;
mod label;
mod mna;
mod modes;
mod polish;
mod project;
mod reduce;
mod spec;
mod symmetric;
#[cfg(test)]
mod tests;
mod zeros;

pub use function::{CircuitFunction, CircuitMode, pole_order};
pub use spec::{
    NetlistError, NetlistSpec, Output, Part, PartKind, StateSpace, Stimulus, is_ground,
};

/// Reduce a netlist to a state space whose order is the number of independent energy
/// stores.
///
/// Errors for every diagnostic of the module, and when the network function is improper
/// (the output contains a derivative of the input; [`analyse`] accepts that case).
pub fn state_space(spec: &NetlistSpec) -> Result<StateSpace, NetlistError> {
    let (reduced, _) = reduce_spec(spec)?;
    if reduced.improper.iter().any(|&q| q != 0.0) {
        return Err(NetlistError::new(
            None,
            &check::output_name(&spec.output),
            "the network function is improper (the output contains a derivative of the \
             stimulus); it has no proper state space",
        ));
    }
    Ok(reduced.ss)
}

/// Analyse a netlist into modes: poles and residues (Laurent coefficients) from the
/// symmetric eigenproblem of an RC circuit, or from the eigen-decomposition of the reduced
/// state matrix (contour integrals for clusters) otherwise.
///
/// Modes whose residues are negligible (uncontrollable or unobservable energy stores, e.g.
/// an island of parts the stimulus never reaches) are dropped: they do not appear in H(s).
pub fn analyse(spec: &NetlistSpec) -> Result<CircuitFunction, NetlistError> {
    dense::sequential_by_default();
    let circuit = check::validate(spec)?;
    let out = check::output_name(&spec.output);
    let f = match symmetric::analyse(spec, &circuit, true) {
        Some(f) => f,
        None => general(spec, &circuit, true)?,
    };
    if f.modes.is_empty() {
        return Err(NetlistError::new(
            None,
            &out,
            "H(s) has no poles: the output does not depend on any energy store",
        ));
    }
    if f.modes.iter().all(|m| m.pole.norm() == 0.0) {
        return Err(NetlistError::new(
            None,
            &out,
            "every pole is at s = 0: there is no time scale to size a pulse against",
        ));
    }
    Ok(f)
}

/// The general path: descriptor system, reduction, eigen-decomposition, and (when `full`)
/// the zeros and the descriptor polish of residues, D and h(0⁺).
/// The most unknowns (node voltages and branch currents) of a circuit outside the symmetric
/// path: its reduction and eigen-decomposition are dense, their cost grows with the cube of
/// this order (about a minute at 2000 on two cores).
pub const MAX_GENERAL_ORDER: usize = 2000;

fn general(
    spec: &NetlistSpec,
    circuit: &check::Circuit,
    full: bool,
) -> Result<CircuitFunction, NetlistError> {
    let order = mna::Stamps::new(spec, circuit).order();
    if order > MAX_GENERAL_ORDER {
        return Err(NetlistError::new(
            None,
            &check::output_name(&spec.output),
            format!(
                "this circuit has {order} unknowns (node voltages and branch currents); circuits \
                 other than resistors with capacitors only, or resistors with inductors only, \
                 are analysed up to {MAX_GENERAL_ORDER}"
            ),
        ));
    }
    let (reduced, desc) = reduce_checked(spec, circuit)?;
    let out = check::output_name(&spec.output);
    let mut f = modes::function(&reduced.ss, reduced.improper, full)
        .map_err(|m| NetlistError::new(None, &out, m))?;
    if full {
        polish::polish(&desc, &mut f);
    }
    Ok(f)
}

/// A netlist validated once, for analysing many variants that differ only in part values
/// (tolerance corners and samples): the checks are not repeated, and what a case does not
/// need is skipped: the zeros (display only) and the descriptor polish (which moves residues
/// in their last digits, not poles).
pub struct Validated {
    circuit: check::Circuit,
    spec: NetlistSpec,
    stamps: mna::Stamps,
    /// The nominal split, kept for variants (general circuits of moderate size whose nominal
    /// reduction is a single index-1 step; `None` otherwise).
    projection: Option<project::Projection>,
}

impl Validated {
    /// Validate the netlist (every diagnostic of [`analyse`]).
    pub fn new(spec: &NetlistSpec) -> Result<Validated, NetlistError> {
        dense::sequential_by_default();
        let circuit = check::validate(spec)?;
        let stamps = mna::Stamps::new(spec, &circuit);
        let projection = projection_of(spec, &circuit, &stamps);
        Ok(Validated {
            circuit,
            spec: spec.clone(),
            stamps,
            projection,
        })
    }

    /// Analyse a variant of the validated netlist: the same parts, nodes and output, with
    /// other values (each still valid: positive R, C, L; |k| < 1). A variant whose part
    /// count differs is validated afresh.
    pub fn analyse(&self, variant: &NetlistSpec) -> Result<CircuitFunction, NetlistError> {
        if variant.parts.len() != self.spec.parts.len() {
            return analyse(variant);
        }
        let f = match symmetric::analyse(variant, &self.circuit, false) {
            Some(f) => f,
            None => general(variant, &self.circuit, false)?,
        };
        if f.modes.is_empty() || f.modes.iter().all(|m| m.pole.norm() == 0.0) {
            return analyse(variant);
        }
        Ok(f)
    }

    /// Analyse the variant whose parts take the main values `values` (one per part, as
    /// [`main_values`] lists them; each still valid). Variants that keep the nominal's
    /// structure are projected on its split (no netlist is built and no SVD run); the
    /// others are analysed as [`Validated::analyse`] does.
    pub fn analyse_values(&self, values: &[f64]) -> Result<CircuitFunction, NetlistError> {
        if let Some(p) = &self.projection
            && values.len() == self.spec.parts.len()
        {
            let n = self.stamps.order();
            let (mut e, mut a) = (
                nalgebra::DMatrix::zeros(n, n),
                nalgebra::DMatrix::zeros(n, n),
            );
            self.stamps.fill(values, &mut e, &mut a);
            let (b, c) = self.stamps.io();
            if let Some(ss) = p.reduce(&e, &a, b, c)
                && let Ok(f) = modes::function(&ss, Vec::new(), false)
                && f.modes.iter().any(|m| m.pole.norm() != 0.0)
            {
                return Ok(f);
            }
        }
        self.analyse(&with_values(&self.spec, values))
    }
}

/// The nominal split of a general circuit, when its reduction is one index-1 step (the
/// order is the rank of E and nothing is improper); `None` for symmetric RC circuits (their
/// own path is cheaper), large ones, or structures the projection cannot hold.
fn projection_of(
    spec: &NetlistSpec,
    circuit: &check::Circuit,
    stamps: &mna::Stamps,
) -> Option<project::Projection> {
    if symmetric::analyse(spec, circuit, false).is_some() {
        return None;
    }
    let desc = stamps.descriptor(&main_values(spec));
    let projection = project::Projection::new(&desc)?;
    let reduced = reduce::reduce(&desc).ok()?;
    (reduced.ss.order() == projection.order() && reduced.improper.is_empty()).then_some(projection)
}

/// The main value of every part (the one a tolerance scales: R, C or L, a coupling's k, a
/// source's gain, an op-amp's open-loop gain; `NaN` for an op-amp without one).
pub fn main_values(spec: &NetlistSpec) -> Vec<f64> {
    mna::main_values(spec)
}

/// A copy of the netlist whose parts take the main values `values` (an op-amp without an
/// open-loop gain keeps none).
pub fn with_values(spec: &NetlistSpec, values: &[f64]) -> NetlistSpec {
    let mut s = spec.clone();
    for (p, &v) in s.parts.iter_mut().zip(values) {
        match &mut p.kind {
            PartKind::Resistor { value, .. }
            | PartKind::Capacitor { value, .. }
            | PartKind::Inductor { value, .. } => *value = v,
            PartKind::Coupling { k, .. } => *k = v,
            PartKind::Vcvs { gain, .. }
            | PartKind::Vccs { gain, .. }
            | PartKind::Cccs { gain, .. }
            | PartKind::Ccvs { gain, .. } => *gain = v,
            PartKind::OpAmp { gain, .. } => {
                if let Some(g) = gain {
                    *g = v;
                }
            }
        }
    }
    s
}

fn reduce_spec(spec: &NetlistSpec) -> Result<(reduce::Reduced, mna::Descriptor), NetlistError> {
    let circuit = check::validate(spec)?;
    reduce_checked(spec, &circuit)
}

fn reduce_checked(
    spec: &NetlistSpec,
    circuit: &check::Circuit,
) -> Result<(reduce::Reduced, mna::Descriptor), NetlistError> {
    let desc = mna::assemble(spec, circuit);
    let reduced = reduce::reduce(&desc).map_err(|e| match e {
        reduce::ReduceError::Singular { right, left } => {
            check::explain_singular(spec, circuit, &desc.labels, &right, &left)
        }
        reduce::ReduceError::Numerical(m) => {
            NetlistError::new(None, &check::output_name(&spec.output), m)
        }
    })?;
    Ok((reduced, desc))
}
