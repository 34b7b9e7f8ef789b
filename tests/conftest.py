"""Shared fixtures: published-case configs and small real run files, made once per session."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))      # tests/naive.py
os.environ.setdefault("OMP_NUM_THREADS", "1")
ROOT = Path(__file__).resolve().parents[1]
CONFIGS = ROOT / "configs"


@pytest.fixture
def case_config():
    """Load a published-case config from configs/ with overrides."""
    from convsim.config import load_config

    def load(case, *overrides):
        return load_config(ROOT / "configs" / f"benchmark_case_{case}.toml", list(overrides))
    return load


def _run(tmp_path_factory, name, config, overrides, **replace):
    from convsim import api
    from convsim.config import load_config
    cfg = load_config(CONFIGS / config, overrides)
    if replace:
        cfg = cfg.replace(**replace)
    path = tmp_path_factory.mktemp(name) / f"{name}.h5"
    api.run(cfg, path)
    return path


@pytest.fixture(scope="session")
def constant_run(tmp_path_factory) -> Path:
    """Case 1a (constant viscosity) on 12 x 12 cells, 200 steps, a snapshot every 50."""
    return _run(tmp_path_factory, "const", "benchmark_case_1a.toml",
                ["domain.nx=12", "domain.nz=12", "stop.max_steps=200", "stop.steady=false",
                 "output.snapshot_steps=50"])


@pytest.fixture(scope="session")
def body_run(tmp_path_factory) -> Path:
    """Case 2a (viscosity contrast 1000) on 16 x 12 cells, aspect 1.5, 150 steps, with the
    [body] table of the invented moon Quellis (configs/quellis_ice_shell.toml), its viscosity
    set so that the body's Ra is the case's 1e4 (a [body] must agree with the run's Ra):
    eta_ref = rho g alpha dT d^3 / (kappa Ra) = 8.783424e14 / 1.5e-2 = 5.855616e16 Pa s, at
    the cold top; no Arrhenius law (the case's own law is kept)."""
    import dataclasses
    from convsim.config import load_config
    body = dataclasses.replace(load_config(CONFIGS / "quellis_ice_shell.toml").body,
                               reference_viscosity=5.855616e16, activation_energy=0.0,
                               maximum_viscosity=0.0)
    return _run(tmp_path_factory, "body", "benchmark_case_2a.toml",
                ["domain.nx=18", "domain.nz=12", "domain.aspect=1.5", "stop.max_steps=150",
                 "output.snapshot_steps=50"], body=body)
