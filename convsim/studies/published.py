"""Published steady-state benchmark values, each with its citation and exact definition.

The table holds data only; the harness (``convsim.studies.bench``) compares against it.
Each value is a ``PublishedValue`` carrying the source, the table it comes from,
the definition of the quantity in the source's own terms, and whether it was
quoted from memory (then it should be checked against the paper before a
result is published on the strength of it).

Definitions, for a unit box 0 <= x <= 1, 0 <= z <= 1 with T = 1 at the bottom
and T = 0 at the top (temperature contrast 1, length unit the depth d, time
unit d^2 / kappa, velocity unit kappa / d):

- Nusselt number  Nu = -(1/1) integral_0^1 dT/dz(x, z=1) dx / (T_bottom - T_top),
  the mean heat flux through the top surface divided by the temperature contrast
  (the conductive flux of the box is 1).
- RMS velocity  vrms = sqrt( integral_box (u^2 + w^2) dx dz / area ), in units
  kappa / d.
- Corner temperature gradients  q = -dT/dz at the top surface at a corner:
  q1 at (x = 0, z = 1), the top corner above the upwelling (the hot plume rises
  at x = 0 in the published one-cell solution); q2 at (x = 1, z = 1), above the
  downwelling.  In convsim, ``RunResult.corner_gradients[0]`` is q1 and ``[1]``
  is q2.

The acceptance tolerances at the end of this module are ours (convsim's), not
published numbers: they say how close our numbers must come to pass the bench.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Source", "PublishedValue", "BLANKENBACH_1989", "DEFINITIONS", "PUBLISHED",
           "QUANTITIES", "ACCEPTANCE", "DEFAULT_CASES", "case_file", "TOSI_2015", "Acceptance", "published_case", "known_cases"]


@dataclass(frozen=True)
class Source:
    """A publication: full citation and where in it the numbers are."""

    key: str
    authors: str
    year: int
    title: str
    journal: str
    volume: str
    pages: str
    location: str          # table / section of the numbers
    quoted_from_memory: bool
    note: str = ""

    @property
    def citation(self) -> str:
        return (f"{self.authors} ({self.year}), {self.title}, {self.journal} {self.volume}, "
                f"{self.pages}; {self.location}")


@dataclass(frozen=True)
class PublishedValue:
    """One published number with its source and definition."""

    case: str
    quantity: str          # nusselt_top | vrms | q1 | q2
    value: float
    source: Source
    definition: str

    @property
    def citation(self) -> str:
        memo = " (quoted from memory)" if self.source.quoted_from_memory else ""
        return self.source.citation + memo


BLANKENBACH_1989 = Source(
    key="blankenbach1989",
    authors=("Blankenbach, B., Busse, F., Christensen, U., Cserepes, L., Gunkel, D., Hansen, U., "
             "Harder, H., Jarvis, G., Koch, M., Marquart, G., Moore, D., Olson, P., Schmeling, H. "
             "and Schnaubelt, T."),
    year=1989,
    title="A benchmark comparison for mantle convection codes",
    journal="Geophys. J. Int.",
    volume="98",
    pages="23-38",
    location="table of best estimates (extrapolated from the participants' results) "
             "for the steady cases 1a, 1b, 1c, 2a and 2b",
    quoted_from_memory=True,
    note="values quoted from memory; check them against the paper's table before relying "
         "on a comparison in a publication",
)

DEFINITIONS = {
    "nusselt_top": "Nu: mean heat flux -dT/dz through the top surface z = 1, averaged over "
               "0 <= x <= 1, divided by the temperature contrast (unit box: conductive Nu = 1)",
    "vrms": "vrms = sqrt(mean over the box of u^2 + w^2), in units kappa / d",
    "q1": "q1 = -dT/dz at the top corner (x = 0, z = 1), above the upwelling",
    "q2": "q2 = -dT/dz at the top corner (x = 1, z = 1), above the downwelling",
}

QUANTITIES = ("nusselt_top", "vrms", "q1", "q2")

CASE_SETUP = {
    "1a": "constant viscosity, Ra = 1e4",
    "1b": "constant viscosity, Ra = 1e5",
    "1c": "constant viscosity, Ra = 1e6",
    "2a": "eta = exp(-ln(1000) T) (contrast 1000), Ra = 1e4 at the viscosity of the cold top",
    "2b": "aspect 2.5, eta = exp(-ln(16384) T + ln(64) (1 - z)), Ra = 1e4 at the viscosity of "
          "the cold top (T = 0, z = 1); one cell",
}

_TABLE = {  # case: (Nu, vrms, q1, q2); Blankenbach et al. (1989), best estimates, from memory
    "1a": (4.884409, 42.864947, 8.059384, 0.588810),
    "1b": (10.534095, 193.21454, 19.079440, 0.722751),
    "1c": (21.972465, 833.98977, 45.964332, 0.877110),
    "2a": (10.0660, 480.4334, 17.53136, 1.00851),
    "2b": (6.9299, 171.755, None, None),    # Nu and vrms only (the corner values not recalled)
}

#: the cases ``convsim bench`` runs when none is named (2b and lid1 are run by name)
DEFAULT_CASES = ("1a", "1b", "1c", "2a")

TOSI_2015 = Source(
    key="tosi2015",
    authors="Tosi, N. and others",
    year=2015,
    title="A community benchmark for viscoplastic thermal convection in a 2-D square box",
    journal="Geochem. Geophys. Geosyst.",
    volume="16",
    pages="2175-2196",
    location="case 1: Ra = 100 at the cold top, viscosity contrast 1e5 in T, no yielding",
    quoted_from_memory=True,
    note="set-up from memory and no value compared (none recalled reliably): the bench runs "
         "the grid-convergence study only",
)
CASE_SETUP["lid1"] = ("stagnant lid: eta = exp(-ln(1e5) T), Ra = 100 at the cold top, unit box "
                      "(Tosi et al. 2015, case 1; set-up from memory; no published value compared)")
#: config file names that do not follow ``benchmark_case_<case>.toml``
CASE_FILES = {"lid1": "benchmark_viscoplastic_case1.toml"}

PUBLISHED = {
    case: {q: PublishedValue(case, q, value, BLANKENBACH_1989, DEFINITIONS[q])
           for q, value in zip(QUANTITIES, values) if value is not None}
    for case, values in _TABLE.items()
}
PUBLISHED["lid1"] = {}          # a case with a convergence study and no published value

# -- the viscoplastic cases of Tosi et al. (2015) (cases 2 and 3; studies/viscoplastic.py) ---------
from convsim.studies.viscoplastic import CASES as _VP_CASES   # noqa: E402 (data of its own block)

for _case, (_file, _setup) in _VP_CASES.items():
    CASE_SETUP[_case] = _setup
    CASE_FILES[_case] = _file
    PUBLISHED[_case] = {}       # no value recalled reliably: the convergence study is the evidence


@dataclass(frozen=True)
class Acceptance:
    """Our pass rule for one quantity (convsim's own acceptance, not a published number).

    finest : largest |relative error| of the finest grid against the published value.
    extrapolated : largest |relative error| of the Richardson-extrapolated value.
    min_order : smallest acceptable observed order (0: not checked).
    """

    finest: float
    extrapolated: float
    min_order: float = 0.0


# convsim's acceptance (our choice): the scheme is second order, so Nu should converge at an
# observed order near 2 and its extrapolation land within 0.1 % of the best estimates; the
# corner gradients are point values of a derivative, looser.
ACCEPTANCE = {
    "nusselt_top": Acceptance(finest=0.01, extrapolated=0.001, min_order=1.8),
    "vrms": Acceptance(finest=0.01, extrapolated=0.001),
    "q1": Acceptance(finest=0.02, extrapolated=0.005),
    "q2": Acceptance(finest=0.02, extrapolated=0.005),
}


def case_file(case: str) -> str:
    """The file name of a case's config (in convsim/studies/cases/, linked from configs/)."""
    return CASE_FILES.get(case, f"benchmark_case_{case}.toml")


def known_cases() -> tuple:
    """The case names with published values, in order."""
    return tuple(PUBLISHED)


def published_case(case: str) -> dict:
    """{quantity: PublishedValue} of a case; KeyError lists the known ones."""
    try:
        return PUBLISHED[case]
    except KeyError:
        raise KeyError(f"case {case!r}: no published values; known: {', '.join(PUBLISHED)}") \
            from None
