//! Outputs: SPICE netlist, parts list (CSV), design JSON, text report.
