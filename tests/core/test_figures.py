"""Figure sheets (core.figures): output files, page sizes, true-resolution images, the sheet's
data file and its validation, panels that carry the physics right.

Physics checks compare with the two-dimensional isotropic harmonic oscillator, whose levels
are E = (N + 1) hbar*omega with N + 1 states in shell N and whose classical turning points on
the x axis are x_t = +-l0 sqrt(2 E / hbar*omega), l0 = sqrt(hbar / (m omega)) (any quantum
mechanics text, e.g. C. Cohen-Tannoudji, B. Diu, F. Laloe, Quantum Mechanics, ch. V).
"""
from __future__ import annotations

import base64
import io
import json
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from core.errors import InputError
from core.figures import (
    TEMPLATES,
    build_sheet,
    load_sheet,
    parse_layout,
    project_hash,
    render_sheet,
    save_sheet,
    sheet_figure,
    sheet_json_path,
    sheet_to_dict,
)
from core.project import project_from_dict
from core.study import solve_project
from core.units import get_units

ROOT = Path(__file__).resolve().parents[2]
HW = 3.0          # hbar*omega, meV
MASS = 0.067      # GaAs, m0


def oscillator_project(points=36, half=100.0, states=6, ndim=2):
    kin = get_units("semiconductor").kinetic_prefactor(MASS)   # hbar^2/2m in meV nm^2
    coords = "x**2 + y**2" + (" + z**2" if ndim == 3 else "")
    doc = {"schema_version": 2, "title": "Test oscillator", "units": "semiconductor",
           "material": {"name": "GaAs", "mass": MASS},
           "grid": {"lower": [-half] * ndim, "upper": [half] * ndim, "points": [points] * ndim,
                    "boundary": "hard-wall"},
           "parameters": {"hw": HW, "kin": kin},
           "potential": [{"kind": "formula", "label": "parabola", "enabled": True,
                          "formula": f"hw**2*({coords})/(4*kin)"}],
           "electric_field": [0.0] * ndim, "magnetic_field": [0.0, 0.0, 0.0], "spin": False,
           "solver": {"states": states, "scheme": "spectral", "tolerance": 1e-8}}
    return project_from_dict(doc)


@pytest.fixture(scope="module")
def osc():
    return solve_project(oscillator_project())


@pytest.fixture(scope="module")
def gate_dot():
    """The bundled gate-defined dot on a coarser grid (fast), to see gate outlines."""
    doc = json.loads((ROOT / "sample_projects" / "gaas_single_dot.json").read_text())
    doc["grid"]["points"] = [40, 40]
    doc["solver"]["states"] = 4
    project = project_from_dict(doc, base_dir=str(ROOT / "sample_projects"))
    return solve_project(project)


@pytest.fixture(scope="module")
def sheet(osc):
    return build_sheet(osc, template="slide")


@pytest.fixture(scope="module")
def fig(sheet):
    """The default sheet drawn once (drawing is the slow part; several tests read it)."""
    return sheet_figure(sheet)


# --- output files --------------------------------------------------------------------------

def test_png_has_the_requested_pixel_size_and_is_not_blank(sheet, tmp_path):
    out = render_sheet(sheet, tmp_path / "s.png", dpi=60)
    img = Image.open(out)
    # the slide is 40/3 x 7.5 inches: 800 x 450 pixels at 60 dpi
    assert img.size == (800, 450)
    px = np.asarray(img.convert("RGB"), dtype=float)
    assert px.std() > 20.0                                   # not a blank page
    sat = px.max(axis=2) - px.min(axis=2)
    assert (sat > 60).mean() > 0.02                          # colour maps were drawn


