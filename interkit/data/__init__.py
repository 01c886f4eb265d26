"""The scan Dataset: schema and netCDF I/O, assembly of job records into variables
(energies, forces, dispersion schemes, SAPT0 terms)."""
