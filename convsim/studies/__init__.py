"""Studies: the published cases, the benchmark harness, parameter sweeps."""
