"""How numbers are written for people: a value to the digits its uncertainty allows, bounds, and
energies in a readable sub-unit (µeV, h·Hz).  One policy, used by every report.

Rounding rule (common practice in experimental reporting): the uncertainty is written with two
significant digits and the value to the same decimal place; a value within its uncertainty of zero
is written as 0.
"""
from __future__ import annotations

import math

__all__ = ["format_measured", "format_bound", "readable_energy", "format_energy", "ENERGY_SUBUNITS"]

#: energy units with a smaller unit that reads better for small numbers (factor from the unit)
ENERGY_SUBUNITS = {"meV": ("µeV", 1e3), "h*kHz": ("h*Hz", 1e3), "hartree": ("mhartree", 1e3),
                   "eV": ("meV", 1e3)}


def _decimals_for(uncertainty: float, significant: int = 2) -> int:
    """Number of decimals that shows ``significant`` digits of ``uncertainty`` (may be negative)."""
    if not (uncertainty > 0 and math.isfinite(uncertainty)):
        return 6
    return significant - 1 - int(math.floor(math.log10(uncertainty)))


def format_measured(value: float, uncertainty: float, unit: str = "") -> str:
    """``1.2345 ± 0.0012 unit``: the value to the digits its uncertainty allows.

    A value whose magnitude is below its uncertainty is printed as ``0 ± u``.  Without a finite
    positive uncertainty the value gets 6 significant digits.
    """
    suffix = f" {unit}" if unit else ""
    if not math.isfinite(value):
        return f"{value}{suffix}"
    if not (uncertainty > 0 and math.isfinite(uncertainty)):
        return f"{value:.6g}{suffix}"
    dec = _decimals_for(uncertainty)
    shown = 0.0 if abs(value) < uncertainty else value
    if shown == 0.0:
        return f"0 ± {uncertainty:.2g}{suffix}"
    big = abs(shown) >= 1e6 or uncertainty >= 1e6
    small = (abs(shown) < 1e-3 and shown != 0) or (shown == 0 and uncertainty < 1e-3)
    if big or small or dec > 12:
        # scientific form with a shared exponent
        exp = int(math.floor(math.log10(abs(shown)))) if shown != 0 else int(math.floor(math.log10(uncertainty)))
        scale = 10.0 ** exp
        d = max(0, _decimals_for(uncertainty / scale))
        return f"({shown / scale:.{d}f} ± {uncertainty / scale:.{d}f})e{exp}{suffix}"
    dec = max(dec, 0)
    return f"{shown:.{dec}f} ± {uncertainty:.{dec}f}{suffix}"


def format_bound(bound: float, unit: str = "", relation: str = "<") -> str:
    """``< 3.1e-07 unit``: an upper (or lower) bound, two significant digits."""
    suffix = f" {unit}" if unit else ""
    return f"{relation} {bound:.2g}{suffix}"


def readable_energy(value: float, unit: str) -> tuple:
    """(factor, unit) for showing energies of about ``value``: µeV below 0.1 meV, h·Hz below
    0.1 h·kHz, otherwise the unit itself."""
    sub = ENERGY_SUBUNITS.get(unit)
    if sub is not None and math.isfinite(value) and 0 < abs(value) < 0.1:
        return sub[1], sub[0]
    return 1.0, unit


def format_energy(value: float, uncertainty: float, unit: str) -> str:
    """An energy with its uncertainty in the readable sub-unit for its size."""
    factor, shown_unit = readable_energy(max(abs(value), abs(uncertainty) if math.isfinite(uncertainty) else 0.0),
                                         unit)
    return format_measured(value * factor, uncertainty * factor, shown_unit)


def format_energy_bound(bound: float, unit: str) -> str:
    factor, shown_unit = readable_energy(bound, unit)
    return format_bound(bound * factor, shown_unit)


__all__.append("format_energy_bound")
