"""``wellscape converge``: table, orders, verdicts by symbol and word, JSON, and one-line user errors.

The physics behind the numbers is tested in tests/core/test_convergence.py; here the anisotropic
oscillator's exact splitting w_y - w_x (separation of variables, e.g. C. Cohen-Tannoudji, B. Diu,
F. Laloe, Quantum Mechanics, Wiley 1977, ch. V) is only used to check that the command line reports
the core's numbers.
"""
from __future__ import annotations

import argparse
import json
import math
import re
from pathlib import Path

import pytest

import app.cli as cli
from app.converge_cli import add_converge_parser

SAMPLES = Path(__file__).resolve().parents[2] / "sample_projects"

PROJECT = {
    "schema_version": 2, "title": "Elliptical trap of our own", "units": "dimensionless",
    "material": {"mass": 1.0},
    "grid": {"lower": [-6, -6], "upper": [6, 6], "points": [48, 48], "boundary": "hard-wall"},
    "parameters": {"ell": 0.01},
    "potential": [{"kind": "formula", "label": "trap", "enabled": True,
                   "formula": "0.5*((1-ell)*x**2 + (1+ell)*y**2)"}],
    "solver": {"states": 3, "scheme": "fd2", "tolerance": 1e-9},
}


@pytest.fixture
def run(monkeypatch, capsys):
    """Run ``wellscape`` with the converge command registered (as app/cli.py will do)."""
    orig = cli.build_parser

    def build():
        p = orig()
        sub = next(a for a in p._actions if isinstance(a, argparse._SubParsersAction))
        if "converge" not in sub.choices:
            add_converge_parser(sub)
        return p

    monkeypatch.setattr(cli, "build_parser", build)

    def go(*argv):
        code = cli.main(list(argv))
        out, err = capsys.readouterr()
        return code, out, err
    return go


@pytest.fixture
def project_file(tmp_path):
    path = tmp_path / "trap.json"
    path.write_text(json.dumps(PROJECT), encoding="utf-8")
    return str(path)


def test_text_report_has_units_orders_and_verdicts(run, project_file):
    code, out, err = run("converge", project_file, "--levels", "3")
    assert code == 0, err
    assert "E extrapolated [1]" in out and "splitting [1]" in out and "on project grid [1]" in out
    assert re.search(r"observed convergence: fd2 scheme, observed order p ≈ (1\.9|2\.0|2\.1), 2 expected", out)
    assert "48x48*" in out and "21x21" in out and "32x32" in out
    assert "spacing 0.2449 x 0.2449" in out                         # 12 / 49 per axis
    # every level: value ± error to the digits the error allows, and its convergence in words
    rows = [ln for ln in out.splitlines() if re.match(r"\s+[0-2]\s", ln)]
    assert len(rows) == 3
    for ln in rows:
        assert re.search(r"\d\.\d+ ± 0\.\d+\s+converges \(order p ≈ \d\.\d\)$", ln), ln
    # every verdict carries a symbol and words
    verdicts = [ln for ln in out.splitlines() if re.match(r"\s+\d-\d\s", ln)]
    assert len(verdicts) == 2
    assert verdicts[0].endswith("✓ resolved") or verdicts[0].endswith("+ resolved")
    assert verdicts[1].endswith("resolved")
    assert "not monotonic" not in out
    assert re.search(r"time: \d+\.\d s from the command.s start to this report: start-up and loading .*; "
                     r"estimate .*; the study "
                     r".*eigensolves .* on 21x21, .* on 32x32, .* on 48x48", out)


def test_single_dot_sample_reads_true(run):
    """The bundled single dot (spectral scheme, converged far below the solver's accuracy between its two
    finest grids): no level is called "not monotonic"; the exact doublets are degenerate on every grid."""
    code, out, err = run("converge", str(SAMPLES / "gaas_single_dot.json"))
    assert code == 0, err
    assert "not monotonic" not in out and "converged to the solver's accuracy" in out
    for pair in ("1-2", "6-7", "8-9"):
        line = next(ln for ln in out.splitlines() if ln.strip().startswith(pair + " "))
        assert "degenerate on every grid (to the solver's accuracy)" in line and "< " in line
    assert "spacing 6.420 x 6.420 nm" in out


def test_json_output_matches_core_and_exact_splitting(run, project_file):
    code, out, err = run("converge", project_file, "--levels", "3", "--json", "--count")
    assert code == 0, err
    doc = json.loads(out)
    conv = doc["convergence"]
    assert conv["scheme"] == "fd2" and len(conv["levels"]) == 3 and len(conv["grids"]) == 3
    pair = [s for s in conv["splittings"] if {s["lower"], s["upper"]} == {1, 2}][0]
    exact = math.sqrt(1.01) - math.sqrt(0.99)
    assert pair["verdict"] == "resolved" and pair["words"] == "resolved"
    assert abs(pair["splitting"] - exact) <= pair["error"]
    assert all(lv["status"] == "converges" for lv in conv["levels"])
    assert doc["time_s"]["total"] >= sum(conv["solve_times_s"]) and doc["time_s"]["count"] > 0
    assert doc["count"]["certified"] is True and doc["count"]["count_below"] == doc["count"]["expected"]


def test_two_grids_and_factor_option(run, project_file):
    code, out, err = run("converge", project_file, "--levels", "2", "--grids", "2", "--factor", "2", "--json")
    assert code == 0, err
    conv = json.loads(out)["convergence"]
    assert [g["points"][0] for g in conv["grids"]] == [23, 48]      # 49 intervals / 2, rounded: 24 intervals
    assert any("two grids" in w for w in conv["warnings"])


@pytest.mark.parametrize("argv,needle", [
    (("--factor", "0.5"), "--factor"),
    (("--levels", "0"), "--levels"),
    (("--grids", "9"), "2 to 5 grids"),
    (("--set", "nope=1"), "unknown parameter"),
])
def test_user_errors_are_one_line_exit_2(run, project_file, argv, needle):
    code, out, err = run("converge", project_file, *argv)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("wellscape: error:") and needle in err


def test_missing_file_is_a_user_error(run, tmp_path):
    code, out, err = run("converge", str(tmp_path / "none.json"))
    assert code == 2 and err.startswith("wellscape: error:") and err.count("\n") == 1


def test_memory_refusal_is_a_user_error(run, project_file, monkeypatch):
    import core.estimate as est
    monkeypatch.setattr(est, "available_memory_bytes", lambda: 50_000)
    code, out, err = run("converge", project_file)
    assert code == 2 and "coarser grid" in err and err.count("\n") == 1


def test_ascii_marks_when_output_cannot_show_symbols():
    from app.converge_cli import _marks

    class Ascii:
        encoding = "ascii"

    assert _marks(Ascii()) == {"resolved": "+", "not resolved": "~"}


def test_report_on_an_ascii_terminal_has_no_symbol_it_cannot_show():
    from app.converge_cli import _printable

    class Ascii:
        encoding = "ascii"

    text = _printable("200 ± 15  converges (order p ≈ 2.0) — ✓ resolved", Ascii())
    assert text == "200 +/- 15  converges (order p ~ 2.0) - + resolved"
