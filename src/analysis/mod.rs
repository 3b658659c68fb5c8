//! Analysis of the board as built: tolerance study, sensitivities, noise, time response, poles,
//! stage levels and op-amp requirements.

pub mod built;
pub mod circuit;
pub mod fastfit;
pub mod levels;
pub mod montecarlo;
pub mod multilinear;
pub mod noise;
pub mod opamp_need;
pub mod poles;
pub mod poly;
pub mod sensitivity;
pub mod timeresp;
