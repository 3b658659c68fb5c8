//! Engineering notation: SI prefixes and the IEC 60062 resistor/capacitor code.
