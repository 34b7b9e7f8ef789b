"""The numerics: grid, kernels, laws, Stokes and energy operators, solvers, diagnostics, the time step and the steady solver. Takes numbers, arrays and declarations, never a Config."""
