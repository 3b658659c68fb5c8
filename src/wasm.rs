//! The wasm facade: the only module that knows JavaScript types.
