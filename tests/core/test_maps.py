"""Loading and interpolating imported potential maps.

Interpolation references: linear interpolation reproduces linear functions exactly, and
piecewise-linear interpolation of f has error at most h^2/8 * max|f''| (C. de Boor,
A Practical Guide to Splines, Springer, New York, 1978, ch. III); results are also
compared with scipy.interpolate.interpn where noted.  Maps are invented test data.
"""
from __future__ import annotations

import pickle

import numpy as np
import pytest
from scipy.interpolate import interpn

from core.errors import InputError
from core.grid import Grid
from core.maps import interpolate_map, load_map_file

UNPICKLED: list = []


def _record_unpickle(tag):
    """Called only if a test file's pickle payload is ever executed."""
    UNPICKLED.append(tag)
    return tag


class _Tripwire:
    def __reduce__(self):
        return (_record_unpickle, ("tripwire",))


def _sample_map():
    x = np.linspace(-1.0, 2.0, 7)[:, None]
    y = np.linspace(0.0, 1.0, 5)[None, :]
    return 0.3 * x - 1.7 * y + 0.25 * x * y + 0.01


# -- round trips -----------------------------------------------------------------------------
def test_npy_round_trip(tmp_path):
    data = _sample_map()
    p = tmp_path / "dot_map.npy"
    np.save(p, data)
    out = load_map_file(p)
    assert out.dtype == float
    np.testing.assert_array_equal(out, data)


def test_npy_integer_and_3d(tmp_path):
    data = np.arange(24, dtype=np.int32).reshape(2, 3, 4)
    p = tmp_path / "cube.npy"
    np.save(p, data)
    out = load_map_file(str(p))
    assert out.shape == (2, 3, 4) and out.dtype == float
    np.testing.assert_array_equal(out, data)


def test_npz_single_and_named(tmp_path):
    data = _sample_map()
    one = tmp_path / "one.npz"
    np.savez(one, potential=data)
    np.testing.assert_array_equal(load_map_file(one), data)

    many = tmp_path / "many.npz"
    np.savez_compressed(many, potential=data, density=2 * data)
    np.testing.assert_array_equal(load_map_file(many, array_name="density"), 2 * data)
    with pytest.raises(InputError) as info:
        load_map_file(many)
    assert "'potential'" in str(info.value) and "'density'" in str(info.value)
    assert str(many) in str(info.value)
    with pytest.raises(InputError, match="no array named 'phi'"):
        load_map_file(many, array_name="phi")


def test_csv_and_txt_round_trip(tmp_path):
    data = _sample_map()
    c = tmp_path / "table.csv"
    np.savetxt(c, data, delimiter=",", header="potential in meV")
    np.testing.assert_allclose(load_map_file(c), data, rtol=0, atol=0)
    t = tmp_path / "table.txt"
    np.savetxt(t, data, fmt="%.17g")
    np.testing.assert_array_equal(load_map_file(t), data)


def test_text_single_column_and_row_are_1d(tmp_path):
    col = tmp_path / "col.csv"
    np.savetxt(col, np.array([1.5, 2.5, 3.5]).reshape(-1, 1), delimiter=",")
    assert load_map_file(col).shape == (3,)
    row = tmp_path / "row.txt"
    np.savetxt(row, np.array([[1.0, 2.0, 3.0, 4.0]]))
    np.testing.assert_array_equal(load_map_file(row), [1.0, 2.0, 3.0, 4.0])


# -- refusals --------------------------------------------------------------------------------
def test_pickled_object_array_refused_and_never_unpickled(tmp_path):
    UNPICKLED.clear()
    obj = np.empty(2, dtype=object)
    obj[0] = _Tripwire()
    obj[1] = 1.0
    p = tmp_path / "objects.npy"
    np.save(p, obj, allow_pickle=True)
    with pytest.raises(InputError, match="pickled") as info:
        load_map_file(p)
    assert str(p) in str(info.value)

    z = tmp_path / "objects.npz"
    np.savez(z, phi=obj)
    with pytest.raises(InputError, match="pickled"):
        load_map_file(z)

    raw = tmp_path / "raw.npy"
    raw.write_bytes(pickle.dumps(_Tripwire()))
    with pytest.raises(InputError, match="pickled"):
        load_map_file(raw)
    assert UNPICKLED == []


def test_nan_and_inf_reported_with_count_and_first_index(tmp_path):
    data = _sample_map()
    data[1, 2] = np.nan
    data[4, 0] = np.inf
    p = tmp_path / "holes.npy"
    np.save(p, data)
    with pytest.raises(InputError) as info:
        load_map_file(p)
    text = str(info.value)
    assert "2 values not finite" in text and "(1, 2)" in text and str(p) in text

    c = tmp_path / "holes.csv"
    c.write_text("1.0, 2.0\n3.0, nan\n")
    with pytest.raises(InputError, match=r"1 value not finite.*\(1, 1\)"):
        load_map_file(c)


