"""Files: the HDF5 run file (netCDF-4/CF), the XDMF sidecar, run-file summaries."""
