"""Cost of a crash-safe snapshot: one commit (copy the run file, append, rename) per snapshot.

Writes snapshots of random fields into a run file with ``RunFileWriter`` (the
real writer, with its restart state) and times each commit, against the old way
(append to the file in place, which a kill can leave mixed) and against one time
step of the model on the same grid.  Run under the CPU lock:

    flock /tmp/convsim-cpu.lock python3 benchmarks/run_file_commit.py [--grids 128,512] [--snapshots 40]

Goals (marked met or not): at 128^2 a commit costs under 15 % of the
steps between two snapshots when snapshots come every 25 steps and the file
holds 40 snapshots; at 512^2 the same.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np

from convsim.files.commit import format_bytes
from convsim.files.runfile import FIELDS, SERIES, RunFileWriter
from convsim.model.grid import Grid

STEPS_PER_SNAPSHOT = 25
GOAL_FRACTION = 0.15


def _snapshot(grid, step, rng):
    nz, nx = grid.nz, grid.nx
    shapes = {"z": nz, "x": nx, "z_node": nz + 1, "x_node": nx + 1}
    fields = {}
    for name, (dims, _, _) in FIELDS.items():
        shape = tuple(shapes[d] for d in dims)
        fields[name] = step if name == "step" else rng.random(shape)
    series = {name: np.arange(STEPS_PER_SNAPSHOT, dtype="i8" if name in (
        "series_step", "stokes_iterations") else "f8") for name in SERIES}
    cell, corner = rng.random((nz, nx)), rng.random((nz + 1, nx + 1))
    restart = dict(temperature=cell, psi=corner, previous_temperature=cell,
                   previous_tendency=cell, factor_weights=None, time=float(step), step=step,
                   previous_dt=1e-3)
    return fields, series, restart


def _in_place(path, fields, series, restart):
    """The old writer: append to the committed file in place (not crash safe)."""
    with h5py.File(path, "a", locking=False) as f:
        n = f["time"].shape[0]
        f["time"].resize((n + 1,))
        for name in FIELDS:
            d = f[name]
            d.resize((n + 1,) + d.shape[1:])
            d[n] = fields[name]
        if "restart" in f:
            del f["restart"]
        g = f.create_group("restart")
        for k, v in restart.items():
            if isinstance(v, np.ndarray):
                g.create_dataset(k, data=v)


def _step_seconds(n):
    from convsim import api
    from convsim.config import load_config
    root = Path(__file__).resolve().parents[1]
    cfg = load_config(root / "configs" / "benchmark_case_1a.toml",
                      [f"domain.nx={n}", f"domain.nz={n}", "stop.steady=false", "stop.max_steps=6"])
    result = api.run(cfg)
    return result.wall_seconds / result.steps


def measure(n, snapshots, folder):
    grid = Grid(n, n, 1.0)
    rng = np.random.default_rng(0)
    safe, old = Path(folder) / f"safe{n}.h5", Path(folder) / f"old{n}.h5"
    writers = []
    for path in (safe, old):
        w = RunFileWriter(path, overwrite=True)
        w.create(grid, "", "benchmark", "bench")
        writers.append(w)
    commit_s, place_s = [], []
    for k in range(snapshots):
        fields, series, restart = _snapshot(grid, k * STEPS_PER_SNAPSHOT, rng)
        t0 = time.perf_counter()
        writers[0].write(time=float(k), fields=fields, series=series, restart=restart,
                         status="running", wall_seconds=0.0)
        commit_s.append(time.perf_counter() - t0)
        if k == 0:
            writers[1].write(time=float(k), fields=fields, series=series, restart=restart,
                             status="running", wall_seconds=0.0)
            continue
        t0 = time.perf_counter()
        _in_place(old, fields, series, restart)
        place_s.append(time.perf_counter() - t0)
    return dict(size=safe.stat().st_size, commit_last=np.mean(commit_s[-5:]),
                commit_first=np.mean(commit_s[1:6]), in_place=np.mean(place_s[-5:]),
                step=_step_seconds(n))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--grids", default="128,512")
    ap.add_argument("--snapshots", type=int, default=40)
    args = ap.parse_args()
    print(f"{'grid':>8} {'file':>9} {'commit, 5 snaps':>16} {'commit, last':>13} "
          f"{'in place':>9} {'step':>8} {'commit / 25 steps':>18}  goal")
    with tempfile.TemporaryDirectory() as folder:
        for n in (int(g) for g in args.grids.split(",")):
            m = measure(n, args.snapshots, folder)
            fraction = m["commit_last"] / (STEPS_PER_SNAPSHOT * m["step"])
            verdict = "met" if fraction < GOAL_FRACTION else "NOT met"
            print(f"{n:>4}^2   {format_bytes(m['size']):>9} {1e3 * m['commit_first']:>13.1f} ms "
                  f"{1e3 * m['commit_last']:>10.1f} ms {1e3 * m['in_place']:>6.1f} ms "
                  f"{1e3 * m['step']:>5.1f} ms {100 * fraction:>16.1f} %  "
                  f"< {100 * GOAL_FRACTION:g} % with {args.snapshots} snapshots: {verdict}")


if __name__ == "__main__":
    main()
