"""The benchmark report: report.md, rows.csv, bench.json and the figures, plus a terminal table.

Writers only; the numbers come from ``convsim.studies.bench``.  Existing files are never
overwritten unless asked (``OutputExistsError``).
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

from convsim.analysis.convergence import SAFETY_FACTOR
from convsim.errors import OutputExistsError
from convsim.files.atomic import atomic_write_text
from convsim.files.jsonio import plain, write_json
from convsim.studies.published import ACCEPTANCE, DEFINITIONS, PUBLISHED, QUANTITIES

__all__ = ["REPORT_FILES", "report_paths", "check_outputs", "write_report", "markdown",
           "rows_csv", "terminal_table", "jsonable", "CSV_COLUMNS"]

REPORT_FILES = ("report.md", "rows.csv", "bench.json", "convergence.png", "convergence.pdf",
                "cost.png", "cost.pdf")
PHASES = ("advect", "diffuse", "stokes", "factor", "diagnose")
CSV_COLUMNS = ("case", "grid", "h", "status", "nusselt_top", "nusselt_bottom", "vrms", "q1", "q2",
               "rel_err_nusselt", "rel_err_vrms", "rel_err_q1", "rel_err_q2", "wall_seconds",
               "steps", "steps_per_second", "time", "upwelling", "peak_rss_mib", "run_rss_mib") \
    + tuple(f"{p}_seconds" for p in PHASES)
LABEL = {"nusselt_top": "Nu", "vrms": "vrms", "q1": "q1", "q2": "q2"}


def jsonable(obj):
    """A copy with NaN and infinities as None (strict JSON): ``convsim.files.jsonio.plain``."""
    return plain(obj)


def report_paths(out) -> list:
    out = Path(out)
    return [out / name for name in REPORT_FILES]


def check_outputs(out, overwrite: bool = False) -> None:
    """Raise OutputExistsError if any report file exists in ``out`` and overwrite is off;
    SnapshotError if ``out`` cannot be created or written."""
    from convsim.files.runfile import check_output_folder
    check_output_folder(out)
    if overwrite:
        return
    existing = [p for p in report_paths(out) if p.exists()]
    if existing:
        raise OutputExistsError(f"--out {str(out)!r}: {', '.join(p.name for p in existing)} "
                                "already exist; pass --overwrite to replace them")


# -- formatting helpers --------------------------------------------------------------------------
def _g(v, digits=7) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{v:.{digits}g}"


def _pct(v, digits=3) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return f"{100.0 * v:+.{digits}g}%"


def _table(header, rows) -> list:
    lines = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    lines += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return lines + [""]


def _other_seconds(row: dict) -> float:
    if row["wall_seconds"] is None:
        return math.nan
    return row["wall_seconds"] - sum(row["phase_seconds"].get(p) or 0.0 for p in PHASES)


# -- markdown ---------------------------------------------------------------------------------
def markdown(bench: dict) -> str:
    """The report text from ``BenchResult.as_dict()``."""
    L = _header(bench) + _summary(bench) + _acceptance(bench)
    for c in bench["cases"]:
        L += _case_section(c)
    L += _performance(bench)
    L += _method(bench)
    return "\n".join(L + _provenance(bench["provenance"]))


def _header(bench: dict) -> list:
    prov = bench["provenance"]
    L = ["# convsim benchmark report", ""]
    verdict = "PASS" if bench["passed"] else "FAIL"
    L += [f"Verdict: **{verdict}** against our acceptance tolerances (below) for "
          f"{len(bench['cases'])} case(s) on grids {', '.join(str(g) for g in bench['grids'])} "
          f"(n x n cells).", "",
          f"Date {prov['date']}; command `{prov['command'] or 'convsim bench'}`; "
          f"total wall time {bench['wall_seconds']:.1f} s with {bench['jobs']} worker "
          "process(es).", ""]
    if bench["overrides"]:
        L += ["Config overrides applied to every case: "
              + ", ".join(f"`{o}`" for o in bench["overrides"]) + ".", ""]
    return L


def _summary(bench: dict) -> list:
    rows = []
    for c in bench["cases"]:
        ext, err, order = c["extrapolated"], c["extrapolated_relative_error"], c["observed_order"]
        fin = c["rows"][-1] if c["rows"] else None
        rows.append([c["case"], _g(c["rayleigh"], 3),
                     _g(fin["nusselt_top"]) if fin else "-",
                     _pct(fin["relative_error"]["nusselt_top"]) if fin else "-",
                     _g(ext["nusselt_top"]), _pct(err["nusselt_top"]), _g(order["nusselt_top"], 3),
                     _g(ext["vrms"]), _pct(err["vrms"]), _g(order["vrms"], 3),
                     "pass" if c["passed"] else "FAIL"])
    return ["## Summary", ""] + _table(["case", "Ra", "Nu finest", "err", "Nu extrap.", "err",
                                        "p(Nu)", "vrms extrap.", "err", "p(vrms)", "verdict"], rows)


def _acceptance(bench: dict) -> list:
    """Our acceptance rule, then the published sources and definitions."""
    L = ["## Acceptance (ours, not published numbers)", ""]
    L += _table(["quantity", "finest grid: abs. rel. error at most",
                 "extrapolated: abs. rel. error at most", "observed order at least"],
                [[LABEL[q], _pct(a.finest, 2).lstrip("+"), _pct(a.extrapolated, 2).lstrip("+"),
                  _g(a.min_order, 3) if a.min_order else "-"] for q, a in ACCEPTANCE.items()])
    L += ["A case passes when every run reached steady state (a periodic case: its end time "
          "with at least three whole periods) and every check holds. The "
          "extrapolated-value check fails when no extrapolation can be made (oscillatory or "
          "divergent sequence); with fewer than three steady grids the order and the "
          "extrapolated value are not measurable, and only steady state and the finest grid "
          "are judged.", ""]
    L += ["## Published values and definitions", ""]
    sources = {}
    for case in bench["cases"]:
        for pv in PUBLISHED[case["case"]].values():
            sources[pv.source.key] = pv.source
    for src in sources.values():
        L += [f"- {src.citation}." + (f" **{src.note}.**" if src.note else "")]
    L += [""]
    L += [f"- {d}." for d in DEFINITIONS.values()]
    L += ["- In convsim, q1 is `RunResult.corner_gradients[0]` at (0, 1) and q2 is "
          "`corner_gradients[1]` at (1, 1); each row records the side of the upwelling.", ""]
    return L


def _provenance(prov: dict) -> list:
    v = prov["versions"]
    return ["## Provenance", "",
            f"- date (UTC): {prov['date']}",
            f"- platform: {prov['platform']} ({prov['machine']})",
            f"- CPU: {prov['cpu'] or 'unknown'}; CPU count {prov['cpu_count']}",
            "- versions: " + ", ".join(f"{k} {val}" for k, val in v.items()),
            f"- source: git {prov['git'] or 'unknown'}",
            f"- command: `{prov['command'] or 'convsim bench'}`", ""]


def _case_section(c: dict) -> list:
    return (_case_setup(c) + _case_runs(c) + _case_lid(c) + _case_convergence(c)
            + _case_checks(c))


def _case_lid(c: dict) -> list:
    """The lid quantities of the viscoplastic cases per grid, and their convergence."""
    from convsim.studies.viscoplastic import LID_QUANTITIES
    if not any(r.get("lid") for r in c["rows"]):
        return []
    names = [q for q in LID_QUANTITIES if any(q in r.get("lid", {}) for r in c["rows"])]
    L = ["Lid (surface and interior rms velocity, surface / whole-layer rms velocity, extreme "
         "viscosities, area fraction where eta_plast < eta_lin; interior = 1/4 < z < 3/4"
         + ("; time means over whole periods" if any(r.get("periodic") for r in c["rows"])
            else "") + "):", ""]
    L += _table(["grid"] + [LID_QUANTITIES[q] for q in names],
                [[r["grid"]] + [_g(r["lid"].get(q), 6) for q in names]
                 for r in c["rows"] if r.get("lid")])
    conv = c.get("lid_convergence") or {}
    if conv:
        L += _table(["quantity", "behaviour", "order p", "extrapolated"],
                    [[LID_QUANTITIES[q], e["behaviour"], _g(e["order"], 4),
                      _g(e["extrapolated"], 6)] for q, e in conv.items() if e is not None])
    return L + _case_periodic(c)


def _case_periodic(c: dict) -> list:
    """A periodic case: period and time means with their 95 % intervals per grid
    (``studies.viscoplastic.periodic_statistics``)."""
    from convsim.studies.viscoplastic import PERIODIC_SERIES
    rows = [r for r in c["rows"] if r.get("periodic")]
    if not rows:
        return []
    L = ["Period (mean of the single periods between upward crossings of the mean Nu after "
         "the spin-up; in brackets the first peak of the autocorrelation of Nu) and time "
         "means over those whole periods, each +- its 95 % half-width (Student t over the "
         "single periods and the single-period means):", ""]
    L += _table(["grid", "periods", "period", "(autocorr.)"] + list(PERIODIC_SERIES),
                [[r["grid"], r["periodic"]["periods"],
                  _pm(r["periodic"]["period"], r["periodic"]["period_ci95"]),
                  _g(r["periodic"]["autocorrelation_period"], 5)]
                 + [_pm(r["periodic"]["means"].get(q), r["periodic"]["ci95"].get(q))
                    for q in PERIODIC_SERIES] for r in rows])
    return L


def _pm(value, half) -> str:
    return f"{_g(value, 6)} +- {_g(half, 2)}"


def _case_setup(c: dict) -> list:
    s = c["settings"]
    b, st, stop, num, visc = (s.get("boundaries", {}), s.get("start", {}), s.get("stop", {}),
                              s.get("numerics", {}), s.get("viscosity", {}))
    L = [f"## Case {c['case']}: {c['title']}", "",
         f"Setup: {c['setup']}. Config `{c['config']}` (sha256 {c['config_sha256'][:12]}...).",
         "",
         f"- box aspect {s.get('domain', {}).get('aspect')}; top {b.get('top_flow')}, bottom "
         f"{b.get('bottom_flow')}, sides {b.get('sides')}; T = {b.get('bottom_value')} at the "
         f"bottom, {b.get('top_value')} at the top",
         f"- viscosity law {visc.get('law')}"
         + (f", thermal contrast {visc.get('thermal_contrast')}"
            if visc.get("law") != "constant" else ""),
         f"- start: {st.get('kind')} with {st.get('perturbation')} perturbation, amplitude "
         f"{st.get('amplitude')}, mode {st.get('mode')}"
         + (f"; continuation through Ra = {st.get('continuation')}" if st.get("continuation")
            else ""),
         f"- stop at steady state, tolerance {stop.get('steady_tolerance')}; numerics: "
         f"{num.get('advection')} advection ({num.get('limiter')}), {num.get('time_scheme')}, "
         f"CFL {num.get('cfl')}, Stokes solver {num.get('stokes_solver')}", ""]
    for note in c["notes"]:
        L += [f"Note: {note}.", ""]
    return L


def _case_runs(c: dict) -> list:
    pub = c["published"]
    L = ["Published: " + ", ".join(f"{LABEL[q]} = {_g(pub[q], 8)}" for q in QUANTITIES
                                   if q in pub)
          + (" (" + PUBLISHED[c["case"]]["nusselt_top"].citation + ")."
             if "nusselt_top" in PUBLISHED[c["case"]] else "none compared."), ""]
    rows = []
    for r in c["rows"]:
        e = r["relative_error"]
        rows.append([r["grid"], r["status"], r["steps"], _g(r["nusselt_top"]),
                     _g(r["nusselt_bottom"]), _g(r["vrms"]), _g(r["q1"]), _g(r["q2"]),
                     _pct(e["nusselt_top"]), _pct(e["vrms"]), _pct(e.get("q1")),
                     _pct(e.get("q2")),
                     _g(r["wall_seconds"], 4)])
    L += _table(["grid", "status", "steps", "Nu top", "Nu bottom", "vrms", "q1", "q2",
                 "err Nu", "err vrms", "err q1", "err q2", "wall s"], rows)
    staged = [r for r in c["rows"] if len(r.get("stage_steps") or []) > 1]
    if staged:
        L += ["Steps per stage (counted in the steps and wall time above): "
              + "; ".join(f"grid {r['grid']}: " + ", ".join(f"Ra {ra:.0e} {n} steps"
                                                           for ra, n in r["stage_steps"])
                          for r in staged) + ".", ""]
    return L


def _case_convergence(c: dict) -> list:
    pub = c["published"]
    L = ["Convergence from the three finest steady grids:", ""]
    rows = []
    for q in QUANTITIES:                    # a quantity without a published value: no error
        est = c["convergence"].get(q)
        if est is None:
            rows.append([LABEL[q], "not enough grids", "-", "-", "-", "-", "-", "-"])
            continue
        f1 = est["values"][0]
        gci = est["gci_fine"]
        inside = "-"
        if gci is not None and math.isfinite(gci):
            inside = "-" if q not in pub else "yes" if abs(pub[q] - f1) <= gci * abs(f1) else "no"
        ext = est["extrapolated"]
        err = ((ext - pub[q]) / pub[q] if q in pub and ext is not None and math.isfinite(ext)
               else math.nan)
        rows.append([LABEL[q], est["behaviour"] + (f" ({est['note']})" if est["note"] else ""),
                     _g(est["order"], 4), _g(ext, 8), _pct(gci).lstrip("+"), inside, _pct(err),
                     _g(est["asymptotic_ratio"], 4)])
    L += _table(["quantity", "behaviour", "order p", "extrapolated", "GCI fine",
                 "published in f1 +- GCI", "err extrap.", "asymptotic ratio"], rows)
    return L


def _case_checks(c: dict) -> list:
    L = ["Checks:", ""]
    for ch in c["checks"]:
        mark = "pass" if ch["passed"] else "FAIL"
        if ch["kind"] == "steady":
            L += [f"- {mark}: steady state, {ch['note']}"]
        elif ch["kind"] == "periodic":
            L += [f"- {mark}: periodic, at least {_g(ch['limit'], 2)} whole periods at the end "
                  f"time, {ch['note']}"]
        elif ch["kind"] == "order":
            L += [f"- {mark}: observed order of {LABEL[ch['quantity']]} {_g(ch['value'], 4)} "
                  f"(at least {_g(ch['limit'], 3)}; {ch['note']})"]
        else:
            L += [f"- {mark}: {ch['kind']} {LABEL[ch['quantity']]}, abs. relative error "
                  f"{_pct(ch['value']).lstrip('+')} (at most {_pct(ch['limit']).lstrip('+')}"
                  + (f"; {ch['note']})" if ch["note"] else ")")]
    return L + [""]


def _performance(bench: dict) -> list:
    L = ["## Performance", "",
         "Time per step by phase (ms; from `RunResult.phase_seconds`; 'other' is the rest of "
         "the loop: steady-state test, series, observers). Runs went "
         f"{bench['jobs']} at a time, so concurrent runs shared the machine.", ""]
    rows = []
    for c in bench["cases"]:
        for r in c["rows"]:
            n = max(r["steps"], 1)
            ph = r["phase_seconds"]
            rows.append([c["case"], r["grid"], r["steps"], _g(r["wall_seconds"], 4),
                         _g(r["steps_per_second"], 4)]
                        + [_g(1e3 * ph[p] / n, 3) if ph.get(p) is not None else "-" for p in PHASES]
                        + [_g(1e3 * _other_seconds(r) / n, 3), _g(r["peak_rss_mib"], 4),
                           _g(r["run_rss_mib"], 4)])
    L += _table(["case", "grid", "steps", "wall s", "steps/s"] + [f"{p} ms" for p in PHASES]
                + ["other ms", "peak RSS MiB", "run RSS MiB"], rows)
    L += ["Error against cost (|relative error| against the published value, wall time of "
          "the run):", ""]
    rows = []
    for c in bench["cases"]:
        for r in c["rows"]:
            e = r["relative_error"]
            rows.append([c["case"], r["grid"], r["status"], _g(r["wall_seconds"], 4),
                         _pct(e["nusselt_top"]).lstrip("+-"), _pct(e["vrms"]).lstrip("+-")])
    L += _table(["case", "grid", "status", "wall s", "abs. err Nu", "abs. err vrms"], rows)
    L += ["![convergence](convergence.png)", "",
          "Relative error against grid spacing, one line per quantity, with a slope-2 guide "
          "(open markers: runs that did not reach steady state).", "",
          "![error against wall time](cost.png)", ""]
    return L


def _method(bench: dict) -> list:
    return [
        "## Method", "",
        "- Each run: the case config with `domain.nx = domain.nz = n`, run to the config's "
        "steady-state rule; grid spacing h = 1/n.",
        f"- Warm-up: {bench['warmup']}.",
        f"- Memory: {bench['memory_method']}.",
        "- Observed order p from the three finest steady grids (finest first, f1, f2, f3; "
        "r21 = h2/h1, r32 = h3/h2): for a constant ratio p = ln((f3-f2)/(f2-f1))/ln r; for "
        "unequal ratios the root of (f3-f2)/(f2-f1) = r21^p (r32^p-1)/(r21^p-1), unique when "
        "it exists.",
        "- Richardson extrapolation f_ext = f1 + (f1-f2)/(r21^p - 1).",
        f"- Grid convergence index (Roache 1994, J. Fluids Eng. 116, 405-413) GCI_fine = Fs "
        f"|(f1-f2)/f1| / (r21^p - 1) with Fs = {SAFETY_FACTOR}; asymptotic ratio "
        "GCI_coarse / (r21^p GCI_fine), near 1 in the asymptotic range.",
        "- Convergence ratio R = (f2-f1)/(f3-f2): R < 0 oscillatory (reported, not "
        "extrapolated); R > 0 monotone convergence when the order equation has a positive "
        "root (for a constant ratio: R < 1), else divergent (reported, not extrapolated); "
        "after Celik et al. (2008), J. Fluids Eng. 130, 078001.",
        "- Relative error (ours - published) / published.", ""]


# -- csv, terminal ------------------------------------------------------------------------------
def rows_csv(bench: dict) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for c in bench["cases"]:
        for r in c["rows"]:
            e, ph = r["relative_error"], r["phase_seconds"]
            values = dict(r, **{f"rel_err_{q}": e.get(q) for q in QUANTITIES},
                          **{f"{p}_seconds": ph.get(p) for p in PHASES})
            writer.writerow([_csv_value(values.get(col)) for col in CSV_COLUMNS])
    return buf.getvalue()


def _csv_value(v):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    if isinstance(v, float):
        return repr(v)
    return v


def terminal_table(bench: dict) -> str:
    """A plain-text table of every run and each case's verdict."""
    head = (f"{'case':<5}{'grid':>5} {'status':<9}{'Nu':>11}{'err':>9}{'vrms':>11}{'err':>9}"
            f"{'q1':>10}{'q2':>9}{'steps':>8}{'wall s':>9}")
    lines = [head, "-" * len(head)]
    for c in bench["cases"]:
        for r in c["rows"]:
            e = r["relative_error"]
            lines.append(f"{c['case']:<5}{r['grid']:>5} {r['status']:<9}{_g(r['nusselt_top']):>11}"
                         f"{_pct(e['nusselt_top'], 2):>9}{_g(r['vrms']):>11}{_pct(e['vrms'], 2):>9}"
                         f"{_g(r['q1'], 6):>10}{_g(r['q2'], 5):>9}{r['steps']:>8}"
                         f"{_g(r['wall_seconds'], 4):>9}")
            if r.get("periodic"):
                per = r["periodic"]
                lines.append(f"{'':<11}period {_pm(per['period'], per['period_ci95'])} over "
                             f"{per['periods']} periods (autocorrelation "
                             f"{_g(per['autocorrelation_period'], 5)}); Nu "
                             f"{_pm(per['means'].get('nusselt_top'), per['ci95'].get('nusselt_top'))}"
                             f", vrms {_pm(per['means'].get('vrms'), per['ci95'].get('vrms'))}")
            if r.get("lid"):
                lid = r["lid"]
                lines.append(f"{'':<11}surface vrms {_g(lid['surface_vrms'], 6)}, interior vrms "
                             f"{_g(lid['interior_vrms'], 6)}, eta [{_g(lid['eta_min'], 3)}, "
                             f"{_g(lid['eta_max'], 3)}], yielded area "
                             f"{_g(lid['yielded_fraction'], 4)}")
        ext, err, p = c["extrapolated"], c["extrapolated_relative_error"], c["observed_order"]
        measurable = ext["nusselt_top"] is not None or ext["vrms"] is not None
        if measurable:      # same columns as the runs above: Nu, err, vrms, err
            lines.append(f"{c['case']:<5}{'ext':>5} {'':<9}{_g(ext['nusselt_top']):>11}"
                         f"{_pct(err['nusselt_top'], 2):>9}{_g(ext['vrms']):>11}"
                         f"{_pct(err['vrms'], 2):>9}")
        lines.append(f"{c['case']:<5}{'pub':>5} {'':<9}"
                     f"{_g(c['published'].get('nusselt_top')):>11}"
                     f"{'':>9}{_g(c['published'].get('vrms')):>11}{'':>9}"
                     f"{_g(c['published'].get('q1'), 6):>10}"
                     f"{_g(c['published'].get('q2'), 5):>9}")
        order = (f"observed order p(Nu) {_g(p['nusselt_top'], 3)}, p(vrms) {_g(p['vrms'], 3)}"
                 if measurable else f"order and extrapolation not measurable with "
                 f"{len(c['rows'])} grid(s) (three needed); judged on the finest grid")
        lines.append(f"{'':<11}{order}; case {c['case']}: "
                     + ("pass" if c["passed"] else "FAIL"))
    lines.append(f"verdict: {'PASS' if bench['passed'] else 'FAIL'} "
                 f"(total wall {bench['wall_seconds']:.1f} s)")
    return "\n".join(lines)


# -- writing ---------------------------------------------------------------------------------
def write_report(bench: dict, out, overwrite: bool = False) -> list:
    """Write the report files into ``out`` (created); returns their paths."""
    from convsim.figures import bench as figures_bench
    out = Path(out)
    check_outputs(out, overwrite)
    out.mkdir(parents=True, exist_ok=True)
    data = jsonable(bench)
    write_json(out / "bench.json", data)
    atomic_write_text(out / "rows.csv", rows_csv(data))
    atomic_write_text(out / "report.md", markdown(data) + "\n")
    figures_bench.convergence_figure(data, out / "convergence")
    figures_bench.cost_figure(data, out / "cost")
    return report_paths(out)
