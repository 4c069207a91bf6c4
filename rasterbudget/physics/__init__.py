"""Pure physics functions: numbers or numpy arrays in, arrays out; SI units and kelvin inside."""
