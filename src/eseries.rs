//! Standard values of IEC 60063 (E6 … E192) and rounding to them.

use serde::Serialize;

/// A preferred-number series, or exact values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Series {
    E6,
    E12,
    E24,
    E48,
    E96,
    E192,
    /// No rounding: the synthesized value is used as is.
    Exact,
}

impl Series {
    /// The link value: `e6` … `e192`, `exact`.
    pub fn key(self) -> &'static str {
        match self {
            Series::E6 => "e6",
            Series::E12 => "e12",
            Series::E24 => "e24",
            Series::E48 => "e48",
            Series::E96 => "e96",
            Series::E192 => "e192",
            Series::Exact => "exact",
        }
    }
}
