"""Readers never stop a run and never see a half-written snapshot (issue 12, item 2).

The run happens in a forked child; the parent reads the run file the way a
notebook does (xarray with engine h5netcdf, held open across the run's writes)
or in a tight open/read/close loop (h5py with HDF5's default file locks, and
xarray).  Every read is checked: the snapshot count agrees across variables, the
restart state is the last snapshot's, the series ends at the last snapshot.
The overlap of reader and writer is forced through the fault-injection hook
(the child waits inside a snapshot write until the parent has opened the file),
not left to timing.
"""

from __future__ import annotations

import os
import select
import signal
from pathlib import Path

import h5py
import numpy as np
import pytest

from convsim import api
from convsim.config import load_config
from convsim.files import commit
from convsim.files.reader import read_run

xr = pytest.importorskip("xarray")
CONFIG = Path(__file__).resolve().parents[1] / "configs" / "benchmark_case_1a.toml"


def _config(steps, every, n=12):
    return load_config(CONFIG, [f"domain.nx={n}", f"domain.nz={n}", "stop.steady=false",
                                f"stop.max_steps={steps}", f"output.snapshot_steps={every}"])


def _fork_run(cfg, path, hook=None) -> int:
    """Start the run in a forked child; its exit status is 0 when it reached its step limit."""
    pid = os.fork()
    if pid == 0:
        code = 2
        try:
            commit.fault_hook = hook
            code = 0 if api.run(cfg, path).status == "step-limit" else 1
        finally:
            os._exit(code)
    return pid


@pytest.fixture
def children():
    """Forked runs of a test; any still alive at its end (a failed test) are killed."""
    pids = []
    yield pids
    for pid in pids:
        try:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
        except (ProcessLookupError, ChildProcessError):
            pass


def _exit_code(pid) -> int:
    _, status = os.waitpid(pid, 0)
    return os.waitstatus_to_exitcode(status)


class _PauseAt:
    """Fault hook: at the ``nth`` time ``point`` is reached, tell the parent and wait for it."""

    def __init__(self, point, nth):
        self.point, self.nth, self.seen = point, nth, 0
        self.ready_r, self.ready_w = os.pipe()
        self.go_r, self.go_w = os.pipe()

    def __call__(self, name):
        if name == self.point:
            self.seen += 1
            if self.seen == self.nth:
                os.write(self.ready_w, b"r")
                os.read(self.go_r, 1)

    def wait_ready(self, pid):
        """Wait until the child is at the pause point; fail if it ends before."""
        while not select.select([self.ready_r], [], [], 0.2)[0]:
            done, status = os.waitpid(pid, os.WNOHANG)
            assert not done, f"the run ended early, exit {os.waitstatus_to_exitcode(status)}"
        assert os.read(self.ready_r, 1) == b"r"

    def go(self):
        os.write(self.go_w, b"g")


def _check_h5(f):
    """One read of a run file, checked; returns the snapshot steps."""
    steps = f["step"][:]
    n = len(steps)
    assert f["time"].shape[0] == n and n >= 1
    for name in ("temperature", "streamfunction", "viscosity", "velocity_x", "q1"):
        assert f[name].shape[0] == n
    g = f["restart"]
    assert int(g.attrs["step"]) == steps[-1]
    assert np.array_equal(g["temperature"][:], f["temperature"][n - 1])
    if steps[-1] > 0:
        assert f["series_step"][-1] == steps[-1]
    assert np.all(np.isfinite(f["temperature"][n - 1]))
    return steps


@pytest.mark.parametrize("point", ["copy", "close", "replace"])
def test_a_held_open_xarray_reader_never_stops_the_run(tmp_path, point, children):
    """xarray (h5netcdf, HDF5 file locks on) opens the file while the run is inside its third
    snapshot write and keeps it open to the end: the run finishes normally, the reader keeps
    a consistent view of the snapshots it opened, and a fresh open sees all of them."""
    path = tmp_path / "run.h5"
    pause = _PauseAt(point, 3)
    pid = _fork_run(_config(40, 10), path, pause)
    children.append(pid)
    pause.wait_ready(pid)
    held = xr.open_dataset(path, engine="h5netcdf")
    locked = h5py.File(path, "r")                         # a plain h5py reader with locks
    try:
        pause.go()
        assert _exit_code(pid) == 0
        assert list(held["step"].values) == [0, 10]       # the version it opened, whole
        final = read_run(path)
        assert list(final.steps) == [0, 10, 20, 30, 40]
        assert final.attrs["status"] == "step-limit"
        with h5py.File(path, "r", locking=False) as f:
            np.testing.assert_array_equal(held["temperature"].values, f["temperature"][:2])
        assert list(_check_h5(locked)) == [0, 10]
    finally:
        held.close()
        locked.close()
    with xr.open_dataset(path, engine="h5netcdf") as fresh:
        assert fresh.sizes["time"] == 5


class _Lockstep(_PauseAt):
    """Fault hook: at every one of ``points``, wait until the parent has read the file once."""

    def __init__(self, points):
        super().__init__(None, 0)
        self.points = points

    def __call__(self, name):
        if name in self.points:
            os.write(self.ready_w, b"r")
            os.read(self.go_r, 1)


def test_readers_in_a_tight_loop_never_stop_the_run_and_read_only_whole_snapshots(tmp_path,
                                                                                 children):
    """h5py with HDF5's default file locks (and, every 20th read, xarray) open, read and close
    the file at every write point of every snapshot (the child waits at each until the parent has read once):
    no read fails, each read is whole, and the run ends normally."""
    path = tmp_path / "run.h5"
    lockstep = _Lockstep({"copy", "fields", "close", "replace"})
    pid = _fork_run(_config(40, 2), path, lockstep)
    children.append(pid)
    reads, counts = 0, []
    while True:
        if not select.select([lockstep.ready_r], [], [], 0.2)[0]:
            done, status = os.waitpid(pid, os.WNOHANG)
            if done:
                assert os.waitstatus_to_exitcode(status) == 0
                break
            continue
        os.read(lockstep.ready_r, 1)
        if path.exists():
            if reads % 20 == 19:                              # xarray opens are slow (~0.3 s)
                with xr.open_dataset(path, engine="h5netcdf") as ds:
                    assert ds.sizes["time"] == ds["step"].size == ds["temperature"].shape[0]
                    counts.append(int(ds.sizes["time"]))
            else:
                with h5py.File(path, "r") as f:
                    counts.append(len(_check_h5(f)))
            reads += 1
        lockstep.go()
    assert reads >= 4 * 20                                 # every point of every later commit
    assert counts == sorted(counts) and counts[-1] == 21
    final = read_run(path)
    assert len(final.steps) == 21 and final.attrs["status"] == "step-limit"
    with h5py.File(path, "r") as f:
        _check_h5(f)


def test_a_file_without_snapshots_gets_its_own_one_line_message(tmp_path):
    """Common practice (one clear line per bad input): a run file with no snapshot yet says
    exactly that, not wrapped in the generic 'not a readable run file' message."""
    import h5py
    from convsim.errors import SnapshotError
    from convsim.files.reader import read_run
    path = tmp_path / "empty.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("time", shape=(0,), maxshape=(None,), dtype="f8")
    with pytest.raises(SnapshotError) as caught:
        read_run(path)
    assert str(caught.value) == f"run file {str(path)!r}: holds no snapshot yet"
