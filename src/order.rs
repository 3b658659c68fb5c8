//! Minimum order of each family for a specification mask.
