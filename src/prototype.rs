//! Normalized low-pass prototypes: the poles of each family at 1 rad/s.
