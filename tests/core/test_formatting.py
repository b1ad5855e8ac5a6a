"""How numbers are written: value to the digits its uncertainty allows, bounds, readable sub-units.

Digit rule of the Particle Data Group (Review of Particle Physics, Introduction; recalled from
memory): the uncertainty gets two significant digits when its three leading digits are 100-354, one
for 355-949, and 950-999 round up to two digits of 1000; the value takes the same decimal place.
The uncertainty is rounded up."""
from __future__ import annotations

import math

from core.formatting import format_bound, format_energy, format_energy_bound, format_measured, readable_energy


def test_value_to_the_digits_of_its_uncertainty():
    assert format_measured(1.8901749, 6.2e-6, "T") == "1.890175 ± 0.000007 T"
    assert format_measured(0.0456, 0.0004, "meV") == "0.0456 ± 0.0004 meV"
    assert format_measured(123456.0, 3.0) == "123456.0 ± 3.0"
    assert format_measured(2.71828, 0.012) == "2.718 ± 0.012"
    assert format_measured(2.71828, 0.0971) == "2.72 ± 0.10"


def test_a_value_within_its_uncertainty_of_zero_is_zero():
    assert format_measured(-8.721e-10, 1e-5, "V") == "0 ± 1e-05 V"
    assert format_measured(3e-3, 0.01) == "0 ± 0.01"


def test_without_an_uncertainty_six_digits():
    assert format_measured(1.23456789, math.nan) == "1.23457"


def test_small_energies_in_a_readable_sub_unit():
    assert readable_energy(0.0457, "meV") == (1e3, "µeV")
    assert readable_energy(2.0, "meV") == (1.0, "meV")
    assert readable_energy(0.02, "h*kHz") == (1e3, "h·Hz")
    assert readable_energy(2e-5, "meV") == (1e6, "neV")
    assert format_energy(0.0456, 0.0004, "meV") == "45.6 ± 0.4 µeV"
    assert format_energy_bound(3.1e-7, "meV") == "< 0.31 neV"
    assert format_bound(2.5, "T", ">") == "> 2.5 T"
