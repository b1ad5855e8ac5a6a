"""Material table: conduction-band electrons in common semiconductors.

Every entry gives the electron effective mass per axis (x, y, z) in units of
the free-electron mass m0, and, where known, the bulk electron g-factor and
the static relative permittivity. Every number has its published source
beside it, in a comment and in ``Material.sources``. A source marked
"[recalled from memory]" was not re-read when the value was entered: check
it before relying on it.

Conventions
-----------
* ``masses`` is the diagonal of the effective-mass tensor in the project's
  x, y, z frame. Only diagonal tensors are represented.
* **Si** (six Delta valleys along <100>): the default entry is the valley
  whose longitudinal axis lies along z, as for the two lowest valleys of a
  (001) quantum well, so ``masses = (m_t, m_t, m_l)``. Use
  :meth:`Material.with_valley_axis` for a valley along x or y.
* **Ge** (four L valleys along <111>): the default entry is a valley whose
  longitudinal axis lies along z, i.e. the frame's z axis is the valley's
  [111] axis (as in a (111) quantum well); ``masses = (m_t, m_t, m_l)``. For a
  (001) well the L-valley mass tensor is not diagonal in x, y, z and cannot be
  represented here.
* **GaN** is the wurtzite phase; the mass is the isotropic band-edge value
  recommended by Vurgaftman et al. (the small anisotropy between the
  directions parallel and perpendicular to the c axis is neglected).
* **AlxGa1-xAs** is a function of the Al fraction x, limited to the
  direct-gap range 0 <= x <= 0.45.

Public API: :class:`Material`, :data:`MATERIALS`, :func:`material_names`,
:func:`get_material`, :func:`algaas`, :func:`custom_material`.
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field, replace
from numbers import Real

from .errors import InputError

__all__ = ["Material", "MATERIALS", "material_names", "get_material", "algaas",
           "custom_material", "ALGAAS_X_MAX", "CONDUCTION_BAND_EDGES", "band_offset"]

# --- sources -----------------------------------------------------------------
VURGAFTMAN_2001 = ("I. Vurgaftman, J. R. Meyer, L. R. Ram-Mohan, "
                   "J. Appl. Phys. 89, 5815 (2001)")
HENSEL_1965 = ("J. C. Hensel, H. Hasegawa, M. Nakayama, Phys. Rev. 138, A225 (1965) "
               "[recalled from memory]")
DKK_1955 = "G. Dresselhaus, A. F. Kip, C. Kittel, Phys. Rev. 98, 368 (1955)"
LRS_VOL1 = ("M. Levinshtein, S. Rumyantsev, M. Shur (eds.), Handbook Series on "
            "Semiconductor Parameters, Vol. 1 (World Scientific, 1996)")
LRS_VOL2 = ("M. Levinshtein, S. Rumyantsev, M. Shur (eds.), Handbook Series on "
            "Semiconductor Parameters, Vol. 2 (World Scientific, 1999)")
LRS_NITRIDES = ("M. Levinshtein, S. Rumyantsev, M. Shur (eds.), Properties of Advanced "
                "Semiconductor Materials: GaN, AlN, InN, BN, SiC, SiGe (Wiley, 2001)")
MEMORY = " [recalled from memory]"

#: upper end of the direct-gap range of AlxGa1-xAs (Gamma-X crossover, Vurgaftman et al. 2001)
ALGAAS_X_MAX = 0.45


@dataclass(frozen=True)
class Material:
    """Conduction-band parameters of one material.

    ``masses``: effective mass per axis (x, y, z) in m0. ``g_factor``: bulk
    electron g-factor, or None if not tabulated. ``permittivity``: static
    relative permittivity eps_r, or None. ``sources``: where each value comes
    from, keyed by ``"masses"``, ``"g_factor"``, ``"permittivity"``.
    ``alloy_fraction``: x for an alloy such as AlxGa1-xAs, else None.
    """

    name: str
    masses: tuple[float, float, float]
    g_factor: float | None = None
    permittivity: float | None = None
    sources: dict[str, str] = field(default_factory=dict, hash=False, compare=False)
    description: str = ""
    alloy_fraction: float | None = None

    def __post_init__(self):
        masses = _check_masses(self.masses, f"material {self.name!r}")
        object.__setattr__(self, "masses", masses)
        if self.g_factor is not None:
            g = _real(self.g_factor, f"material {self.name!r}: g_factor")
            if not math.isfinite(g):
                raise InputError(f"material {self.name!r}: g_factor must be finite, got {g!r}")
            object.__setattr__(self, "g_factor", g)
        if self.permittivity is not None:
            eps = _real(self.permittivity, f"material {self.name!r}: permittivity")
            if not math.isfinite(eps) or eps <= 0.0:
                raise InputError(f"material {self.name!r}: permittivity must be a positive "
                                 f"finite number, got {eps!r}")
            object.__setattr__(self, "permittivity", eps)
        object.__setattr__(self, "sources", dict(self.sources))

    @property
    def isotropic(self) -> bool:
        """True when the three axis masses are equal."""
        return self.masses[0] == self.masses[1] == self.masses[2]

    @property
    def mass(self) -> float:
        """The scalar effective mass (m0); InputError for an anisotropic material."""
        if not self.isotropic:
            raise InputError(f"material {self.name!r} is anisotropic (masses x, y, z = "
                             f"{self.masses}); use .masses instead of .mass")
        return self.masses[0]

    @property
    def density_of_states_mass(self) -> float:
        """Geometric mean (m_x m_y m_z)^(1/3) in m0 (per valley)."""
        return math.prod(self.masses) ** (1.0 / 3.0)

    def with_valley_axis(self, axis: str) -> Material:
        """Return a copy with the longitudinal (distinct) mass on ``axis`` ("x", "y" or "z").

        Meaningful for uniaxial materials (Si, Ge) whose default valley has its
        longitudinal axis along z; an isotropic material is returned unchanged.
        """
        axes = ("x", "y", "z")
        key = str(axis).strip().lower()
        if key not in axes:
            raise InputError(f"valley axis must be one of x, y, z; got {axis!r}")
        if self.isotropic:
            return self
        m_t, m_t2, m_l = self.masses
        if m_t != m_t2:
            raise InputError(f"material {self.name!r} is not uniaxial about z "
                             f"(masses {self.masses}); cannot reorient its valley")
        masses = [m_t, m_t, m_t]
        masses[axes.index(key)] = m_l
        return replace(self, masses=tuple(masses),
                       description=f"{self.description} Valley axis along {key}.".strip())

    def describe(self) -> dict:
        """A plain, JSON-friendly summary."""
        return {"name": self.name, "masses": list(self.masses), "g_factor": self.g_factor,
                "permittivity": self.permittivity, "alloy_fraction": self.alloy_fraction,
                "description": self.description, "sources": dict(self.sources)}


def _real(value, what: str) -> float:
    if isinstance(value, bool) or not isinstance(value, Real):
        raise InputError(f"{what}: expected a number, got {value!r}")
    return float(value)


def _check_masses(mass, what: str) -> tuple[float, float, float]:
    if isinstance(mass, (str, bytes)):
        raise InputError(f"{what}: mass must be a number or 3 numbers, got {mass!r}")
    if isinstance(mass, Real) and not isinstance(mass, bool):
        values = [float(mass)] * 3
    else:
        try:
            items = list(mass)
        except TypeError:
            raise InputError(f"{what}: mass must be a number or 3 numbers, got {mass!r}") from None
        if len(items) != 3:
            raise InputError(f"{what}: expected 3 masses (x, y, z), got {len(items)}")
        values = [_real(v, f"{what}: mass") for v in items]
    for v in values:
        if not math.isfinite(v) or v <= 0.0:
            raise InputError(f"{what}: masses must be positive finite numbers (in m0), got {mass!r}")
    return (values[0], values[1], values[2])


# --- the table ----------------------------------------------------------------
# Si: Delta valleys; m_l = 0.916, m_t = 0.190 (Hensel, Hasegawa, Nakayama 1965;
# Dresselhaus, Kip, Kittel 1955 give 0.97 / 0.19).
_SI_ML, _SI_MT = 0.916, 0.190
# Ge: L valleys; m_l = 1.58, m_t = 0.082 (Dresselhaus, Kip, Kittel 1955).
_GE_ML, _GE_MT = 1.58, 0.082

MATERIALS: dict[str, Material] = {
    "GaAs": Material(
        name="GaAs",
        masses=(0.067, 0.067, 0.067),   # Vurgaftman et al. 2001, Gamma-valley electron mass
        g_factor=-0.44,                 # Weisbuch & Hermann 1977 [recalled from memory]
        permittivity=12.9,              # Levinshtein et al. Vol. 1 (1996) [recalled from memory]
        sources={
            "masses": VURGAFTMAN_2001,
            "g_factor": "C. Weisbuch, C. Hermann, Phys. Rev. B 15, 816 (1977)" + MEMORY,
            "permittivity": LRS_VOL1 + MEMORY,
        },
        description="Gallium arsenide (zinc blende), Gamma-valley conduction electrons."),
    "InAs": Material(
        name="InAs",
        masses=(0.026, 0.026, 0.026),   # Vurgaftman et al. 2001
        g_factor=-14.9,                 # common practice [recalled from memory]
        permittivity=15.15,             # Levinshtein et al. Vol. 1 (1996) [recalled from memory]
        sources={
            "masses": VURGAFTMAN_2001,
            "g_factor": "common practice (bulk band-edge value)" + MEMORY,
            "permittivity": LRS_VOL1 + MEMORY,
        },
        description="Indium arsenide (zinc blende), Gamma-valley conduction electrons."),
    "InSb": Material(
        name="InSb",
        masses=(0.0135, 0.0135, 0.0135),  # Vurgaftman et al. 2001
        g_factor=-51.3,                   # Isaacson 1968, ESR [recalled from memory]
        permittivity=16.8,                # Levinshtein et al. Vol. 1 (1996) [recalled from memory]
        sources={
            "masses": VURGAFTMAN_2001,
            "g_factor": "R. A. Isaacson, Phys. Rev. 169, 312 (1968)" + MEMORY,
            "permittivity": LRS_VOL1 + MEMORY,
        },
        description="Indium antimonide (zinc blende), Gamma-valley conduction electrons."),
    "GaN": Material(
        name="GaN",
        masses=(0.20, 0.20, 0.20),      # Vurgaftman et al. 2001, wurtzite, isotropic recommendation
        g_factor=1.95,                  # common practice (ESR, close to 2) [recalled from memory]
        permittivity=8.9,               # Levinshtein et al. (2001), wurtzite [recalled from memory]
        sources={
            "masses": VURGAFTMAN_2001 + "; wurtzite, isotropic band-edge value "
                      "(anisotropy parallel/perpendicular to c neglected)",
            "g_factor": "common practice (ESR value close to 2)" + MEMORY,
            "permittivity": LRS_NITRIDES + "; static, wurtzite, anisotropy neglected" + MEMORY,
        },
        description="Gallium nitride, wurtzite phase, Gamma-valley conduction electrons; "
                    "isotropic mass 0.20 m0."),
    "Si": Material(
        name="Si",
        masses=(_SI_MT, _SI_MT, _SI_ML),  # Hensel et al. 1965: m_t = 0.190, m_l = 0.916
        g_factor=2.0,                     # common practice (donor/dot g close to 2) [recalled from memory]
        permittivity=11.7,                # Levinshtein et al. Vol. 1 (1996) [recalled from memory]
        sources={
            "masses": HENSEL_1965 + "; cf. " + DKK_1955 + " (0.97 / 0.19)",
            "g_factor": "common practice (g close to 2; e.g. P donors 1.998)" + MEMORY,
            "permittivity": LRS_VOL1 + MEMORY,
        },
        description="Silicon, one Delta valley with its longitudinal axis along z "
                    "(as in a (001) quantum well): masses (m_t, m_t, m_l) = (0.190, 0.190, 0.916)."),
    "Ge": Material(
        name="Ge",
        masses=(_GE_MT, _GE_MT, _GE_ML),  # Dresselhaus, Kip, Kittel 1955: m_t = 0.082, m_l = 1.58
        g_factor=None,                    # anisotropic in Ge; not tabulated here
        permittivity=16.2,                # Levinshtein et al. Vol. 1 (1996) [recalled from memory]
        sources={
            "masses": DKK_1955,
            "g_factor": "not tabulated (the electron g-tensor of Ge is anisotropic)",
            "permittivity": LRS_VOL1 + MEMORY,
        },
        description="Germanium, one L valley with its longitudinal [111] axis along z "
                    "(as in a (111) quantum well): masses (m_t, m_t, m_l) = (0.082, 0.082, 1.58)."),
}

# --- conduction-band edges (band offsets) ---------------------------------------
# Unstrained Gamma conduction-band edge E_c = VBO + E_g(0 K), in eV, on the common valence-band
# scale of Vurgaftman et al. 2001 (valence-band offsets relative to InSb; their recommended
# VBO and low-temperature Gamma gaps) [recalled from memory]: GaAs VBO -0.80, Eg 1.519;
# InAs VBO -0.59, Eg 0.417; InSb VBO 0, Eg 0.235.  Strain in a lattice-mismatched dot (InAs in
# GaAs: about 7 %) shifts the edges by hundreds of meV; these are the unstrained values.
_EDGE_SOURCE = VURGAFTMAN_2001 + ": E_c = VBO + E_g(Gamma, 0 K), unstrained" + MEMORY
CONDUCTION_BAND_EDGES: dict[str, tuple[float, str]] = {
    "GaAs": (-0.80 + 1.519, _EDGE_SOURCE),
    "InAs": (-0.59 + 0.417, _EDGE_SOURCE),
    "InSb": (0.0 + 0.235, _EDGE_SOURCE),
}


def band_offset(name: str, reference: str) -> float:
    """Conduction-band edge of ``name`` minus that of ``reference`` in eV (unstrained; see the table).

    Negative when ``name`` confines electrons inside ``reference`` (InAs in GaAs: -0.892 eV)."""
    edges = {}
    for what in (name, reference):
        material = get_material(what)
        if material.name not in CONDUCTION_BAND_EDGES:
            raise InputError(f"no tabulated conduction-band edge for {material.name}; give the offset as a "
                             f"number (tabulated: {', '.join(CONDUCTION_BAND_EDGES)})")
        edges[what] = CONDUCTION_BAND_EDGES[material.name][0]
    return edges[name] - edges[reference]


# AlxGa1-xAs: linear interpolation of the Gamma-valley mass between GaAs (0.067)
# and AlAs (0.15), both from Vurgaftman et al. 2001 (no bowing for the mass).
_ALAS_GAMMA_MASS = 0.15          # Vurgaftman et al. 2001, AlAs Gamma-valley electron mass
# Static permittivity 12.90 - 2.84 x (Levinshtein et al. Vol. 2, 1999) [recalled from memory]
_ALGAAS_EPS = (12.90, -2.84)

_ALLOY_ALIASES = ("algaas", "alxga1-xas", "al(x)ga(1-x)as")


def algaas(x: float) -> Material:
    """Al_x Ga_(1-x) As for 0 <= x <= 0.45 (direct gap)."""
    xv = _real(x, "AlGaAs: Al fraction x")
    if not math.isfinite(xv) or xv < 0.0 or xv > ALGAAS_X_MAX:
        raise InputError(f"AlGaAs: Al fraction x must be in [0, {ALGAAS_X_MAX}] "
                         f"(direct-gap range), got {x!r}")
    m_gaas = MATERIALS["GaAs"].masses[0]
    m = m_gaas + (_ALAS_GAMMA_MASS - m_gaas) * xv
    eps = _ALGAAS_EPS[0] + _ALGAAS_EPS[1] * xv
    return Material(
        name=f"Al{xv:g}Ga{1.0 - xv:g}As",
        masses=(m, m, m),
        g_factor=None,   # g(x) changes sign near x ~ 0.1; not interpolated
        permittivity=eps,
        sources={
            "masses": VURGAFTMAN_2001 + "; linear between GaAs 0.067 and AlAs (Gamma) 0.15",
            "g_factor": "not tabulated (strongly x-dependent, changes sign)",
            "permittivity": LRS_VOL2 + "; 12.90 - 2.84 x" + MEMORY,
        },
        description=f"Aluminium gallium arsenide, Al fraction x = {xv:g} "
                    f"(direct gap, Gamma-valley electrons).",
        alloy_fraction=xv)


def material_names() -> list[str]:
    """Names accepted by :func:`get_material` ("AlGaAs" needs an x)."""
    return sorted([*MATERIALS, "AlGaAs"], key=str.lower)


_NUMBER = r"(\d+(?:\.\d*)?|\.\d+)"
_ALLOY_RE = re.compile(rf"^al{_NUMBER}ga{_NUMBER}?as$")


def get_material(name_or_spec: str | Material, *, x: float | None = None) -> Material:
    """Look up a material by name, case-insensitively.

    Accepts a table name ("GaAs", "si", ...), an alloy formula such as
    "Al0.3Ga0.7As" (or "Al0.3GaAs"), or "AlGaAs" together with ``x=``.
    A :class:`Material` is returned unchanged.
    """
    if isinstance(name_or_spec, Material):
        if x is not None:
            raise InputError("x= is only used with a material name such as 'AlGaAs'")
        return name_or_spec
    if not isinstance(name_or_spec, str):
        raise InputError(f"material must be a name (string), got {name_or_spec!r}")
    key = name_or_spec.strip().replace(" ", "").lower()
    if key in _ALLOY_ALIASES:
        if x is None:
            raise InputError(f"{name_or_spec!r} needs the Al fraction: get_material('AlGaAs', x=0.3)")
        return algaas(x)
    match = _ALLOY_RE.match(key)
    if match:
        x_name = float(match.group(1))
        if match.group(2) is not None:
            ga = float(match.group(2))
            if abs(x_name + ga - 1.0) > 1e-6:
                raise InputError(f"{name_or_spec!r}: Al and Ga fractions must add up to 1 "
                                 f"(got {x_name:g} + {ga:g})")
        if x is not None and abs(float(x) - x_name) > 1e-12:
            raise InputError(f"{name_or_spec!r} has x = {x_name:g} but x={x!r} was also given")
        return algaas(x_name)
    for name, material in MATERIALS.items():
        if name.lower() == key:
            if x is not None:
                raise InputError(f"{name} is not an alloy; x= is not accepted")
            return material
    known = material_names()
    by_lower = {n.lower(): n for n in known}
    close = difflib.get_close_matches(key, list(by_lower), n=1, cutoff=0.5)
    hint = f" Did you mean {by_lower[close[0]]!r}?" if close else ""
    raise InputError(f"unknown material {name_or_spec!r}.{hint} Known materials: "
                     f"{', '.join(known)} (AlGaAs with x, or e.g. 'Al0.3Ga0.7As').")


def custom_material(mass, g_factor: float | None = None, *, permittivity: float | None = None,
                    name: str = "custom") -> Material:
    """A user-defined material: ``mass`` is one number (isotropic) or 3 numbers (x, y, z), in m0."""
    masses = _check_masses(mass, f"custom material {name!r}")
    return Material(name=name, masses=masses, g_factor=g_factor, permittivity=permittivity,
                    sources={"masses": "user input",
                             "g_factor": "user input" if g_factor is not None else "not given",
                             "permittivity": "user input" if permittivity is not None else "not given"},
                    description="User-defined material.")
