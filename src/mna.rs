//! Complex modified nodal analysis of stage netlists with the op-amp model.