@pytest.mark.parametrize("template, width_pt, height_pt", [("slide", 960.0, 540.0), ("column", 86 / 25.4 * 72, None)])
def test_pdf_page_size(osc, tmp_path, template, width_pt, height_pt):
    small = build_sheet(osc, layout="potential+states1", template="slide")
    out = render_sheet(small, tmp_path / "s.pdf", template=template)
    data = out.read_bytes()
    assert data.startswith(b"%PDF")
    m = re.search(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)\s*\]", data)
    assert m, "no MediaBox in the PDF"
    w, h = float(m.group(1)), float(m.group(2))
    assert w == pytest.approx(width_pt, abs=0.5)
    if height_pt is not None:
        assert h == pytest.approx(height_pt, abs=0.5)
    else:
        assert 0.5 * w < h < 4 * w                          # a column figure of sensible height
    # maps are embedded at the grid's own resolution (36 x 36 points), not resampled
    widths = [int(v) for v in re.findall(rb"/Width (\d+)", data)]
    heights = [int(v) for v in re.findall(rb"/Height (\d+)", data)]
    assert 36 in widths and 36 in heights


def test_svg_is_xml_with_vector_paths_and_true_resolution_images(sheet, tmp_path):
    out = render_sheet(sheet, tmp_path / "s.svg")
    root = ET.parse(out).getroot()
    ns = "{http://www.w3.org/2000/svg}"
    paths = root.iter(f"{ns}path")
    assert sum(1 for _ in paths) > 100                       # axes, ticks, text and contours stay vector
    sizes = []
    for im in root.iter(f"{ns}image"):
        href = im.get("{http://www.w3.org/1999/xlink}href") or im.get("href")
        assert href.startswith("data:image/png;base64,")
        sizes.append(Image.open(io.BytesIO(base64.b64decode(href.split(",", 1)[1]))).size)
    pot = sheet.panels[0]
    assert (pot["x"].size, pot["y"].size) in sizes           # the potential map at the grid's resolution
    state = sheet.panels[1]
    assert (state["x"].size, state["y"].size) in sizes


def test_a_failed_render_leaves_an_existing_figure_alone(sheet, tmp_path):
    target = tmp_path / "keep.png"
    target.write_bytes(b"old figure")
    with pytest.raises(InputError, match="dpi"):
        render_sheet(sheet, target, dpi=1)
    assert target.read_bytes() == b"old figure"
    with pytest.raises(InputError, match="folder"):
        render_sheet(sheet, tmp_path / "missing" / "x.png")
    with pytest.raises(InputError, match=r"\.png, \.pdf or \.svg"):
        render_sheet(sheet, tmp_path / "x.gif")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.png"]   # no temporary files left


def test_core_draws_without_qt_or_a_gui_backend(tmp_path):
    """core.figures runs with Qt made unimportable and no display."""
    code = f"""
import sys
sys.modules['PySide6'] = None
sys.modules['pyqtgraph'] = None
sys.path.insert(0, {str(ROOT)!r})
import numpy as np
from core.figures import Sheet, render_sheet
x = np.linspace(-1, 1, 8)
p = {{"kind": "state", "title": "t", "level": 0, "energy": 1.0, "mode": "density", "value_label": "v",
      "x_label": "x [nm]", "y_label": "y [nm]", "x": x, "y": x, "values": np.outer(x, x) ** 2}}
s = Sheet(panels=(p,), caption=("caption",), layout="states1")
for ext in ("png", "pdf", "svg"):
    render_sheet(s, {str(tmp_path)!r} + "/a." + ext, dpi=40)
import matplotlib
assert "agg" in matplotlib.get_backend().lower() or "PyQt" not in matplotlib.get_backend()
assert not any(m.startswith(("PySide6", "PyQt", "tkinter")) and sys.modules[m] is not None for m in sys.modules)
print("ok")
"""
    env = {"PATH": "/usr/bin:/bin", "HOME": str(tmp_path)}
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=300)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "ok"
    assert all((tmp_path / f"a.{e}").stat().st_size > 500 for e in ("png", "pdf", "svg"))


# --- the sheet's data file -----------------------------------------------------------------

def _plotted(fig):
    """Every image array and line of a drawn sheet, panel by panel."""
    out = []
    for ax in fig._wellscape_panels:
        out.append(([np.asarray(im.get_array()) for im in ax.get_images()],
                    [np.asarray(line.get_xydata()) for line in ax.get_lines()]))
    return out


