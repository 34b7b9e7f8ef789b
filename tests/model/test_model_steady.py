"""The steady residual of the Newton finish on a trial temperature far outside [0, 1]."""

import warnings

import numpy as np

from convsim.config import Config
from convsim.model.steady import steady_residual
from convsim.run.build import build_model


def test_a_wild_trial_temperature_gives_a_non_finite_residual_without_warnings():
    """exp(-ln(1e5) T) overflows for T < -62 (float64 range, common practice): the trial is
    judged by its residual, which must be non-finite, and no floating-point warning reaches
    the user (the Newton finish of the lid case printed three of them)."""
    cfg = Config().replace(domain__nx=12, domain__nz=12, physics__rayleigh=100.0,
                           viscosity__law="frank-kamenetskii",
                           viscosity__thermal_contrast=1e5)
    model = build_model(cfg)
    X, Z = model.grid.cell_mesh()
    good = 1.0 - Z
    F_good, psi = steady_residual(model, good)
    assert np.all(np.isfinite(F_good))
    wild = good - 100.0 * np.sin(np.pi * Z) * (1.0 + np.cos(np.pi * X))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        F_wild, _ = steady_residual(model, wild, psi)
    assert not np.all(np.isfinite(F_wild))
