"""``convsim plot``, ``animate``, ``info``, ``xdmf``: figures and what a run file holds."""

from __future__ import annotations

import sys

from convsim.cli.common import command, emit_json


@command("plot", "figures of a run file: fields, profiles, time series, a summary sheet")
def _add_plot(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    which = p.add_mutually_exclusive_group()
    which.add_argument("--snapshot", type=int, metavar="N",
                       help="snapshot index (negative: from the end); default the last")
    which.add_argument("--time", metavar="T", help="the snapshot nearest this time: a "
                       "nondimensional number, or with units (e.g. '5 Myr') for a run with [body]")
    p.add_argument("--out", metavar="DIR", help="output folder (default: beside the run file)")
    p.add_argument("--format", default="png,pdf,svg", metavar="LIST",
                   help="comma-separated formats among png, pdf, svg (default: all three)")
    p.add_argument("--arrows", action="store_true",
                   help="velocity arrows instead of streamlines over the temperature")
    p.add_argument("--units", default="auto", choices=("auto", "physical", "nondimensional"),
                   help="auto: physical units when the run's config has a [body] table")
    p.add_argument("--shading", default="smooth", choices=("smooth", "cells"),
                   help="fields interpolated between cell centres (smooth, default) or one "
                        "flat colour per cell (cells)")
    p.add_argument("--overwrite", action="store_true", help="replace existing figure files")
    p.set_defaults(handler=_run_plot)


def _run_plot(args) -> int:
    from convsim.figures.fields import plot_run
    paths = plot_run(args.run, snapshot=args.snapshot, time=args.time, out_dir=args.out,
                     formats=args.format, arrows=args.arrows, overwrite=args.overwrite,
                     units=args.units, shading=args.shading)
    for path in paths:
        print(path)
    return 0


@command("animate", "animation of the temperature field over the snapshots of a run file")
def _add_animate(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--out", metavar="FILE", help="output .mp4 (needs ffmpeg) or .gif; default "
                   "RUN_temperature.mp4 beside the run file, .gif when ffmpeg is missing")
    p.add_argument("--fps", type=int, default=10, help="frames (snapshots) per second (default 10)")
    p.add_argument("--units", default="auto", choices=("auto", "physical", "nondimensional"),
                   help="auto: physical units when the run's config has a [body] table")
    p.add_argument("--overwrite", action="store_true", help="replace an existing file")
    p.set_defaults(handler=_run_animate)


def _run_animate(args) -> int:
    from tqdm import tqdm
    from convsim.figures.animation import animate_run

    def progress(frames, total):
        return tqdm(frames, total=total, unit="frame", file=sys.stderr, leave=False,
                    disable=None)

    path = animate_run(args.run, args.out, fps=args.fps, overwrite=args.overwrite,
                       units=args.units, progress=progress)
    if args.out is None and path.suffix == ".gif":
        print("convsim: ffmpeg is not on the PATH, so the animation is a GIF (install ffmpeg "
              "for MP4)", file=sys.stderr)
    print(path)
    return 0


@command("info", "what a run file holds: config, grid, snapshot times, final diagnostics")
def _add_info(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=_run_info)


def _run_info(args) -> int:
    from convsim.files.info import describe_run, format_info
    info = describe_run(args.run)
    if args.json:
        emit_json(info)
    else:
        print(format_info(info))
    return 0


@command("xdmf", "write the XDMF sidecar of a run file (for ParaView and VisIt)")
def _add_xdmf(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--overwrite", action="store_true", help="replace an existing sidecar")
    p.set_defaults(handler=_run_xdmf)


def _run_xdmf(args) -> int:
    from convsim.files.xdmf import write_xdmf
    print(write_xdmf(args.run, overwrite=args.overwrite))
    return 0
