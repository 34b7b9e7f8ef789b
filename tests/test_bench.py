"""Benchmark harness: case configs, the published table, the analysis and a smoke run.

External references: the published values of Blankenbach et al. (1989), Geophys. J.
Int. 98, 23-38, table of best estimates (quoted from memory, see convsim.studies.published);
power-law sequences f = f0 (1 + C h^2), for which the harness must find order 2 and
extrapolate to f0.
"""

from conftest import assert_drawn_png
import json
import math
from pathlib import Path

import pytest

from convsim.studies import bench
from convsim.studies import bench_report
from convsim.studies import published
from convsim.cli import main
from convsim.errors import ConfigError

ROOT = Path(__file__).resolve().parent.parent


# -- configs -------------------------------------------------------------------------------------
@pytest.mark.parametrize("case", published.known_cases())
def test_each_case_config_has_one_source(case):
    """The package copy is the case file; configs/ only links to it (no second copy to drift)."""
    name = published.case_file(case)
    shipped = bench.package_cases_dir() / name
    repo = ROOT / "configs" / name
    assert bench.case_config_path(case) == shipped
    assert repo.is_symlink() and repo.resolve() == shipped.resolve(), \
        f"configs/{name} must be a link to convsim/studies/cases/{name}, not a copy"


def test_case_config_path_and_unknown_case():
    assert bench.case_config_path("1a").name == "benchmark_case_1a.toml"
    with pytest.raises(ConfigError, match="known cases: 1a, 1b, 1c, 2a, 2b, lid1, vp2, vp3, vp4"):
        bench.case_config_path("3z")


def test_case_configs_match_the_published_setup():
    # Blankenbach et al. (1989): Ra = 1e4, 1e5, 1e6 constant viscosity; 2a Ra = 1e4 with a
    # viscosity contrast of 1000, eta = exp(-ln(1000) T)
    from convsim.config import load_config
    expect = {"1a": (1e4, "constant"), "1b": (1e5, "constant"), "1c": (1e6, "constant"),
              "2a": (1e4, "frank-kamenetskii")}
    for case, (ra, law) in expect.items():
        cfg = load_config(bench.case_config_path(case))
        assert cfg.physics.rayleigh == ra and cfg.viscosity.law == law
        assert cfg.domain.aspect == 1.0
    assert load_config(bench.case_config_path("2a")).viscosity.thermal_contrast == 1000.0
    assert tuple(load_config(bench.case_config_path("1c")).start.continuation) == (1e5,)


# -- published table -------------------------------------------------------------------------------
def test_every_published_value_has_a_citation_and_definition():
    assert set(published.PUBLISHED) == {"1a", "1b", "1c", "2a", "2b", "lid1", "vp2", "vp3", "vp4"}
    for case, table in published.PUBLISHED.items():
        expected = {"2b": {"nusselt_top", "vrms"}, "lid1": set(), "vp2": set(),
                    "vp3": set(), "vp4": set()}.get(
            case, set(published.QUANTITIES))
        assert set(table) == expected
        for q, pv in table.items():
            src = pv.source
            assert pv.case == case and pv.quantity == q
            assert math.isfinite(pv.value) and pv.value > 0
            assert src.authors.startswith("Blankenbach") and src.year == 1989
            assert src.journal and src.volume == "98" and src.pages == "23-38" and src.location
            assert "Blankenbach" in pv.citation and "1989" in pv.citation
            assert "quoted from memory" in pv.citation        # honest about the source
            assert pv.definition == published.DEFINITIONS[q]
    for q in published.QUANTITIES:
        assert q in published.ACCEPTANCE


def test_published_values_follow_boundary_layer_scaling():
    """A real check of the table (beyond its own digits; the runs of tests/test_published.py
    check 1a and 2a against it): across cases 1a, 1b, 1c (Ra = 1e4, 1e5, 1e6) Nu grows as
    Ra^(1/3) and vrms as Ra^(2/3) within 0.02 and 0.05 in the exponent (boundary-layer
    theory, common practice), and at each case the top corner above the upwelling carries
    more heat than the mean and the one above the downwelling less: q1 > Nu > q2."""
    p = {case: {q: v.value for q, v in table.items()} for case, table in published.PUBLISHED.items()}
    for low, high in (("1a", "1b"), ("1b", "1c")):
        beta = math.log10(p[high]["nusselt_top"] / p[low]["nusselt_top"])
        gamma = math.log10(p[high]["vrms"] / p[low]["vrms"])
        assert abs(beta - 1 / 3) < 0.02, (low, high, beta)
        assert abs(gamma - 2 / 3) < 0.05, (low, high, gamma)
    for case, v in p.items():
        if "q1" in v and "q2" in v:              # (case 2b publishes no corner values)
            assert v["q1"] > v["nusselt_top"] > v["q2"] > 0, case


