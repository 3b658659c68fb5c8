//! Frequency transforms of the normalized low-pass prototype: low-pass, high-pass, band-pass.
