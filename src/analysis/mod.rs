//! Analysis of the board as built: tolerance study, sensitivities, noise, time response, poles,
//! stage levels and op-amp requirements.

pub mod circuit;
pub mod montecarlo;
pub mod poly;
