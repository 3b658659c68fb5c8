//! The ideal response of a cascade of sections: gain, unwrapped phase, group delay.