def test_rank_complex_and_text_refusals(tmp_path):
    scalar = tmp_path / "scalar.npy"
    np.save(scalar, np.array(3.0))
    with pytest.raises(InputError, match="single number"):
        load_map_file(scalar)
    four = tmp_path / "four.npy"
    np.save(four, np.zeros((2, 2, 2, 2)))
    with pytest.raises(InputError, match="4 axes"):
        load_map_file(four)
    cplx = tmp_path / "complex.npy"
    np.save(cplx, np.ones((3, 3), dtype=complex))
    with pytest.raises(InputError, match="complex"):
        load_map_file(cplx)
    strings = tmp_path / "strings.npy"
    np.save(strings, np.array(["a", "b"]))
    with pytest.raises(InputError, match="real numbers"):
        load_map_file(strings)
    words = tmp_path / "words.csv"
    words.write_text("1.0, 2.0\n3.0, volts\n")
    with pytest.raises(InputError, match="not a numeric table"):
        load_map_file(words)
    ragged = tmp_path / "ragged.txt"
    ragged.write_text("1 2 3\n4 5\n")
    with pytest.raises(InputError, match="not a numeric table"):
        load_map_file(ragged)
    empty = tmp_path / "empty.csv"
    empty.write_text("# nothing here\n")
    with pytest.raises(InputError, match="no values"):
        load_map_file(empty)


def test_missing_unreadable_and_unsupported(tmp_path):
    missing = tmp_path / "nope.npy"
    with pytest.raises(InputError, match="no such file") as info:
        load_map_file(missing)
    assert str(missing) in str(info.value)
    garbage = tmp_path / "garbage.npy"
    garbage.write_bytes(b"\x93NUMPY\x01\x00garbage")
    with pytest.raises(InputError, match="garbage.npy"):
        load_map_file(garbage)
    bad_zip = tmp_path / "bad.npz"
    bad_zip.write_bytes(b"not a zip archive at all")
    with pytest.raises(InputError, match="bad.npz"):
        load_map_file(bad_zip)
    binary = tmp_path / "binary.txt"
    binary.write_bytes(b"\xff\xfe\x00\x01\x02")
    with pytest.raises(InputError, match="binary.txt"):
        load_map_file(binary)
    other = tmp_path / "map.json"
    other.write_text("[1, 2]")
    with pytest.raises(InputError, match="unsupported"):
        load_map_file(other)
    with pytest.raises(InputError, match="is not a regular file"):
        load_map_file(tmp_path)


# -- interpolation ---------------------------------------------------------------------------
def test_linear_function_reproduced_exactly_2d():
    """Bilinear interpolation reproduces a linear function exactly (de Boor, A Practical Guide
    to Splines, Springer 1978, ch. III); only rounding remains: 1e-12 on values of order 100."""
    lower, upper = (-50.0, -40.0), (50.0, 40.0)
    xs = np.linspace(lower[0], upper[0], 21)
    ys = np.linspace(lower[1], upper[1], 17)
    mx, my = np.meshgrid(xs, ys, indexing="ij")
    values = 2.0 * mx - 3.0 * my + 5.0
    grid = Grid(lower, upper, (37, 29))
    out = interpolate_map(values, lower=lower, upper=upper, grid=grid)
    gx, gy = grid.mesh()
    assert out.shape == grid.shape
    assert np.max(np.abs(out - (2.0 * gx - 3.0 * gy + 5.0))) < 1e-12
    scaled = interpolate_map(values, lower=lower, upper=upper, grid=grid, scale=1e-3)
    assert np.max(np.abs(scaled - 1e-3 * (2.0 * gx - 3.0 * gy + 5.0))) < 1e-15


def test_linear_function_reproduced_exactly_3d_periodic_grid():
    """Trilinear interpolation is exact for linear data (de Boor 1978, ch. III); rounding 1e-12.
    A periodic grid's points also lie inside [lower, upper)."""
    lower, upper = (0.0, -1.0, 2.0), (4.0, 1.0, 3.0)
    axes = [np.linspace(lo, hi, m) for lo, hi, m in zip(lower, upper, (9, 5, 6))]
    mx, my, mz = np.meshgrid(*axes, indexing="ij")
    values = 1.25 * mx + 0.5 * my - 4.0 * mz
    grid = Grid(lower, upper, (10, 7, 5), boundary="periodic")
    out = interpolate_map(values, lower=lower, upper=upper, grid=grid)
    gx, gy, gz = grid.mesh()
    assert np.max(np.abs(out - (1.25 * gx + 0.5 * gy - 4.0 * gz))) < 1e-12


