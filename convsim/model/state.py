"""The model state: the advected fields by name, the flow, and what SBDF2 needs of the past.

Plain data (arrays and numbers), so that a run continues bit for bit from it:
``to_record`` flattens it into {name: array or number} for the run file's
restart group and ``from_record`` reads it back.  Record keys, for every
advected field f (see ``convsim.model.fields``): ``f`` (f^n), ``previous_f``
(f^{n-1}), ``previous_explicit_f`` (N_f^{n-1}); then ``psi``, ``time``,
``step``, ``previous_dt``, ``previous_psi`` (psi^{n-1}), ``earlier_psi`` (psi^{n-2}),
``earlier_dt`` (t_{n-1} - t_{n-2}) and the Stokes solver's cache
as ``solver_*`` (opaque here: only the solver reads it).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["ModelState", "to_record", "from_record"]


@dataclass
class ModelState:
    """Everything needed to continue a run bit for bit (plain arrays and numbers).

    Attributes
    ----------
    time : float
        t_n, in d^2/kappa.
    step : int
    fields : dict
        Advected field name -> cell values (nz, nx) at t_n ('temperature' always).
    psi : ndarray, shape (nz + 1, nx + 1)
        Streamfunction of the fields at t_n.
    previous : dict or None
        Field name -> values at t_{n-1} (None: no history, the next step is first order).
    previous_explicit : dict or None
        Field name -> explicit term N^{n-1} = -div(u f) + S at t_{n-1}.
    previous_dt : float
        t_n - t_{n-1} (0: none).
    solver : dict
        The Stokes solver's cache (``StokesSolver.state()``).
    previous_psi : ndarray or None
        Streamfunction at t_{n-1} (the start of the next flow solve is extrapolated from it).
    earlier_psi : ndarray or None
        Streamfunction at t_{n-2} (for the quadratic extrapolation of the flow).
    earlier_dt : float
        t_{n-1} - t_{n-2} (0: none).
    """

    time: float
    step: int
    fields: dict
    psi: np.ndarray
    previous: dict | None = None
    previous_explicit: dict | None = None
    previous_dt: float = 0.0
    solver: dict = field(default_factory=dict)
    previous_psi: np.ndarray | None = None
    earlier_psi: np.ndarray | None = None
    earlier_dt: float = 0.0

    @property
    def temperature(self) -> np.ndarray:
        """T^n, shape (nz, nx)."""
        return self.fields["temperature"]


def to_record(state: ModelState) -> dict:
    """The state as a flat {name: array or number} (None where there is no history)."""
    out = {}
    for name, values in state.fields.items():
        out[name] = values
        out[f"previous_{name}"] = None if state.previous is None else state.previous[name]
        out[f"previous_explicit_{name}"] = (None if state.previous_explicit is None
                                            else state.previous_explicit[name])
    out.update(psi=state.psi, time=state.time, step=state.step, previous_dt=state.previous_dt,
               previous_psi=state.previous_psi, earlier_psi=state.earlier_psi,
               earlier_dt=state.earlier_dt)
    out.update({f"solver_{k}": v for k, v in state.solver.items()})
    return out


def _legacy(record: dict) -> dict:
    """Keys of run files written before the fields had names (temperature only)."""
    record = dict(record)
    if "previous_tendency" in record and "previous_explicit_temperature" not in record:
        record["previous_explicit_temperature"] = record.pop("previous_tendency")
    if "factor_weights" in record and not any(k.startswith("solver_") for k in record):
        record["solver_factor_weights"] = record.pop("factor_weights")
    return record


def from_record(record: dict, names) -> ModelState:
    """The state of ``to_record`` for the advected fields ``names``.

    A missing field raises ``KeyError`` naming it.  History is kept only when
    every field has it (a field without history would make the step inconsistent).
    """
    record = _legacy(record)
    missing = [n for n in names if n not in record]
    if missing:
        raise KeyError(f"restart state lacks the advected field(s) {', '.join(missing)}")
    fields = {n: np.array(record[n]) for n in names}
    previous = {n: record.get(f"previous_{n}") for n in names}
    explicit = {n: record.get(f"previous_explicit_{n}") for n in names}
    history = all(v is not None for v in (*previous.values(), *explicit.values()))
    solver = {k[len("solver_"):]: v for k, v in record.items() if k.startswith("solver_")}
    return ModelState(
        time=float(record["time"]), step=int(record["step"]), fields=fields,
        psi=np.array(record["psi"]),
        previous={n: np.array(v) for n, v in previous.items()} if history else None,
        previous_explicit={n: np.array(v) for n, v in explicit.items()} if history else None,
        previous_dt=float(record["previous_dt"]), solver=solver,
        previous_psi=None if (p := record.get("previous_psi")) is None else np.array(p),
        earlier_psi=None if (e := record.get("earlier_psi")) is None else np.array(e),
        earlier_dt=float(record.get("earlier_dt", 0.0)))
