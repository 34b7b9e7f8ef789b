"""Run control: dt independence of the steady state, bit-for-bit restart, divergence, crash safety."""

import os
import signal
import subprocess
import sys
import time

import h5py
import numpy as np
import pytest

from convsim import api
from convsim.files.reader import read_run
from convsim.model.timestepping import Model, StepFailed


def test_steady_state_does_not_depend_on_the_time_step(case_config):
    """SBDF2 with the explicit and implicit weights summing to one has no splitting error:
    two Courant numbers reach the same discrete steady state."""
    results = []
    for cfl in (0.15, 0.5):
        cfg = case_config("1a", "domain.nx=16", "domain.nz=16", f"numerics.cfl={cfl}",
                          "stop.newton=false", "stop.steady_tolerance=1e-10")
        results.append(api.run(cfg))
    assert all(r.steady for r in results)
    assert results[0].steps > 2 * results[1].steps              # really different steps
    assert abs(results[0].nusselt_top - results[1].nusselt_top) < 1e-8
    assert abs(results[0].vrms - results[1].vrms) < 1e-8 * results[0].vrms


def test_newton_reaches_the_time_steppers_steady_state(case_config):
    stepped = api.run(case_config("1a", "domain.nx=16", "domain.nz=16", "stop.newton=false",
                                  "stop.steady_tolerance=1e-9"))
    solved = api.run(case_config("1a", "domain.nx=16", "domain.nz=16"))
    assert solved.steps < stepped.steps / 3
    assert abs(solved.nusselt_top - stepped.nusselt_top) < 1e-7
    np.testing.assert_allclose(solved.temperature, stepped.temperature, atol=1e-7)


@pytest.mark.parametrize("case", ["1a", "2a"])
def test_restart_continues_bit_for_bit(case_config, tmp_path, case):
    """2a exercises the variable-viscosity solver with its reused factor."""
    common = ["domain.nx=16", "domain.nz=16", "stop.steady=false", "output.snapshot_steps=40"]
    full = api.run(case_config(case, *common, "stop.max_steps=160"), tmp_path / "full.h5")
    api.run(case_config(case, *common, "stop.max_steps=100"), tmp_path / "part.h5")
    resumed = api.run(case_config(case, *common, "stop.max_steps=160"),
                      restart=tmp_path / "part.h5")
    assert resumed.steps == full.steps == 160
    assert np.array_equal(resumed.temperature, full.temperature)
    assert np.array_equal(resumed.psi, full.psi)
    a, b = read_run(tmp_path / "full.h5"), read_run(tmp_path / "part.h5")
    assert np.array_equal(a.series["nusselt_top"], b.series["nusselt_top"])
    assert np.array_equal(a.series["series_time"], b.series["series_time"])


def _overturning_model(cfl, max_dt=10.0):
    from convsim.model.energy import ThermalBoundaries
    from convsim.model.grid import Grid
    m = Model(Grid(16, 16), 1.0e5, ThermalBoundaries(), cfl=cfl, max_dt=max_dt,
              time_scale_fraction=0.0)         # the Courant and growth limits alone
    X, Z = m.grid.cell_mesh()
    return m, m.initial_state(1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z))


def test_steps_far_beyond_the_courant_limit_are_rejected_and_halved():
    """Courant number 30 (explicit advection far beyond its stability limit): steps whose
    temperature change exceeds the temperature range are rejected and retried at half the
    step; every accepted step respects that bound and has dt = planned / 2^rejections, with
    the planned step the documented one: cfl / (max|u|/dx + max|w|/dz) of the face
    velocities (the two-dimensional Courant condition, common practice), at most 25 % above
    the previous step."""
    from convsim.model.stokes import face_velocities
    m, state = _overturning_model(30.0)
    rejected = 0
    for _ in range(40):
        T_old = state.temperature
        u, w = face_velocities(m.grid, state.psi)
        planned = 30.0 / (np.abs(u).max() / m.grid.dx + np.abs(w).max() / m.grid.dz)
        if state.previous_dt > 0:
            planned = min(planned, 1.25 * state.previous_dt)
        state, report = m.step(state)
        assert report.dt == pytest.approx(planned / 2 ** report.rejections, rel=1e-12)
        assert np.abs(state.temperature - T_old).max() <= np.ptp(T_old)
        rejected += report.rejections
    assert rejected >= 3


