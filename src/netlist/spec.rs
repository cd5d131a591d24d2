//! What a netlist problem is: the parts, the stimulus, the observed output, the state space a
//! circuit reduces to, and the error that names the culprit.

use nalgebra::{DMatrix, DVector};

/// The quantity the network function maps the stimulus to.
#[derive(Debug, Clone, PartialEq)]
pub enum Output {
    /// Voltage of a node against ground.
    Node(String),
    /// Voltage of the first node minus that of the second.
    Differential(String, String),
    /// Current through a part (from its `nodes[0]` to its `nodes[1]`).
    CurrentThrough(String),
}

/// How the circuit is driven.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stimulus {
    /// A voltage source from `input` to ground (source resistance in series).
    Voltage,
    /// A current injected into `input` from ground (source resistance in parallel).
    Current,
}

/// One part of the netlist.
#[derive(Debug, Clone, PartialEq)]
pub struct Part {
    /// Unique name (matched without regard to case).
    pub name: String,
    /// What the part is and how it is connected.
    pub kind: PartKind,
    /// Source line, for diagnostics.
    pub line: usize,
    /// Tolerance as a fraction (not used by the analysis; validated to be in [0, 1)).
    pub tolerance: Option<f64>,
}

/// The kinds of part.
#[derive(Debug, Clone, PartialEq)]
pub enum PartKind {
    /// Resistor, ohms.
    Resistor {
        /// Terminals.
        nodes: [String; 2],
        /// Resistance in Ω (> 0).
        value: f64,
    },
    /// Capacitor, farads.
    Capacitor {
        /// Terminals.
        nodes: [String; 2],
        /// Capacitance in F (> 0).
        value: f64,
    },
    /// Inductor, henries.
    Inductor {
        /// Terminals (`nodes[0]` is the dotted end for couplings).
        nodes: [String; 2],
        /// Inductance in H (> 0).
        value: f64,
    },
    /// Magnetic coupling of two inductors, `M = k·√(L₁L₂)`, `0 < |k| < 1`.
    Coupling {
        /// Names of the two inductors.
        inductors: [String; 2],
        /// Coupling coefficient.
        k: f64,
    },
    /// Operational amplifier (see the module documentation for the models).
    OpAmp {
        /// Non-inverting input.
        plus: String,
        /// Inverting input.
        minus: String,
        /// Output (driven against ground).
        output: String,
        /// Open-loop DC gain A₀.
        gain: Option<f64>,
        /// Gain–bandwidth product in Hz.
        gbw: Option<f64>,
    },
    /// Voltage-controlled voltage source: `v(n0) − v(n1) = gain·(v(c0) − v(c1))`.
    Vcvs {
        /// Output terminals.
        nodes: [String; 2],
        /// Controlling node pair.
        control: [String; 2],
        /// Voltage gain.
        gain: f64,
    },
    /// Voltage-controlled current source: `gain·(v(c0) − v(c1))` flows from n0 to n1.
    Vccs {
        /// Output terminals.
        nodes: [String; 2],
        /// Controlling node pair.
        control: [String; 2],
        /// Transconductance in S.
        gain: f64,
    },
    /// Current-controlled current source: `gain·i(sense)` flows from n0 to n1.
    Cccs {
        /// Output terminals.
        nodes: [String; 2],
        /// Part whose current controls the source.
        sense: String,
        /// Current gain.
        gain: f64,
    },
    /// Current-controlled voltage source: `v(n0) − v(n1) = gain·i(sense)`.
    Ccvs {
        /// Output terminals.
        nodes: [String; 2],
        /// Part whose current controls the source.
        sense: String,
        /// Transresistance in Ω.
        gain: f64,
    },
}

/// A complete netlist problem: parts, stimulus and observed output.
#[derive(Debug, Clone, PartialEq)]
pub struct NetlistSpec {
    /// Node the stimulus drives.
    pub input: String,
    /// Observed quantity.
    pub output: Output,
    /// Source resistance in Ω: series for a voltage stimulus, parallel for a current one.
    pub source_resistance: Option<f64>,
    /// Voltage or current stimulus.
    pub stimulus: Stimulus,
    /// The parts.
    pub parts: Vec<Part>,
}

/// A single-input single-output state space `x' = A x + B u`, `y = C x + D u`.
#[derive(Debug, Clone, PartialEq)]
pub struct StateSpace {
    /// State matrix (n × n).
    pub a: DMatrix<f64>,
    /// Input vector (n).
    pub b: DVector<f64>,
    /// Output row, stored as a vector (n).
    pub c: DVector<f64>,
    /// Direct feed-through.
    pub d: f64,
}

impl StateSpace {
    /// Order (number of states).
    pub fn order(&self) -> usize {
        self.a.nrows()
    }
}

/// A netlist that cannot be analysed, with the part or node to blame.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}'{}': {}", line_prefix(*.line), .culprit, .message)]
pub struct NetlistError {
    /// Source line of the culprit part, when there is one.
    pub line: Option<usize>,
    /// Name of the part or node to blame.
    pub culprit: String,
    /// What is wrong.
    pub message: String,
}

fn line_prefix(line: Option<usize>) -> String {
    line.map(|l| format!("line {l}: ")).unwrap_or_default()
}

impl NetlistError {
    pub(crate) fn new(line: Option<usize>, culprit: &str, message: impl Into<String>) -> Self {
        NetlistError {
            line,
            culprit: culprit.to_string(),
            message: message.into(),
        }
    }
}

/// True for the ground node names `gnd` and `ground` (any case).
pub fn is_ground(node: &str) -> bool {
    node.eq_ignore_ascii_case("gnd") || node.eq_ignore_ascii_case("ground")
}
