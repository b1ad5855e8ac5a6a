"""Unit systems and the kinetic prefactor hbar^2 / (2 m).

A project picks one unit system. Every length, energy, mass and field in the
project is then a plain number in that system's units, and this module turns
those into the few combinations the Hamiltonian needs, always from
``scipy.constants`` (CODATA), never from hand-typed constants.

Unit systems (``UNIT_SYSTEMS``):

=============== ========== ============ ================ ====================== ==========
name            length     energy       mass             electric field          charge
=============== ========== ============ ================ ====================== ==========
semiconductor   nm         meV          m0 (electron)    mV/nm                   -e
atoms           um         h*kHz        u (atomic mass)  h*kHz/um (force field)  0
atomic          bohr       hartree      m_e              hartree/(e*bohr)        -e
dimensionless   1          1            1                1                       -1
=============== ========== ============ ================ ====================== ==========

The electric field of a project is given in "energy unit per length unit per
unit charge", so that the energy of a particle of charge q (in units of the
system's charge unit) in a uniform field F is ``-q F . r`` with no further
factor. For neutral atoms the "field" is a uniform force (a tilt, e.g.
gravity) and the energy is ``-F . r``.

Magnetic fields are in tesla for the physical systems, in units where
hbar = |q| = 1 for ``dimensionless``, and in atomic units of field for
``atomic``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .errors import InputError

__all__ = ["UnitSystem", "UNIT_SYSTEMS", "get_units"]


@dataclass(frozen=True)
class UnitSystem:
    """One consistent set of units. All ``*_si`` values are SI sizes of one unit."""

    name: str
    length_unit: str
    energy_unit: str
    mass_unit: str
    field_unit: str
    magnetic_unit: str
    length_si: float
    energy_si: float
    mass_si: float
    magnetic_si: float
    hbar_si: float
    #: charge of the particle in SI units (coulomb); 0 for neutral atoms
    charge_si: float
    #: the size of "one unit of charge" used for the electric field, in coulomb
    charge_unit_si: float

    @property
    def charged(self) -> bool:
        return self.charge_si != 0.0

    @property
    def charge(self) -> float:
        """Particle charge in units of the system's charge unit (-1 for an electron)."""
        if self.charge_unit_si == 0.0:
            return 0.0
        return self.charge_si / self.charge_unit_si

    def kinetic_prefactor(self, mass: float) -> float:
        """hbar^2 / (2 m) in (energy unit) * (length unit)^2, for a mass in the system's mass unit."""
        mass = _positive(mass, "mass")
        value_si = self.hbar_si**2 / (2.0 * mass * self.mass_si)
        return value_si / (self.energy_si * self.length_si**2)

    def cyclotron_energy(self, mass: float, b_field: float) -> float:
        """hbar |q| B / m in the energy unit (0 for a neutral particle)."""
        mass = _positive(mass, "mass")
        return (self.hbar_si * abs(self.charge_si) * abs(b_field) * self.magnetic_si
                / (mass * self.mass_si)) / self.energy_si

    def phase_per_flux_area(self) -> float:
        """q / hbar in 1 / ((magnetic unit) * (length unit)^2).

        The Peierls phase of a straight hop is this number times the line
        integral of A (in magnetic unit * length unit).
        """
        return self.charge_si * self.magnetic_si * self.length_si**2 / self.hbar_si

    def bohr_magneton(self) -> float:
        """mu_B = e hbar / (2 m_e) in energy unit per magnetic unit (1/2 in dimensionless units)."""
        if self.name == "dimensionless":
            return 0.5
        return sc.physical_constants["Bohr magneton"][0] * self.magnetic_si / self.energy_si

    def oscillator_length(self, mass: float, hbar_omega: float) -> float:
        """sqrt(hbar / (m omega)) in the length unit, for hbar*omega in the energy unit."""
        hbar_omega = _positive(hbar_omega, "hbar*omega")
        return float(np.sqrt(2.0 * self.kinetic_prefactor(mass) / hbar_omega))

    def describe(self) -> dict:
        return {"system": self.name, "length": self.length_unit, "energy": self.energy_unit,
                "mass": self.mass_unit, "electric_field": self.field_unit,
                "magnetic_field": self.magnetic_unit}


def _positive(value, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a positive number, got {value!r}") from None
    if not np.isfinite(v) or v <= 0.0:
        raise InputError(f"{what} must be a positive, finite number, got {value!r}")
    return v


_ATOMIC_FIELD_T = sc.hbar / (sc.e * sc.physical_constants["Bohr radius"][0] ** 2)

UNIT_SYSTEMS: dict[str, UnitSystem] = {
    "semiconductor": UnitSystem(
        name="semiconductor", length_unit="nm", energy_unit="meV", mass_unit="m0",
        field_unit="mV/nm", magnetic_unit="T",
        length_si=1e-9, energy_si=1e-3 * sc.e, mass_si=sc.m_e, magnetic_si=1.0,
        hbar_si=sc.hbar, charge_si=-sc.e, charge_unit_si=sc.e),
    "atoms": UnitSystem(
        name="atoms", length_unit="um", energy_unit="h*kHz", mass_unit="u",
        field_unit="h*kHz/um", magnetic_unit="T",
        length_si=1e-6, energy_si=sc.h * 1e3,
        mass_si=sc.physical_constants["atomic mass constant"][0], magnetic_si=1.0,
        hbar_si=sc.hbar, charge_si=0.0, charge_unit_si=0.0),
    "atomic": UnitSystem(
        name="atomic", length_unit="bohr", energy_unit="hartree", mass_unit="m_e",
        field_unit="hartree/(e*bohr)", magnetic_unit="a.u.",
        length_si=sc.physical_constants["Bohr radius"][0],
        energy_si=sc.physical_constants["Hartree energy"][0], mass_si=sc.m_e,
        magnetic_si=_ATOMIC_FIELD_T, hbar_si=sc.hbar, charge_si=-sc.e, charge_unit_si=sc.e),
    "dimensionless": UnitSystem(
        name="dimensionless", length_unit="1", energy_unit="1", mass_unit="1",
        field_unit="1", magnetic_unit="1",
        length_si=1.0, energy_si=1.0, mass_si=1.0, magnetic_si=1.0,
        hbar_si=1.0, charge_si=-1.0, charge_unit_si=1.0),
}


def get_units(units: str | UnitSystem) -> UnitSystem:
    """Return the unit system called ``units`` (or ``units`` itself if it already is one)."""
    if isinstance(units, UnitSystem):
        return units
    try:
        return UNIT_SYSTEMS[str(units)]
    except KeyError:
        known = ", ".join(sorted(UNIT_SYSTEMS))
        raise InputError(f"unknown unit system {units!r}; known systems: {known}") from None
