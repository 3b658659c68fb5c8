//! Outputs: SPICE netlist, parts list (CSV), design JSON, text report.

pub mod bom;
pub mod spice;
