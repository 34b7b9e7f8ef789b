"""Figures of a run file: files written, images not blank, plotted data = data in the file.

External references used below:
- streamlines of a 2D incompressible flow are the level lines of the
  streamfunction psi, u = dpsi/dz, w = -dpsi/dx (any fluid-dynamics text,
  e.g. Batchelor 1967, An Introduction to Fluid Dynamics, sec. 2.2);
  contour vertices are checked against bilinear interpolation of psi (scipy);
- hand arithmetic for the physical units (the [body] of the invented moon
  Quellis, configs/quellis_ice_shell.toml): T_dim = T_s + dT T,
  q_dim = Nu k dT / d, lengths d x, time d^2/kappa in Julian years;
- CIE 1976 L* from sRGB (IEC 61966-2-1) for the colour-map lightness checks;
- Okabe & Ito (2008), Color Universal Design, for the line colours
  (hex values quoted from memory).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest


from matplotlib import colors as mcolors  # noqa: E402
from matplotlib.collections import QuadMesh  # noqa: E402
from matplotlib.image import AxesImage  # noqa: E402
from matplotlib.contour import ContourSet  # noqa: E402
from matplotlib.quiver import Quiver  # noqa: E402

from convsim.figures import animation
from convsim.figures import fields as figures
from convsim.figures import style  # noqa: E402
from convsim.cli import main  # noqa: E402
from convsim.errors import ConfigError  # noqa: E402
from convsim.files.reader import read_run  # noqa: E402

# The invented moon's [body] (configs/quellis_ice_shell.toml), SI, for hand arithmetic.
D, DT, TS, K_COND, KAPPA = 30000.0, 170.0, 100.0, 2.3, 1.5e-6
ETA_REF = 5.855616e16          # at the cold top, so that the body's Ra is 1e4 (tests/conftest.py)
YEAR = 365.25 * 86400.0


def _meshes(fig, label=None):
    """The drawn fields: QuadMesh (cell shading) or AxesImage (smooth shading)."""
    found = [a for ax in fig.axes for a in list(ax.collections) + list(ax.images)
             if isinstance(a, (QuadMesh, AxesImage))]
    return [m for m in found if label is None or m.get_label() == label]


def _png_pixels(path: Path) -> np.ndarray:
    from PIL import Image
    with Image.open(path) as im:
        return np.asarray(im.convert("RGB"), dtype=float)


# -- the plot command -------------------------------------------------------------------------
def test_plot_command_writes_every_figure_in_every_format(constant_run, tmp_path, capsys):
    out = tmp_path / "figs"
    assert main(["plot", str(constant_run), "--out", str(out)]) == 0
    stem = constant_run.stem
    names = ["temperature", "profiles", "series", "summary"]  # viscosity uniform: no field
    expected = {f"{stem}_{n}.{fmt}" for n in names for fmt in ("png", "pdf", "svg")}
    assert {p.name for p in out.iterdir()} == expected
    printed = capsys.readouterr().out.split()
    assert {Path(p).name for p in printed} == expected
    for name in names:
        pixels = _png_pixels(out / f"{stem}_{name}.png")
        assert pixels.var() > 0.0, name
        assert (out / f"{stem}_{name}.pdf").read_bytes().startswith(b"%PDF")
        assert b"<svg" in (out / f"{stem}_{name}.svg").read_bytes()[:2000]


def test_plot_writes_viscosity_field_when_it_varies(body_run, tmp_path):
    out = tmp_path / "figs"
    assert main(["plot", str(body_run), "--out", str(out), "--format", "png",
                 "--snapshot", "1"]) == 0
    names = {p.name for p in out.iterdir()}
    assert f"{body_run.stem}_viscosity_s0001.png" in names
    assert f"{body_run.stem}_temperature_s0001.png" in names
    assert f"{body_run.stem}_series.png" in names
    assert _png_pixels(out / f"{body_run.stem}_viscosity_s0001.png").var() > 0.0


def test_plot_refuses_to_overwrite_and_png_is_one_column_at_300_dpi(constant_run, tmp_path,
                                                                    capsys):
    args = ["plot", str(constant_run), "--out", str(tmp_path), "--format", "png"]
    assert main(args) == 0
    pixels = _png_pixels(tmp_path / f"{constant_run.stem}_series.png")
    assert pixels.shape[1] == round(style.COLUMN_WIDTH * 300)
    before = {p: p.read_bytes() for p in tmp_path.iterdir()}
    capsys.readouterr()
    assert main(args) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "exists" in err[0] and "--overwrite" in err[0]
    assert {p: p.read_bytes() for p in tmp_path.iterdir()} == before
    assert main(args + ["--overwrite"]) == 0
    assert {p: p.read_bytes() for p in tmp_path.iterdir()} == before  # same data, same bytes


@pytest.mark.parametrize("bad", [["--format", "png,jpg"], ["--snapshot", "99"],
                                 ["--time", "5 Myr"], ["--units", "physical"]])
def test_plot_bad_input_is_one_line_exit_2(constant_run, tmp_path, capsys, bad):
    assert main(["plot", str(constant_run), "--out", str(tmp_path)] + bad) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("convsim: error:")
    assert not any(tmp_path.iterdir())


# -- plotted data equals the data in the run file -----------------------------------------------
def test_temperature_mesh_is_the_temperature_field(constant_run):
    run = read_run(constant_run)
    (image,) = _meshes(figures.temperature_figure(run), "temperature")    # smooth: an image
    np.testing.assert_array_equal(np.asarray(image.get_array()), run.fields["temperature"])
    assert isinstance(image, AxesImage) and image.origin == "lower"
    assert image.get_extent() == [run.x_node[0], run.x_node[-1], run.z_node[0], run.z_node[-1]]
    fig = figures.temperature_figure(run, shading="cells")
    (mesh,) = _meshes(fig, "temperature")
    np.testing.assert_array_equal(np.asarray(mesh.get_array()), run.fields["temperature"])
    corners = mesh.get_coordinates()  # (nz+1, nx+1, 2)
    np.testing.assert_array_equal(corners[0, :, 0], run.x_node)
    np.testing.assert_array_equal(corners[:, 0, 1], run.z_node)
    ax = mesh.axes
    assert ax.get_aspect() == 1.0
    assert "x" in ax.get_xlabel() and "z" in ax.get_ylabel()


def test_streamlines_are_contours_of_the_streamfunction(constant_run):
    from scipy.interpolate import RegularGridInterpolator
    run = read_run(constant_run)
    psi = run.fields["streamfunction"]
    fig = figures.temperature_figure(run)
    (cs,) = [a for ax in fig.axes for a in ax.collections if isinstance(a, ContourSet)]
    m = np.abs(psi).max()
    assert m > 0
    levels = np.asarray(cs.levels)
    assert levels.size >= 2 and np.all(np.abs(levels) < m) and np.all(levels != 0)
    interp = RegularGridInterpolator((run.z_node, run.x_node), psi, method="linear")
    drawn = 0
    for level, path in zip(levels, cs.get_paths()):
        if len(path.vertices) == 0:
            continue
        values = interp(path.vertices[:, ::-1])  # (x, z) -> (z, x)
        np.testing.assert_allclose(values, level, atol=1e-9 * m)
        drawn += len(path.vertices)
    assert drawn > 0


def test_arrows_are_the_velocity_from_the_streamfunction(constant_run):
    """u = dpsi/dz, w = -dpsi/dx at cell centres, by central differences of the corner psi."""
    run = read_run(constant_run)
    fig = figures.temperature_figure(run, arrows=True)
    (q,) = [a for ax in fig.axes for a in ax.collections if isinstance(a, Quiver)]
    psi = run.fields["streamfunction"]
    dx, dz = np.diff(run.x_node)[0], np.diff(run.z_node)[0]
    u = (psi[1:, :-1] + psi[1:, 1:] - psi[:-1, :-1] - psi[:-1, 1:]) / (2 * dz)
    w = -(psi[:-1, 1:] + psi[1:, 1:] - psi[:-1, :-1] - psi[1:, :-1]) / (2 * dx)
    i = np.searchsorted(run.x, np.asarray(q.X).ravel())
    j = np.searchsorted(run.z, np.asarray(q.Y).ravel())
    np.testing.assert_allclose(run.x[i], np.asarray(q.X).ravel())
    np.testing.assert_allclose(np.asarray(q.U).ravel(), u[j, i], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(np.asarray(q.V).ravel(), w[j, i], rtol=1e-12, atol=1e-12)
    assert not any(isinstance(a, ContourSet) for ax in fig.axes for a in ax.collections)


def test_viscosity_on_log_scale_when_it_varies(body_run, constant_run):
    run = read_run(body_run, 1)
    pres = figures.Presentation()
    fig = figures.viscosity_figure(run, pres=pres)
    (mesh,) = _meshes(fig, "viscosity")
    assert isinstance(mesh.norm, mcolors.LogNorm)
    np.testing.assert_array_equal(np.asarray(mesh.get_array()), run.fields["viscosity"])
    flat = figures.viscosity_figure(read_run(constant_run), pres=pres)
    (mesh,) = _meshes(flat, "viscosity")
    assert not isinstance(mesh.norm, mcolors.LogNorm)


def test_profiles_are_the_horizontal_means_from_wall_to_wall(constant_run, body_run):
    for path in (constant_run, body_run):
        run = read_run(path)
        fig = figures.profiles_figure(run, pres=figures.Presentation())
        ax_t, ax_2 = fig.axes
        (lt,), (l2,) = ax_t.get_lines(), ax_2.get_lines()
        np.testing.assert_array_equal(lt.get_xdata()[1:-1], run.fields["temperature_profile"])
        np.testing.assert_array_equal(lt.get_ydata()[1:-1], run.z)
        # the walls: the imposed temperatures (T = 1 at z = 0, T = 0 at z = 1)
        assert list(lt.get_ydata()[[0, -1]]) == [0.0, 1.0]
        assert list(lt.get_xdata()[[0, -1]]) == [1.0, 0.0]
        # the stored profile is the horizontal mean of the field (uniform grid)
        np.testing.assert_allclose(lt.get_xdata()[1:-1], run.fields["temperature"].mean(axis=1),
                                   rtol=1e-12)
        assert "t = " in ax_t.get_title(loc="left")       # which time the profiles show
    # body run: the viscosity varies, log scale, the stored profile between the walls
    np.testing.assert_array_equal(l2.get_xdata()[1:-1], run.fields["viscosity_profile"])
    assert ax_2.get_xscale() == "log"
    # uniform viscosity: the rms velocity profile instead of a flat line; its mean square over
    # the height is vrms^2 (the series' last value) to the grid's accuracy
    run = read_run(constant_run)
    (l2,) = figures.profiles_figure(run, pres=figures.Presentation()).axes[1].get_lines()
    assert l2.get_label() == "rms velocity"
    assert np.mean(l2.get_xdata() ** 2) == pytest.approx(run.series["vrms"][-1] ** 2, rel=0.05)


def test_series_lines_are_the_nusselt_and_vrms_series(constant_run):
    run = read_run(constant_run)
    fig = figures.series_figure(run)
    ax_nu, ax_v = fig.axes
    top, bottom = ax_nu.get_lines()[:2]
    (vrms,) = [line for line in ax_v.get_lines() if line.get_label() == "vrms"]
    s = run.series
    np.testing.assert_array_equal(top.get_xdata(), s["series_time"])
    np.testing.assert_array_equal(top.get_ydata(), s["nusselt_top"])
    np.testing.assert_array_equal(bottom.get_ydata(), s["nusselt_bottom"])
    np.testing.assert_array_equal(vrms.get_ydata(), s["vrms"])
    assert len(s["series_time"]) == 200
    assert "Nu" in ax_nu.get_ylabel() and "time" in ax_v.get_xlabel()


def test_physical_units_from_the_body_table(body_run):
    """[body] present: K, km, Myr, mW m^-2, cm/yr by hand arithmetic."""
    run = read_run(body_run)
    pres = figures.presentation_for(run)
    assert pres.physical
    (mesh,) = _meshes(figures.temperature_figure(run, shading="cells"), "temperature")
    np.testing.assert_allclose(np.asarray(mesh.get_array()),
                               TS + DT * run.fields["temperature"], rtol=1e-13)
    np.testing.assert_allclose(mesh.get_coordinates()[0, :, 0], run.x_node * D / 1e3,
                               rtol=1e-13)
    assert "(K)" in mesh.colorbar.ax.get_ylabel() and "km" in mesh.axes.get_xlabel()
    (vmesh,) = _meshes(figures.viscosity_figure(run), "viscosity")
    np.testing.assert_allclose(np.asarray(vmesh.get_array()), ETA_REF * run.fields["viscosity"],
                               rtol=1e-13)
    ax_nu, ax_v = figures.series_figure(run).axes
    top = ax_nu.get_lines()[0]
    np.testing.assert_allclose(top.get_ydata(), run.series["nusselt_top"] * K_COND * DT / D * 1e3,
                               rtol=1e-12)
    np.testing.assert_allclose(top.get_xdata(),
                               run.series["series_time"] * D**2 / KAPPA / (1e6 * YEAR), rtol=1e-12)
    vrms = [line for line in ax_v.get_lines() if line.get_label() == "vrms"][0]
    np.testing.assert_allclose(vrms.get_ydata(),
                               run.series["vrms"] * KAPPA / D * 100 * YEAR, rtol=1e-12)
    assert "mW" in ax_nu.get_ylabel() and "Myr" in ax_v.get_xlabel()
    # forced back to nondimensional
    (mesh,) = _meshes(figures.temperature_figure(run, pres=figures.presentation_for(
        run, "nondimensional")), "temperature")
    np.testing.assert_array_equal(np.asarray(mesh.get_array()), run.fields["temperature"])


def test_summary_sheet_holds_all_panels_and_parameters(body_run):
    run = read_run(body_run, 2)
    fig = figures.summary_figure(run)
    meshes = {m.get_label(): m for m in _meshes(fig)}
    np.testing.assert_allclose(np.asarray(meshes["temperature"].get_array()),
                               TS + DT * run.fields["temperature"], rtol=1e-13)
    assert isinstance(meshes["viscosity"].norm, mcolors.LogNorm)
    text = "\n".join(t.get_text() for sub in fig.subfigs for t in sub.texts)
    assert "Rayleigh number: 10000" in text
    assert "frank-kamenetskii" in text and "18 x 12 cells" in text
    assert f"status: {run.attrs['status']}" in text
    assert f"{run.attrs['final_nusselt_top']:.6g}" in text
    assert "snapshot shown: 2 of" in text
    assert _pixels_of(fig).var() > 0


def test_summary_shows_the_temperature_anomaly_when_viscosity_is_uniform(constant_run):
    run = read_run(constant_run)
    fig = figures.summary_figure(run, pres=figures.Presentation())
    meshes = {m.get_label(): m for m in _meshes(fig)}
    assert "viscosity" not in meshes
    anomaly = np.asarray(meshes["temperature anomaly"].get_array())
    T = run.fields["temperature"]
    np.testing.assert_allclose(anomaly, T - T.mean(axis=1, keepdims=True), atol=1e-15)
    np.testing.assert_allclose(anomaly.mean(axis=1), 0.0, atol=1e-14)  # rows average to zero
    lo, hi = meshes["temperature anomaly"].get_clim()
    assert lo == -hi == -np.abs(anomaly).max()  # symmetric about zero
    assert meshes["temperature anomaly"].cmap.name == style.DIVERGING_CMAP


def test_log_ticks_label_short_and_long_ranges():
    fig = style.new_figure()
    ax = fig.add_subplot()
    ax.set_xscale("log")
    short = figures.log_ticks(ax.xaxis, 0.25, 0.9, max_labels=4)  # less than a decade
    assert short == pytest.approx([0.3, 0.5, 0.7, 0.9])  # 1..9 series, every other one
    assert figures.log_ticks(ax.xaxis, 0.15, 3.0) == pytest.approx([0.2, 0.5, 1.0, 2.0])
    wide = figures.log_ticks(ax.xaxis, 1e-3, 1e3, max_labels=4)
    assert len(wide) <= 4 and all(math.log10(v) == round(math.log10(v)) for v in wide)
    assert figures._log_label(2e12) == "$2\\times10^{12}$"
    assert figures._log_label(1e-5) == "$10^{-5}$" and figures._log_label(0.5) == "0.5"


def _pixels_of(fig):
    return style.to_rgba_array(fig)[..., :3].astype(float)


def test_rendered_figures_are_not_blank(constant_run):
    run = read_run(constant_run)
    for make in (figures.temperature_figure, figures.viscosity_figure, figures.profiles_figure,
                 figures.series_figure):
        assert _pixels_of(make(run)).var() > 0.0, make.__name__


# -- deterministic bytes ------------------------------------------------------------------------
def test_same_data_gives_the_same_bytes(constant_run, tmp_path):
    paths = []
    for name in ("a", "b"):
        fig = figures.summary_figure(read_run(constant_run))
        paths.append(style.save(fig, tmp_path / name, ("svg", "pdf")))
    for first, second in zip(*paths):
        assert first.read_bytes() == second.read_bytes(), first.suffix
    pdf = paths[0][1].read_bytes()
    assert b"/CreationDate" not in pdf and b"/ModDate" not in pdf
    assert b"<dc:date>" not in paths[0][0].read_bytes()


# -- snapshot selection -------------------------------------------------------------------------
def test_select_snapshot_by_index_and_nearest_time(body_run):
    run = read_run(body_run)
    times = run.times
    assert figures.select_snapshot(times) == len(times) - 1
    assert figures.select_snapshot(times, snapshot=-2) == len(times) - 2
    k = 2
    assert figures.select_snapshot(times, time=str(times[k] * (1 + 1e-9))) == k
    pres = figures.presentation_for(run)
    myr = times[k] * D**2 / KAPPA / (1e6 * YEAR)
    assert figures.select_snapshot(times, time=f"{myr} Myr", presentation=pres) == k
    kyr = myr * 1e3
    assert figures.select_snapshot(times, time=f"{kyr} kyr", presentation=pres) == k
    with pytest.raises(ConfigError, match="--time"):
        figures.select_snapshot(times, time="3 kg", presentation=pres)
    with pytest.raises(ConfigError, match="--snapshot"):
        figures.select_snapshot(times, snapshot=len(times))


# -- animation ----------------------------------------------------------------------------------
def test_animation_gif_has_one_frame_per_snapshot(constant_run, tmp_path, monkeypatch, capsys):
    from PIL import Image
    import shutil
    monkeypatch.setattr(shutil, "which", lambda name: None)  # no ffmpeg: GIF through pillow
    out = tmp_path / "t.gif"
    assert main(["animate", str(constant_run), "--out", str(out), "--fps", "4"]) == 0
    count = len(read_run(constant_run).times)
    with Image.open(out) as im:
        assert im.n_frames == count
        im.seek(0)
        first = np.asarray(im.convert("RGB"), dtype=float)
        im.seek(count - 1)
        last = np.asarray(im.convert("RGB"), dtype=float)
        assert im.info.get("duration") == 250
    assert first.var() > 0 and np.abs(first - last).max() > 0
    capsys.readouterr()
    assert main(["animate", str(constant_run), "--out", str(out)]) == 2  # exists
    assert main(["animate", str(constant_run), "--out", str(tmp_path / "t.mp4")]) == 2
    assert "ffmpeg" in capsys.readouterr().err
    assert not (tmp_path / "t.mp4").exists()


def test_default_animation_is_gif_without_ffmpeg(constant_run, monkeypatch):
    import shutil
    monkeypatch.setattr(shutil, "which", lambda name: None)
    assert animation.default_animation_path(constant_run).suffix == ".gif"
    monkeypatch.setattr(shutil, "which", lambda name: "/usr/bin/ffmpeg")
    assert animation.default_animation_path(constant_run).suffix == ".mp4"


# -- the style --------------------------------------------------------------------------------
def _lightness(name, n=64):
    """CIE 1976 L* of n samples of a colour map (sRGB, D65), IEC 61966-2-1 linearisation."""
    import matplotlib
    rgb = matplotlib.colormaps[name](np.linspace(0.0, 1.0, n))[:, :3]
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    y = lin @ np.array([0.2126, 0.7152, 0.0722])
    f = np.where(y > (6 / 29) ** 3, np.cbrt(y), y / (3 * (6 / 29) ** 2) + 4 / 29)
    return 116.0 * f - 16.0


@pytest.mark.parametrize("name", [style.TEMPERATURE_CMAP, style.VISCOSITY_CMAP])
def test_sequential_maps_rise_steadily_in_lightness(name):
    L = _lightness(name)
    steps = np.diff(L)
    assert np.all(steps > 0)
    # Crameri's maps are uniform in a perceptual space that weighs hue and chroma too
    # (CAM02-UCS), so their L* steps alone vary by up to a factor of ~2.5
    assert steps.max() < 3.0 * steps.min()
    assert L[-1] - L[0] > 60


def test_diverging_map_is_symmetric_with_a_light_centre():
    L = _lightness(style.DIVERGING_CMAP, 65)
    centre, peak = len(L) // 2, int(np.argmax(L))
    assert abs(peak - centre) <= 1                  # the lightest colour is the centre
    assert np.all(np.diff(L[: peak + 1]) > 0) and np.all(np.diff(L[peak:]) < 0)
    assert abs(L[0] - L[-1]) < 6.0                  # both ends about as dark (vik: 5 L*)
    assert L[centre] > 80.0
    assert style.symmetric_limits([-0.2, 0.5]) == (-0.5, 0.5)


def test_line_colours_are_okabe_ito():
    okabe_ito = {"#000000", "#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00",
                 "#cc79a7"}  # Okabe & Ito (2008), quoted from memory
    assert set(style.LINE_COLORS) <= okabe_ito and len(set(style.LINE_COLORS)) == 7


# -- what a reviewer asks of the figures ------------------------------------------------------
def test_viscosity_colours_cover_the_relevant_range_and_say_where_clipped(body_run):
    import dataclasses
    run = read_run(body_run, 1)
    z = run.z[:, None] * np.ones_like(run.fields["viscosity"])
    steep = dict(run.fields, viscosity=10.0 ** (8.0 * z))          # 8 decades over the depth
    clipped = dataclasses.replace(run, fields=steep)
    (mesh,) = _meshes(figures.viscosity_figure(clipped, pres=figures.Presentation()),
                      "viscosity")
    lo, hi = mesh.norm.vmin, mesh.norm.vmax
    assert lo == pytest.approx(steep["viscosity"].min())
    assert hi == pytest.approx(lo * 10.0 ** style.VISCOSITY_DECADES)
    assert mesh.colorbar.extend == "max" and "clipped" in mesh.colorbar.ax.get_ylabel()
    (mesh,) = _meshes(figures.viscosity_figure(run, pres=figures.Presentation()), "viscosity")
    assert mesh.colorbar.extend == "neither"     # 3 decades: all of it shown
    assert mesh.norm.vmax == pytest.approx(run.fields["viscosity"].max())


def test_streamline_key_states_the_interval_and_the_sense(constant_run):
    run = read_run(constant_run)
    fig = figures.temperature_figure(run, pres=figures.Presentation())
    (cs,) = [a for ax in fig.axes for a in ax.collections if isinstance(a, ContourSet)]
    legend = cs.axes.get_legend()
    step = cs.levels[1] - cs.levels[0]
    assert f"{float(f'{step:.3g}'):g}" in legend.get_title().get_text()
    labels = [t.get_text() for t in legend.get_texts()]
    assert "anticlockwise" in labels[0] and "clockwise" in labels[1]
    # the sense: u = dpsi/dz > 0 below a maximum of psi, so the flow turns anticlockwise there
    psi = run.fields["streamfunction"]
    j, i = np.unravel_index(np.argmax(np.abs(psi)), psi.shape)
    u = run.fields["velocity_x"]          # (z, x_node): u at height z[j-1], below the extremum
    assert np.sign(u[j - 1, i]) == np.sign(psi[j, i])


def test_animation_keeps_one_set_of_streamline_levels(constant_run, tmp_path, monkeypatch):
    import shutil
    monkeypatch.setattr(shutil, "which", lambda name: None)
    seen = []
    original = animation.draw_streamlines

    def spy(ax, run, pres, psi=None, levels=None, legend=True):
        seen.append(np.asarray(levels).copy())
        return original(ax, run, pres, psi=psi, levels=levels, legend=legend)
    monkeypatch.setattr(animation, "draw_streamlines", spy)
    animation.animate_run(constant_run, tmp_path / "a.gif")
    psi_max = max(np.abs(read_run(constant_run, k).fields["streamfunction"]).max()
                  for k in range(len(read_run(constant_run).times)))
    assert len(seen) == len(read_run(constant_run).times)
    for levels in seen:
        np.testing.assert_array_equal(levels, figures.streamline_levels([psi_max]))


def test_series_mark_the_time_mean_over_its_window(constant_run):
    run = read_run(constant_run)
    t = run.series["series_time"]
    start = float(t[len(t) // 2])
    stats = {"nusselt_top": {"mean": 3.0, "ci95": 0.2, "from_time": start},
             "vrms": {"mean": 20.0, "ci95": None, "from_time": start}}
    ax_nu, ax_v = figures.series_figure(run, pres=figures.Presentation(),
                                        statistics=stats).axes
    (mean,) = [line for line in ax_nu.get_lines() if line.get_label() == "_mean"]
    assert list(mean.get_ydata()) == [3.0, 3.0]
    assert mean.get_xdata()[0] == start and mean.get_xdata()[1] == pytest.approx(t[-1])
    assert any("mean" in text.get_text() for text in ax_nu.get_legend().get_texts())
    (vmean,) = [line for line in ax_v.get_lines() if line.get_label() == "_mean"]
    assert list(vmean.get_ydata()) == [20.0, 20.0]


def test_summary_text_columns_do_not_overlap_and_use_one_unit_style(body_run):
    import re
    run = read_run(body_run)
    fig = figures.summary_figure(run)
    renderer = fig.canvas.get_renderer()
    (sheet,) = [sub for sub in fig.subfigs if sub.texts]
    left, right = sorted(sheet.texts, key=lambda t: t.get_position()[0])
    assert left.get_window_extent(renderer).x1 < right.get_window_extent(renderer).x0
    assert right.get_window_extent(renderer).x1 <= fig.bbox.x1
    text = left.get_text() + "\n" + right.get_text()
    assert "mW m^-2" in text and "mW/m2" not in text and "cm/yr" not in text
    assert not re.search(r"\([^)]*\(", text.replace("exp(b)", "").replace("exp(c)", ""))


def test_animation_says_when_it_falls_back_to_gif(constant_run, tmp_path, monkeypatch, capsys):
    import shutil
    run = tmp_path / "copy.h5"
    shutil.copyfile(constant_run, run)
    monkeypatch.setattr(shutil, "which", lambda name: None)      # no ffmpeg
    assert main(["animate", str(run)]) == 0
    captured = capsys.readouterr()
    assert captured.out.strip().endswith(".gif") and "ffmpeg" in captured.err