def test_regenerating_from_the_sheet_json_plots_the_same_values(sheet, fig, tmp_path):
    fig_path, data_path = save_sheet(sheet, tmp_path / "talk.png", dpi=50)
    assert data_path == sheet_json_path(fig_path) == tmp_path / "talk.sheet.json"
    again = load_sheet(data_path)
    assert len(again.panels) == len(sheet.panels)
    for a, b in zip(sheet.panels, again.panels):
        assert a["kind"] == b["kind"] and a["title"] == b["title"]
        for key, value in a.items():
            if isinstance(value, np.ndarray):
                assert np.array_equal(value, b[key]), (a["kind"], key)     # exact, float64 round trip
    first, second = _plotted(fig), _plotted(sheet_figure(again))
    for panel, (ims1, lines1), (ims2, lines2) in zip(sheet.panels, first, second):
        assert len(ims1) == len(ims2) and len(lines1) == len(lines2)
        assert all(np.array_equal(u, v, equal_nan=True) for u, v in zip(ims1, ims2))
        # the level diagram's bar widths are layout (they follow text extents); its energies are the data
        cols = slice(1, 2) if panel["kind"] == "levels" else slice(None)
        bad = [(u[:3].tolist(), v[:3].tolist()) for u, v in zip(lines1, lines2)
               if not np.array_equal(u[:, cols], v[:, cols], equal_nan=True)]   # NaN breaks lines
        assert not bad, bad
    redrawn = render_sheet(again, tmp_path / "again.png", dpi=50)
    assert np.array_equal(np.asarray(Image.open(fig_path)), np.asarray(Image.open(redrawn)))


def test_the_potential_map_plots_the_solved_potential(osc, sheet, fig):
    pot = sheet.panels[0]
    assert pot["kind"] == "potential"
    assert np.array_equal(pot["values"], osc.potential)
    assert np.array_equal(pot["x"], osc.grid.axes[0]) and np.array_equal(pot["y"], osc.grid.axes[1])
    assert np.array_equal(np.asarray(fig._wellscape_panels[0].get_images()[0].get_array()), osc.potential.T)


def test_caption_names_units_scheme_version_and_hash(osc, sheet, fig):
    from core import __version__
    text = "\n".join(sheet.caption)
    assert "nm" in text and "meV" in text
    assert osc.scheme in text and "sinc-DVR" in text
    assert f"Wellscape {__version__}" in text
    assert sheet.project_hash in text and re.fullmatch(r"[0-9a-f]{12}", sheet.project_hash)
    assert "GaAs" in text and "36 × 36" in text and "idealised" in text
    shown = " ".join(t.get_text() for t in fig.texts).replace("\n", " ")
    # the sheet carries the short caption; the full record (units, version, parameters) stays in the file
    assert osc.scheme in shown and "GaAs" in shown and "36 × 36" in shown and sheet.project_hash in shown
    assert "idealised" not in shown and "Parameters" not in shown


def test_hash_follows_the_exact_inputs(osc):
    from core.figures import _project_doc
    doc = _project_doc(osc.project, osc.parameters)
    assert project_hash(doc) == project_hash(json.loads(json.dumps(doc)))
    other = json.loads(json.dumps(doc))
    other["parameters"]["hw"] = HW * 1.001
    assert project_hash(other) != project_hash(doc)


def test_a_sheet_file_edited_by_hand_is_refused(sheet, tmp_path):
    doc = json.loads(json.dumps(sheet_to_dict(sheet)))
    good = tmp_path / "good.sheet.json"
    good.write_text(json.dumps(doc))
    assert load_sheet(good).project_hash == sheet.project_hash
    doc["project"]["parameters"]["hw"] = 99.0           # no longer the project the figure was made from
    bad = tmp_path / "edited.sheet.json"
    bad.write_text(json.dumps(doc))
    with pytest.raises(InputError, match="project_hash"):
        load_sheet(bad)