def test_quadratic_error_is_second_order():
    """Piecewise-linear interpolation of f = x^2 + y^2 errs by at most (hx^2 + hy^2)/8 * 2
    (de Boor, A Practical Guide to Splines, Springer 1978, ch. III: |f - I f| <= h^2/8 max|f''|,
    and bilinear interpolation of a sum of 1D functions is the sum of their 1D interpolants).
    Halving h must cut the error by about 4 (O(h^2)): ratio checked in [3.5, 4.5]."""
    lower, upper = (-1.0, -2.0), (1.0, 2.0)
    grid = Grid(lower, upper, (61, 83))
    gx, gy = grid.mesh()
    exact = gx ** 2 + gy ** 2
    errors = []
    for m in (11, 21, 41):
        xs = np.linspace(lower[0], upper[0], m)
        ys = np.linspace(lower[1], upper[1], m)
        mx, my = np.meshgrid(xs, ys, indexing="ij")
        out = interpolate_map(mx ** 2 + my ** 2, lower=lower, upper=upper, grid=grid)
        hx, hy = xs[1] - xs[0], ys[1] - ys[0]
        err = float(np.max(np.abs(out - exact)))
        assert err <= (hx ** 2 + hy ** 2) / 4.0 + 1e-14
        assert err > 0.0
        errors.append(err)
    for coarse, fine in zip(errors, errors[1:]):
        assert 3.5 < coarse / fine < 4.5


def test_cubic_matches_scipy_interpn():
    """Cubic option equals scipy.interpolate.interpn on the grid points (same SciPy spline
    routine; agreement to 1e-12)."""
    lower, upper = (0.0, 0.0), (3.0, 2.0)
    xs, ys = np.linspace(0, 3, 8), np.linspace(0, 2, 6)
    mx, my = np.meshgrid(xs, ys, indexing="ij")
    values = np.sin(mx) * np.cos(my)
    grid = Grid(lower, upper, (13, 9))
    out = interpolate_map(values, lower=lower, upper=upper, grid=grid, method="cubic")
    gx, gy = grid.mesh()
    ref = interpn((xs, ys), values, np.stack([gx, gy], axis=-1), method="cubic")
    assert np.max(np.abs(out - ref)) < 1e-12
    assert np.max(np.abs(out - np.sin(gx) * np.cos(gy))) < 1e-2


def test_rank_mismatch_rejected():
    grid = Grid((0.0, 0.0), (1.0, 1.0), (5, 5))
    with pytest.raises(InputError, match="1 axes .* grid has 2"):
        interpolate_map(np.arange(4.0), lower=0.0, upper=1.0, grid=grid)


def test_map_must_cover_grid():
    grid = Grid((0.0, -10.0), (100.0, 10.0), (9, 9))   # y points span [-8, 8]
    values = np.zeros((5, 5))
    with pytest.raises(InputError) as info:
        interpolate_map(values, lower=(0.0, -5.0), upper=(100.0, 5.0), grid=grid)
    text = str(info.value)
    assert "along y" in text and "[-8, 8]" in text and "[-5, 5]" in text
    # a rounding-level overshoot (well inside the 1e-9 relative tolerance) is accepted
    xs = grid.axes[0]
    ok = interpolate_map(np.ones((3, 3)), lower=(xs[0] * (1 + 1e-13), -8.0 * (1 - 1e-12)),
                         upper=(xs[-1] * (1 - 1e-13), 8.0), grid=grid)
    assert ok.shape == grid.shape and np.max(np.abs(ok - 1.0)) < 1e-14  # constant map, rounding only


def test_bad_interpolation_arguments():
    grid = Grid((0.0,), (1.0,), (5,))
    vals = np.linspace(0, 1, 3)
    with pytest.raises(InputError, match="method"):
        interpolate_map(vals, lower=0.0, upper=1.0, grid=grid, method="spline9")
    with pytest.raises(InputError, match="needs at least 4"):
        interpolate_map(vals, lower=0.0, upper=1.0, grid=grid, method="cubic")
    with pytest.raises(InputError, match="upper"):
        interpolate_map(vals, lower=1.0, upper=0.0, grid=grid)
    with pytest.raises(InputError, match="not finite"):
        interpolate_map(np.array([0.0, np.nan, 1.0]), lower=0.0, upper=1.0, grid=grid)
    with pytest.raises(InputError, match="scale"):
        interpolate_map(vals, lower=0.0, upper=1.0, grid=grid, scale=float("inf"))
    with pytest.raises(InputError, match="Grid"):
        interpolate_map(vals, lower=0.0, upper=1.0, grid=(5,))
