//! Build choices shared by the link reader and the circuits: a leaf that imports nothing of the
//! crate, so that the link grammar and the topologies can both name these types without
//! importing each other.

use serde::Serialize;

/// How standard values are chosen (`round`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Rounding {
    /// Each part rounded to its nearest standard value (`nearest`).
    Nearest,
    /// A search over combinations of neighbouring standard values for the least f0 and Q error
    /// (`search`, the default).
    Search,
}