# -- inputs ---------------------------------------------------------------------------------------
def test_parse_grids_and_cases():
    assert bench.parse_grids("64, 32,128,32") == (32, 64, 128)
    assert bench.parse_cases([]) == ("1a", "1b", "1c", "2a")
    assert bench.parse_cases(["2A", "1a", "2a"]) == ("2a", "1a")
    for bad in ("32,x", "2,8", "", "99999"):
        with pytest.raises(ConfigError, match="--grids"):
            bench.parse_grids(bad)
    with pytest.raises(ConfigError, match="case '9'"):
        bench.parse_cases(["9"])


# -- analysis on synthetic rows --------------------------------------------------------------------
def _rows(case, grids, law):
    pub = {q: v.value for q, v in published.PUBLISHED[case].items()}
    rows = []
    for n in grids:
        h = 1.0 / n
        vals = {q: law(pub[q], h, i) for i, q in enumerate(published.QUANTITIES)}
        row = bench.BenchRow(case=case, grid=n, h=h, status="steady", message="ok",
                             nusselt_top=vals["nusselt_top"], nusselt_bottom=vals["nusselt_top"],
                             vrms=vals["vrms"], q1=vals["q1"], q2=vals["q2"], wall_seconds=1.0,
                             steps=100, time=0.1, phase_seconds={}, peak_rss_mib=1.0,
                             run_rss_mib=0.0, upwelling="x=0", stage_steps=[])
        row.relative_error = {q: (vals[q] - pub[q]) / pub[q] for q in vals}
        rows.append(row)
    return rows


def test_analysis_of_a_second_order_sequence_passes():
    rows = _rows("1a", (64, 128, 256), lambda f0, h, i: f0 * (1.0 - (i + 1) * h * h))
    s = bench.analyse_case("1a", rows, bench.case_config_path("1a"))
    for q in published.QUANTITIES:
        assert s.observed_order[q] == pytest.approx(2.0, rel=1e-6)
        assert s.extrapolated_error[q] == pytest.approx(0.0, abs=1e-9)
    assert s.passed, [c for c in s.checks if not c.passed]


def test_analysis_reports_oscillation_and_fails():
    rows = _rows("1b", (32, 64, 128), lambda f0, h, i: f0 * (1.0 + (-1) ** round(1 / h / 32) * h))
    s = bench.analyse_case("1b", rows, bench.case_config_path("1b"))
    assert s.convergence["nusselt_top"].behaviour == "oscillatory"
    assert math.isnan(s.extrapolated["nusselt_top"])
    assert not s.passed
    failed = {(c.quantity, c.kind) for c in s.checks if not c.passed}
    assert ("nusselt_top", "extrapolated") in failed


def test_analysis_first_order_fails_the_order_check():
    rows = _rows("2a", (32, 64, 128), lambda f0, h, i: f0 * (1.0 + 0.01 * h))
    s = bench.analyse_case("2a", rows, bench.case_config_path("2a"))
    assert s.observed_order["nusselt_top"] == pytest.approx(1.0, rel=1e-6)
    order = [c for c in s.checks if c.kind == "order"]
    assert order and not order[0].passed


def test_analysis_of_1c_says_it_chains_a_continuation():
    rows = _rows("1c", (32, 64), lambda f0, h, i: f0 * (1.0 + h * h))
    s = bench.analyse_case("1c", rows, bench.case_config_path("1c"))
    text = " ".join(s.notes)
    assert "continuation" in text and "Ra = 1e5" in text and "include" in text
    # two grids: order and extrapolation not measurable; no check fails for that, the finest
    # grid is judged (its error here is h^2 = 0.02 %)
    assert "not measurable" in text
    assert not any(c.kind in ("extrapolated", "order") for c in s.checks)
    assert s.passed
    rows[0].stage_steps = [(1e5, 40), (1e6, 60)]
    result = bench.BenchResult([s], (32, 64), 1, (), 1.0, bench.provenance())
    md = bench_report.markdown(bench_report.jsonable(result.as_dict()))
    assert "continues to Ra = 1e6" in md and "Ra 1e+05 40 steps" in md


