"""Figure sheets of every bundled sample, in every template: no drawn text overlaps another text and
no text leaves the figure.  The boxes are measured with matplotlib's own renderer
(``Text.get_window_extent``), as drawn; this is a layout check (common practice), not physics.

Each sample is solved once and its sheet drawn in the three templates; the full matrix solves every
sample (a 3D one among them), so it is marked slow.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from core.figures import TEMPLATES, build_sheet, sheet_figure
from core.project import load_project
from core.study import solve_project

SAMPLES = sorted((Path(__file__).resolve().parents[2] / "sample_projects").glob("*.json"))
_TOL = 0.5   # pixels: boxes that only touch are not an overlap


def _text_boxes(fig):
    """(text, box) of every text the figure really draws, in display pixels: ``Text.draw`` is
    watched during a full draw, so tick labels matplotlib skips (outside the view) do not count."""
    from unittest import mock

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.text import Text
    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    seen = []
    original = Text.draw

    def watch(self, renderer):
        if self.get_visible() and self.get_text().strip():
            seen.append(self)
        return original(self, renderer)

    with mock.patch.object(Text, "draw", watch):
        fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    out = []
    for t in dict.fromkeys(seen):          # an annotation's draw calls Text.draw: count it once
        box = Text.get_window_extent(t, renderer)   # an annotation's own extent includes its leader line
        clip = t.get_clip_box() if t.get_clip_on() else None
        if clip is not None and not box.overlaps(clip):
            continue                      # clipped away entirely: not visible
        out.append((t.get_text(), box))
    return out


def _problems(fig) -> list:
    boxes = _text_boxes(fig)
    W, H = fig.canvas.get_width_height()
    bad = []
    for text, b in boxes:
        if b.x0 < -_TOL or b.y0 < -_TOL or b.x1 > W + _TOL or b.y1 > H + _TOL:
            bad.append(f"{text!r} leaves the figure ({b.x0:.0f}, {b.y0:.0f}, {b.x1:.0f}, {b.y1:.0f}) of {W}x{H}")
    for i, (ta, a) in enumerate(boxes):
        for tb, b in boxes[i + 1:]:
            w = min(a.x1, b.x1) - max(a.x0, b.x0)
            h = min(a.y1, b.y1) - max(a.y0, b.y0)
            if w > _TOL and h > _TOL:
                bad.append(f"{ta!r} overlaps {tb!r} by {w:.1f} x {h:.1f} px")
    return bad


def _check_sample(path: Path) -> list:
    project = load_project(str(path))
    result = solve_project(project, states=project.solver.states)
    bad = []
    for name in TEMPLATES:
        bad.extend(f"{path.stem}/{name}: {m}" for m in _sheet_problems(build_sheet(result, template=name)))
    return bad


def _sheet_problems(sheet) -> list:
    """The sheet drawn and measured as render_sheet draws it (the template's type sizes in force)."""
    import matplotlib

    from core.figures import _rc, _template
    with matplotlib.rc_context(_rc(_template(sheet.template))):
        return _problems(sheet_figure(sheet))


def test_detector_finds_an_overlap():
    """The check itself can fail: two texts put on one spot are reported."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    fig = Figure(figsize=(3, 2))
    FigureCanvasAgg(fig)
    fig.text(0.5, 0.5, "gap 0.0457 meV")
    fig.text(0.52, 0.5, "Levels against eps")
    fig.text(0.9, 0.5, "this runs off the right edge")
    bad = _problems(fig)
    assert any("overlaps" in m for m in bad) and any("leaves the figure" in m for m in bad)


def test_double_dot_sheet_has_no_overlapping_text():
    """The sample the issue showed (gate labels, tunnel doublet), all templates."""
    bad = _check_sample(next(p for p in SAMPLES if p.stem == "gaas_double_dot"))
    assert not bad, "\n".join(bad)


@pytest.mark.slow
@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_every_sample_sheet_has_no_overlapping_text(path):
    bad = _check_sample(path)
    assert not bad, "\n".join(bad)
