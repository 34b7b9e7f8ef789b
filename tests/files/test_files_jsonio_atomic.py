"""The one JSON form (RFC 8259: no NaN or Infinity tokens) and the one atomic write."""

import ast
import json
import math
from pathlib import Path

import numpy as np
import pytest

from convsim.files.atomic import atomic_path, atomic_write_text
from convsim.files.jsonio import dumps, plain, write_json

PACKAGE = Path(__file__).resolve().parents[2] / "convsim"


def _reject(token):
    raise ValueError(f"non-standard JSON token {token}")


def test_non_finite_numbers_become_null_and_numpy_becomes_plain():
    value = {"nu": np.float64("nan"), "vrms": float("inf"), "n": np.int64(3), "ok": np.bool_(True),
             "T": np.array([[1.0, np.nan]]), "t": (1, -math.inf), 2: b"x", "p": Path("a/b")}
    text = dumps(value)
    back = json.loads(text, parse_constant=_reject)      # strict: NaN, Infinity rejected
    assert back == {"nu": None, "vrms": None, "n": 3, "ok": True, "T": [[1.0, None]],
                    "t": [1, None], "2": "x", "p": "a/b"}
    assert type(plain(np.float32(0.5))) is float


def test_atomic_write_leaves_the_old_file_on_failure(tmp_path):
    target = tmp_path / "sub" / "table.csv"
    atomic_write_text(target, "old\n")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("disk trouble")
    assert target.read_text() == "old\n"
    assert sorted(p.name for p in target.parent.iterdir()) == ["table.csv"]
    write_json(target.with_suffix(".json"), {"a": float("nan")})
    assert json.loads(target.with_suffix(".json").read_text()) == {"a": None}


def test_whole_files_are_replaced_only_through_the_atomic_helper():
    """os.replace / Path.replace appear only in files/atomic.py (and the run file's own
    crash-safe update in files/)."""
    allowed = {"files/atomic.py", "files/runfile.py", "files/commit.py"}
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE).as_posix()
        tree = ast.parse(path.read_text())
        calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call)
                 and isinstance(n.func, ast.Attribute) and n.func.attr in ("replace", "rename")
                 and isinstance(n.func.value, ast.Name) and n.func.value.id in ("os", "tmp", "part")]
        assert rel in allowed or not calls, f"{rel}: writes a file atomically by hand"
