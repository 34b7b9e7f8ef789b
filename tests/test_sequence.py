"""Grid sequencing of a time-dependent run (convsim/run/sequence.py, issue 10).

The coarse run is replaced by a stand-in that ends as told with a linear temperature field,
so that only the sequencing decisions are under test (the coarse runs of a real stagnant
lid take minutes: benchmarks/stagnant_lid_mean.py).  Reference: bilinear interpolation
reproduces a linear function exactly between the coarse cell centres and holds the nearest
centre's value beyond them (convsim.model.grid.interpolate_cells; analytic).
"""

from types import SimpleNamespace

import numpy as np
import pytest

from convsim.config import parse_config
from convsim.model.grid import Grid
from convsim.run import controller, sequence

STATISTICAL = {"domain": {"nx": 32, "nz": 16, "aspect": 2.0},
               "start": {"coarse_grid": 8},
               "stop": {"mean_precision": 0.02, "max_steps": 1000}}


def _linear(x, z):
    return 0.3 + 0.1 * x + 0.5 * z


@pytest.fixture
def coarse_runs(monkeypatch):
    """Replace the coarse run: it ends with (status, settled) set by the test."""
    seen = {}

    def from_config(cfg, *args, **kwargs):
        seen["config"] = cfg
        g = Grid(cfg.domain.nx, cfg.domain.nz, cfg.domain.aspect)
        X, Z = g.cell_mesh()
        result = SimpleNamespace(status=seen["end"][0], settled=seen["end"][1],
                                 temperature=_linear(X, Z), nusselt_top=3.0, steps=10,
                                 time=1.0, vrms=seen.get("vrms", 10.0))
        return SimpleNamespace(run=lambda: result)

    monkeypatch.setattr(controller.Simulation, "from_config", staticmethod(from_config))
    return seen


@pytest.mark.parametrize("end", [("mean-precision", "statistically-steady"),
                                 ("steady", "steady")])
def test_a_statistically_steady_coarse_run_starts_the_fine_grid(coarse_runs, end):
    cfg = parse_config(STATISTICAL, source="test")
    fine = Grid(32, 16, 2.0)
    coarse_runs["end"] = end
    T = sequence.coarse_temperature(cfg, fine)
    used = coarse_runs["config"]
    assert (used.domain.nx, used.domain.nz) == (16, 8)          # half the cells
    assert used.stop.mean_precision == 0.02                     # the coarse run keeps the rule
    assert used.stop.steady                                     # as the config says
    coarse = Grid(16, 8, 2.0)
    xc, zc = coarse.x_cell, coarse.z_cell
    X, Z = fine.cell_mesh()
    expected = _linear(np.clip(X, xc[0], xc[-1]), np.clip(Z, zc[0], zc[-1]))
    np.testing.assert_allclose(T, expected, rtol=1e-12, atol=1e-12)


def test_the_coarse_run_of_a_statistical_run_keeps_its_steady_key(coarse_runs):
    coarse_runs["end"] = ("mean-precision", "statistically-steady")
    data = {**STATISTICAL, "stop": {**STATISTICAL["stop"], "steady": False}}
    sequence.coarse_temperature(parse_config(data, source="test"), Grid(32, 16, 2.0))
    assert not coarse_runs["config"].stop.steady
    # a run without time means still needs a steady coarse state (the rule is switched on)
    data = {**STATISTICAL, "stop": {"steady": False, "max_steps": 1000}}
    sequence.coarse_temperature(parse_config(data, source="test"), Grid(32, 16, 2.0))
    assert coarse_runs["config"].stop.steady


@pytest.mark.parametrize("end", [("step-limit", "unfinished"), ("interrupted", "unfinished"),
                                 ("end-time", "unfinished")])
def test_an_unfinished_coarse_run_leaves_the_config_start(coarse_runs, end):
    coarse_runs["end"] = end
    assert sequence.coarse_temperature(parse_config(STATISTICAL, source="test"),
                                       Grid(32, 16, 2.0)) is None


