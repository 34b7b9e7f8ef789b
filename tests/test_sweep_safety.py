"""Sweeps lose nothing and leave nothing behind (issue 12, items 7 to 9, and 8 for XDMF).

- a sweep killed with SIGKILL or stopped with SIGTERM leaves no worker or
  resource-tracker process, and a rerun skips every case finished before;
- a folder holding another sweep's table is refused without --overwrite;
- every case's config is checked before the first run;
- an existing XDMF sidecar is not replaced without --overwrite.
"""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from convsim import api
from convsim.config import load_config
from convsim.errors import ConfigError, OutputExistsError
from convsim.studies.sweep import load_sweep, run_sweep
from convsim.studies.sweep_table import read_record

ROOT = Path(__file__).resolve().parents[1]
BASE = ROOT / "configs" / "benchmark_case_1a.toml"
SWEEP = f"""
title = "safety"
base = "{BASE}"
[fixed]
domain.nx = 12
domain.nz = 12
stop.steady = false
stop.max_steps = {{steps}}
[[axis]]
key = "physics.rayleigh"
values = {{values}}
"""


def _sweep_file(tmp_path, values="[1e4, 2e4, 3e4]", steps=60, name="sweep.toml"):
    path = tmp_path / name
    path.write_text(SWEEP.format(values=values, steps=steps))
    return path


def _descendants(pid) -> set:
    """Process ids below ``pid`` (from /proc)."""
    children: dict = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            ppid = int(stat.rsplit(")", 1)[1].split()[1])
            children.setdefault(ppid, []).append(int(entry.name))
    found, todo = set(), [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            found.add(child)
            todo.append(child)
    return found


def _alive(pids) -> set:
    alive = set()
    for pid in pids:
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            continue
        if state != "Z":
            alive.add(pid)
    return alive


@pytest.mark.parametrize("how", [signal.SIGKILL, signal.SIGTERM])
def test_a_killed_sweep_leaves_no_process_and_loses_no_finished_case(tmp_path, how):
    sweep = _sweep_file(tmp_path, values="[1e4, 2e4, 3e4, 4e4, 5e4, 6e4]", steps=400)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "convsim.cli", "sweep", str(sweep), "--out",
                             str(out), "--jobs", "2"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        end = time.time() + 180
        while not list((out / "cases").glob("*.json")) and time.time() < end:
            time.sleep(0.1)
        workers = _descendants(proc.pid)
        assert len(workers) >= 2                       # the pool (and its resource tracker)
        finished = {p.name: read_record(p) for p in (out / "cases").glob("*.json")}
        assert finished
        proc.send_signal(how)
        _, err = proc.communicate(timeout=60)
        if how == signal.SIGTERM:
            assert proc.returncode == 130 and "Traceback" not in err, err
        end = time.time() + 30
        while _alive(workers) and time.time() < end:
            time.sleep(0.2)
        assert not _alive(workers)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    for name, record in finished.items():        # every finished case is kept as it was
        assert read_record(out / "cases" / name) == record
    spec = load_sweep(sweep)
    ran = []

    def runner(task):
        ran.append(task.case_id)
        from convsim.studies.sweep_case import run_case
        return run_case(task)

    again = run_sweep(spec, out, backend="inline", runner=runner)
    assert again.skipped >= len(finished)
    assert not set(ran) & {r["case_id"] for r in finished.values()}


def test_a_folder_holding_another_sweep_is_refused_without_overwrite(tmp_path):
    out = tmp_path / "out"
    first = run_sweep(load_sweep(_sweep_file(tmp_path)), out, backend="inline")
    assert len(first.records) == 3
    other = load_sweep(_sweep_file(tmp_path, values="[5e4]", name="other.toml"))
    before = (out / "table.csv").read_bytes()
    with pytest.raises(OutputExistsError, match="holds another sweep"):
        run_sweep(other, out, backend="inline")
    assert (out / "table.csv").read_bytes() == before          # 3 rows stay 3 rows
    again = run_sweep(load_sweep(_sweep_file(tmp_path)), out, backend="inline")
    assert again.skipped == 3                                  # the same sweep resumes
    replaced = run_sweep(other, out, backend="inline", overwrite=True)
    assert len(replaced.records) == 1


@pytest.mark.parametrize("bad, key", [('"many"', "physics.rayleigh"), ("-1.0", "physics.rayleigh")])
def test_every_case_config_is_checked_before_the_first_run(tmp_path, bad, key):
    path = _sweep_file(tmp_path, values=f"[1e4, {bad}]")
    ran = []
    with pytest.raises(ConfigError) as caught:
        run_sweep(load_sweep(path), tmp_path / "out", backend="inline",
                  runner=lambda task: ran.append(task))
    assert "case 1" in str(caught.value) and key in str(caught.value)
    assert ran == []


def test_fixed_value_the_checker_rejects_names_the_case_and_key(tmp_path):
    path = _sweep_file(tmp_path)
    path.write_text(path.read_text().replace("domain.nz = 12", "domain.nz = 2"))
    with pytest.raises(ConfigError, match=r"case 0 .*domain\.nz = 2"):
        run_sweep(load_sweep(path), tmp_path / "out", backend="inline",
                  runner=lambda task: pytest.fail("no case may run"))


def test_an_existing_xdmf_sidecar_is_not_replaced_without_overwrite(tmp_path):
    cfg = load_config(BASE, ["domain.nx=8", "domain.nz=8", "stop.max_steps=3"])
    sidecar = tmp_path / "run.xdmf"
    sidecar.write_text("not ours")
    with pytest.raises(OutputExistsError, match="run.xdmf"):
        api.run(cfg, tmp_path / "run.h5")
    assert sidecar.read_text() == "not ours" and not (tmp_path / "run.h5").exists()
    api.run(cfg, tmp_path / "run.h5", overwrite=True)
    assert "run.h5:/temperature" in sidecar.read_text()
