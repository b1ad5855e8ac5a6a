"""``wellscape import-layout``: a GDSII layout written by the test (gdstk) becomes gates in a project file.

The expected coordinates follow from the documented map x = scale * (u - X), y = scale * (v - Y);
the default scale is the layout's user unit over the project's length unit (1e-6 m / 1e-9 m = 1000).
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from app.cli import main
from core.project import load_project, new_project, save_project

gdstk = pytest.importorskip("gdstk")


def run(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def layout(tmp_path):
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    cell = lib.new_cell("KESTREL")
    cell.add(gdstk.rectangle((0.0, 0.0), (0.2, 0.1), layer=3))
    cell.add(gdstk.Polygon([(0, 0.3), (0.3, 0.3), (0.3, 0.4), (0.1, 0.4), (0.1, 0.6), (0, 0.6)], layer=4))
    path = tmp_path / "kestrel.gds"
    lib.write_gds(str(path))
    return path


def test_new_project_with_default_scale(capsys, tmp_path, layout):
    out = tmp_path / "gates.json"
    code, text, err = run(capsys, "import-layout", layout, "--layer", "3", "--layer", "4/0", "--origin", "0.1", "0",
                          "--voltage", "-0.3", "--depth", "70", "-o", out)
    assert code == 0, err
    assert "2 gates" in text and "scale 1000 nm per layout unit" in text
    project = load_project(out)
    (term,) = project.potential
    assert term.depth == 70.0 and [g.voltage for g in term.gates] == [-0.3, -0.3]
    np.testing.assert_allclose(term.gates[0].rectangle, (-100.0, 0.0, 100.0, 100.0), atol=1e-9)
    np.testing.assert_allclose(np.array(term.gates[1].polygon)[:3], [(-100, 300), (200, 300), (200, 400)],
                               atol=1e-9)
    assert run(capsys, "check", out)[0] == 0


def test_into_existing_project_needs_force_and_keeps_its_terms(capsys, tmp_path, layout):
    base = tmp_path / "dot.json"
    save_project(new_project("Kestrel dot"), base)
    before = base.read_bytes()
    code, _, err = run(capsys, "import-layout", layout, "--layer", "3", "--depth", "50", "--scale", "500",
                       "--into", base, "-o", base)
    assert code == 2 and "exists; add --force" in err and err.count("\n") == 1
    assert base.read_bytes() == before
    code, _, err = run(capsys, "import-layout", layout, "--layer", "3", "--depth", "50", "--scale", "500",
                       "--into", base, "-o", base, "--force")
    assert code == 0, err
    doc = json.loads(base.read_text(encoding="utf-8"))
    assert [t["kind"] for t in doc["potential"]] == ["formula", "gates"]
    assert doc["potential"][1]["gates"][0]["rectangle"] == pytest.approx([0.0, 0.0, 100.0, 50.0], abs=1e-9)


@pytest.mark.parametrize("args, message", [
    (["--layer", "9", "--depth", "5"], "layer 9 has no polygons; the layout's layers are 3/0, 4/0"),
    (["--layer", "three", "--depth", "5"], "expected LAYER or LAYER/DATATYPE"),
    (["--layer", "3"], "give the depth of the electron gas"),
])
def test_user_errors_are_one_line(capsys, tmp_path, layout, args, message):
    code, _, err = run(capsys, "import-layout", layout, *args, "-o", tmp_path / "x.json")
    assert code == 2 and message in err and err.count("\n") == 1
    assert not (tmp_path / "x.json").exists()


def test_not_a_layout(capsys, tmp_path):
    bad = tmp_path / "readme.gds"
    bad.write_text("plain text\n", encoding="utf-8")
    code, _, err = run(capsys, "import-layout", bad, "--layer", "1", "--depth", "5", "-o", tmp_path / "x.json")
    assert code == 2 and "not a GDSII stream file" in err


def test_cut_layout_is_one_line(capfd, tmp_path, layout):
    """capfd also catches what the C++ reader would print on the process's own stderr."""
    cut = tmp_path / "cut.gds"
    cut.write_bytes(layout.read_bytes()[:100])
    code, _, err = run(capfd, "import-layout", cut, "--layer", "3", "--depth", "5", "-o", tmp_path / "x.json")
    assert code == 2 and "cut short" in err and err.count("\n") == 1
