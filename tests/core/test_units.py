"""Checks of core/units.py against scipy.constants (CODATA) and published numbers.

References for the check values (see /work/shared/REFERENCES.md):
* scipy.constants, CODATA recommended values (P. J. Mohr et al., as shipped by scipy).
* GaAs numbers (hbar^2/2m* = 568.65 meV nm^2, hbar*omega_c = 1.728 meV/T, oscillator
  lengths 33.7 nm at 1 meV and 19.5 nm at 3 meV, all for m* = 0.067): common practice.
* Atom-trap numbers (hbar^2/(2 m h) = 58.15 Hz um^2, oscillator length 0.341 um at 1 kHz
  for Rb-87): common practice; formulas as in R. Grimm, M. Weidemueller,
  Yu. B. Ovchinnikov, Adv. At. Mol. Opt. Phys. 42, 95 (2000).
* Rb-87 atomic mass 86.909 180 520 u: D. A. Steck, "Rubidium 87 D Line Data"
  (online data sheet, rev. 2.x) [recalled from memory].
"""
from __future__ import annotations

import math
import warnings

import pytest
from scipy import constants as sc

from core.errors import InputError
from core.units import UNIT_SYSTEMS, UnitSystem, get_units

RB87_MASS_U = 86.909180520  # Steck, Rubidium 87 D Line Data [recalled from memory]
M_GAAS = 0.067              # Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001)


# --- scipy.constants, to float round-off ------------------------------------------

def test_semiconductor_kinetic_prefactor_matches_scipy():
    """hbar^2/(2 m* m0) in meV nm^2 from scipy.constants (CODATA).

    Same formula, same constants: rel 1e-12 covers float round-off only.
    """
    s = get_units("semiconductor")
    expected = sc.hbar**2 / (2 * M_GAAS * sc.m_e) / (1e-3 * sc.e * 1e-18)
    assert s.kinetic_prefactor(M_GAAS) == pytest.approx(expected, rel=1e-12)


def test_semiconductor_cyclotron_energy_matches_scipy():
    """hbar e B / m* in meV from scipy.constants; rel 1e-12 (round-off only)."""
    s = get_units("semiconductor")
    expected = sc.hbar * sc.e * 2.5 / (M_GAAS * sc.m_e) / (1e-3 * sc.e)
    assert s.cyclotron_energy(M_GAAS, 2.5) == pytest.approx(expected, rel=1e-12)
    # the sign of B does not matter for the energy hbar*omega_c
    assert s.cyclotron_energy(M_GAAS, -2.5) == pytest.approx(expected, rel=1e-12)


def test_bohr_magneton_in_meV_per_tesla_matches_scipy():
    """mu_B against scipy.constants 'Bohr magneton in eV/T' (CODATA).

    The two CODATA entries are rounded separately (~11 digits): rel 1e-9.
    """
    s = get_units("semiconductor")
    expected = sc.physical_constants["Bohr magneton in eV/T"][0] * 1e3
    assert s.bohr_magneton() == pytest.approx(expected, rel=1e-9)
    assert s.bohr_magneton() == pytest.approx(0.05788, abs=1e-5)  # common practice, 4 digits


def test_bohr_magneton_in_atom_units_matches_scipy():
    """mu_B / h in kHz/T against scipy 'Bohr magneton in Hz/T' (CODATA); rel 1e-9."""
    a = get_units("atoms")
    expected = sc.physical_constants["Bohr magneton in Hz/T"][0] / 1e3
    assert a.bohr_magneton() == pytest.approx(expected, rel=1e-9)


def test_flux_quantum_and_magnetic_length():
    """|q|/hbar times h/e must be 2 pi; the magnetic length is 25.66 nm / sqrt(B[T]).

    h/e is twice scipy's 'mag. flux quantum' h/(2e) (CODATA). 25.66 nm: REFERENCES.md
    (Peierls section), common practice, 4 digits -> abs 0.005 nm.
    """
    s = get_units("semiconductor")
    h_over_e_T_nm2 = 2 * sc.physical_constants["mag. flux quantum"][0] / 1e-18
    assert s.phase_per_flux_area() * h_over_e_T_nm2 == pytest.approx(-2 * math.pi, rel=1e-10)
    magnetic_length_1T = 1 / math.sqrt(abs(s.phase_per_flux_area()))
    assert magnetic_length_1T == pytest.approx(25.66, abs=0.005)


