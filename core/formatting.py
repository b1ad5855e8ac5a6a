"""How numbers are written for people: a value to the digits its uncertainty allows, bounds, and
energies in a readable sub-unit (µeV, h·Hz).  One policy, used by every report.

Rounding rule: the uncertainty to one or two significant digits and the value to the same decimal
place (the digit rule of the Particle Data Group: two digits when the uncertainty's three leading
digits are 100-354, one digit for 355-949, 950-999 as two digits of 1000; Review of Particle
Physics, Introduction, recalled from memory).  The uncertainty is rounded up, so that a printed
error bar is never smaller than the estimate.
"""
from __future__ import annotations

import math

__all__ = ["format_uncertain", "format_value", "format_measured", "format_bound", "readable_energy", "format_energy",
           "format_energy_bound", "ENERGY_SUBUNITS", "UNIT_TEXT", "pretty_unit"]

#: how a unit is written for a reader (``um`` -> ``µm``, ``h*kHz`` -> ``h·kHz``, dimensionless ``1`` -> nothing)
UNIT_TEXT = {"um": "µm", "h*kHz": "h·kHz", "h*Hz": "h·Hz", "h*kHz/um": "h·kHz/µm", "1": "",
             "hartree/(e*bohr)": "hartree/(e·bohr)"}
#: smaller units of each energy unit, in order (factor to multiply by, name as written)
ENERGY_SUBUNITS = {"meV": ((1e3, "µeV"), (1e6, "neV")), "eV": ((1e3, "meV"), (1e6, "µeV")),
                   "h*kHz": ((1e3, "h·Hz"), (1e6, "h·mHz")), "h*Hz": ((1e3, "h·mHz"),),
                   "hartree": ((1e3, "mhartree"), (1e6, "µhartree"))}
ENERGY_SUBUNITS.update({"h·kHz": ENERGY_SUBUNITS["h*kHz"], "h·Hz": ENERGY_SUBUNITS["h*Hz"]})


def _rounded_uncertainty(u: float) -> tuple:
    """``(rounded uncertainty, decimals)`` by the three-digit rule above; decimals may be negative."""
    exp = math.floor(math.log10(u))
    lead = int(u / 10.0 ** (exp - 2) + 1e-9)          # the three leading digits, 100..999
    if lead >= 950:
        exp, digits = exp + 1, 2
    else:
        digits = 2 if lead <= 354 else 1
    decimals = digits - 1 - exp
    step = 10.0 ** -decimals
    return math.ceil(u / step * (1 - 1e-12)) * step, decimals


def _fixed(x: float, decimals: int) -> str:
    if decimals <= 0:
        return f"{round(x, decimals):.0f}"
    return f"{x:.{decimals}f}"


def format_uncertain(value: float, uncertainty: float, unit: str = "") -> str:
    """``value ± uncertainty [unit]`` to the digits the uncertainty allows, e.g. "199.8 ± 1.4 meV";
    "-" for a missing value, "<value> (error unknown)" when the uncertainty is not known."""
    tail = f" {unit}" if unit and unit != "1" else ""
    if value is None or not math.isfinite(value):
        return "-"
    if uncertainty is None or not math.isfinite(uncertainty) or uncertainty <= 0:
        return f"{value:.4g}{tail} (error unknown)"
    u, dec = _rounded_uncertainty(float(uncertainty))
    if dec > 6 and abs(value) < 10.0 ** -3:
        # a small number with a small uncertainty: one power of ten for both
        exp = math.floor(math.log10(max(abs(value), u)))
        s = 10.0 ** exp
        return f"({_fixed(value / s, dec + exp)} ± {_fixed(u / s, dec + exp)})e{exp:+03d}{tail}"
    return f"{_fixed(value, dec)} ± {_fixed(u, dec)}{tail}"


def format_value(value: float, uncertainty: float) -> str:
    """The value alone, to the digits ``uncertainty`` allows (for a table whose header says the
    uncertainty, e.g. energies known to the solver's accuracy)."""
    if value is None or not math.isfinite(value):
        return "-"
    if uncertainty is None or not math.isfinite(uncertainty) or uncertainty <= 0:
        return f"{value:.4g}"
    _, dec = _rounded_uncertainty(float(uncertainty))
    if dec > 6 and abs(value) < 10.0 ** -3:
        return f"{value:.1e}"
    return _fixed(value, dec)


def format_bound(bound: float, unit: str = "", relation: str = "<") -> str:
    """A bound, e.g. "< 2.1e-05 meV" (two significant digits: a bound, not a measurement)."""
    tail = f" {unit}" if unit and unit != "1" else ""
    return f"{relation} {bound:.2g}{tail}"


def format_measured(value: float, uncertainty: float, unit: str = "") -> str:
    """``1.2345 ± 0.0012 unit`` (:func:`format_uncertain`), with two differences for swept positions and
    gaps: a value within its uncertainty of zero is printed as ``0 ± u``, and without a finite positive
    uncertainty the value gets 6 significant digits."""
    suffix = f" {unit}" if unit and unit != "1" else ""
    if value is None or not math.isfinite(value):
        return f"{value}{suffix}"
    if uncertainty is None or not (uncertainty > 0 and math.isfinite(uncertainty)):
        return f"{value:.6g}{suffix}"
    if abs(value) < uncertainty:
        u, _ = _rounded_uncertainty(float(uncertainty))
        return f"0 ± {u:.2g}{suffix}"
    return format_uncertain(value, uncertainty, unit)


def pretty_unit(unit: str) -> str:
    """A unit as a reader expects to see it (see :data:`UNIT_TEXT`)."""
    unit = str(unit or "")
    return UNIT_TEXT.get(unit, unit)


def readable_energy(value: float, unit: str) -> tuple:
    """(factor, unit as written) for showing energies of about ``value``: the next smaller unit while
    the number would be below 1 (0.0387 meV -> 38.7 µeV, 2e-5 meV -> 20 neV), else the unit itself."""
    factor, name = 1.0, pretty_unit(unit)
    if math.isfinite(value) and value != 0.0:
        for f, sub in ENERGY_SUBUNITS.get(unit, ()):
            if abs(value) * factor < 1.0:
                factor, name = f, sub
            else:
                break
    return factor, name


def format_energy(value: float, uncertainty: float, unit: str) -> str:
    """An energy with its uncertainty in the readable sub-unit for its size."""
    factor, shown_unit = readable_energy(max(abs(value), abs(uncertainty) if math.isfinite(uncertainty) else 0.0),
                                         unit)
    return format_measured(value * factor, uncertainty * factor, shown_unit)


def format_energy_bound(bound: float, unit: str) -> str:
    factor, shown_unit = readable_energy(bound, unit)
    return format_bound(bound * factor, shown_unit)

