"""Bad input: one clear line on stderr naming the key, the value and what is allowed; exit 2."""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
GOOD = (ROOT / "configs" / "benchmark_case_1a.toml").read_text()


def _convsim(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "convsim.cli", *args], capture_output=True,
                          text=True, cwd=cwd, timeout=120)


def _write(tmp_path, text, name="case.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


CASES = {
    "missing file": (lambda tmp: ["run", str(tmp / "nope.toml")], "not found"),
    "broken TOML": (lambda tmp: ["run", str(_write(tmp, "[domain\nnx = 3"))], "not valid TOML"),
    "unknown key": (lambda tmp: ["run", str(_write(tmp, "[physics]\nraleigh = 1e4\n"))],
                    "did you mean 'rayleigh'"),
    "unknown table": (lambda tmp: ["run", str(_write(tmp, "[physic]\nrayleigh = 1e4\n"))],
                      "did you mean 'physics'"),
    "wrong type": (lambda tmp: ["run", str(_write(tmp, "[domain]\nnx = \"many\"\n"))],
                   "domain.nx = 'many': expected a whole number"),
    "negative Ra": (lambda tmp: ["run", str(_write(tmp, "[physics]\nrayleigh = -5.0\n"))],
                    "physics.rayleigh = -5.0: out of range, allowed > 0"),
    "grid under 4 cells": (lambda tmp: ["run", str(_write(tmp, GOOD)), "--grid", "3x3"],
                           "domain.nx = 3: out of range, allowed >= 4"),
    "unknown boundary": (lambda tmp: ["run", str(_write(tmp, "[boundaries]\ntop_flow = \"free slip\"\n"))],
                         "boundaries.top_flow = 'free slip': expected one of 'free-slip', 'no-slip'"),
    "NaN": (lambda tmp: ["run", str(_write(tmp, "[physics]\nrayleigh = nan\n"))],
            "physics.rayleigh = nan: expected a finite number"),
    "unwritable output folder": (lambda tmp: ["run", str(_write(tmp, GOOD)), "--out",
                                              str(_write(tmp, "x", "file.txt") / "sub")],
                                 "cannot be created"),
    "bad --set": (lambda tmp: ["run", str(_write(tmp, GOOD)), "--set", "physics.rayleigh"],
                  "expected section.key=value"),
    "bad --grid": (lambda tmp: ["run", str(_write(tmp, GOOD)), "--grid", "64by64"],
                   "--grid '64by64': expected NXxNZ"),
    "both walls fixed flux": (lambda tmp: ["run", str(_write(tmp, "[boundaries]\ntop_heat = \"flux\"\nbottom_heat = \"flux\"\n"))],
                              "boundaries.top_heat = 'flux'"),
    "unknown option": (lambda tmp: ["run", str(_write(tmp, GOOD)), "--grdi", "8x8"],
                       "unrecognized arguments"),
}


@pytest.mark.parametrize("name", list(CASES))
def test_bad_input_gives_one_line_and_exit_status_2(tmp_path, name):
    make_args, expected = CASES[name]
    result = _convsim(*make_args(tmp_path))
    assert result.returncode == 2, (name, result.stderr)
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert expected in lines[0], lines[0]
    assert "Traceback" not in result.stderr


def test_existing_output_is_not_overwritten_without_the_flag(tmp_path):
    cfg = _write(tmp_path, GOOD)
    args = ["run", str(cfg), "--grid", "8x8", "--set", "stop.max_steps=5", "--out", str(tmp_path)]
    first = _convsim(*args)
    assert first.returncode == 0, first.stderr
    before = (tmp_path / "case.h5").read_bytes()
    second = _convsim(*args)
    assert second.returncode == 2
    assert "exists; pass --overwrite" in second.stderr
    assert (tmp_path / "case.h5").read_bytes() == before
    third = _convsim(*args, "--overwrite", "--json")
    assert third.returncode == 0, third.stderr


def test_run_json_summary_has_the_documented_keys(tmp_path):
    import json
    cfg = _write(tmp_path, GOOD)
    result = _convsim("run", str(cfg), "--grid", "12x12", "--out", str(tmp_path), "--json")
    assert result.returncode == 0, result.stderr
    summary = json.loads(result.stdout)
    for key in ("nusselt_top", "nusselt_bottom", "vrms", "time", "steps", "steady", "wall_seconds",
                "output"):
        assert key in summary
    assert summary["steady"] is True and abs(summary["nusselt_top"] / 4.884409 - 1) < 0.02