# --- published numbers of the trade (rounded; tolerance = half the last digit) ------

def test_gaas_kinetic_prefactor_568_65():
    """hbar^2/2m* = 568.65 meV nm^2 for m* = 0.067 (common practice); 5 digits -> abs 0.005."""
    assert get_units("semiconductor").kinetic_prefactor(M_GAAS) == pytest.approx(568.65, abs=0.005)


def test_gaas_cyclotron_energy_1_728_meV_per_tesla():
    """hbar*omega_c = 1.728 meV/T for m* = 0.067 (common practice); 4 digits -> abs 5e-4."""
    assert get_units("semiconductor").cyclotron_energy(M_GAAS, 1.0) == pytest.approx(1.728, abs=5e-4)


@pytest.mark.parametrize("hbar_omega, length", [(1.0, 33.7), (3.0, 19.5)])
def test_gaas_oscillator_length(hbar_omega, length):
    """sqrt(hbar/(m* omega)) = 33.7 nm at 1 meV, 19.5 nm at 3 meV for m* = 0.067
    (common practice); 3 digits -> abs 0.05 nm. Also checked against scipy.constants, rel 1e-12.
    """
    s = get_units("semiconductor")
    value = s.oscillator_length(M_GAAS, hbar_omega)
    assert value == pytest.approx(length, abs=0.05)
    omega = hbar_omega * 1e-3 * sc.e / sc.hbar
    assert value == pytest.approx(math.sqrt(sc.hbar / (M_GAAS * sc.m_e * omega)) / 1e-9, rel=1e-12)


def test_rb87_kinetic_prefactor_needs_the_real_mass():
    """hbar^2/(2 m h) = 58.15 Hz um^2 for Rb-87 (common practice; 4 digits -> abs 0.005).

    REFERENCES.md says "for mass 87 u", but 87 u gives 58.09 Hz um^2. The quoted 58.15
    is reproduced by the real atomic mass of Rb-87, 86.909 u (Steck, Rubidium 87 D Line
    Data [recalled from memory]). The energy unit is h*kHz, hence the factor 1e3.
    """
    a = get_units("atoms")
    assert a.kinetic_prefactor(RB87_MASS_U) * 1e3 == pytest.approx(58.15, abs=0.005)
    assert a.kinetic_prefactor(87.0) * 1e3 == pytest.approx(58.09, abs=0.005)
    assert abs(a.kinetic_prefactor(87.0) * 1e3 - 58.15) > 0.05
    # and against scipy.constants directly (round-off only)
    u = sc.physical_constants["atomic mass constant"][0]
    expected = sc.hbar**2 / (2 * RB87_MASS_U * u * sc.h) / 1e-12  # Hz um^2
    assert a.kinetic_prefactor(RB87_MASS_U) * 1e3 == pytest.approx(expected, rel=1e-12)


def test_rb87_oscillator_length_at_1_khz():
    """0.341 um at 1 kHz for Rb-87 (common practice; 3 digits -> abs 5e-4 um).

    h*1 kHz is one energy unit, so hbar*omega = 1. This figure does not separate the two
    masses (86.909 u gives 0.3410 um, 87 u gives 0.3409 um): both round to 0.341.
    """
    a = get_units("atoms")
    assert a.oscillator_length(RB87_MASS_U, 1.0) == pytest.approx(0.341, abs=5e-4)
    u = sc.physical_constants["atomic mass constant"][0]
    expected = math.sqrt(sc.hbar / (RB87_MASS_U * u * 2 * math.pi * 1e3)) / 1e-6
    assert a.oscillator_length(RB87_MASS_U, 1.0) == pytest.approx(expected, rel=1e-12)


def test_atoms_are_neutral():
    """Neutral atoms: no charge, no cyclotron motion, no Peierls phase."""
    a = get_units("atoms")
    assert not a.charged
    assert a.charge == 0.0
    assert a.cyclotron_energy(87.0, 1.0) == 0.0
    assert a.phase_per_flux_area() == 0.0


