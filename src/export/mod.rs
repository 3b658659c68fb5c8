//! Outputs: SPICE netlist, parts list (CSV), design JSON, text report.

pub mod bom;
pub mod json;
pub mod spice;
pub mod text;
pub mod words;
