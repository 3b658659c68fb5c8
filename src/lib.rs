//! Rolloff: active-filter design from a requirement to a buildable, checked board.
//!
//! The pipeline, one module per step:
//! [`link`] (the share link ⇄ state) → [`spec`] → [`order`] → [`prototype`] → [`transform`] →
//! [`section`] / [`sections`] → [`topology`] → [`eseries`] → [`board`] and [`netlist`] →
//! [`analysis`] (the built board's response by the banded solver in [`analysis::built`]; [`mna`]
//! is the dense reference of the tests and the diagnosis of a singular board).
//! [`design`] synthesizes (requirement → sections); [`pipeline`] composes the whole design and
//! runs the one analysis plan ([`pipeline::analyses`]); the faces only present it: [`export`]
//! (JSON, text, parts list, SPICE), [`plot`] and [`schematic`] (drawing), [`app`] (the page's view
//! model), [`cli`] (the command line) and `wasm` (the page's facade, built for wasm32, the only
//! module that knows JavaScript types). The core never panics on user input and has no web
//! dependencies.

pub mod analysis;
pub mod app;
pub mod board;
pub mod choices;
pub mod cli;
pub mod design;
pub mod error;
pub mod eseries;
pub mod export;
pub mod fmath;
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
pub mod sort;
pub mod spec;
pub mod topology;
pub mod transform;
pub mod units;

#[cfg(target_arch = "wasm32")]
pub mod canvas;
#[cfg(target_arch = "wasm32")]
pub mod wasm;