def test_a_step_that_fails_at_every_size_raises_and_leaves_the_state_alone():
    """Courant number 1e6: even after MAX_REJECTIONS halvings the change is unbounded."""
    from convsim.model.timestepping import MAX_REJECTIONS
    m, state = _overturning_model(1.0e6)
    before = state.temperature.copy()
    with pytest.raises(StepFailed, match="no finite, bounded result") as info:
        m.step(state)
    assert f"{10.0 / 2 ** MAX_REJECTIONS:.3g}" in str(info.value)
    assert np.array_equal(state.temperature, before)


def test_a_runaway_run_stops_as_diverged_and_keeps_its_last_good_state(tmp_path):
    """Heating far beyond the Rayleigh number's scale (H = 1e4 at Ra = 1e4) drives the flow
    past the runaway bound within a few dozen steps: the run stops as 'diverged' with the
    reason, and the run file ends with the last finite state below the bound."""
    from convsim.config import Config
    cfg = Config().replace(domain__nx=12, domain__nz=12, physics__rayleigh=1e4,
                           physics__internal_heating=1e4, stop__max_steps=300,
                           stop__newton=False, output__snapshot_steps=5)
    result = api.run(cfg, tmp_path / "run.h5")
    assert result.status == "diverged", result.message
    assert "vrms" in result.message and "above" in result.message
    bound = 100.0 * 1e4 ** (2.0 / 3.0)
    assert 5 < result.steps < 300 and result.vrms <= bound
    saved = read_run(tmp_path / "run.h5")
    assert saved.attrs["status"] == "diverged"
    assert saved.steps[-1] == result.steps
    assert np.all(np.isfinite(saved.fields["temperature"]))


def _start_run(tmp_path, *extra):
    cfg = tmp_path / "long.toml"
    cfg.write_text("[domain]\nnx = 48\nnz = 48\n[physics]\nrayleigh = 1e5\n"
                   "[stop]\nsteady = false\nmax_steps = 100000000\nend_time = 100.0\n"
                   "[output]\nsnapshot_steps = 25\n")
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    return subprocess.Popen([sys.executable, "-m", "convsim.cli", "run", str(cfg), "--out",
                             str(tmp_path / "out"), *extra], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def _wait_for_snapshots(path, count, timeout=120):
    end = time.time() + timeout
    while time.time() < end:
        try:
            with h5py.File(path, "r", locking=False) as f:
                if f["time"].shape[0] >= count:
                    return
        except (OSError, KeyError):
            pass
        time.sleep(0.2)
    raise AssertionError("the run wrote no snapshots in time")


def test_a_killed_run_leaves_a_readable_file(tmp_path):
    proc = _start_run(tmp_path)
    path = tmp_path / "out" / "long.h5"
    try:
        _wait_for_snapshots(path, 3)
        time.sleep(0.5)
    finally:
        proc.kill()
        proc.wait()
    saved = read_run(path)                       # complete up to its last snapshot
    assert len(saved.times) >= 3
    assert np.all(np.isfinite(saved.fields["temperature"]))


def test_ctrl_c_ends_cleanly_with_a_final_snapshot(tmp_path):
    proc = _start_run(tmp_path)
    path = tmp_path / "out" / "long.h5"
    _wait_for_snapshots(path, 2)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "Traceback" not in err
    saved = read_run(path)
    assert saved.attrs["status"] == "interrupted"
    assert saved.steps[-1] > saved.steps[-2]


def test_start_from_another_runs_snapshot_on_another_grid(case_config, tmp_path):
    """Continuation: a converged 16 x 16 state interpolated onto 24 x 24 converges to the
    24 x 24 steady state of a fresh start (same Nu)."""
    api.run(case_config("1a", "domain.nx=16", "domain.nz=16"), tmp_path / "coarse.h5")
    fresh = api.run(case_config("1a", "domain.nx=24", "domain.nz=24", "stop.newton=false",
                                "stop.steady_tolerance=1e-7"))
    continued = api.run(case_config("1a", "domain.nx=24", "domain.nz=24", "stop.newton=false",
                                    "stop.steady_tolerance=1e-7", 'start.kind="snapshot"',
                                    f'start.file="{tmp_path / "coarse.h5"}"'))
    assert fresh.steady and continued.steady
    assert abs(continued.nusselt_top - fresh.nusselt_top) < 1e-5
    assert continued.steps < fresh.steps
