"""Mutation check of the numerics: plant plausible bugs one at a time and see the tests fail.

The bugs are data, in ``tools/mutations.toml`` (one ``[[mutation]]`` table each: ``id``,
``file``, the exact ``old`` text, the ``new`` text, the pytest arguments ``tests`` that
should catch it, and a one-line ``what``).  For each, this script

1. checks that ``old`` occurs exactly once in the file as it is now; a mutation whose text
   is gone is reported as *stale* (the code moved: update the list), never skipped silently;
2. applies it to a scratch copy of the project in a temporary directory (never the real
   tree) and runs ``python -m pytest -x`` on its tests there, with PYTHONPATH at the copy
   and a timeout;
3. restores the file in the copy.

A mutation is *caught* when the tests fail (or time out: a hang is a failure too), and
*survives* when they pass.  First the selected tests run once unmutated: they must pass,
or the score would mean nothing.  Prints one line per mutation and the score
(caught / applied, the survivors, the stale ones); exit status 0 when the score reaches
``--goal`` and nothing is stale, 1 otherwise, 2 on bad input.

Run it under the shared CPU lock (it takes minutes)::

    flock /tmp/convsim-cpu.lock python3 tools/mutation_check.py
    python3 tools/mutation_check.py --only nu-top-bottom-swapped sbdf2-ratio-inverted
    python3 tools/mutation_check.py --list
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
COPIED = ("convsim", "tests", "configs", "benchmarks", "pyproject.toml", "README.md",
          "DEVELOPERS.md")
KEYS = ("id", "file", "old", "new", "tests", "what")


def load_mutations(path: Path) -> list[dict]:
    """The ``[[mutation]]`` tables of the list, checked for their keys and unique ids."""
    data = tomllib.loads(path.read_text())
    mutations = data.get("mutation", [])
    seen = set()
    for i, m in enumerate(mutations):
        missing = [k for k in KEYS if k not in m]
        if missing:
            raise ValueError(f"{path.name}: mutation #{i + 1} ({m.get('id', '?')}) lacks {missing}")
        if m["id"] in seen:
            raise ValueError(f"{path.name}: mutation id {m['id']!r} appears twice")
        if m["old"] == m["new"]:
            raise ValueError(f"{path.name}: mutation {m['id']!r} changes nothing")
        seen.add(m["id"])
    return mutations


def scratch_copy(dest: Path) -> Path:
    """Copy the project (package, tests, configs) into ``dest``, without caches or run files."""
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.h5", "*.nc", ".pytest_cache")
    for name in COPIED:
        src = ROOT / name
        if src.is_dir():
            shutil.copytree(src, dest / name, ignore=ignore)
        elif src.exists():
            shutil.copy2(src, dest / name)
    return dest


def run_tests(copy: Path, args: list[str], timeout: float) -> tuple[str, float, str]:
    """('passed' | 'failed' | 'timeout' | 'error', seconds, last lines of output)."""
    env = dict(os.environ, PYTHONPATH=str(copy), OMP_NUM_THREADS="1", PYTHONDONTWRITEBYTECODE="1")
    cmd = [sys.executable, "-m", "pytest", "-q", "-x", "-p", "no:cacheprovider", *args]
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(cmd, cwd=copy, env=env, capture_output=True, text=True,
                              timeout=timeout, start_new_session=True)
    except subprocess.TimeoutExpired:
        return "timeout", time.perf_counter() - t0, ""
    seconds = time.perf_counter() - t0
    tail = "\n".join((proc.stdout + proc.stderr).strip().splitlines()[-3:])
    if proc.returncode == 0:
        return "passed", seconds, tail
    if proc.returncode == 1:
        return "failed", seconds, tail
    return "error", seconds, tail          # 2: interrupted/collection error, 5: no tests


def check(mutations: list[dict], copy: Path, timeout: float, log) -> list[dict]:
    """Apply each mutation to the copy, run its tests, restore; returns one record each."""
    records = []
    for m in mutations:
        path = copy / m["file"]
        text = path.read_text() if path.exists() else ""
        count = text.count(m["old"])
        record = dict(id=m["id"], what=m["what"], file=m["file"], seconds=0.0)
        if count != 1:
            record["result"] = "stale" if count == 0 else f"ambiguous ({count} matches)"
            records.append(record)
            log(f"{record['result']:>10}  {m['id']}: {m['what']}")
            continue
        path.write_text(text.replace(m["old"], m["new"]))
        try:
            outcome, seconds, tail = run_tests(copy, list(m["tests"]), timeout)
        finally:
            path.write_text(text)
        record.update(seconds=seconds, outcome=outcome,
                      result="survived" if outcome == "passed" else "caught")
        if outcome == "error":
            record["detail"] = tail
        records.append(record)
        label = record["result"] + ("" if outcome in ("passed", "failed") else f" ({outcome})")
        log(f"{label:>10}  {m['id']} [{seconds:.0f} s]: {m['what']}")
    return records


def summary(records: list[dict], goal: float) -> tuple[str, bool]:
    applied = [r for r in records if r["result"] in ("caught", "survived")]
    caught = [r for r in applied if r["result"] == "caught"]
    survivors = [r for r in applied if r["result"] == "survived"]
    stale = [r for r in records if r["result"] not in ("caught", "survived")]
    score = len(caught) / len(applied) if applied else 0.0
    lines = [f"score: {len(caught)} / {len(applied)} caught ({100 * score:.0f} %), goal "
             f"{100 * goal:.0f} %; {len(stale)} stale of {len(records)} listed"]
    for r in survivors:
        lines.append(f"  survivor: {r['id']} ({r['file']}): {r['what']}")
    for r in stale:
        lines.append(f"  {r['result']}: {r['id']} ({r['file']}): update its old text")
    for r in applied:
        if r.get("outcome") == "error":
            lines.append(f"  caught only by an error (check it is not a broken mutation): "
                         f"{r['id']}: {r.get('detail', '')}")
    return "\n".join(lines), score >= goal and not stale


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--list-file", type=Path, default=ROOT / "tools" / "mutations.toml",
                        help="the mutation list (default tools/mutations.toml)")
    parser.add_argument("--only", nargs="+", metavar="ID", help="run these mutations only")
    parser.add_argument("--timeout", type=float, default=300.0,
                        help="seconds per mutation before it counts as caught by a hang")
    parser.add_argument("--goal", type=float, default=0.9, help="fraction to catch (0.9)")
    parser.add_argument("--list", action="store_true", help="print the mutations and exit")
    parser.add_argument("--no-baseline", action="store_true",
                        help="skip the unmutated run of the selected tests")
    args = parser.parse_args(argv)
    try:
        mutations = load_mutations(args.list_file)
    except (OSError, ValueError, tomllib.TOMLDecodeError) as exc:
        print(f"--list-file {args.list_file}: {exc}", file=sys.stderr)
        return 2
    if args.only:
        unknown = sorted(set(args.only) - {m["id"] for m in mutations})
        if unknown:
            print(f"--only {' '.join(unknown)}: no such mutation id", file=sys.stderr)
            return 2
        mutations = [m for m in mutations if m["id"] in args.only]
    if args.list:
        for m in mutations:
            print(f"{m['id']:<36} {m['file']:<36} {m['what']}")
        return 0

    def log(text):
        print(text, flush=True)

    with tempfile.TemporaryDirectory(prefix="convsim-mutants-") as tmp:
        copy = scratch_copy(Path(tmp))
        if not args.no_baseline:
            tests = sorted({t for m in mutations for t in m["tests"] if t.startswith("tests/")})
            outcome, seconds, tail = run_tests(copy, tests, 4 * args.timeout)
            log(f"baseline: the {len(tests)} test files unmutated: {outcome} [{seconds:.0f} s]")
            if outcome != "passed":
                log(tail)
                return 1
        records = check(mutations, copy, args.timeout, log)
    text, met = summary(records, args.goal)
    log(text)
    return 0 if met else 1


if __name__ == "__main__":
    sys.exit(main())
