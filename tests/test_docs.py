"""The documentation site builds from the repository (MkDocs, --strict: no broken link, no
warning) and its generated pages match the code they come from (the config schema, the run
file's declarations, the docstrings)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_site_builds_strict_with_pages_generated_from_the_code(tmp_path):
    from convsim.config import TABLES
    from convsim.files.runfile import FIELDS
    site = tmp_path / "site"
    done = subprocess.run([sys.executable, "-m", "mkdocs", "build", "--strict", "-q",
                           "-f", str(ROOT / "mkdocs.yml"), "-d", str(site)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    config = (site / "config" / "index.html").read_text(encoding="utf-8")
    for table, cls in TABLES.items():
        assert f"[{table}]" in config
        for key in cls.__dataclass_fields__:
            assert f"<code>{key}</code>" in config, (table, key)
    runfile = (site / "runfile" / "index.html").read_text(encoding="utf-8")
    for name in FIELDS:
        assert f"<code>{name}</code>" in runfile
    api = (site / "api" / "index.html").read_text(encoding="utf-8")
    assert "convsim.open_run" in api and "physical_quantities" in api
    assert not (site / "hooks.py").exists()
