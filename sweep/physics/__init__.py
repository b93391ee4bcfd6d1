"""Pure, vectorized physics kernels in SI units: no xarray, no I/O, no logging."""
