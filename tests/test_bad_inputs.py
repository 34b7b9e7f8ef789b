"""A corpus of bad inputs: each gets one line on stderr naming the key (or option, or file),
exit status 2 and no traceback (issue 12; README "Bad input").

Three families: every config key with a value of the wrong type, every bounded key
just outside its range, every choice key with an unknown choice (generated from the
config declarations, so a new key joins the corpus by itself); then files, options,
restarts, outputs and sweeps written by hand.  The commands run in this process
(``convsim.cli.main``), so the corpus takes seconds; each bad value comes after a
small, fast base (8 x 8 cells, 2 steps), so a value the checker let through would
show as exit 0, not as an hour-long run.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import h5py
import pytest

from convsim.cli import main
from convsim.config import TABLES

ROOT = Path(__file__).resolve().parents[1]
GOOD = ROOT / "configs" / "benchmark_case_1a.toml"
SMALL = ["--set", "domain.nx=8", "--set", "domain.nz=8", "--set", "stop.max_steps=2"]


def _bad_values():
    """(case name, --set item, text the error line must hold) for every declared key."""
    cases = []
    for section, cls in TABLES.items():
        for f in dataclasses.fields(cls):
            meta, key = f.metadata, f"{section}.{f.name}"
            default = f.default if f.default is not dataclasses.MISSING else f.default_factory()
            if isinstance(default, bool):
                wrong = '"perhaps"'
            elif isinstance(default, (int, float)):
                wrong = '[1, 2]' if meta.get("quantity") else '"many"'
            elif isinstance(default, (list, tuple)):
                wrong = '"1e5"'
            else:
                wrong = "5"
            cases.append((f"{key} wrong type", f"{key}={wrong}", key))
            if meta.get("choices"):
                cases.append((f"{key} unknown choice", f'{key}="bogus"', key))
            if isinstance(default, bool) or not isinstance(default, (int, float)):
                continue
            integer = isinstance(default, int)
            if meta.get("le") is not None:
                high = meta["le"] + 1 if integer else meta["le"] * 10 + 1
                cases.append((f"{key} above range", f"{key}={high!r}", key))
            low = meta.get("ge") if meta.get("ge") is not None else meta.get("gt")
            if low is not None and math.isfinite(low):
                below = low - 1 if integer else (low - 1.0 if low <= 0 else low / 10.0
                                                 if meta.get("ge") is not None else 0.0)
                if meta.get("gt") is not None:
                    below = low if not integer else low
                cases.append((f"{key} below range", f"{key}={below!r}", key))
    return cases


BAD_VALUES = _bad_values()


def _convsim(capsys, *argv):
    code = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.err


def _one_clean_line(code, err, expected):
    assert code == 2, err
    assert "Traceback" not in err, err
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert expected in lines[0], lines[0]


@pytest.mark.parametrize("name, item, key", BAD_VALUES, ids=[c[0] for c in BAD_VALUES])
def test_a_bad_config_value_names_its_key(capsys, tmp_path, name, item, key):
    code, err = _convsim(capsys, "run", GOOD, "--out", tmp_path, *SMALL, "--set", item)
    _one_clean_line(code, err, key)


def _write(tmp_path, text, name="case.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


def _write_bytes(tmp_path, data, name="case.toml"):
    path = tmp_path / name
    path.write_bytes(data)
    return path


def _run_file(tmp_path, config_text=None, name="stored.h5"):
    """A small finished run file; ``config_text`` replaces its stored config."""
    out = tmp_path / "runs"
    assert main(["run", str(GOOD), "--out", str(out), *SMALL]) == 0
    path = out / "benchmark_case_1a.h5"
    if config_text is not None:
        with h5py.File(path, "a") as f:
            f.attrs["config"] = config_text
    return path


def _sweep(tmp_path, values="[1e4, 2e4]", fixed="domain.nx = 8\ndomain.nz = 8\n"):
    return _write(tmp_path, f'base = "{GOOD}"\n[fixed]\n{fixed}stop.max_steps = 2\n'
                            f'[[axis]]\nkey = "physics.rayleigh"\nvalues = {values}\n',
                  "sweep.toml")


HAND = {
    "missing config file": (lambda t: ["run", t / "nope.toml"], "not found"),
    "a directory as config": (lambda t: ["run", t], "is a directory"),
    "broken TOML": (lambda t: ["run", _write(t, "[domain\nnx = 3")], "not valid TOML"),
    "not UTF-8": (lambda t: ["run", _write_bytes(t, b"\xff\xfe[x]")], "not UTF-8"),
    "unknown key": (lambda t: ["run", _write(t, "[physics]\nraleigh = 1e4\n")], "rayleigh"),
    "unknown table": (lambda t: ["run", _write(t, "[physic]\nrayleigh = 1e4\n")], "physics"),
    "top level not a table": (lambda t: ["run", _write(t, "physics = 5\n")], "physics"),
    "bad --set": (lambda t: ["run", GOOD, "--set", "physics.rayleigh"], "--set"),
    "--set without section": (lambda t: ["run", GOOD, "--set", "rayleigh=5"], "--set"),
    "bad --grid": (lambda t: ["run", GOOD, "--grid", "64by64"], "--grid"),
    "--grid under 4": (lambda t: ["run", GOOD, "--grid", "3x3"], "domain.nx"),
    "unknown option": (lambda t: ["run", GOOD, "--grdi", "8x8"], "--grdi"),
    "unknown command": (lambda t: ["runn", GOOD], "runn"),
    "both walls fixed flux": (lambda t: ["run", _write(
        t, '[boundaries]\ntop_heat = "flux"\nbottom_heat = "flux"\n')], "boundaries"),
    "snapshot start without file": (lambda t: ["run", GOOD, *SMALL, "--out", t, "--set",
                                               'start.kind="snapshot"'], "start.file"),
    "start file missing": (lambda t: ["run", GOOD, *SMALL, "--out", t, "--from", t / "no.h5"],
                           "start.file"),
    "run output folder under a file": (lambda t: ["run", GOOD, *SMALL, "--out",
                                                  _write(t, "x", "f.txt") / "sub"], "f.txt"),
    "run output exists": (lambda t: ["run", GOOD, *SMALL, "--out", _run_file(t).parent],
                          "--overwrite"),
    "xdmf sidecar exists": (lambda t: ["run", GOOD, *SMALL, "--out", t]
                            if _write(t, "x", "benchmark_case_1a.xdmf") else [],
                            "benchmark_case_1a.xdmf"),
    "grid too large for memory": (lambda t: ["run", GOOD, "--out", t, "--grid", "4096x4096"],
                                  "domain.nx x domain.nz = 4096 x 4096"),
    "restart file missing": (lambda t: ["run", GOOD, "--restart", t / "no.h5"], "no.h5"),
    "restart not HDF5": (lambda t: ["run", GOOD, "--restart", _write(t, "x", "r.h5")], "r.h5"),
    "restart corrupt stored config": (lambda t: ["run", GOOD, *SMALL, "--restart",
                                                 _run_file(t, "[domain\nnx=")], "stored config"),
    "restart alone, corrupt stored config": (lambda t: ["run", "--restart",
                                                        _run_file(t, "[domain\nnx=")],
                                             "stored config"),
    "restart no stored config": (lambda t: ["run", GOOD, *SMALL, "--restart",
                                            _run_file(t, "")], "no stored config"),
    "restart alone, no stored config": (lambda t: ["run", "--restart", _run_file(t, "")],
                                        "no stored config"),
    "restart changes the physics": (lambda t: ["run", GOOD, *SMALL, "--set",
                                               "physics.rayleigh=2e4", "--restart",
                                               _run_file(t)], "[physics]"),
    "bench out unwritable": (lambda t: ["bench", "1a", "--grids", "8,16", "--out",
                                        _write(t, "x", "f.txt") / "b"], "--out"),
    "bench unknown case": (lambda t: ["bench", "9z", "--out", t], "9z"),
    "bench bad grids": (lambda t: ["bench", "1a", "--grids", "8,x", "--out", t], "--grids"),
    "bench jobs zero": (lambda t: ["bench", "1a", "--jobs", "0", "--out", t], "--jobs"),
    "onset out unwritable": (lambda t: ["onset", GOOD, "--out", _write(t, "x", "f.txt") / "o"],
                             "--out"),
    "onset bad wavenumbers": (lambda t: ["onset", GOOD, "--wavenumbers", "1:0:5"],
                              "--wavenumbers"),
    "onset points out of range": (lambda t: ["onset", GOOD, "--points", "2"], "--points"),
    "fit out unwritable": (lambda t: ["fit", _write(t, "case_id,status,rayleigh,nusselt_top\n"
                                                       "a,steady,1e4,4.9\nb,steady,1e5,10.5\n",
                                                    "table.csv"),
                                      "--out", _write(t, "x", "f.txt") / "fit"], "--out"),
    "fit table missing": (lambda t: ["fit", t / "none.csv"], "none.csv"),
    "sweep file missing": (lambda t: ["sweep", t / "none.toml"], "none.toml"),
    "sweep case value a string": (lambda t: ["sweep", _sweep(t, '[1e4, "many"]'), "--out",
                                             t / "s"], "physics.rayleigh"),
    "sweep case value out of range": (lambda t: ["sweep", _sweep(t, "[1e4, -5.0]"), "--out",
                                                 t / "s"], "physics.rayleigh"),
    "sweep fixed value rejected": (lambda t: ["sweep", _sweep(t, fixed="domain.nx = 2\n"),
                                              "--out", t / "s"], "domain.nx"),
    "sweep jobs with scheduler": (lambda t: ["sweep", _sweep(t), "--jobs", "2", "--scheduler",
                                             "tcp://127.0.0.1:1"], "--jobs"),
    "info file missing": (lambda t: ["info", t / "none.h5"], "none.h5"),
    "info not HDF5": (lambda t: ["info", _write(t, "x", "r.h5")], "r.h5"),
    "xdmf file missing": (lambda t: ["xdmf", t / "none.h5"], "none.h5"),
    "plot file missing": (lambda t: ["plot", t / "none.h5"], "none.h5"),
    "rayleigh bad depth units": (lambda t: ["rayleigh", "--depth", "30 kg"], "--depth"),
}


@pytest.mark.parametrize("name", list(HAND))
def test_a_bad_input_gives_one_line_and_exit_status_2(capsys, tmp_path, name):
    make, expected = HAND[name]
    argv = make(tmp_path)
    capsys.readouterr()                         # what building the input printed
    try:
        code, err = _convsim(capsys, *argv)
    except SystemExit as exc:                   # argparse exits by itself
        code, err = exc.code, capsys.readouterr().err
    _one_clean_line(code, err, expected)


def test_the_corpus_is_at_least_130_inputs():
    assert len(BAD_VALUES) + len(HAND) >= 130
