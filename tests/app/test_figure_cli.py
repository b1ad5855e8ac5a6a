"""``wellscape figure``: sheets from a project, headless; redrawing from the sheet's data file;
one-line user errors with exit status 2."""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from app.figure_cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_projects" / "elliptical_dot.json"


@pytest.fixture(scope="module")
def small_project(tmp_path_factory):
    """The elliptical sample on a coarser grid, so each solve is quick."""
    doc = json.loads(SAMPLE.read_text())
    doc["grid"]["points"] = [32, 32]
    doc["solver"]["states"] = 4
    path = tmp_path_factory.mktemp("proj") / "ellipse.json"
    path.write_text(json.dumps(doc))
    return path


def run(capsys, *args):
    code = main(["figure", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_figure_headless_without_a_display_or_qt(small_project, tmp_path):
    """The command runs with no display and with Qt unimportable."""
    out = tmp_path / "sheet.png"
    code = ("import sys; sys.modules['PySide6'] = None; sys.modules['pyqtgraph'] = None; "
            f"sys.path.insert(0, {str(ROOT)!r}); from app.figure_cli import main; "
            f"sys.exit(main(['figure', {str(small_project)!r}, '-o', {str(out)!r}, '--dpi', '60']))")
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM",
                                                               "MPLBACKEND")}
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=600)
    assert r.returncode == 0, r.stderr
    assert "800 x 450 px" in r.stdout
    assert Image.open(out).size == (800, 450)
    doc = json.loads((tmp_path / "sheet.sheet.json").read_text())
    assert doc["format"] == "wellscape-figure-sheet"
    assert [p["kind"] for p in doc["panels"]] == ["potential", "state", "state", "state", "state", "levels"]


def test_redraw_from_the_sheet_gives_the_same_values(small_project, tmp_path, capsys):
    code, out, err = run(capsys, small_project, "-o", tmp_path / "a.svg", "--states", "0,2", "--template", "double",
                         "--psi", "signed")
    assert code == 0, err
    first = json.loads((tmp_path / "a.sheet.json").read_text())
    assert [p["level"] for p in first["panels"] if p["kind"] == "state"] == [0, 2]
    assert all(p["mode"] == "signed" for p in first["panels"] if p["kind"] == "state")
    code, out, err = run(capsys, "--from", tmp_path / "a.sheet.json", "-o", tmp_path / "b.pdf",
                         "--template", "column")
    assert code == 0, err
    assert "b.pdf" in out and "mm" in out
    second = json.loads((tmp_path / "b.sheet.json").read_text())
    assert second["template"] == "column"
    assert second["panels"] == first["panels"]                  # the very same plotted numbers
    assert second["project_hash"] == first["project_hash"]
    assert (tmp_path / "b.pdf").read_bytes().startswith(b"%PDF")


def test_fan_from_a_sweep_file_without_solving(small_project, tmp_path, capsys):
    from core.export import write_sweep_npz
    from core.project import load_project
    from core.sweep import Anticrossing, SweepResult
    project = load_project(small_project)
    x = np.linspace(-0.2, 0.2, 11)
    root = np.sqrt(x ** 2 + 0.01)
    sweep = SweepResult(parameter="ell", values=x, energies=np.stack([5 - root, 5 + root], axis=1),
                        tracks=np.array([np.zeros(11, int), np.ones(11, int)]),
                        anticrossings=(Anticrossing(0.0, 0.2, (0, 1), "anticrossing", 5, 0.2),),
                        observables={}, project=project)
    write_sweep_npz(sweep, tmp_path / "ell.npz")
    code, out, err = run(capsys, small_project, "-o", tmp_path / "fan.png", "--sweep", tmp_path / "ell.npz",
                         "--layout", "fan", "--dpi", "40")
    assert code == 0, err
    doc = json.loads((tmp_path / "fan.sheet.json").read_text())
    assert [p["kind"] for p in doc["panels"]] == ["fan"]
    assert doc["panels"][0]["anticrossings"][0]["gap"] == 0.2
    assert "Sweep: ell" in " ".join(doc["caption"])


@pytest.mark.parametrize("args, message", [
    (["{p}", "-o", "{t}/x.gif"], "unknown figure type .gif"),
    (["{p}", "-o", "{t}/x.png", "--states", "a,b"], "--states expects level numbers"),
    (["{p}", "-o", "{t}/x.png", "--dpi", "big"], "--dpi expects a number"),
    (["{p}", "-o", "{t}/x.png", "--template", "poster"], "unknown template"),
    (["{p}", "-o", "{t}/x.png", "--layout", "potential+spectrum"], "unknown panel"),
    (["{p}", "-o", "{t}/x.png", "--layout", "fan"], "give a sweep"),
    (["{p}", "-o", "{t}/missing/x.png"], "does not exist"),
    (["-o", "{t}/x.png"], "give a PROJECT"),
    (["{p}", "--from", "{t}/s.sheet.json", "-o", "{t}/x.png"], "not both"),
    (["--from", "{t}/none.sheet.json", "-o", "{t}/x.png"], "no such sheet file"),
    (["{t}/none.json", "-o", "{t}/x.png"], "no such project file"),
    (["{p}", "-o", "{t}/x.png", "--sweep", "{t}/none.npz"], "no such sweep file"),
])
def test_user_errors_are_one_line_and_exit_2(small_project, tmp_path, capsys, args, message):
    args = [a.format(p=small_project, t=tmp_path) for a in args]
    code, out, err = run(capsys, *args)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("wellscape: error:"), err
    assert message in lines[0]
    assert "Traceback" not in err


def test_redraw_refuses_options_that_change_the_values(tmp_path, capsys):
    sheet = tmp_path / "s.sheet.json"
    sheet.write_text("{}")
    code, out, err = run(capsys, "--from", sheet, "-o", tmp_path / "x.png", "--states", "1")
    assert code == 2 and "--states changes what is plotted" in err


def test_registered_in_the_wellscape_command():
    """Once app/cli.py registers it, ``wellscape figure`` reaches this command."""
    from app.cli import build_parser
    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    if "figure" not in sub.choices:
        pytest.skip("app/cli.py does not register the figure command yet")
    args = parser.parse_args(["figure", "p.json", "-o", "x.pdf"])
    from app.figure_cli import cmd_figure
    assert args.func is cmd_figure


def test_figure_converge_marks_the_level_diagram(small_project, tmp_path):
    """``--converge``: the sheet's level panel carries a verdict for every splitting of the levels it
    shows and an error bar per level; the caption says how the levels were checked."""
    code = main(["figure", str(small_project), "--layout", "levels", "--converge", "-o", str(tmp_path / "l.png")])
    assert code == 0
    doc = json.loads((tmp_path / "l.sheet.json").read_text())
    panel = doc["panels"][0]
    n = len(panel["energies"])
    assert len(panel["splittings"]) >= min(n, 4) - 1 and len(panel["errors"]) == n
    assert all(isinstance(sp["resolved"], bool) for sp in panel["splittings"])
    assert any("Levels checked on 3 grids" in line for line in doc["caption"])


def test_figure_converge_needs_a_levels_panel(small_project, tmp_path, capsys):
    code = main(["figure", str(small_project), "--layout", "potential", "--converge", "-o", str(tmp_path / "p.png")])
    assert code == 2
    assert "no levels panel" in capsys.readouterr().err
