"""``convsim compare``: two runs side by side (final diagnostics, field difference, a figure)."""

from __future__ import annotations

from convsim.cli.common import command, emit_json


@command("compare", "two run files side by side: final diagnostics, their differences, the "
                    "temperature difference field and a figure")
def _add_compare(p):
    p.add_argument("a", metavar="A.h5", help="the reference run file")
    p.add_argument("b", metavar="B.h5", help="the run file compared with it")
    p.add_argument("--out", metavar="FILE", help="write the comparison figure (.png, .pdf, .svg)")
    p.add_argument("--units", default="auto", choices=("auto", "physical", "nondimensional"),
                   help="figure units; auto: physical when A's config has a [body] table")
    p.add_argument("--overwrite", action="store_true", help="replace an existing figure")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=_run_compare)


def _cell(value, fmt=".6g"):
    return "-" if value is None else format(value, fmt)


def _run_compare(args) -> int:
    from pathlib import Path
    from convsim.analysis.compare import compare_runs
    out = Path(args.out) if args.out else None
    if out is not None:
        from convsim.files.runfile import check_writable
        check_writable(out, args.overwrite)
    comparison = compare_runs(args.a, args.b)
    if out is not None:
        from convsim.figures.compare import comparison_figure
        from convsim.figures import style
        style.save_file(comparison_figure(comparison, units=args.units), out)
    if args.json:
        emit_json(comparison.to_dict() | {"figure": None if out is None else str(out)})
        return 0
    print(f"A {comparison.paths[0]}\nB {comparison.paths[1]}")
    print(f"  {'':<14s} {'A':>14s} {'B':>14s} {'(B - A) / |A|':>14s}")
    for label, _, va, vb, rel in comparison.rows:
        print(f"  {label:<14s} {_cell(va):>14s} {_cell(vb):>14s} "
              f"{'-' if rel is None else format(100.0 * rel, '+.4g') + ' %':>14s}")
    phys_a, phys_b = comparison.physical
    if phys_a and phys_b:
        for key in phys_a:
            if key in phys_b:
                print(f"  {key.replace('_', ' '):<20s} {phys_a[key]['value']:>10.4g} "
                      f"{phys_b[key]['value']:>10.4g} {phys_a[key]['units']}")
    print(f"  temperature B - A: max |dT| {comparison.max_abs_difference:.4g}, rms "
          f"{comparison.rms_difference:.4g}"
          + (" (B interpolated onto A's grid)" if comparison.interpolated else ""))
    if out is not None:
        print(f"figure {out}")
    return 0
