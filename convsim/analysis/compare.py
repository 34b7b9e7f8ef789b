"""Two runs side by side: final diagnostics, their differences, the temperature difference field.

``compare_runs(a, b)`` reads the last snapshot of two run files and returns plain
data (``Comparison``) for ``convsim compare`` and its figure
(:mod:`convsim.figures.compare`).  When the grids differ, run B's temperature is
interpolated bilinearly onto run A's cell centres (``convsim.model.grid.interpolate_cells``)
before the difference T_B - T_A is taken; the boxes must have the same aspect ratio.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from convsim.errors import ConfigError
from convsim.files.reader import RunFile, read_run

__all__ = ["Comparison", "compare_runs", "DIAGNOSTICS"]

#: The final diagnostics compared, in order: (key, label).
DIAGNOSTICS = (("nusselt_top", "Nu top"), ("nusselt_bottom", "Nu bottom"), ("vrms", "vrms"),
               ("surface_vrms", "surface vrms"), ("mean_temperature", "mean T"),
               ("time", "time"), ("steps", "steps"))


def _final(run: RunFile) -> dict:
    """The final numbers of a run: the ``final_*`` attributes, else the last series row."""
    out = {}
    for key, _ in DIAGNOSTICS:
        value = run.attrs.get(f"final_{key}")
        if value is None:
            column = {"time": "series_time", "steps": "series_step"}.get(key, key)
            series = run.series.get(column, ())
            value = series[-1] if len(series) else None
        out[key] = None if value is None else float(value)
    return out


def _physical(run: RunFile, final: dict):
    from convsim.config import parse_config
    from convsim.physical import physical_quantities
    from convsim.units import scales_from_body
    cfg = parse_config(tomllib.loads(run.config_text), source=str(run.path))
    if cfg.body is None:
        return None
    return physical_quantities(final, scales_from_body(cfg.body), cfg.boundaries)


@dataclass
class Comparison:
    """Two runs compared (plain data)."""

    paths: tuple
    runs: tuple = field(repr=False)            # (RunFile A, RunFile B)
    rows: list                                 # (label, key, value A, value B, relative diff)
    physical: tuple                            # (dict or None, dict or None)
    temperature_b_on_a: np.ndarray = field(repr=False)
    difference: np.ndarray = field(repr=False)  # T_B - T_A on A's cells
    max_abs_difference: float = 0.0
    rms_difference: float = 0.0
    interpolated: bool = False

    def to_dict(self) -> dict:
        return {"a": str(self.paths[0]), "b": str(self.paths[1]),
                "diagnostics": {key: {"a": va, "b": vb, "relative_difference": rel}
                                for _, key, va, vb, rel in self.rows},
                "physical": {"a": self.physical[0], "b": self.physical[1]},
                "temperature_difference": {"max_abs": self.max_abs_difference,
                                           "rms": self.rms_difference,
                                           "b_interpolated_to_a": self.interpolated}}


def compare_runs(path_a: str | Path, path_b: str | Path) -> Comparison:
    """Compare the last snapshots and final diagnostics of two run files (B relative to A)."""
    a, b = read_run(path_a), read_run(path_b)
    aspect_a = float(a.x_node[-1] - a.x_node[0])
    aspect_b = float(b.x_node[-1] - b.x_node[0])
    if not math.isclose(aspect_a, aspect_b, rel_tol=1e-9):
        raise ConfigError(f"{path_b}: box aspect {aspect_b:g} differs from {path_a}'s "
                          f"{aspect_a:g}; only boxes of one shape can be compared field by field")
    fa, fb = _final(a), _final(b)
    rows = []
    for key, label in DIAGNOSTICS:
        va, vb = fa[key], fb[key]
        rel = None
        if va is not None and vb is not None and va != 0.0:
            rel = (vb - va) / abs(va)
        rows.append((label, key, va, vb, rel))
    Ta, Tb = a.fields["temperature"], b.fields["temperature"]
    interpolated = Ta.shape != Tb.shape or not np.allclose(a.z, b.z, rtol=0.0, atol=1e-12)
    if interpolated:            # another grid (or rows refined towards the walls)
        from convsim.model.grid import interpolate_points
        Tb = interpolate_points(b.x, b.z, Tb, a.x, a.z, aspect_a)
    diff = Tb - Ta
    return Comparison(paths=(Path(path_a), Path(path_b)), runs=(a, b), rows=rows,
                      physical=(_physical(a, fa), _physical(b, fb)), temperature_b_on_a=Tb,
                      difference=diff, max_abs_difference=float(np.max(np.abs(diff))),
                      rms_difference=float(np.sqrt(np.mean(diff * diff))),
                      interpolated=interpolated)