def test_unsteady_row_fails_and_is_left_out():
    rows = _rows("1a", (16, 32, 64, 128), lambda f0, h, i: f0 * (1.0 + h * h))
    rows[-1].status = "step-limit"
    s = bench.analyse_case("1a", rows, bench.case_config_path("1a"))
    assert s.convergence["nusselt_top"].h == (1 / 64, 1 / 32, 1 / 16)
    assert not s.passed


# -- smoke run of the command ----------------------------------------------------------------------
@pytest.fixture(scope="module")
def smoke(tmp_path_factory):
    out = tmp_path_factory.mktemp("bench") / "report"
    import contextlib
    import io
    buf, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(buf), contextlib.redirect_stderr(err):
        code = main(["bench", "1a", "--grids", "8,12,16", "--out", str(out), "--jobs", "2",
                     "--set", "stop.steady_tolerance=1e-4", "--set", "stop.max_steps=3000", "--json"])
    return code, buf.getvalue(), err.getvalue(), out


def _strict(text):
    def bad(c):
        raise ValueError(f"non-standard JSON constant {c}")
    return json.loads(text, parse_constant=bad)


def test_smoke_json_shape(smoke):
    code, stdout, _, _ = smoke
    data = _strict(stdout)
    assert code == (0 if data["passed"] else 1)
    assert isinstance(data["cases"], list) and len(data["cases"]) == 1
    case = data["cases"][0]
    assert case["case"] == "1a"
    assert [r["grid"] for r in case["rows"]] == [8, 12, 16]
    for r in case["rows"]:
        for key in ("grid", "nusselt_top", "vrms", "q1", "q2", "wall_seconds", "steps"):
            assert key in r
        assert r["status"] == "steady" and r["steps"] > 0 and r["wall_seconds"] > 0
    for key in ("observed_order", "extrapolated", "published"):
        assert {"nusselt_top", "vrms"} <= set(case[key])
    assert case["published"]["nusselt_top"] == 4.884409
    # coarse, but the right answer: within 2 % of Blankenbach et al. (1989) on 16 x 16
    assert case["rows"][-1]["nusselt_top"] == pytest.approx(4.884409, rel=0.02)
    assert case["rows"][-1]["vrms"] == pytest.approx(42.864947, rel=0.02)
    # and converging towards it
    errs = [abs(r["relative_error"]["nusselt_top"]) for r in case["rows"]]
    assert errs[0] > errs[1] > errs[2]
    assert data["provenance"]["versions"]["numpy"] and data["provenance"]["cpu_count"] >= 1


def test_smoke_report_files(smoke):
    _, stdout, stderr, out = smoke
    for name in bench_report.REPORT_FILES:
        assert (out / name).is_file() and (out / name).stat().st_size > 0, name
    assert_drawn_png(out / "convergence.png")
    assert_drawn_png(out / "cost.png")
    assert (out / "convergence.pdf").read_bytes()[:5] == b"%PDF-"
    assert _strict((out / "bench.json").read_text()) == _strict(stdout)
    lines = (out / "rows.csv").read_text().splitlines()
    assert lines[0].split(",")[:3] == ["case", "grid", "h"] and len(lines) == 4
    md = (out / "report.md").read_text()
    for text in ("## Case 1a", "## Performance", "## Provenance", "Blankenbach", "quoted from "
                 "memory", "steps/s", "Fs = 1.25", "numpy", "scipy"):
        assert text in md, text
    assert "[3/3]" in stderr


def test_smoke_refuses_to_overwrite(smoke, capsys):
    _, _, _, out = smoke
    before = (out / "report.md").read_text()
    code = main(["bench", "1a", "--grids", "8,12,16", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "--overwrite" in err and len(err.strip().splitlines()) == 1
    assert (out / "report.md").read_text() == before


def test_cli_rejects_bad_grids(capsys, tmp_path):
    assert main(["bench", "--grids", "8,foo", "--out", str(tmp_path / "x")]) == 2
    assert "--grids" in capsys.readouterr().err
    assert not (tmp_path / "x").exists()
