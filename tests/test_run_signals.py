"""SIGTERM, a second Ctrl-C, a full disk, a finished run restarted (issue 12, items 3, 6, 10).

Signals and faults arrive at chosen write points through ``CONVSIM_FAULT`` (see
``convsim.files.commit``), not by timing luck.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

from convsim import api
from convsim.cli import EXIT_DISK_FULL, main
from convsim.config import load_config
from convsim.files import commit
from convsim.files.reader import read_run

ROOT = Path(__file__).resolve().parents[1]
GOOD = ROOT / "configs" / "benchmark_case_1a.toml"
LONG = ["--grid", "12x12", "--set", "stop.steady=false", "--set", "stop.max_steps=100000",
        "--set", "output.snapshot_steps=5"]


def _cli(tmp_path, fault, *extra):
    env = dict(os.environ, CONVSIM_FAULT=fault, PYTHONUNBUFFERED="1")
    return subprocess.run([sys.executable, "-m", "convsim.cli", "run", str(GOOD), "--out",
                           str(tmp_path), *LONG, *extra], env=env, capture_output=True,
                          text=True, timeout=300)


def test_sigterm_inside_a_snapshot_write_ends_like_ctrl_c(tmp_path):
    """SIGTERM (a batch scheduler) lands inside the third snapshot's write: that snapshot is
    completed, the run stops after the next step with a final snapshot, status interrupted,
    exit 130, and the line that continues it."""
    done = _cli(tmp_path, "copy#3=sigterm")
    assert done.returncode == 130, done.stderr
    assert "Traceback" not in done.stderr
    assert "--restart" in done.stderr
    saved = read_run(tmp_path / "benchmark_case_1a.h5")
    assert saved.attrs["status"] == "interrupted"
    assert list(saved.steps) == [0, 5, 10, 11]


def test_a_second_ctrl_c_during_the_final_snapshot_exits_130_and_keeps_the_file(tmp_path):
    done = _cli(tmp_path, "copy#3=sigint,copy#4=sigint")
    assert done.returncode == 130, done.stderr
    assert "Traceback" not in done.stderr
    assert len([line for line in done.stderr.splitlines() if line.strip()]) == 1
    path = tmp_path / "benchmark_case_1a.h5"
    assert list(read_run(path).steps) == [0, 5, 10]          # the final snapshot dropped whole
    assert not path.with_name(path.name + ".part").exists()


def test_a_full_disk_gives_one_line_exit_4_and_keeps_every_snapshot(tmp_path, monkeypatch,
                                                                     capsys):
    monkeypatch.setenv("CONVSIM_FAULT", "fields#4=enospc")
    monkeypatch.setattr(commit, "_counts", {})
    code = main(["run", str(GOOD), "--out", str(tmp_path), *LONG])
    err = capsys.readouterr().err
    assert code == EXIT_DISK_FULL == 4
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and "disk is full" in lines[0] and "--restart" in lines[0], err
    assert list(read_run(tmp_path / "benchmark_case_1a.h5").steps) == [0, 5, 10]


def _mount_tmpfs(folder: Path) -> bool:
    if os.geteuid() != 0:
        return False
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=2m", "tmpfs", str(folder)],
                          capture_output=True)
    return done.returncode == 0


def test_a_real_full_file_system(tmp_path):
    """A 2 MB tmpfs fills up during the run: one error line, exit 4, no traceback, and a file
    that h5py, xarray and `convsim info` open, holding every snapshot completed before."""
    disk = tmp_path / "disk"
    disk.mkdir()
    if not _mount_tmpfs(disk):
        pytest.skip("mounting a tmpfs needs root; the injected full-disk tests cover every "
                    "write point")
    try:
        done = subprocess.run([sys.executable, "-m", "convsim.cli", "run", str(GOOD), "--out",
                               str(disk), "--grid", "32x32", "--set", "stop.steady=false",
                               "--set", "stop.max_steps=2000", "--set",
                               "output.snapshot_steps=2"], capture_output=True, text=True,
                              timeout=300)
        assert done.returncode == 4, done.stderr
        assert "Traceback" not in done.stderr
        errors = [line for line in done.stderr.splitlines() if "error" in line]
        assert len(errors) == 1 and "disk is full" in errors[0], done.stderr
        path = disk / "benchmark_case_1a.h5"
        saved = read_run(path)
        assert len(saved.steps) >= 2
        with h5py.File(path, "r") as f:
            assert f["temperature"].shape[0] == len(saved.steps)
            assert int(f["restart"].attrs["step"]) == saved.steps[-1]
        xr = pytest.importorskip("xarray")
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            assert ds.sizes["time"] == len(saved.steps)
        info = subprocess.run([sys.executable, "-m", "convsim.cli", "info", str(path)],
                              capture_output=True, text=True, timeout=120)
        assert info.returncode == 0, info.stderr
    finally:
        subprocess.run(["umount", str(disk)], capture_output=True)


def test_a_finished_run_restarted_does_nothing_more_and_says_so(tmp_path):
    cfg = load_config(GOOD, ["domain.nx=8", "domain.nz=8", "stop.steady=false",
                             "stop.max_steps=20", "output.snapshot_steps=10"])
    first = api.run(cfg, tmp_path / "run.h5")
    before = read_run(tmp_path / "run.h5")
    again = api.run(cfg, restart=tmp_path / "run.h5")
    assert again.steps == first.steps == 20
    assert "already" in again.message and "nothing to do" in again.message
    after = read_run(tmp_path / "run.h5")
    assert list(after.steps) == list(before.steps) == [0, 10, 20]
    assert np.array_equal(after.series["series_step"], before.series["series_step"])
    more = api.run(cfg.replace(stop__max_steps=30), restart=tmp_path / "run.h5")
    assert more.steps == 30                                  # a higher limit goes on
    steady = load_config(GOOD, ["domain.nx=8", "domain.nz=8"])
    api.run(steady, tmp_path / "steady.h5")
    again = api.run(steady, restart=tmp_path / "steady.h5")
    assert again.status == "steady" and "already steady" in again.message