@pytest.mark.parametrize("mutate, message", [
    (lambda d: d.update(format="something else"), "not a Wellscape figure-sheet"),
    (lambda d: d.update(format_version=99), "newer"),
    (lambda d: d["panels"][0].update(values=[[1.0, 2.0], [3.0]]), r"panels\[0\]\.values"),
    (lambda d: d["panels"][0].update(values="import os"), r"panels\[0\]\.values"),
    (lambda d: d["panels"][0].update(x=d["panels"][0]["x"][:-1]), "does not match"),
    (lambda d: d["panels"][1].update(kind="macro"), r"panels\[1\]\.kind"),
    (lambda d: d["panels"][1].update(extra=1), "unknown keys"),
    (lambda d: d.update(panels=[]), "non-empty"),
    (lambda d: d.update(template="poster"), "template"),
    (lambda d: d["panels"][-1].update(groups=[[0, 1]]), "exactly once"),
])
def test_bad_sheet_files_get_a_clear_error(sheet, tmp_path, mutate, message):
    doc = json.loads(json.dumps(sheet_to_dict(sheet)))
    mutate(doc)
    path = tmp_path / "bad.sheet.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(InputError, match=message):
        load_sheet(path)


def test_non_json_and_nan_are_refused(tmp_path):
    p = tmp_path / "x.sheet.json"
    p.write_text("{not json")
    with pytest.raises(InputError, match="not valid JSON"):
        load_sheet(p)
    p.write_text('{"format": "wellscape-figure-sheet", "format_version": 1, "panels": [NaN]}')
    with pytest.raises(InputError, match="NaN"):
        load_sheet(p)
    with pytest.raises(InputError, match="no such sheet"):
        load_sheet(tmp_path / "missing.sheet.json")


def test_the_data_file_never_replaces_a_file_that_is_not_a_sheet(sheet, tmp_path):
    precious = tmp_path / "dot.sheet.json"
    precious.write_text('{"schema_version": 2, "title": "my project"}')
    with pytest.raises(InputError, match="not overwriting"):
        save_sheet(sheet, tmp_path / "dot.png")
    assert precious.read_text() == '{"schema_version": 2, "title": "my project"}'
    assert not (tmp_path / "dot.png").exists()


# --- layouts -------------------------------------------------------------------------------

def test_layout_grammar():
    assert parse_layout("potential+states4+levels") == [("potential", 1), ("states", 4), ("levels", 1)]
    assert parse_layout(" fan ") == [("fan", 1)]
    assert parse_layout("states6") == [("states", 6)]
    for bad in ("", "potential+spectrum", "levels2", "states0", "states40"):
        with pytest.raises(InputError):
            parse_layout(bad)


def test_layouts_and_templates_make_the_panels_asked_for(osc, tmp_path):
    s = build_sheet(osc, layout="states6", template="double", wavefunction="signed")
    assert [p["kind"] for p in s.panels] == ["state"] * 6
    assert [p["level"] for p in s.panels] == [0, 1, 2, 3, 4, 5]
    assert all(p["mode"] == "signed" for p in s.panels)
    s = build_sheet(osc, layout="potential+cut+levels", states=[2, 0], template="column")
    assert [p["kind"] for p in s.panels] == ["potential", "cut", "levels"]
    with pytest.raises(InputError, match="not solved"):
        build_sheet(osc, states=[0, 40])
    with pytest.raises(InputError, match="sweep"):
        build_sheet(osc, layout="fan")
    with pytest.raises(InputError, match="template"):
        build_sheet(osc, template="poster")
    assert TEMPLATES["column"].width_in * 25.4 == pytest.approx(86)
    assert TEMPLATES["double"].width_in * 25.4 == pytest.approx(178)
    assert TEMPLATES["slide"].width_in / TEMPLATES["slide"].height_in == pytest.approx(16 / 9)


def test_every_axis_label_carries_a_unit(fig):
    for ax in fig._wellscape_panels:
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            if label:
                assert "[" in label and "]" in label, label
    for ax in fig.axes:
        if ax not in fig._wellscape_panels and ax.get_ylabel():   # colour bars
            assert "nm" in ax.get_ylabel() or "meV" in ax.get_ylabel()


# --- panels and physics ----------------------------------------------------------------------

