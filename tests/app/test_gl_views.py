"""OpenGL isosurfaces of the 3D views: run only on a real display (``xvfb-run -a``, platform xcb).

Skipped, never failed, where no OpenGL context can be made (e.g. QT_QPA_PLATFORM=offscreen, on
which GL widgets may crash the process).  ``xvfb-run -a .venv/bin/python -m pytest tests/app/test_gl_views.py``
"""
from __future__ import annotations

import dataclasses
import os
from pathlib import Path

if os.environ.get("DISPLAY") and "QT_QPA_PLATFORM" not in os.environ:
    os.environ["QT_QPA_PLATFORM"] = "xcb"

import numpy as np
import pytest

from core.grid import Grid
from core.project import FormulaTerm, new_project
from core.study import solve_project

pytestmark = pytest.mark.gl


@pytest.fixture
def gl(qapp):
    from app.views.isosurface import gl_available
    if qapp.platformName() != "xcb" or not gl_available():
        pytest.skip(f"no OpenGL context on the {qapp.platformName()!r} platform (run under xvfb-run -a)")
    return True


def _sphere_project(points=20):
    """A 3D parabolic well V = c r^2 on a small grid (invented test scenario)."""
    base = new_project("3D parabolic well")
    return dataclasses.replace(base, grid=Grid([-60.0] * 3, [60.0] * 3, [points] * 3),
                               potential=(FormulaTerm("bowl", "0.5*hw*r**2/l0**2"),), electric_field=(0.0, 0.0, 0.0))


@pytest.fixture(scope="module")
def bowl():
    return solve_project(_sphere_project(), states=4)


def _session(result):
    from tests.app.test_views import StandInSession
    return StandInSession(result.project, result)


def test_potential_isosurface_is_the_analytic_sphere(qtbot, gl, bowl):
    """The isosurface V = E of V = (hw/2) r^2/l0^2 is the sphere r = l0 sqrt(2E/hw).

    Marching cubes (W. E. Lorensen, H. E. Cline, Computer Graphics 21(4), 163 (1987)) places vertices
    by linear interpolation along cell edges.  Along an edge V = c (x^2 + const) lies below its chord by
    c (x - x0)(x1 - x) <= c h^2/4, so a vertex has V_true in [E - c h^2/4, E]: it lies inside the sphere,
    by R - r <= h^2 / (4 (R + r)) <= h^2/(4 R) (h the grid spacing).  The test allows 2x that.
    """
    from app.views import PotentialView
    s = _session(bowl)
    view = PotentialView(s)
    qtbot.addWidget(view)
    view.resize(1100, 700)
    view.show()
    qtbot.waitExposed(view)
    assert view.isosurface.gl_view is not None
    e = 4.0                                                # meV, inside V's range
    view.iso_energy.setValue(e)
    verts, faces = view.isosurface.meshes[0]
    p = bowl.parameters
    radius = p["l0"] * np.sqrt(2 * e / p["hw"])
    h = bowl.grid.spacing[0]
    r = np.linalg.norm(verts, axis=1)
    assert len(faces) > 100
    assert np.all(r <= radius + 1e-9)
    assert np.max(radius - r) <= 2 * h ** 2 / (4 * radius)
    import pyqtgraph.opengl as glmod
    meshes = [it for it in view.isosurface.gl_view.items if isinstance(it, glmod.GLMeshItem)]
    assert len(meshes) == 1


def test_state_isosurface_rotates_and_renders(qtbot, gl, bowl, tmp_path):
    """The |psi|^2 surface of the ground state holding 50 % of the probability is drawn and can be turned."""
    from app.views import StatesView
    s = _session(bowl)
    view = StatesView(s)
    qtbot.addWidget(view)
    view.resize(1100, 700)
    view.show()
    qtbot.waitExposed(view)
    glw = view.isosurface.gl_view
    assert glw is not None
    before = dict(glw.opts)
    glw.orbit(40, 10)
    assert glw.opts["azimuth"] != before["azimuth"]
    qtbot.wait(50)
    out = Path(os.environ.get("WELLSCAPE_SHOTS", tmp_path))
    out.mkdir(parents=True, exist_ok=True)
    img = view.grab().toImage()
    assert img.save(str(out / "3d_states_gl.png"))
    frame = glw.grabFramebuffer()
    assert frame.save(str(out / "3d_states_gl_surface.png"))
    colours = {frame.pixel(x, y) for x in range(0, frame.width(), 4) for y in range(0, frame.height(), 4)}
    assert len(colours) > 10, "the isosurface view looks blank"
    # signed mode: two surfaces, psi = +c and psi = -c, for the first excited (odd) state
    s.select_state(1)
    view.mode.setCurrentIndex(1)
    assert len(view.isosurface.meshes) == 2 and all(m is not None for m in view.isosurface.meshes)
