"""Material regions in project files: validation with field paths, round trip, migration, solving."""
import pathlib

import numpy as np
import pytest

from core.errors import ProjectError
from core.hamiltonian import Hamiltonian
from core.hamiltonian_regions import RegionHamiltonian
from core.materials import band_offset
from core.project import CURRENT_SCHEMA_VERSION, load_project, project_from_dict, project_to_dict
from core.study import project_hamiltonian, solve_project

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_projects" / "inas_lens_regions.json"


def doc(regions, **changes) -> dict:
    d = {"schema_version": CURRENT_SCHEMA_VERSION, "title": "Sandpiper well", "units": "semiconductor",
         "material": "GaAs", "grid": {"lower": [-30.0], "upper": [30.0], "points": [119]},
         "parameters": {"a": 10.0}, "potential": [], "regions": regions, "solver": {"states": 2}}
    d.update(changes)
    return d


def refused(d) -> ProjectError:
    with pytest.raises(ProjectError) as info:
        project_from_dict(d)
    return info.value


WELL = {"label": "well", "inside": "abs(x) < a/2", "material": "InAs", "offset": -300.0}


def test_bad_region_formula_names_its_field():
    err = refused(doc([dict(WELL, inside="abs(x) < b")]))
    assert err.path == "regions[0].inside" and "b" in str(err)


def test_region_mass_must_be_positive():
    err = refused(doc([dict(WELL, material={"mass": -0.02})]))
    assert err.path == "regions[0].material.mass" and "positive" in str(err)
    err = refused(doc([WELL, dict(WELL, material={"mass": [0.02, 0.0, 0.03]})]))
    assert err.path == "regions[1].material.mass[1]"


def test_unknown_region_material_is_refused():
    err = refused(doc([dict(WELL, material="Unobtainium")]))
    assert err.path == "regions[0].material" and "unknown material" in str(err)


def test_table_offset_needs_tabulated_edges():
    err = refused(doc([dict(WELL, material="Si", offset="table")]))
    assert err.path == "regions[0].offset" and "Si" in str(err)
    err = refused(doc([dict(WELL, offset="table")], units="dimensionless", material={"mass": 1.0}))
    assert err.path == "regions[0].offset"


def test_round_trip_keeps_regions():
    regions = [WELL, {"label": "cap", "inside": "x > 3", "material": {"name": "GaAs", "mass": [0.07, 0.07, 0.09],
                                                                       "permittivity": 12.0}, "offset": "a"}]
    p = project_from_dict(doc(regions))
    out = project_to_dict(p)
    assert out["regions"] == regions
    assert project_from_dict(out) == p


def test_file_without_regions_writes_no_regions_key():
    p = project_from_dict(doc([]))
    assert p.regions == () and "regions" not in project_to_dict(p)


def test_table_band_offset_value():
    """InAs in GaAs, unstrained: E_c(InAs) - E_c(GaAs) = (-0.59 + 0.417) - (-0.80 + 1.519) = -0.892 eV
    (Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), VBOs and 0 K gaps, recalled)."""
    assert band_offset("InAs", "GaAs") == pytest.approx(-0.892, abs=1e-12)


def test_region_project_builds_the_region_operator_and_auto_picks_fd2():
    p = project_from_dict(doc([WELL], solver={"states": 2, "scheme": "auto"}))
    h, v, _params, scheme, reason = project_hamiltonian(p)
    assert isinstance(h, RegionHamiltonian) and scheme == "fd2" and "effective mass" in reason
    assert v.min() == pytest.approx(-300.0)
    p4 = project_from_dict(doc([WELL], solver={"states": 2, "scheme": "fd4"}))
    with pytest.raises(Exception, match="cannot carry a position-dependent"):
        project_hamiltonian(p4)


def test_same_mass_region_keeps_the_plain_operator_bit_for_bit():
    """A region with the project's own mass and an offset: the constant-mass operator of
    core.hamiltonian is used, so the levels equal those of the same step written as a formula."""
    same = project_from_dict(doc([dict(WELL, material="GaAs", offset=-300.0)], solver={"scheme": "fd2"}))
    h, v, *_ = project_hamiltonian(same)
    assert type(h) is Hamiltonian
    step = project_from_dict(doc([], potential=[{"kind": "formula", "formula": "0"}], solver={"scheme": "fd2"}))
    h2, *_ = project_hamiltonian(step, potential=v)
    assert np.array_equal(h.to_sparse().toarray(), h2.to_sparse().toarray())


def test_sample_solves_with_an_exact_p_doublet():
    """The bundled InAs-like lens sample solves; its p-like levels 1-2 form an exact doublet (the grid
    keeps the x/y exchange symmetry of the round lens; common practice)."""
    p = load_project(SAMPLE)
    r = solve_project(p, states=3)
    assert r.scheme == "fd2"
    assert any(set(g) >= {1, 2} for g in r.groups)
    assert r.energies[0] < -500.0            # the table offset makes a deep (unstrained) well, meV


def test_region_mass_formula_checked_when_resolved():
    """A mass written as a formula of parameters is checked with the values it gets."""
    p = project_from_dict(doc([dict(WELL, material={"mass": "a - 20"})]))
    with pytest.raises(ProjectError) as info:
        project_hamiltonian(p)
    assert info.value.path == "regions[0].material.mass" and "positive" in str(info.value)


def test_region_formula_with_nan_on_the_grid_is_refused():
    p = project_from_dict(doc([dict(WELL, inside="sqrt(x) - 1")]))
    with pytest.raises(ProjectError) as info:
        project_hamiltonian(p)
    assert info.value.path.startswith("regions[0].inside") and "NaN" in str(info.value)


def test_later_regions_win():
    """Two overlapping regions: where both hold, the later one's material and offset apply."""
    p = project_from_dict(doc([dict(WELL, offset=-100.0), {"label": "core", "inside": "abs(x) < 1",
                                                           "material": {"mass": 0.04}, "offset": -200.0}]))
    h, v, *_ = project_hamiltonian(p)
    x = p.grid.axes[0]
    assert np.all(v[np.abs(x) < 0.9] == -200.0)
    assert np.all(v[(np.abs(x) > 1.6) & (np.abs(x) < 4.4)] == -100.0)
    assert np.all(v[np.abs(x) > 5.6] == 0.0)


def test_extreme_region_mass_is_refused_with_the_limit():
    """A region mass far outside the physical range (1e-300 electron masses) is refused with the range named,
    before any operator is built (the project-wide mass range of core.limits)."""
    import numpy as np
    import pytest as _pytest

    from core.errors import ProjectError
    from core.regions import MaterialMap
    with _pytest.raises(ProjectError, match="within"):
        MaterialMap.from_formulas(["dot"], ["x < 0"], np.array([[0.067] * 3, [1e-300] * 3]), np.zeros(2), {})