def test_state_titles_give_the_oscillator_energies_and_multiplets(osc, sheet):
    """Shell N of the 2D oscillator: E = (N + 1) hbar*omega, N + 1 states."""
    states = [p for p in sheet.panels if p["kind"] == "state"]
    assert [p["level"] for p in states] == [0, 1, 2, 3]
    for p in states:
        n_shell = {0: 0, 1: 1, 2: 1, 3: 2}[p["level"]]
        assert p["energy"] == pytest.approx((n_shell + 1) * HW, rel=2e-4)
        assert f"{p['energy']:.2f} meV" in p["title"]
    assert "x+ y+" in states[0]["title"]
    assert "doublet 1–2" in states[1]["title"] and "doublet 1–2" in states[2]["title"]
    levels = sheet.panels[-1]
    assert levels["kind"] == "levels"
    assert [len(g) for g in levels["groups"]][:3] == [1, 2, 3]
    assert levels["highlight"] == [0, 1, 2, 3]


def test_degenerate_levels_are_drawn_side_by_side(sheet, fig):
    ax = fig._wellscape_panels[-1]
    bars = [line.get_xydata() for line in ax.get_lines()]
    e = sheet.panels[-1]["energies"]
    doublet = [b for b in bars if abs(b[0, 1] - e[1]) < 1e-9 or abs(b[0, 1] - e[2]) < 1e-9]
    assert len(doublet) == 2
    (a0, a1), (b0, b1) = sorted(tuple(b[:, 0]) for b in doublet)
    assert a1 <= b0                                               # next to each other, not on top
    texts = " ".join(t.get_text() for t in ax.texts)
    assert "1–2" in texts and "(×2)" in texts and "(×3)" in texts


def test_cut_draws_levels_between_the_classical_turning_points(osc):
    s = build_sheet(osc, layout="cut")
    cut = s.panels[0]
    assert "y =" in cut["title"]
    fig = sheet_figure(s)
    ax = fig._wellscape_panels[0]
    l0 = np.sqrt(2 * get_units("semiconductor").kinetic_prefactor(MASS) / HW)
    h = osc.grid.spacing[0]
    y_cut = abs(float(cut["title"].split("y = ")[1].split()[0]))
    for e_level in (HW, 2 * HW):
        segs = [line.get_xydata() for line in ax.get_lines()
                if np.allclose(line.get_xydata()[:, 1], e_level, rtol=1e-3)]
        assert len(segs) == 1
        x_t = np.sqrt(max(l0 ** 2 * 2 * e_level / HW - y_cut ** 2, 0.0))   # V(x, y_cut) = E on the cut
        assert segs[0][0, 0] == pytest.approx(-x_t, abs=h) and segs[0][1, 0] == pytest.approx(x_t, abs=h)


def test_potential_map_shows_gates_and_a_scale_bar(gate_dot, tmp_path):
    s = build_sheet(gate_dot, layout="potential+states1", template="slide")
    pot = s.panels[0]
    assert {g["label"] for g in pot["gates"]} == {"west", "east", "north", "south", "plunger"}
    plunger = next(g for g in pot["gates"] if g["label"] == "plunger")
    assert plunger["voltage"] == pytest.approx(0.05)
    assert pot["scale_bar"] == 100.0                          # a round length near a quarter of 520 nm
    caption = " ".join(s.caption)
    assert "plunger 0.05 V" in caption and "-0.25 V" in caption
    fig = sheet_figure(s)
    ax = fig._wellscape_panels[0]
    assert len(ax.patches) == 5                               # every gate outline
    bar = ax._wellscape_scale_bar
    assert "100 nm" in bar.txt_label.get_text()


def test_three_d_states_are_projected_or_sliced():
    r = solve_project(oscillator_project(points=16, half=60.0, states=4, ndim=3))
    s = build_sheet(r, layout="potential+states1")
    p = s.panels[1]
    assert "dz" in p["value_label"]
    dx, dy = np.diff(p["x"][:2])[0], np.diff(p["y"][:2])[0]
    assert p["values"].sum() * dx * dy == pytest.approx(1.0, rel=1e-6)    # a projected density integrates to 1
    assert "z =" in s.panels[0]["title"]
    s = build_sheet(r, layout="states1", three_d="slice", crop=False)
    assert "z =" in s.panels[0]["title"] and "nm$^{-3}$" in s.panels[0]["value_label"]


# --- the sweep fan -------------------------------------------------------------------------

