"""Advected fields, each declared once: what it is, where it lives, how it moves.

Every advected field f (the temperature, a passive dye) obeys

    df/dt + div(u f) = kappa_f lap f + S_f,                                    (1)

with kappa_f its diffusivity over the thermal diffusivity (0: advection only), S_f a
uniform source (the internal heating for the temperature), and boundary
conditions on z = 0 and z = 1 of fixed value or fixed upward flux -kappa df/dz
(``ThermalBoundaries``); side walls are insulating or periodic like the box.  A
field adds buoyancy Ra * buoyancy * df/dx to the Stokes forcing (1 for the
temperature, 0 for a passive dye).

The declaration travels everywhere the field goes: ``Model.step`` advances every
declared field with the same IMEX code; the run file, its XDMF sidecar, the
restart group, ``convsim info`` and ``convsim plot`` read the name, units,
long_name and CF attributes from ``ADVECTED`` (and the run file's own
attributes).  To add a field, add one ``FieldDeclaration`` to ``ADVECTED`` and a
way to switch it on (see DEVELOPERS.md, "How to add an advected field").
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid

__all__ = ["FieldDeclaration", "ADVECTED", "INSULATED", "declared", "temperature_field",
           "dye_field", "DerivedField", "DERIVED"]

#: No flux through the top and bottom (side walls follow the box: insulating or periodic).
INSULATED = ThermalBoundaries("flux", 0.0, "flux", 0.0)


@dataclass(frozen=True)
class FieldDeclaration:
    """One advected cell-centred field of equation (1).

    Attributes
    ----------
    name : str
        Key in the model state, the run file and the figures (lower case, ASCII).
    units : str
        CF units string ("1": nondimensional).
    long_name : str
        One line saying what the field is (CF ``long_name``).
    cf : dict
        Further CF attributes written with the field (``standard_name`` where one exists).
    location : {'cell'}
        Where the values live (cell centres; the only place advected fields live now).
    diffusivity : float
        kappa_f / kappa, >= 0 (0: advection only, no diffusion solve).
    boundaries : ThermalBoundaries
        Value or upward flux -df/dz on the bottom and top walls.
    source : float
        Uniform source S_f (per unit time d^2/kappa).
    buoyancy : float
        Weight of the field in the buoyancy force, Ra * buoyancy * df/dx (0: passive).
    colormap : str
        Name of the house colour map the figures draw it with (``convsim.figures.style``).
    start : callable or None
        Grid -> initial cell values (nz, nx); None: zero (the temperature's start is
        given to the model separately).
    """

    name: str
    units: str
    long_name: str
    cf: dict = field(default_factory=dict)
    location: str = "cell"
    diffusivity: float = 0.0
    boundaries: ThermalBoundaries = INSULATED
    source: float = 0.0
    buoyancy: float = 0.0
    colormap: str = "dye"
    start: Callable | None = None

    def __post_init__(self):
        if self.diffusivity < 0.0:
            raise ValueError(f"field {self.name!r}: diffusivity = {self.diffusivity!r}, "
                             f"allowed >= 0")
        if self.location != "cell":
            raise ValueError(f"field {self.name!r}: location = {self.location!r}, allowed 'cell'")

    def initial(self, grid: Grid) -> np.ndarray:
        """The starting cell values, shape (nz, nx)."""
        if self.start is None:
            return np.zeros(grid.cell_shape)
        values = np.asarray(self.start(grid), dtype=float)
        return np.broadcast_to(values, grid.cell_shape).copy()

    def replace(self, **changes) -> "FieldDeclaration":
        """The same declaration with per-run values (diffusivity, boundaries, source) set."""
        return dataclasses.replace(self, **changes)


#: Every advected field convsim knows, by name; a run uses the temperature and any others
#: its config switches on, with the per-run values set through ``FieldDeclaration.replace``.
ADVECTED = {
    "temperature": FieldDeclaration(
        "temperature", "1", "temperature (T - T_top) / contrast, cell centres",
        diffusivity=1.0, boundaries=ThermalBoundaries(), buoyancy=1.0, colormap="temperature"),
    "dye": FieldDeclaration(
        "dye", "1", "passive dye concentration (advected, no buoyancy), cell centres",
        cf={"comment": "tracer of material paths; starts as configured in [tracer]"},
        diffusivity=0.0, boundaries=INSULATED, buoyancy=0.0, colormap="dye"),
}


def declared(name: str) -> FieldDeclaration:
    """The declaration of a field by name; an unknown name lists the known ones."""
    if name not in ADVECTED:
        raise KeyError(f"advected field {name!r}: unknown; known: {', '.join(ADVECTED)}")
    return ADVECTED[name]


def temperature_field(thermal: ThermalBoundaries, heating: float = 0.0) -> FieldDeclaration:
    """The temperature with a run's thermal boundary conditions and internal heating H."""
    return ADVECTED["temperature"].replace(boundaries=thermal, source=float(heating))


def dye_field(diffusivity: float = 0.0, start: Callable | None = None) -> FieldDeclaration:
    """The passive dye with a run's diffusivity and start (insulating walls: the total dye
    is conserved); ``start`` from ``convsim.model.dye`` (a layer, a blob, an expression)."""
    return ADVECTED["dye"].replace(diffusivity=float(diffusivity), start=start)


@dataclass(frozen=True)
class DerivedField:
    """A snapshot field computed from the state (not advected), written only by the runs it
    applies to.

    Attributes
    ----------
    name, units, long_name, cf : as in ``FieldDeclaration`` (a long_name ending in
        ", units S" names the nondimensional scale S of the run file's attributes).
    needs : str
        What a run must have for the field to exist: "yielding" (a law whose yielding
        modifier is active, ``convsim.model.plates.yields``).
    dtype : str
        numpy dtype of the stored values ("f8"; "i1" for a 0/1 flag).
    colormap : str
        House colour map of the figures (``convsim.figures.style``).
    """

    name: str
    units: str
    long_name: str
    needs: str
    cf: dict = field(default_factory=dict)
    dtype: str = "f8"
    colormap: str = "strain"


#: Derived cell fields of a run whose law yields (values: ``convsim.model.plates.yield_fields``);
#: the viscosity itself is a snapshot field of every run.
DERIVED = {
    "strain_rate": DerivedField(
        "strain_rate", "1", "strain-rate invariant e_II = sqrt(e_ij e_ij / 2), cell centres, "
        "units kappa/d^2", needs="yielding"),
    "stress": DerivedField(
        "stress", "1", "deviatoric stress invariant sigma_II = 2 eta e_II, cell centres, "
        "units eta_ref kappa/d^2", needs="yielding"),
    "yielded": DerivedField(
        "yielded", "1", "yielded cells: the plastic viscosity below the linear law's, cell "
        "centres", needs="yielding", dtype="i1",
        cf={"flag_values": np.array([0, 1], dtype="i1"),
            "flag_meanings": "not_yielded yielded"}),
}
