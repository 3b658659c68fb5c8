//! Rolloff: active-filter design from a requirement to a buildable, checked board.
//!
//! The pipeline, one module per stage:
//! [`link`] → [`spec`] → [`order`] → [`prototype`] → [`transform`] → [`sections`] →
//! [`topology`] → [`eseries`] → [`netlist`] → [`mna`] → [`analysis`] → [`export`] / [`plot`].
//! [`design`] composes them. The core never panics on user input and has no web dependencies;
//! only `wasm` (built for wasm32) knows JavaScript types.

pub mod analysis;
pub mod app;
pub mod board;
pub mod choices;
pub mod cli;
pub mod design;
pub mod error;
pub mod eseries;
pub mod export;
pub mod link;
pub mod mna;
pub mod netlist;
pub mod opamp;
pub mod order;
pub mod pipeline;
pub mod plot;
pub mod prototype;
pub mod response;
pub mod schematic;
pub mod section;
pub mod sections;
pub mod spec;
pub mod topology;
pub mod transform;
pub mod units;

#[cfg(target_arch = "wasm32")]
pub mod canvas;
#[cfg(target_arch = "wasm32")]
pub mod wasm;