def two_level_sweep(project, gap=0.2):
    """A sweep of two levels with an anticrossing of minimum gap ``gap`` at eps = 0:
    E = c -+ sqrt(eps^2 + gap^2 / 4), plus a far level (the two-level model)."""
    from core.sweep import Anticrossing, SweepResult
    eps = np.linspace(-1.0, 1.0, 41)
    lo = 10.0 - np.sqrt(eps ** 2 + gap ** 2 / 4)
    hi = 10.0 + np.sqrt(eps ** 2 + gap ** 2 / 4)
    far = np.full_like(eps, 13.0)
    energies = np.stack([lo, hi, far], axis=1)
    tracks = np.tile(np.arange(3)[:, None], (1, eps.size))
    ac = Anticrossing(at=0.0, gap=gap, tracks=(0, 1), kind="anticrossing", index=20, sampled_gap=gap)
    return SweepResult(parameter="magnetic_field[2]", values=eps, energies=energies, tracks=tracks,
                       anticrossings=(ac,), observables={}, project=project)


def test_fan_marks_the_anticrossing_with_its_gap(osc, tmp_path):
    sweep = two_level_sweep(osc.project)
    s = build_sheet(osc, sweep=sweep, template="slide")
    assert [p["kind"] for p in s.panels] == ["potential", "state", "state", "fan"]
    fan = s.panels[-1]
    assert fan["x_label"] == "magnetic_field[2] [T]" and fan["y_label"] == "E [meV]"
    assert np.array_equal(fan["tracks"], sweep.track_energies())
    ac = fan["anticrossings"][0]
    assert ac["centre"] == pytest.approx(10.0) and ac["gap"] == 0.2
    fig = sheet_figure(s)
    ax = fig._wellscape_panels[-1]
    arrows = [a for a in ax.texts if getattr(a, "arrow_patch", None) is not None and a.get_text() == ""]
    assert len(arrows) == 1
    (x0, y0), (x1, y1) = arrows[0].xyann, arrows[0].xy
    assert x0 == x1 == 0.0 and abs(y1 - y0) == pytest.approx(0.2)      # the arrow spans the gap exactly
    # the sweep's own words, in two short lines
    assert any(t.get_text().replace("\n", " ") == ac["text"] == "gap 2t = 200 µeV" for t in ax.texts)
    fan_only = build_sheet(None, sweep=sweep)
    assert [p["kind"] for p in fan_only.panels] == ["fan"]
    data = tmp_path / "fan.sheet.json"
    data.write_text(json.dumps(sheet_to_dict(fan_only)))
    assert load_sheet(data).panels[0]["anticrossings"][0]["gap"] == 0.2


def test_fan_keeps_missing_points_as_gaps(osc, tmp_path):
    sweep = two_level_sweep(osc.project)
    tracks = sweep.tracks.copy()
    energies = sweep.energies.copy()
    energies[5, 2] = np.nan                                      # a level missing at one point
    sweep = replace(sweep, energies=energies, tracks=tracks)
    s = build_sheet(None, sweep=sweep, layout="fan")
    _, data = save_sheet(s, tmp_path / "fan.png", dpi=40)
    assert Image.open(tmp_path / "fan.png").size[0] == 533           # 40/3 in at 40 dpi
    back = load_sheet(data).panels[0]["tracks"]
    assert np.isnan(back[2, 5]) and np.array_equal(np.isnan(back), np.isnan(s.panels[0]["tracks"]))


# --- a convergence check on the level diagram ----------------------------------------------------
# Richardson extrapolation (L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)); the 2D
# oscillator's shells (N + 1 equal levels at (N + 1) hbar*omega, see the module docstring) are split
# on a second-order grid only by the grid, so their internal splittings must be "not resolved" and
# the hbar*omega gaps between shells "resolved".

@pytest.fixture(scope="module")
def fd2_checked():
    from core.convergence import convergence_study
    p = oscillator_project(points=36, states=6)
    p = replace(p, solver=replace(p.solver, scheme="fd2"))
    return solve_project(p), convergence_study(p, factor=1.5, grids=3)


def _exact_levels(n):
    return np.array([HW * (N + 1) for N in range(6) for _ in range(N + 1)])[:n]


