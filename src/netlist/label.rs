//! What each unknown of the descriptor system stands for, shared by the assembly (which
//! numbers the unknowns) and the diagnostics (which name them).

/// What an unknown (and the equation of the same index) stands for, for diagnostics.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Label {
    /// Voltage of user node k (its KCL row).
    Node(usize),
    /// Current of part k (its branch equation).
    Current(usize),
    /// Internal node between the stimulus source and its series resistance.
    SourceNode,
    /// Current of the stimulus voltage source.
    SourceCurrent,
}
