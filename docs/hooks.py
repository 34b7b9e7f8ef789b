"""MkDocs hook: pages generated from the code, so the site cannot drift from it.

A page line ``<!-- generate: NAME -->`` is replaced by the text of ``NAME``:

- ``config-reference``: every config table and key, from the schema
  (``convsim.config.reference_markdown``);
- ``runfile-variables``: the run file's fields and series with their units and scales
  (``convsim.files.runfile``);
- ``api``: the Python front door and the public functions of ``convsim.units`` and
  ``convsim.views``, from their signatures and docstrings (``inspect``).
"""

from __future__ import annotations

import inspect
import re
import sys
from pathlib import Path

_ROOT = str(Path(__file__).resolve().parents[1])

_MARK = re.compile(r"^<!-- generate: ([a-z-]+) -->$", re.M)


def _config_reference() -> str:
    from convsim.config import reference_markdown
    return reference_markdown()


def _runfile_variables() -> str:
    from convsim.files.runfile import FIELDS, NONDIMENSIONAL_SCALES, SERIES, cf_attributes
    rows = ["| variable | dimensions | units | scale | long name |", "|---|---|---|---|---|"]
    for name, (dims, units, long_name) in FIELDS.items():
        a = cf_attributes(name, units, long_name)
        rows.append(f"| `{name}` | (time, {', '.join(dims)}) | `{a['units']}` | "
                    f"{a.get('nondimensional_scale', '')} | {a['long_name']} |")
    for name, (units, long_name) in SERIES.items():
        a = cf_attributes(name, units, long_name)
        rows.append(f"| `{name}` | (series_time,) | `{a['units']}` | "
                    f"{NONDIMENSIONAL_SCALES.get(name, a.get('nondimensional_scale', ''))} | "
                    f"{a['long_name']} |")
    return "\n".join(rows)


def _doc(obj) -> str:
    text = inspect.getdoc(obj) or "(no docstring)"
    return "```text\n" + text + "\n```"


def _api() -> str:
    import convsim
    from convsim import api, units, views
    out = []
    entries = [("convsim.load_config", convsim.load_config), ("convsim.run", api.run),
               ("convsim.open_run", api.open_run),
               ("RunResult.to_xarray", __import__("convsim.run.records",
                                                  fromlist=["RunResult"]).RunResult.to_xarray)]
    entries += [(f"convsim.units.{n}", getattr(units, n)) for n in
                ("Scales", "scales_from_body", "parse_quantity", "physical_quantities",
                 "wall_heat_flows")]
    entries += [(f"convsim.views.{n}", getattr(views, n)) for n in views.__all__]
    for name, obj in entries:
        try:
            signature = str(inspect.signature(obj))
        except (TypeError, ValueError):
            signature = "(...)"
        out += [f"### `{name}`", "", f"```python\n{name.split('.')[-1]}{signature}\n```", "",
                _doc(obj), ""]
    return "\n".join(out)


_GENERATORS = {"config-reference": _config_reference, "runfile-variables": _runfile_variables,
               "api": _api}


def on_config(config):
    """Document the repository's own convsim (MkDocs restores sys.path after loading hooks)."""
    if _ROOT not in sys.path:
        sys.path.insert(0, _ROOT)
    return config


def on_page_markdown(markdown, page, config, files):
    def replace(match):
        name = match.group(1)
        if name not in _GENERATORS:
            raise ValueError(f"{page.file.src_path}: unknown generator {name!r}")
        return _GENERATORS[name]()
    return _MARK.sub(replace, markdown)