def test_levels_panel_marks_every_splitting_with_the_analytic_verdict(fd2_checked, tmp_path):
    result, report = fd2_checked
    sheet = build_sheet(result, layout="levels", convergence=report)
    panel = sheet.panels[0]
    exact = _exact_levels(6)
    assert panel["groups"] == [[0], [1, 2], [3, 4, 5]]        # grouped with the error-based tolerance
    assert len(panel["splittings"]) == 5
    for sp in panel["splittings"]:
        same_shell = exact[sp["lower"]] == exact[sp["upper"]]
        assert sp["resolved"] == (not same_shell), sp
    # each error bar covers the project grid's distance to the exact level within a factor of 3
    # (the estimate is the distance to the Richardson value, itself O(h^4)-close to the exact one)
    err = panel["errors"]
    true = np.abs(result.energies[:6] - exact)
    assert np.all(err > true / 3) and np.all(err < 3 * true)
    assert any("Levels checked on 3 grids" in line for line in sheet.caption)
    # drawn with the marks, and redrawn identically from the sheet's data file
    fig_path, data_path = save_sheet(sheet, tmp_path / "levels.png")
    again = load_sheet(data_path)
    assert again.panels[0]["splittings"] == panel["splittings"]
    np.testing.assert_array_equal(again.panels[0]["errors"], err)
    texts = [t.get_text() for t in sheet_figure(sheet).axes[0].texts]
    assert texts.count("✓") == 2                     # the two gaps between shells, left of the bars
    assert any(t.endswith("≈") for t in "\n".join(texts).split("\n"))   # inside the shells' labels


def test_a_convergence_check_of_another_project_is_refused(fd2_checked, osc):
    _result, report = fd2_checked
    with pytest.raises(InputError, match="another project"):
        build_sheet(osc, layout="levels", convergence=report)


@pytest.mark.parametrize("mutate, message", [
    (lambda p: p.update(splittings="all fine"), r"splittings"),
    (lambda p: p.update(splittings=[{"lower": 0, "upper": 99, "resolved": True}]), r"splittings\[0\]\.upper"),
    (lambda p: p.update(splittings=[{"lower": 0, "upper": 1, "resolved": "yes"}]), r"resolved"),
    (lambda p: p.update(errors=[0.1]), r"errors"),
])
def test_bad_verdicts_in_a_sheet_file_get_a_clear_error(fd2_checked, tmp_path, mutate, message):
    result, report = fd2_checked
    doc = json.loads(json.dumps(sheet_to_dict(build_sheet(result, layout="levels", convergence=report))))
    mutate(doc["panels"][0])
    path = tmp_path / "bad.sheet.json"
    path.write_text(json.dumps(doc))
    with pytest.raises(InputError, match=message):
        load_sheet(path)


def test_short_caption_keeps_what_the_reader_needs_and_leaves_the_record_to_the_file():
    """The sheet's caption: material, grid, scheme, fields and hash; a warning that panels come from
    two project states, or the key of a mark, is kept whole; parameters and version stay in the file."""
    from core.figures import short_caption
    full = ["A dot", "Material: GaAs, m* = 0.067 m0.  Grid: 10 × 10 points on [-1, 1] × [-1, 1] nm, spacing 0.2, "
            "0.2 nm, hard-wall boundaries.", "Kinetic scheme: fd2 (2nd-order finite differences), set in the project; "
            "4 levels solved.  Fields: B = (0, 0, 0) T.  Parameters: a = 1.",
            "Units: lengths in nm.  Wellscape 9.9, project hash 0123456789ab.",
            "Panels from two project states: the fan from state aa, every other panel from state bb."]
    text = short_caption(full)
    assert text.startswith("A dot. GaAs, m* = 0.067 m0; grid 10 × 10, spacing 0.2, 0.2 nm, hard-wall boundaries")
    assert "fd2 (2nd-order finite differences) kinetic scheme" in text and "B = (0, 0, 0) T" in text
    assert "0123456789ab" in text and "Panels from two project states: the fan from state aa" in text
    assert "Parameters" not in text and "9.9" not in text
    assert not short_caption(full, with_title=False).startswith("A dot")