def test_a_coarse_run_without_flow_leaves_the_config_start(coarse_runs):
    """A steady coarse state without flow (the conductive state) is not handed on."""
    coarse_runs["end"], coarse_runs["vrms"] = ("steady", "steady"), 1e-9
    assert sequence.coarse_temperature(parse_config(STATISTICAL, source="test"),
                                       Grid(32, 16, 2.0)) is None


def test_an_early_newton_on_the_coarse_grid_does_not_hand_on_conduction(case_config):
    """Case 1a with the Newton finish from step 50 (newton_threshold = 1e3): on 32 x 32 it
    solves to the conductive state (Nu = 1), so 64 x 64 keeps its own perturbed start and
    reaches the published one-cell flow, Nu within 1 % of Blankenbach et al. (1989) 4.884409
    (quoted from memory in convsim/studies/published.py)."""
    from convsim import api
    from convsim.studies.published import PUBLISHED
    cfg = case_config("1a", "domain.nx=64", "domain.nz=64", "stop.newton_threshold=1e3",
                      "start.coarse_grid=32")
    result = api.run(cfg)
    published = PUBLISHED["1a"]["nusselt_top"].value
    assert result.status == "steady"
    assert abs(result.nusselt_top / published - 1.0) < 0.01


@pytest.mark.parametrize("case", ["1a", "1b"])
def test_a_sequenced_published_case_has_its_flow_on_its_coarse_grid(case_config, case):
    """The premise of ``start.coarse_grid`` in the published steady cases (DEVELOPERS.md, "Grid
    sequencing for the steady cases"): the coarse grid already has the published steady flow,
    its top Nusselt number within 1 % of the published value (Blankenbach et al. 1989, quoted
    from memory in convsim/studies/published.py), so every finer grid starts in its basin."""
    from convsim import api
    from convsim.studies.published import PUBLISHED
    n = case_config(case).start.coarse_grid
    assert n > 0
    result = api.run(case_config(case, f"domain.nx={n}", f"domain.nz={n}"))
    published = next(v.value for q, v in PUBLISHED[case].items() if q.startswith("nusselt"))
    assert result.status == "steady"
    assert abs(result.nusselt_top / published - 1.0) < 0.01


@pytest.mark.parametrize("source, target", [((16, 16, 1.0, 0.0), (24, 24, 1.0, 0.0)),
                                            ((32, 16, 2.0, 1.0), (64, 32, 2.0, 1.0)),
                                            ((12, 10, 1.5, 0.0), (7, 9, 1.0, 0.5))])
def test_cell_interpolation_is_scipys_bilinear_interpolation(source, target):
    """interpolate_cells (numpy) against the reference library: scipy's
    RegularGridInterpolator (linear) on the same clipped target points, on a random field,
    across grids of other sizes, aspects and refined rows; and exact for a bilinear
    function a + b x + c z + d x z inside the source centres (calculus)."""
    from scipy.interpolate import RegularGridInterpolator
    from convsim.model.grid import interpolate_cells
    src, dst = (Grid(nx, nz, aspect, wall_refinement=beta) for nx, nz, aspect, beta
                in (source, target))
    field = np.random.default_rng(7).standard_normal(src.cell_shape)
    xs = src.x_cell * (dst.aspect / (src.x_cell[-1] + 0.5 * (src.x_cell[1] - src.x_cell[0])))
    zs = src.z_cell
    Z, X = np.meshgrid(np.clip(dst.z_cell, zs[0], zs[-1]), np.clip(dst.x_cell, xs[0], xs[-1]),
                       indexing="ij")
    reference = RegularGridInterpolator((zs, xs), field)(np.stack([Z.ravel(), X.ravel()], 1))
    np.testing.assert_allclose(interpolate_cells(src.x_cell, src.z_cell, field, dst),
                               reference.reshape(dst.cell_shape), rtol=0, atol=1e-13)
    XS, ZS = np.meshgrid(xs, zs)
    bilinear = interpolate_cells(src.x_cell, src.z_cell, 0.3 + 0.2 * XS - 0.7 * ZS + 0.5 * XS * ZS,
                                 dst)
    np.testing.assert_allclose(bilinear, 0.3 + 0.2 * X - 0.7 * Z + 0.5 * X * Z, atol=1e-14)
