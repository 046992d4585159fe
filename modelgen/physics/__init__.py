"""Device physics over numpy arrays, SI units."""
