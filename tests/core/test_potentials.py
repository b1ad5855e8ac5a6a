"""Potential evaluation of project terms, and the full solve of the template project.

Sources:
* [DLS] J. H. Davies, I. A. Larkin, E. V. Sukhorukov, J. Appl. Phys. 77, 4504 (1995):
  a pinned surface gate at V gives phi = V * Omega / (2 pi) at depth d, Omega the solid angle
  the gate subtends.  A square of side 2a seen from distance d on its axis subtends
  Omega = 4 arcsin(a^2 / (a^2 + d^2)); for a = d this is 4 arcsin(1/2) = 2 pi / 3, so phi = V/3.
* Electrostatics: a charge q in a potential phi has energy U = q phi; a uniform field F
  has phi = -F . r, so U = -q F . r.  For an electron (q = -e) and phi in volts, the energy in
  meV is -1000 * phi (1 eV = 1000 meV).
* [FD] V. Fock, Z. Phys. 47, 446 (1928): at B = 0 the 2D isotropic oscillator has
  E = (2n + |l| + 1) hbar omega, i.e. 1, 2, 2, 3, 3, 3, 4, 4, 4, 4 times hbar omega.
* Linear interpolation reproduces a function linear in the coordinate exactly
  (scipy.interpolate.RegularGridInterpolator, method "linear"), up to rounding.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from core.errors import InputError
from core.grid import Grid
from core.potentials import default_lever, evaluate_potential, evaluate_terms, resolve_value
from core.project import FieldTerm, FormulaTerm, GateSpec, GatesTerm, MapTerm, MaterialSpec, Project, new_project
from core.study import solve_project

# Closed forms in float64: the gate solid angle is a sum of four atan2 terms (rectangle) or n
# atan2 terms (polygon), each exact to a few ulps; 1e-12 relative leaves a wide margin.
GATE_RTOL = 1e-12


def make_project(*terms, units="semiconductor", grid=None, parameters=None, electric_field=(0.0, 0.0),
                 base_dir=None) -> Project:
    return Project(title="Plover test dot", units=units, material=MaterialSpec(name="GaAs"),
                   grid=grid or Grid([-30.0, -30.0], [30.0, 30.0], [11, 11]),
                   parameters=dict(parameters or {}), potential=tuple(terms), electric_field=electric_field,
                   base_dir=base_dir)


def centre_index(grid: Grid) -> tuple:
    idx = tuple(int(np.argmin(np.abs(ax))) for ax in grid.axes)
    assert all(abs(ax[i]) < 1e-12 for ax, i in zip(grid.axes, idx))   # the centre is a grid node
    return idx


def test_formula_term_equals_numpy_expression():
    params = {"V0": -4.0, "w": 12.0, "c": 0.003}
    project = make_project(FormulaTerm("bump", "V0*exp(-(x**2 + y**2)/w**2) + c*x*y"), parameters=params)
    x, y = project.grid.mesh()
    expected = params["V0"] * np.exp(-(x**2 + y**2) / params["w"] ** 2) + params["c"] * x * y
    # Same float64 operations in a possibly different order: a few ulps.
    np.testing.assert_allclose(evaluate_potential(project), expected, rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize("shape", ["rectangle", "polygon"])
def test_square_gate_centre_is_one_third_of_lever_times_voltage(shape):
    depth, volts, lever = 25.0, 0.8, 7.5
    if shape == "rectangle":
        gate = GateSpec("plunger", volts, rectangle=(-depth, -depth, depth, depth))
    else:   # the same square turned by 45 degrees: takes the general polygon formula
        a = math.sqrt(2.0) * depth
        gate = GateSpec("plunger", volts, polygon=((a, 0.0), (0.0, a), (-a, 0.0), (0.0, -a)))
    project = make_project(GatesTerm("gates", depth=depth, gates=(gate,), lever=lever))
    v = evaluate_potential(project)
    expected = lever * volts * (4.0 * math.asin(0.5) / (2.0 * math.pi))    # [DLS] solid angle 2 pi / 3
    assert expected == pytest.approx(lever * volts / 3.0, rel=1e-15)
    assert v[centre_index(project.grid)] == pytest.approx(expected, rel=GATE_RTOL)


def test_default_lever_is_electron_charge_in_meV_per_volt():
    gate = GateSpec("plunger", -1.0, rectangle=(-40.0, -40.0, 40.0, 40.0))
    project = make_project(GatesTerm("gates", depth=40.0, gates=(gate,)))
    # U = -e * phi: -1000 meV per volt; e cancels between the charge and the meV unit.
    assert default_lever(project) == pytest.approx(-1000.0, rel=1e-12)
    v = evaluate_potential(project)
    assert v[centre_index(project.grid)] == pytest.approx(1000.0 / 3.0, rel=GATE_RTOL)


def test_gate_voltage_formula_uses_parameters():
    gate = GateSpec("plunger", "VP + 0.1*eps", rectangle=(-20.0, -20.0, 20.0, 20.0))
    project = make_project(GatesTerm("gates", depth=20.0, gates=(gate,), lever=1.0),
                           parameters={"VP": -0.3, "eps": 0.5})
    assert resolve_value("VP + 0.1*eps", project.parameters) == pytest.approx(-0.25, rel=1e-15)
    v = evaluate_potential(project)
    assert v[centre_index(project.grid)] == pytest.approx(-0.25 / 3.0, rel=GATE_RTOL)


def test_uniform_field_term_is_minus_q_F_dot_r():
    fx, fy = 0.2, -0.05
    electron = make_project(FieldTerm("tilt"), electric_field=(fx, fy))
    x, y = electron.grid.mesh()
    # electron: q = -1 (units of e), so U = +F . r
    np.testing.assert_allclose(evaluate_potential(electron), fx * x + fy * y, rtol=1e-14, atol=1e-14)
    atom = make_project(FieldTerm("gravity"), units="atoms", electric_field=(fx, fy))
    # neutral atom: the "field" is a force, U = -F . r
    np.testing.assert_allclose(evaluate_potential(atom), -(fx * x + fy * y), rtol=1e-14, atol=1e-14)


def test_parameter_overrides_change_the_result():
    project = make_project(FormulaTerm("bowl", "k*x**2 + c"), parameters={"k": 0.01, "c": 1.0})
    x, _ = project.grid.mesh()
    base = evaluate_potential(project)
    changed = evaluate_potential(project, parameters={"k": 0.03})
    np.testing.assert_allclose(base, 0.01 * x**2 + 1.0, rtol=1e-14)
    np.testing.assert_allclose(changed, 0.03 * x**2 + 1.0, rtol=1e-14)
    assert project.parameters["k"] == 0.01          # the project itself is not modified


def test_unknown_override_name_refused():
    project = make_project(FormulaTerm("bowl", "k*x**2"), parameters={"k": 0.01})
    with pytest.raises(InputError) as info:
        evaluate_potential(project, parameters={"kk": 1.0})
    assert "'kk'" in str(info.value) and "k" in str(info.value)


def test_disabled_term_contributes_nothing():
    on = FormulaTerm("bowl", "0.01*(x**2 + y**2)")
    off = FormulaTerm("wall", "500*(x > 10)", enabled=False)
    project = make_project(on, off)
    x, y = project.grid.mesh()
    np.testing.assert_allclose(evaluate_potential(project), 0.01 * (x**2 + y**2), rtol=1e-14)
    terms = evaluate_terms(project)
    assert terms[1][2] is None
    every = evaluate_terms(project, include_disabled=True)
    assert np.max(every[1][2]) == 500.0             # it would contribute if enabled


def test_map_linear_in_x_reproduced_by_linear_interpolation(tmp_path):
    a, b, scale = 2.0, -0.07, 1.5
    lower, upper = (-40.0, -35.0), (45.0, 50.0)
    mx = np.linspace(lower[0], upper[0], 18)
    values = np.broadcast_to((a + b * mx)[:, None], (18, 7)).copy()
    np.save(tmp_path / "ramp.npy", values)
    project = make_project(MapTerm("ramp", file="ramp.npy", lower=lower, upper=upper, scale=scale),
                           base_dir=str(tmp_path))
    x, _ = project.grid.mesh()
    # exact up to rounding of the node positions: ~1e-15 relative on values of order 1
    np.testing.assert_allclose(evaluate_potential(project), scale * (a + b * x), rtol=0, atol=1e-12)


# --- the full pipeline -----------------------------------------------------------------------------

def test_template_project_gives_fock_darwin_levels_at_zero_field():
    # [FD] at B = 0.  The template writes l0 = 19.47 nm rounded from sqrt(hbar^2/(m* hbar omega)) =
    # 19.4705... nm for GaAs (m* = 0.067) at 3 meV; hbar omega scales as 1/l0, a change of ~3e-5.
    # The spectral scheme on 64 points over 240 nm (about 6 l0 each side) adds < 1e-4.  Hence 1e-3.
    project = new_project()
    result = solve_project(project)
    assert project.solver.states == 10
    expected = 3.0 * np.array([1, 2, 2, 3, 3, 3, 4, 4, 4, 4], dtype=float)
    np.testing.assert_allclose(result.energies[:10], expected, rtol=1e-3)


# --- the material's hbar^2/(2 m*) in formulas -------------------------------------------------------

def test_material_names_are_hbar_squared_over_twice_the_mass():
    """hbar^2/(2 m*) from CODATA constants (scipy.constants): for GaAs (m* = 0.067 m_e, the materials
    table) in meV nm^2, and per axis for an anisotropic mass; 1e-12 relative (float64 arithmetic)."""
    import scipy.constants as sc

    from core.potentials import material_names
    expected = sc.hbar**2 / (2 * 0.067 * sc.m_e) / (1e-3 * sc.e) / 1e-18
    got = material_names(make_project(), {})
    assert got["hbar2_over_2m"] == pytest.approx(expected, rel=1e-12)
    assert got["hbar2_over_2m_x"] == got["hbar2_over_2m_y"] == got["hbar2_over_2m"]
    aniso = dataclasses.replace(make_project(), material=MaterialSpec(name="custom", mass=(0.2, 0.05, 1.0)))
    got = material_names(aniso, {})
    for axis, m in zip("xyz", (0.2, 0.05, 1.0)):
        assert got[f"hbar2_over_2m_{axis}"] == pytest.approx(expected * 0.067 / m, rel=1e-12)


@pytest.mark.parametrize("material", ["GaAs", "InAs"])
def test_an_oscillator_written_with_the_material_prefactor_keeps_its_frequency(material):
    """1/2 m* omega^2 r^2 written as hw^2 r^2 / (4 hbar2_over_2m): the levels are hbar omega times 1, 2, 2, 3, 3, 3
    [FD] whatever the mass.  Spectral scheme on 48^2 over +-8 oscillator lengths: the truncation error is far
    below 1e-6 hbar omega (sinc-DVR converges exponentially for a Gaussian-like state; common practice)."""
    hw = 3.0
    l0 = math.sqrt(2 * 38.0998 / {"GaAs": 0.067, "InAs": 0.026}[material] / hw)   # recalled, only for the box
    box = 8 * l0
    project = make_project(FormulaTerm(label="oscillator", formula="hw**2*(x**2 + y**2)/(4*hbar2_over_2m)"),
                           grid=Grid([-box, -box], [box, box], [48, 48]), parameters={"hw": hw})
    project = dataclasses.replace(project, material=MaterialSpec(name=material))
    result = solve_project(project, states=6, scheme="spectral")
    np.testing.assert_allclose(result.energies / hw, [1, 2, 2, 3, 3, 3], atol=1e-6)


def test_a_parameter_may_not_take_a_material_name():
    """The material names are values the formulas receive; a parameter of that name is refused."""
    from core.errors import ProjectError
    from core.project import project_from_dict, project_to_dict
    data = project_to_dict(new_project())
    data["parameters"]["hbar2_over_2m"] = 1.0
    with pytest.raises(ProjectError, match="hbar2_over_2m.*reserved"):
        project_from_dict(data)


# --- the oscillator term --------------------------------------------------------------------------

def _oscillator_project(hbar_omega, centre, *, material="GaAs", grid=None, parameters=None):
    from core.project import OscillatorTerm
    term = OscillatorTerm(label="dot", hbar_omega=tuple(hbar_omega), centre=tuple(centre))
    p = make_project(term, grid=grid or Grid([-120.0, -120.0], [120.0, 120.0], [64, 64]),
                     parameters=parameters or {})
    return dataclasses.replace(p, material=MaterialSpec(name=material))


def test_oscillator_term_is_half_m_omega_squared_x_squared():
    """The term equals 1/2 m* omega^2 (x - c)^2 with m* from the materials table and hbar from CODATA
    (scipy.constants), written out by hand; 1e-12 relative (float64 arithmetic)."""
    import scipy.constants as sc
    p = _oscillator_project((2.0, "hy"), (5.0, -3.0), parameters={"hy": 3.0})
    v = evaluate_potential(p)
    x, y = p.grid.mesh_sparse()
    m = 0.067 * sc.m_e
    meV = 1e-3 * sc.e
    omega = np.array([2.0, 3.0]) * meV / sc.hbar
    expected = 0.5 * m * (omega[0]**2 * ((x - 5.0) * 1e-9)**2 + omega[1]**2 * ((y + 3.0) * 1e-9)**2) / meV
    np.testing.assert_allclose(v, expected, rtol=1e-12)


def test_oscillator_term_levels_are_the_anisotropic_oscillator():
    """E = hw_x (n_x + 1/2) + hw_y (n_y + 1/2) (textbook separable oscillator, common practice), off
    centre, for two materials: the quanta do not depend on the mass.  Spectral scheme, the box 8 oscillator
    lengths (of the softer axis) from the centre, 96 points: error far below 1e-6 meV."""
    exact = np.sort([2.0 * (i + 0.5) + 3.0 * (j + 0.5) for i in range(8) for j in range(8)])
    for material, mass in (("GaAs", 0.067), ("InAs", 0.026)):
        l0 = math.sqrt(2 * 38.0998 / mass / 2.0)          # hbar^2/(2 m_e) = 38.0998 meV nm^2 (recalled; box only)
        half = 8 * l0
        p = _oscillator_project((2.0, 3.0), (10.0, -8.0), material=material,
                                grid=Grid([10.0 - half, -8.0 - half], [10.0 + half, -8.0 + half], [96, 96]))
        result = solve_project(p, states=6, scheme="spectral")
        n = len(result.energies)                   # 7: the solver completes the doublet at 8.5 meV
        assert n >= 6
        np.testing.assert_allclose(result.energies, exact[:n], atol=1e-6)


@pytest.mark.parametrize("term, message", [
    ({"hbar_omega": [1.0, -2.0]}, "hbar_omega[1]: hbar*omega cannot be negative"),
    ({"hbar_omega": [1.0, 2.0, 3.0]}, "hbar_omega"),
    ({}, "hbar_omega: missing"),
    ({"hbar_omega": 3.0, "centre": [0.0]}, "centre"),
    ({"hbar_omega": "nope"}, "hbar_omega"),
])
def test_bad_oscillator_terms_are_one_line_errors(term, message):
    from core.errors import ProjectError
    from core.project import project_from_dict, project_to_dict
    data = project_to_dict(new_project())
    data["potential"] = [{"kind": "oscillator", "label": "dot", **term}]
    with pytest.raises(ProjectError) as info:
        project_from_dict(data)
    assert message in str(info.value) and "\n" not in str(info.value)


def test_oscillator_term_round_trips_and_one_value_means_every_axis():
    from core.project import OscillatorTerm, project_from_dict, project_to_dict
    data = project_to_dict(new_project())
    data["parameters"]["hw"] = 2.5
    data["potential"] = [{"kind": "oscillator", "label": "dot", "hbar_omega": "hw"}]
    p = project_from_dict(data)
    (t,) = p.potential
    assert isinstance(t, OscillatorTerm) and t.hbar_omega == ("hw", "hw") and t.centre == (0.0, 0.0)
    assert project_from_dict(project_to_dict(p)) == p
