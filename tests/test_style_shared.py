"""The onset, bench and sweep figures are drawn through the shared style (convsim.figures.style).

External references used below:
- Okabe & Ito (2008), Color Universal Design: the line colours (checked against
  matplotlib's own ``okabe_ito`` map in tests/test_figures.py);
- the critical Rayleigh number of a layer between free-slip, isothermal walls,
  Ra_c = 27 pi^4 / 4 = 657.511 at k_c = pi / sqrt(2) (Rayleigh 1916; Chandrasekhar
  1961, Hydrodynamic and Hydromagnetic Stability, ch. II; quoted from memory);
- Blankenbach et al. (1989), Table 9, Nu of cases 1a-1c (quoted from memory);
- 300 dpi and one column of 3.5 in: common practice for journal figures.
"""

from __future__ import annotations

import ast
import math
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from matplotlib import colors as mcolors
from matplotlib.layout_engine import ConstrainedLayoutEngine
from matplotlib.text import Text

from convsim.figures import bench as figures_bench
from convsim.figures import onset as figures_onset
from convsim.figures import sweep as figures_sweep
from convsim.analysis import stability
from convsim.figures import style
from convsim.analysis.fitting import fit_power_law

PACKAGE = Path(__file__).resolve().parent.parent / "convsim"
MODULES = ("onset", "bench", "sweep", "fields", "animation")
RA_C, K_C = 27.0 * math.pi**4 / 4.0, math.pi / math.sqrt(2.0)
BLANKENBACH_RA = np.array([1e4, 1e5, 1e6])
BLANKENBACH_NU = np.array([4.884409, 10.534095, 21.972465])


# -- inputs ------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def onset():
    return stability.analyse_onset(1.0e4, aspect=1.0, wavenumbers=np.linspace(1.0, 8.0, 15))


def _bracket():
    """A stand-in RunBracket: rates s = (Ra - Ra_c) / Ra_c on two grids (duck-typed)."""
    ra = RA_C * np.array([0.8, 0.9, 1.0, 1.1, 1.2])
    coarse = SimpleNamespace(grid=(24, 12), rayleigh=ra, rates=ra / RA_C - 1.02)
    return SimpleNamespace(theory_curve=(ra, ra / RA_C - 1.0), wavenumber=math.pi, mode=1,
                           grid=(48, 24), rayleigh=ra, rates=ra / RA_C - 1.005, coarse=coarse,
                           eigen_critical_rayleigh=RA_C, critical_rayleigh=1.005 * RA_C,
                           relative_difference=0.005, extrapolated_rayleigh=1.0003 * RA_C,
                           extrapolated_difference=0.0003)


def _bench():
    """Relative errors 2 h^2 .. on three grids, the coarsest not steady."""
    rows = [{"h": 1.0 / n, "status": "steady" if n > 8 else "step-limit",
             "wall_seconds": n / 8.0,
             "relative_error": {"nusselt_top": 2.0 / n**2, "vrms": -1.0 / n**2, "q1": 3.0 / n,
                                "q2": None}} for n in (8, 16, 32)]
    return {"cases": [{"case": "1a", "rows": rows}, {"case": "1b", "rows": rows}]}


def _series():
    fit = fit_power_law(BLANKENBACH_RA, BLANKENBACH_NU)
    return [("", BLANKENBACH_RA, BLANKENBACH_NU, fit)]


BUILDERS = {
    "neutral curve": lambda onset: figures_onset.neutral_curve_figure(onset),
    "growth rates": lambda onset: figures_onset.growth_rate_figure(_bracket()),
    "convergence": lambda onset: figures_bench.convergence_plot(_bench()),
    "cost": lambda onset: figures_bench.cost_plot(_bench()),
    "scaling": lambda onset: figures_sweep.scaling_plot(
        _series(), x_label="Ra", y_label="Nu", reference_slope=1.0 / 3.0,
        excluded=([1e7], [30.0])),
    "regime map": lambda onset: figures_sweep.regime_map_plot(
        [1e4, 1e5, 1e6, 1e5], [1.0, 1e3, 1e5, 10.0],
        ["mobile", "sluggish", "stagnant-lid", "unclassified"], thresholds_text="M >= 0.6"),
}


# -- the modules go through convsim.figures.style --------------------------------------------------------
@pytest.mark.parametrize("name", MODULES)
def test_module_imports_the_style_and_keeps_no_style_of_its_own(name):
    source = (PACKAGE / "figures" / f"{name}.py").read_text()
    tree = ast.parse(source)
    imported = {alias.name for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)
                and node.module == "convsim.figures" for alias in node.names}
    assert "style" in imported
    module_names = {t.id for node in tree.body if isinstance(node, ast.Assign)
                    for t in node.targets if isinstance(t, ast.Name)}
    assert "STYLE" not in module_names
    calls = {node.func.attr if isinstance(node.func, ast.Attribute) else getattr(node.func, "id", "")
             for node in ast.walk(tree) if isinstance(node, ast.Call)}
    # figures are made by style.new_figure and written by style.save / style.save_file
    assert not calls & {"savefig", "Figure", "FigureCanvasAgg", "rc_context", "set_fontsize"}
    assert "#" not in "".join(n.value for n in ast.walk(tree) if isinstance(n, ast.Constant)
                              and isinstance(n.value, str) and n.value.startswith("#"))
    assert "tab:" not in source


