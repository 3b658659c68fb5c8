//! Plots drawn by Rust, generic over the plotters backend (canvas in the browser, SVG natively).
