//! Analysis of the board as built: tolerance study, sensitivities, noise, time response, poles,
//! stage levels, op-amp requirements and DC errors.
//!
//! Leaves that the analyses share: [`circuit`] (the fast assembler and solver), `lanes` (the
//! SIMD lanes of the tolerance study's batches), `roots` (root finders of a stage's
//! denominator), [`magnitude`] (|P(jω)|² as a polynomial in ω²) and [`poly`] (polynomials, the
//! circle fit of a stage's N and D).

pub mod built;
pub mod circuit;
pub mod dc;
pub mod fastfit;
pub(crate) mod lanes;
pub mod levels;
pub mod magnitude;
pub mod multilinear;
pub mod noise;
pub mod notch;
pub mod opamp_need;
pub mod poles;
pub mod poly;
pub(crate) mod roots;
pub mod sensitivity;
pub mod timeresp;
pub mod tolerance;