@pytest.mark.parametrize("what", list(BUILDERS))
def test_figure_is_in_the_house_style(what, onset):
    fig = BUILDERS[what](onset)
    assert fig.get_figwidth() in (style.COLUMN_WIDTH, style.PAGE_WIDTH)
    # laid out once, then frozen (style.freeze_layout): no layout engine left running
    assert not isinstance(fig.get_layout_engine(), ConstrainedLayoutEngine)
    allowed = {mcolors.to_hex(c) for c in style.LINE_COLORS + (style.GUIDE_COLOR,)}
    lines = [line for ax in fig.axes for line in ax.get_lines()]
    assert lines
    for line in lines:
        assert mcolors.to_hex(line.get_color()) in allowed, (what, line.get_label())
        assert line.get_marker() in style.MARKERS + ("x", "None", "none", "")
    sizes = {t.get_fontsize() for t in fig.findobj(Text) if t.get_visible() and t.get_text()}
    assert sizes <= {style.RC["font.size"], style.RC["legend.fontsize"]}, sizes
    families = {t.get_fontfamily()[0] for t in fig.findobj(Text) if t.get_text()}
    assert families <= {"sans-serif", "DejaVu Sans"}
    assert fig.legends or any(ax.get_legend() for ax in fig.axes)
    pixels = style.to_rgba_array(fig)[..., :3].astype(float)
    assert pixels.var() > 0.0


def test_plotted_data_are_the_inputs(onset):
    fig = figures_onset.neutral_curve_figure(onset)
    lines = {line.get_label(): line for line in fig.axes[0].get_lines()}
    curve = lines[r"neutral curve $\mathrm{Ra}(k)$"]
    np.testing.assert_array_equal(curve.get_xdata(), onset.wavenumbers)
    np.testing.assert_array_equal(curve.get_ydata(), onset.neutral_rayleigh)
    (layer,) = [line for label, line in lines.items() if label.startswith("layer")]
    assert layer.get_xdata()[0] == pytest.approx(K_C, rel=1e-3)
    assert layer.get_ydata()[0] == pytest.approx(RA_C, rel=1e-4)

    fig = figures_bench.convergence_plot(_bench())
    nu = [line for line in fig.axes[0].get_lines() if line.get_label() == "Nu"][0]
    np.testing.assert_allclose(nu.get_xdata(), [1 / 8, 1 / 16, 1 / 32])
    np.testing.assert_allclose(nu.get_ydata(), [2 / 64, 2 / 256, 2 / 1024])

    fig = figures_sweep.scaling_plot(_series(), x_label="Ra", y_label="Nu")
    points = [line for line in fig.axes[0].get_lines() if line.get_linestyle() == "None"][0]
    np.testing.assert_array_equal(points.get_ydata(), BLANKENBACH_NU)


# -- deterministic files -----------------------------------------------------------------------
def _written_twice(tmp_path, write):
    for name in ("a", "b"):
        (tmp_path / name).mkdir()
    paths = [write(tmp_path / name) for name in ("a", "b")]
    return [Path(p) for p in paths]


@pytest.mark.parametrize("what", ["onset", "bench", "sweep"])
def test_svg_is_the_same_bytes_twice_and_dateless(what, onset, tmp_path):
    if what == "onset":
        first, second = _written_twice(
            tmp_path, lambda d: figures_onset.plot_neutral_curve(onset, d / "curve.svg"))
    elif what == "bench":
        first, second = _written_twice(
            tmp_path, lambda d: style.save(figures_bench.convergence_plot(_bench()),
                                           d / "convergence", ("svg",))[0])
    else:
        first, second = _written_twice(
            tmp_path, lambda d: figures_sweep.scaling_figure(d / "nu.svg", _series(),
                                                             x_label="Ra", y_label="Nu"))
    assert first.read_bytes() == second.read_bytes()
    assert b"<svg" in first.read_bytes()[:2000] and b"<dc:date>" not in first.read_bytes()
    assert not [p for p in tmp_path.rglob("*") if ".part" in p.name]


def test_bench_writer_gives_the_same_pdf_twice_and_one_column_png(tmp_path, onset):
    paths = [figures_bench.convergence_figure(_bench(), tmp_path / name) for name in "ab"]
    assert [p.suffix for p in paths[0]] == [".png", ".pdf"]
    for first, second in zip(*paths):
        assert first.read_bytes() == second.read_bytes(), first.suffix
    assert b"/CreationDate" not in paths[0][1].read_bytes()
    from PIL import Image
    path = figures_onset.plot_neutral_curve(onset, tmp_path / "curve.png")
    with Image.open(path) as im:
        assert im.size[0] == round(style.COLUMN_WIDTH * style.RC["savefig.dpi"])


def test_save_file_names_the_path_and_the_formats_it_allows(onset, tmp_path):
    with pytest.raises(ValueError, match=r"curve\.jpg.*\.png, \.pdf, \.svg"):
        figures_onset.plot_neutral_curve(onset, tmp_path / "curve.jpg")
    assert not any(tmp_path.iterdir())
