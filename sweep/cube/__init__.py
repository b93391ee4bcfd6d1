"""The cube: CF conventions (the Dataset built from the variable registry) and the netCDF backend."""
