"""The sweep definition: a sweep file read into a ``SweepSpec`` and expanded into cases.

The file format and the meaning of each table: see ``convsim.studies.sweep``.
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import itertools
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from convsim.config import TABLES, Config, read_toml
from convsim.errors import ConfigError
from convsim.run.stops import run_statuses

__all__ = ["Axis", "Continuation", "SweepSpec", "Case", "load_sweep", "parse_sweep",
           "expand_cases", "case_id", "SWEEP_KEYS", "AXIS_KEYS", "CONTINUATION_KEYS"]

SWEEP_KEYS = ("title", "base", "combine", "fixed", "axis", "continuation")
AXIS_KEYS = ("key", "values", "start", "stop", "count", "spacing")
CONTINUATION_KEYS = ("axis", "accept")


# -- the definition --------------------------------------------------------------------------
@dataclass(frozen=True)
class Axis:
    """One sweep axis: a config key and its values, in order."""

    key: str
    values: tuple


@dataclass(frozen=True)
class Continuation:
    """Start each case from the nearest finished case along ``axis`` (see the module doc)."""

    axis: str
    accept: tuple = ("steady",)


@dataclass(frozen=True)
class SweepSpec:
    """A parsed sweep file."""

    base_config: Config
    axes: tuple
    combine: str = "product"
    fixed: tuple = ()                      # ((key, value), ...)
    continuation: Continuation | None = None
    title: str = ""
    source: str = ""                       # the sweep file, for messages
    base: str = ""                         # the base config path as resolved

    @property
    def param_keys(self) -> tuple:
        return tuple(a.key for a in self.axes)


def _suggest(word, candidates) -> str:
    close = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _config_field(key: str, where: str) -> dataclasses.Field:
    """The declaration of a run-config key ``section.key``; refuses unknown ones."""
    if not isinstance(key, str) or key.count(".") != 1:
        raise ConfigError(f"{where} = {key!r}: expected a run-config key 'section.key', "
                          f"e.g. 'physics.rayleigh'")
    section, name = key.split(".")
    if section not in TABLES:
        raise ConfigError(f"{where} = {key!r}: unknown table [{section}]"
                          f"{_suggest(section, TABLES)}; allowed: {', '.join(TABLES)}")
    fields = {f.name: f for f in dataclasses.fields(TABLES[section])}
    if name not in fields:
        raise ConfigError(f"{where} = {key!r}: unknown key{_suggest(name, fields)}; allowed keys "
                          f"of [{section}]: {', '.join(fields)}")
    return fields[name]


def _check_keys(table: dict, allowed, where: str) -> None:
    for k in table:
        if k not in allowed:
            raise ConfigError(f"{where}.{k}: unknown key{_suggest(k, allowed)}; allowed keys: "
                              f"{', '.join(allowed)}")


def _number(value, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ConfigError(f"{where} = {value!r}: expected a finite number")
    return float(value)


def _axis_values(raw: dict, field: dataclasses.Field, where: str) -> tuple:
    has_list = "values" in raw
    has_range = any(k in raw for k in ("start", "stop", "count", "spacing"))
    if has_list == has_range:
        raise ConfigError(f"{where}: give either values = [...] or start, stop, count "
                          f"(and spacing = 'linear' or 'log')")
    if has_list:
        values = raw["values"]
        if not isinstance(values, list) or not values:
            raise ConfigError(f"{where}.values = {values!r}: expected a non-empty list")
        return tuple(values)
    for k in ("start", "stop", "count"):
        if k not in raw:
            raise ConfigError(f"{where}.{k}: missing; a range needs start, stop and count")
    start, stop = _number(raw["start"], f"{where}.start"), _number(raw["stop"], f"{where}.stop")
    count = raw["count"]
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 100000:
        raise ConfigError(f"{where}.count = {count!r}: expected a whole number from 1 to 100000")
    spacing = raw.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise ConfigError(f"{where}.spacing = {spacing!r}: expected 'linear' or 'log'")
    if count == 1:
        if start != stop:
            raise ConfigError(f"{where}.count = 1: start and stop must then be equal")
        grid = np.array([start])
    elif spacing == "log":
        if start <= 0 or stop <= 0:
            raise ConfigError(f"{where}: spacing = 'log' needs start > 0 and stop > 0, got "
                              f"{start!r} and {stop!r}")
        grid = np.geomspace(start, stop, count)
    else:
        grid = np.linspace(start, stop, count)
    if field.type == "int":
        values = tuple(int(round(v)) for v in grid)
    else:
        values = tuple(float(f"{v:.12g}") for v in grid)
    if len(set(values)) != len(values):
        raise ConfigError(f"{where}: the range gives repeated values {list(values)}; "
                          f"lower count or widen the range")
    return values


def _flatten(table: dict, prefix: str = "") -> dict:
    out = {}
    for k, v in table.items():
        name = f"{prefix}.{k}" if prefix else k
        if isinstance(v, dict):
            out.update(_flatten(v, name))
        else:
            out[name] = v
    return out


def _parse_axes(raw_axes, fixed: dict, source: str, repeats: bool = False) -> list:
    """The [[axis]] tables: a config key each (not also in [fixed], not twice) and its values
    (a value twice only with ``repeats``: zipped axes, whose cases must still differ)."""
    if not isinstance(raw_axes, list) or not raw_axes:
        raise ConfigError(f"{source}: expected at least one [[axis]] table")
    axes = []
    for i, raw in enumerate(raw_axes):
        where = f"axis[{i}]"
        if not isinstance(raw, dict):
            raise ConfigError(f"{source}: {where} must be a table")
        _check_keys(raw, AXIS_KEYS, where)
        field = _config_field(raw.get("key"), f"{where}.key")
        key = raw["key"]
        if key in fixed:
            raise ConfigError(f"{where}.key = {key!r}: also set in [fixed]; keep one")
        if any(a.key == key for a in axes):
            raise ConfigError(f"{where}.key = {key!r}: used by two axes")
        values = _axis_values(raw, field, where)
        if not repeats and len({json.dumps(v, sort_keys=True) for v in values}) != len(values):
            raise ConfigError(f"{where}.values = {list(values)!r}: repeated values")
        axes.append(Axis(key, values))
    return axes


def _parse_continuation(raw_c, axes: list, source: str):
    """The optional [continuation] table: the axis to chain along and the accepted statuses."""
    if raw_c is None:
        return None
    if not isinstance(raw_c, dict):
        raise ConfigError(f"{source}: [continuation] must be a table")
    _check_keys(raw_c, CONTINUATION_KEYS, "continuation")
    axis = raw_c.get("axis")
    keys = [a.key for a in axes]
    if axis not in keys:
        raise ConfigError(f"continuation.axis = {axis!r}: expected one of the axis keys "
                          f"{', '.join(keys)}{_suggest(str(axis), keys)}")
    accept = raw_c.get("accept", ["steady"])
    statuses = run_statuses()
    if (not isinstance(accept, list) or not accept
            or any(a not in statuses for a in accept)):
        raise ConfigError(f"continuation.accept = {accept!r}: expected a list of run "
                          f"statuses from {', '.join(statuses)}")
    return Continuation(axis, tuple(accept))


def parse_sweep(data: dict, *, folder: str | Path = ".", source: str = "sweep") -> SweepSpec:
    """A ``SweepSpec`` from the TOML mapping of a sweep file (paths relative to ``folder``)."""
    from convsim.config import load_config
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: expected a TOML table at the top level")
    run_tables = sorted(set(data) & set(TABLES))
    if run_tables and "base" not in data and "axis" not in data:
        raise ConfigError(f"{source}: a run config (it has [{'], ['.join(run_tables)}]), not a "
                          f"sweep file; run it with `convsim run {source}`, or sweep it from a "
                          f"sweep file with base = \"{Path(source).name}\" and [[axis]] tables "
                          f"(README, 'Sweep files')")
    _check_keys(data, SWEEP_KEYS, source)
    base = data.get("base")
    if not isinstance(base, str) or not base:
        raise ConfigError(f"{source}: base = {base!r}: expected the path of a run config "
                          f"(relative to the sweep file)")
    base_path = (Path(folder) / base) if not Path(base).is_absolute() else Path(base)
    base_config = load_config(base_path)
    combine = data.get("combine", "product")
    if combine not in ("product", "zip"):
        raise ConfigError(f"{source}: combine = {combine!r}: expected 'product' or 'zip'")
    fixed_raw = data.get("fixed", {})
    if not isinstance(fixed_raw, dict):
        raise ConfigError(f"{source}: [fixed] must be a table of section.key = value")
    fixed = _flatten(fixed_raw)
    for key in fixed:
        _config_field(key, "fixed key")
    axes = _parse_axes(data.get("axis", []), fixed, source, repeats=(combine == "zip"))
    if combine == "zip" and len({len(a.values) for a in axes}) > 1:
        raise ConfigError(f"{source}: combine = 'zip' needs axes of equal length, got "
                          + ", ".join(f"{a.key}: {len(a.values)}" for a in axes))
    continuation = _parse_continuation(data.get("continuation"), axes, source)
    title = data.get("title", "")
    if not isinstance(title, str):
        raise ConfigError(f"{source}: title = {title!r}: expected a string")
    spec = SweepSpec(base_config=base_config, axes=tuple(axes), combine=combine,
                     fixed=tuple(fixed.items()), continuation=continuation, title=title,
                     source=source, base=str(base_path))
    expand_cases(spec)   # repeated cases are refused here, before anything runs
    return spec


def load_sweep(path: str | Path) -> SweepSpec:
    """Read and check a sweep file."""
    path = Path(path)
    data = read_toml(path, "sweep file")
    return parse_sweep(data, folder=path.parent, source=str(path))


# -- cases -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Case:
    """One case: its parameter values and its place in a continuation chain."""

    index: int
    case_id: str
    params: tuple          # ((key, value), ...) in axis order
    chain: int = 0
    position: int = 0

    @property
    def values(self) -> dict:
        return dict(self.params)


def _slug(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        text = f"{value:.6g}"
    else:
        text = str(value)
    return "".join(c if c.isalnum() or c in ".+-" else "-" for c in text)


def case_id(params) -> str:
    """Stable identifier of a parameter set: readable slug + 8 hex digits of its SHA-1."""
    params = list(params.items() if isinstance(params, dict) else params)
    canonical = json.dumps([[k, v] for k, v in params], sort_keys=False)
    digest = hashlib.sha1(canonical.encode("utf-8")).hexdigest()[:8]
    slug = "_".join(f"{k.split('.')[-1]}-{_slug(v)}" for k, v in params)
    if len(slug) > 80:
        slug = slug[:80]
    return f"{slug}_{digest}" if slug else digest


def expand_cases(spec: SweepSpec) -> list[Case]:
    """The cases of a sweep, in order, with their continuation chains."""
    keys = spec.param_keys
    if spec.combine == "zip":
        combos = list(zip(*(a.values for a in spec.axes)))
    else:
        combos = list(itertools.product(*(a.values for a in spec.axes)))
    chains: dict = {}
    cases, seen = [], {}
    cont = spec.continuation
    for index, combo in enumerate(combos):
        params = tuple(zip(keys, combo))
        cid = case_id(params)
        if cid in seen:
            raise ConfigError(f"{spec.source}: cases {seen[cid]} and {index} have the same "
                              f"parameters {dict(params)}")
        seen[cid] = index
        if cont is None:
            chain, position = index, 0
        else:
            axis_pos = keys.index(cont.axis)
            if spec.combine == "zip":
                group = ()
            else:
                group = tuple(v for i, v in enumerate(combo) if i != axis_pos)
            group_key = json.dumps(group)
            chain = chains.setdefault(group_key, len(chains))
            position = spec.axes[axis_pos].values.index(combo[axis_pos])
        cases.append(Case(index, cid, params, chain, position))
    return cases
