"""Analysis: linear stability, run-based onset, convergence (Richardson/GCI), scaling-law fits and regimes."""
