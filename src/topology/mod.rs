//! Topologies: from a section and the design freedoms to a stage with part values and a netlist.

use serde::Serialize;

/// The circuit family used for the second-order stages (first-order sections get the matching
/// RC stage: a buffered RC for Sallen-Key, an inverting RC for multiple feedback).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Topology {
    /// Sallen-Key (voltage-controlled voltage source), link value `sk`.
    SallenKey,
    /// Multiple feedback (infinite-gain), link value `mfb`.
    MultipleFeedback,
}

impl Topology {
    /// The link value: `sk` or `mfb`.
    pub fn key(self) -> &'static str {
        match self {
            Topology::SallenKey => "sk",
            Topology::MultipleFeedback => "mfb",
        }
    }
}
