"""Animation of the temperature field over the snapshots of a run file.

MP4 through ffmpeg where it is on the PATH (H.264, yuv420p, so that common
players show it), otherwise GIF through pillow.  Frames are drawn with
:func:`convsim.figures.fields.draw_temperature` in the house style; colour limits are
the extremes over all snapshots, so a colour means the same temperature in
every frame.
"""

from __future__ import annotations

import math
from pathlib import Path

from convsim.figures import style
from convsim.errors import ConfigError
from convsim.figures.fields import (_field_size, draw_streamlines, draw_temperature,
                                    streamline_levels)
from convsim.figures.presentation import presentation_for
from convsim.files.atomic import atomic_path
from convsim.files.runfile import check_writable
from convsim.files.reader import iter_fields, read_run

__all__ = ["animate_run", "animation_writer", "default_animation_path"]


def animation_writer(output: Path, fps: int):
    """The matplotlib writer for ``output``: FFMpegWriter for .mp4, PillowWriter for .gif."""
    import shutil
    from matplotlib import animation
    suffix = output.suffix.lower()
    if suffix == ".mp4":
        if shutil.which("ffmpeg") is None:
            raise ConfigError(f"--out = {str(output)!r}: MP4 needs ffmpeg, which is not on the "
                              f"PATH; name a .gif file instead")
        return animation.FFMpegWriter(fps=fps, codec="libx264", bitrate=-1,
                                      extra_args=["-pix_fmt", "yuv420p"],
                                      metadata={"title": output.stem, "comment": "convsim"})
    if suffix == ".gif":
        return animation.PillowWriter(fps=fps)
    raise ConfigError(f"--out = {str(output)!r}: expected a .mp4 or .gif file name")


def default_animation_path(path: Path) -> Path:
    """``<stem>_temperature.mp4`` beside the run file when ffmpeg is there, else ``.gif``."""
    import shutil
    suffix = ".mp4" if shutil.which("ffmpeg") else ".gif"
    return path.with_name(f"{path.stem}_temperature{suffix}")


def animate_run(path: str | Path, output: str | Path | None = None, *, fps: int = 10,
                overwrite: bool = False, units: str = "auto", dpi: int = 150,
                progress=None) -> Path:
    """Animation of the temperature field with streamlines over the snapshots of a run.

    Parameters
    ----------
    output : path, optional
        ``.mp4`` (through ffmpeg) or ``.gif`` (through pillow); default
        :func:`default_animation_path`.
    fps : int
        Frames (snapshots) per second, 1 to 120.
    progress : callable, optional
        ``progress(iterable, total) -> iterable``, e.g. a tqdm bar.

    Colour limits are the extremes over all snapshots, so colours mean the same
    in every frame; the streamline levels are fixed too, from the largest |psi| of
    all snapshots, so a nearly still start shows few streamlines and a vigorous
    flow many.
    """
    path = Path(path)
    if not (isinstance(fps, int) and 1 <= fps <= 120):
        raise ConfigError(f"--fps = {fps!r}: expected a whole number from 1 to 120")
    output = default_animation_path(path) if output is None else Path(output)
    writer = animation_writer(output, fps)
    check_writable(output, overwrite)
    run = read_run(path, 0)
    pres = presentation_for(run, units)
    lo, hi, psi_max = math.inf, -math.inf, 0.0
    for _, _, f in iter_fields(path, ("temperature", "streamfunction")):
        lo, hi = min(lo, float(f["temperature"].min())), max(hi, float(f["temperature"].max()))
        psi_max = max(psi_max, float(abs(f["streamfunction"]).max()))
    levels = streamline_levels([psi_max])
    count = len(run.times)
    with style.context():
        width, height = _field_size(run)
        height += 0.35      # the streamline key under the axes
        # whole, even pixel counts (the yuv420p pixel format of MP4 needs even sizes)
        width, height = (2 * round(v * dpi / 2) / dpi for v in (width, height))
        fig = style.new_figure(width, height)
        ax = fig.add_subplot()
        mesh = draw_temperature(ax, run, pres, levels=levels)
        mesh.set_clim(pres.temperature(lo), pres.temperature(hi))
        style.freeze_layout(fig)  # no jitter as the title changes
        frames = iter_fields(path, ("temperature", "streamfunction"))
        if progress is not None:
            frames = progress(frames, count)
        with atomic_path(output, suffix=output.suffix) as part, \
                writer.saving(fig, str(part), dpi):
            for index, t, f in frames:
                mesh.set_array(pres.temperature(f["temperature"]))
                for artist in list(ax.collections):
                    if artist is not mesh:
                        artist.remove()
                draw_streamlines(ax, run, pres, psi=f["streamfunction"], levels=levels,
                                 legend=False)
                ax.set_title(pres.time_text(t) + f"  (snapshot {index})", loc="left")
                writer.grab_frame()
    return output
