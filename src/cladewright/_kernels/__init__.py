"""Internal: compiled numba kernels: arrays in, arrays out, no I/O and no objects."""
