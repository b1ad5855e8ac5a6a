"""Grid conventions (stable API: other tools rely on them)."""
from __future__ import annotations

import numpy as np
import pytest

from core import Grid
from core.errors import InputError


def test_hard_wall_axis_holds_interior_points():
    g = Grid(lower=[0.0], upper=[1.0], points=[9])
    np.testing.assert_allclose(g.axes[0], np.linspace(0.1, 0.9, 9))
    assert g.spacing == pytest.approx((0.1,))


def test_periodic_axis_period_is_upper_minus_lower():
    g = Grid([-1.0], [1.0], [8], boundary="periodic")
    np.testing.assert_allclose(g.axes[0], -1.0 + 0.25 * np.arange(8))


def test_shapes_volume_element_and_mixed_boundaries():
    g = Grid([0, 0, 0], [1, 2, 3], [9, 19, 10], ["hard-wall", "hard-wall", "periodic"])
    assert g.shape == (9, 19, 10) and g.ndim == 3 and g.size == 9 * 19 * 10
    assert g.volume_element == pytest.approx(0.1 * 0.1 * 0.3)
    x, y, z = g.mesh()
    assert x.shape == g.shape and x[1, 0, 0] > x[0, 0, 0] and y[0, 1, 0] > y[0, 0, 0]


@pytest.mark.parametrize("kwargs,match", [
    (dict(lower=[0], upper=[1], points=[-4]), "points"),
    (dict(lower=[0], upper=[1], points=["abc"]), "points"),
    (dict(lower=[1], upper=[0], points=[10]), "greater"),
    (dict(lower=[0, 0], upper=[1], points=[10, 10]), "same number"),
    (dict(lower=[0], upper=[1], points=[10], boundary="sticky"), "boundary"),
    (dict(lower=[0, 0, 0, 0], upper=[1, 1, 1, 1], points=[5, 5, 5, 5]), "1, 2 or 3"),
    (dict(lower=[float("nan")], upper=[1], points=[10]), "finite"),
])
def test_bad_grids_are_refused(kwargs, match):
    with pytest.raises(InputError, match=match):
        Grid(**kwargs)


def test_refined_keeps_the_box():
    g = Grid([0, 0], [1, 1], [9, 19])
    f = g.refined(2.0)
    assert f.points == (19, 39) and f.spacing == pytest.approx((0.05, 0.025))
