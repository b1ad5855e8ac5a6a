"""Results as xarray Datasets (core.datasets): the same numbers, labelled, with units.

The physics check: the Dataset's density of each state integrates to 1 over the grid (|psi|^2 is a
probability density; the midpoint sum is exact for the solver's grid functions, common practice), and
the energies of the elliptical sample equal the separable oscillator hw sqrt(1 -+ ell) (n + 1/2)
(textbook, common practice) to the spectral scheme's accuracy (1e-5 meV on its 64^2 grid).
"""
from __future__ import annotations

import pathlib

import numpy as np
import pytest

from core.datasets import study_dataset, sweep_dataset
from core.project import load_project
from core.study import solve_project
from core.sweep import run_sweep

xr = pytest.importorskip("xarray")
SAMPLES = pathlib.Path(__file__).resolve().parents[2] / "sample_projects"


@pytest.fixture(scope="module")
def elliptical():
    p = load_project(SAMPLES / "elliptical_dot.json")
    return p, solve_project(p, states=4)


def test_study_dataset_labels_the_solve(elliptical):
    project, result = elliptical
    ds = study_dataset(result)
    assert isinstance(ds, xr.Dataset)
    assert ds["energy"].attrs["units"] == "meV" and ds["x"].attrs["units"] == "nm"
    np.testing.assert_array_equal(ds["energy"].values, result.energies)
    np.testing.assert_array_equal(ds["psi"].values, result.states)
    hw, ell = project.parameters["hw"], project.parameters["ell"]
    wx, wy = hw * np.sqrt(1 - ell), hw * np.sqrt(1 + ell)
    exact = np.sort([wx * (i + 0.5) + wy * (j + 0.5) for i in range(4) for j in range(4)])[:4]
    np.testing.assert_allclose(ds["energy"].values, exact, atol=1e-5)
    dv = result.grid.volume_element
    np.testing.assert_allclose(ds["probability_density"].sum(dim=("x", "y")).values * dv, 1.0, atol=1e-10)
    assert ds.attrs["fingerprint"] == result.fingerprint and ds.attrs["scheme"] == result.scheme
    assert "psi" not in study_dataset(result, states=False)


def test_sweep_dataset_keeps_values_tracks_and_verdicts(elliptical):
    project, _ = elliptical
    sweep = run_sweep(project, "hw", np.linspace(3.0, 5.0, 4), states=3)
    ds = sweep_dataset(sweep)
    assert ds["value"].attrs["units"] == "meV" and ds.attrs["swept"] == "hw"
    np.testing.assert_array_equal(ds["energy"].values, sweep.energies)
    np.testing.assert_array_equal(ds["track_energy"].values, sweep.track_energies())
    # the ground level is hw (sqrt(1 - ell) + sqrt(1 + ell)) / 2 at every hw
    ell = project.parameters["ell"]
    np.testing.assert_allclose(ds["energy"].sel(level=0).values,
                               ds["value"].values * (np.sqrt(1 - ell) + np.sqrt(1 + ell)) / 2, atol=1e-5)
    assert len(ds.attrs["close_approaches"]) == len(sweep.anticrossings)
