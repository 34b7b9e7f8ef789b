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
from convsim.files.runfile import read_run
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


def test_a_diverging_run_stops_with_a_message_and_keeps_its_last_good_state(case_config, tmp_path,
                                                                           monkeypatch):
    real_step = Model.step

    def failing_step(self, state, dt_limit=None):
        if state.step >= 30:
            raise StepFailed(f"step {state.step + 1}: no finite result")
        return real_step(self, state, dt_limit)

    monkeypatch.setattr(Model, "step", failing_step)
    cfg = case_config("1a", "domain.nx=12", "domain.nz=12", "output.snapshot_steps=20",
                      "stop.newton=false")
    result = api.run(cfg, tmp_path / "run.h5")
    assert result.status == "diverged" and "no finite result" in result.message
    saved = read_run(tmp_path / "run.h5")
    assert saved.attrs["status"] == "diverged"
    assert saved.steps[-1] == 30
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