# --- atomic and dimensionless units: exact by definition ----------------------------

def test_atomic_units():
    """In atomic units hbar = m_e = e = a0 = E_h = 1: hbar^2/(2 m_e) = 0.5 hartree bohr^2,
    hbar e B/m_e = 1 hartree per atomic unit of field, mu_B = 0.5.

    scipy's Bohr radius and Hartree energy are separately rounded CODATA values
    (~12 digits), so rel 1e-10.
    """
    au = get_units("atomic")
    assert au.kinetic_prefactor(1.0) == pytest.approx(0.5, rel=1e-10)
    assert au.cyclotron_energy(1.0, 1.0) == pytest.approx(1.0, rel=1e-10)
    assert au.bohr_magneton() == pytest.approx(0.5, rel=1e-10)
    assert au.charge == -1.0


def test_dimensionless_units():
    """hbar = m = |q| = 1: hbar^2/2m = 0.5 exactly (up to one rounding)."""
    d = get_units("dimensionless")
    assert d.kinetic_prefactor(1.0) == pytest.approx(0.5, rel=1e-15)
    assert d.kinetic_prefactor(2.0) == pytest.approx(0.25, rel=1e-15)
    assert d.cyclotron_energy(1.0, 3.0) == pytest.approx(3.0, rel=1e-15)
    assert d.bohr_magneton() == 0.5
    assert d.charge == -1.0
    assert d.oscillator_length(1.0, 1.0) == pytest.approx(1.0, rel=1e-15)


def test_electron_charge_sign():
    """Electrons carry charge -1 in the semiconductor system."""
    s = get_units("semiconductor")
    assert s.charged and s.charge == -1.0
    assert s.charge_si == pytest.approx(-sc.e, rel=1e-15)


# --- lookup and bad input ------------------------------------------------------------

def test_get_units_lookup():
    for name, system in UNIT_SYSTEMS.items():
        assert get_units(name) is system
        assert get_units(system) is system
        assert isinstance(system, UnitSystem)
        assert system.describe()["system"] == name


def test_unknown_unit_system():
    with pytest.raises(InputError) as info:
        get_units("furlongs")
    message = str(info.value)
    assert "furlongs" in message
    for name in UNIT_SYSTEMS:
        assert name in message


@pytest.mark.parametrize("mass", [0.0, -0.067, float("nan"), float("inf"), float("-inf")])
def test_kinetic_prefactor_rejects_bad_mass(mass):
    with pytest.raises(InputError, match="mass"):
        get_units("semiconductor").kinetic_prefactor(mass)


@pytest.mark.parametrize("mass", [0.0, -0.067])
def test_cyclotron_energy_rejects_non_positive_mass(mass):
    with pytest.raises(InputError, match="mass"):
        get_units("semiconductor").cyclotron_energy(mass, 1.0)


@pytest.mark.parametrize("mass", [0.0, -1.0, float("nan")])
def test_oscillator_length_rejects_bad_mass(mass):
    with pytest.raises(InputError, match="mass"):
        get_units("semiconductor").oscillator_length(mass, 1.0)


@pytest.mark.parametrize("mass", [float("nan"), float("inf")])
def test_cyclotron_energy_rejects_non_finite_mass(mass):
    try:
        get_units("semiconductor").cyclotron_energy(mass, 1.0)
    except InputError:
        return
    raise AssertionError(f"cyclotron_energy accepted mass={mass!r}")


@pytest.mark.parametrize("hbar_omega", [0.0, -1.0, float("nan")])
def test_oscillator_length_rejects_bad_energy(hbar_omega):
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # sqrt of a negative number
            get_units("semiconductor").oscillator_length(M_GAAS, hbar_omega)
    except InputError:
        return
    except Exception as error:  # noqa: BLE001 - any other error type is the bug
        raise AssertionError(f"wrong error type {type(error).__name__}") from error
    raise AssertionError(f"oscillator_length accepted hbar_omega={hbar_omega!r}")
