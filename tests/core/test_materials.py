"""Checks of the material table core/materials.py.

The expected numbers are copied from the publications, not from the module:
* III-V electron masses: I. Vurgaftman, J. R. Meyer, L. R. Ram-Mohan,
  J. Appl. Phys. 89, 5815 (2001): GaAs 0.067, InAs 0.026, InSb 0.0135,
  AlAs (Gamma) 0.15, wurtzite GaN 0.20.
* Si: m_l = 0.916, m_t = 0.190, J. C. Hensel, H. Hasegawa, M. Nakayama,
  Phys. Rev. 138, A225 (1965) [recalled from memory]; G. Dresselhaus, A. F. Kip,
  C. Kittel, Phys. Rev. 98, 368 (1955) give 0.97 / 0.19.
* Ge: m_l = 1.58, m_t = 0.082, Dresselhaus, Kip, Kittel (1955).
* GaAs g* = -0.44: C. Weisbuch, C. Hermann, Phys. Rev. B 15, 816 (1977) [recalled from memory].
* Static permittivities (GaAs 12.9, Si 11.7, Ge 16.2; AlxGa1-xAs 12.90 - 2.84x):
  M. Levinshtein, S. Rumyantsev, M. Shur (eds.), Handbook Series on Semiconductor
  Parameters, Vols. 1-2 (World Scientific, 1996, 1999) [recalled from memory].
Table values are exact decimal entries, so equality is checked to rel 1e-12.
"""
from __future__ import annotations

import json
import math

import pytest

from core.errors import InputError
from core.materials import ALGAAS_X_MAX, MATERIALS, Material, algaas, custom_material, get_material, material_names

TIGHT = dict(rel=1e-12)  # table entries are typed-in decimals: round-off only

PUBLISHED_ISOTROPIC = {  # Vurgaftman, Meyer, Ram-Mohan (2001)
    "GaAs": 0.067,
    "InAs": 0.026,
    "InSb": 0.0135,
    "GaN": 0.20,
}


@pytest.mark.parametrize("name, mass", sorted(PUBLISHED_ISOTROPIC.items()))
def test_iii_v_masses_vurgaftman_2001(name, mass):
    """Gamma-valley electron masses of Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001)."""
    material = get_material(name)
    assert material.isotropic
    assert material.mass == pytest.approx(mass, **TIGHT)
    assert "Vurgaftman" in material.sources["masses"]
    assert "89, 5815 (2001)" in material.sources["masses"]


def test_gan_is_wurtzite_and_says_so():
    """GaN: wurtzite, isotropic 0.20 (Vurgaftman et al. 2001)."""
    gan = get_material("GaN")
    assert "wurtzite" in gan.description.lower()
    assert "wurtzite" in gan.sources["masses"].lower()


def test_silicon_valley_along_z():
    """Si: (m_t, m_t, m_l) = (0.190, 0.190, 0.916), Hensel, Hasegawa, Nakayama (1965)."""
    si = get_material("Si")
    assert si.masses == pytest.approx((0.190, 0.190, 0.916), **TIGHT)
    assert not si.isotropic
    assert "Hensel" in si.sources["masses"] and "A225" in si.sources["masses"]
    assert "(001)" in si.description
    with pytest.raises(InputError, match="anisotropic"):
        _ = si.mass


def test_germanium_valley_along_z():
    """Ge: (m_t, m_t, m_l) = (0.082, 0.082, 1.58), Dresselhaus, Kip, Kittel (1955)."""
    ge = get_material("Ge")
    assert ge.masses == pytest.approx((0.082, 0.082, 1.58), **TIGHT)
    assert "Dresselhaus" in ge.sources["masses"] and "98, 368" in ge.sources["masses"]
    assert "[111]" in ge.description


def test_valley_reorientation():
    """Moving the longitudinal mass of Si to x or y permutes the diagonal."""
    si = get_material("Si")
    assert si.with_valley_axis("x").masses == pytest.approx((0.916, 0.190, 0.190), **TIGHT)
    assert si.with_valley_axis("Y").masses == pytest.approx((0.190, 0.916, 0.190), **TIGHT)
    assert si.with_valley_axis("z").masses == si.masses
    gaas = get_material("GaAs")
    assert gaas.with_valley_axis("x") is gaas
    with pytest.raises(InputError, match="valley axis"):
        si.with_valley_axis("w")


def test_density_of_states_mass_silicon():
    """Per-valley DOS mass (m_t^2 m_l)^(1/3) for Si with the Hensel et al. (1965) masses,
    evaluated independently from the published m_t, m_l; rel 1e-12 (round-off)."""
    si = get_material("Si")
    assert si.density_of_states_mass == pytest.approx((0.190**2 * 0.916) ** (1 / 3), **TIGHT)


def test_gaas_g_factor_and_permittivities():
    """GaAs g* = -0.44 (Weisbuch & Hermann 1977) and eps_r 12.9; Si 11.7; Ge 16.2
    (Levinshtein et al. 1996) [recalled from memory]."""
    assert get_material("GaAs").g_factor == pytest.approx(-0.44, **TIGHT)
    assert get_material("GaAs").permittivity == pytest.approx(12.9, **TIGHT)
    assert get_material("Si").permittivity == pytest.approx(11.7, **TIGHT)
    assert get_material("Ge").permittivity == pytest.approx(16.2, **TIGHT)


def test_every_value_has_a_source():
    """Each entry names a source for each value, and memory-recalled ones say so."""
    for name, material in MATERIALS.items():
        assert material.name == name
        assert material.description
        for key in ("masses", "g_factor", "permittivity"):
            assert material.sources.get(key), f"{name}: no source for {key}"
        for key, value in (("g_factor", material.g_factor), ("permittivity", material.permittivity)):
            if value is not None:
                text = material.sources[key]
                assert ("(19" in text or "(20" in text or "[recalled from memory]" in text
                        or "common practice" in text), f"{name}: {key} source {text!r}"
        for m in material.masses:
            assert math.isfinite(m) and m > 0


@pytest.mark.parametrize("x", [0.0, 0.1, 0.3, 0.45])
def test_algaas_linear_mass(x):
    """AlxGa1-xAs Gamma mass interpolated linearly between GaAs 0.067 and AlAs 0.15
    (Vurgaftman et al. 2001), i.e. 0.067 + 0.083 x; eps_r = 12.90 - 2.84 x
    (Levinshtein et al. Vol. 2, 1999) [recalled from memory]."""
    material = get_material("AlGaAs", x=x)
    assert material.mass == pytest.approx(0.067 + 0.083 * x, **TIGHT)
    assert material.permittivity == pytest.approx(12.90 - 2.84 * x, **TIGHT)
    assert material.alloy_fraction == x


def test_algaas_at_x0_is_gaas():
    assert algaas(0.0).mass == pytest.approx(get_material("GaAs").mass, **TIGHT)


@pytest.mark.parametrize("spec", ["Al0.3Ga0.7As", "al0.3ga0.7as", "AL0.3GA0.7AS", " Al0.3Ga0.7As ",
                                  "Al.3Ga.7As", "Al0.3GaAs"])
def test_algaas_formula_names(spec):
    material = get_material(spec)
    assert material.alloy_fraction == pytest.approx(0.3, **TIGHT)
    assert material.mass == pytest.approx(0.067 + 0.083 * 0.3, **TIGHT)
    assert material.name == "Al0.3Ga0.7As"


@pytest.mark.parametrize("x", [-0.01, 0.46, 1.0, float("nan"), float("inf")])
def test_algaas_rejects_x_outside_direct_gap(x):
    with pytest.raises(InputError, match="Al fraction"):
        get_material("AlGaAs", x=x)


def test_algaas_errors():
    with pytest.raises(InputError, match="Al fraction"):
        get_material("AlGaAs")
    with pytest.raises(InputError, match="Al fraction"):
        get_material("Al0.5Ga0.5As")
    with pytest.raises(InputError, match="add up to 1"):
        get_material("Al0.3Ga0.6As")
    with pytest.raises(InputError, match="also given"):
        get_material("Al0.3Ga0.7As", x=0.2)
    with pytest.raises(InputError, match="not an alloy"):
        get_material("GaAs", x=0.2)
    with pytest.raises(InputError):
        get_material("AlGaAs", x="0.3")
    assert ALGAAS_X_MAX == 0.45


@pytest.mark.parametrize("spec", ["gaas", "GAAS", "GaAs", "si", "SI", "ge", "inas", "insb", "gan"])
def test_case_insensitive_lookup(spec):
    material = get_material(spec)
    assert material.name.lower() == spec.lower()
    assert material is MATERIALS[material.name]


def test_unknown_name_suggests_closest_and_lists_known():
    with pytest.raises(InputError) as info:
        get_material("GaAss")
    message = str(info.value)
    assert "GaAss" in message
    assert "Did you mean 'GaAs'?" in message
    for name in material_names():
        assert name in message
    with pytest.raises(InputError, match="Did you mean 'InSb'"):
        get_material("InSbb")
    with pytest.raises(InputError) as info:
        get_material("unobtainium")
    assert "Did you mean" not in str(info.value)
    with pytest.raises(InputError, match="string"):
        get_material(0.067)


def test_material_names():
    names = material_names()
    assert set(names) == set(MATERIALS) | {"AlGaAs"}
    assert {"GaAs", "InAs", "InSb", "GaN", "Si", "Ge", "AlGaAs"} <= set(names)


def test_material_passes_through():
    material = get_material("Si")
    assert get_material(material) is material


def test_custom_material():
    iso = custom_material(0.1, g_factor=2.0)
    assert iso.isotropic and iso.mass == 0.1 and iso.g_factor == 2.0
    aniso = custom_material([0.2, 0.3, 0.4])
    assert aniso.masses == (0.2, 0.3, 0.4) and not aniso.isotropic
    assert aniso.g_factor is None
    assert aniso.sources["masses"] == "user input"


@pytest.mark.parametrize("mass", [0.0, -0.1, float("nan"), float("inf"), [0.1, 0.2],
                                  [0.1, -0.2, 0.3], [0.1, float("nan"), 0.3], "0.1", None, True])
def test_custom_material_rejects_bad_mass(mass):
    with pytest.raises(InputError, match="mass"):
        custom_material(mass)


def test_custom_material_rejects_bad_g_and_permittivity():
    with pytest.raises(InputError, match="g_factor"):
        custom_material(0.1, g_factor=float("nan"))
    with pytest.raises(InputError, match="permittivity"):
        custom_material(0.1, permittivity=-1.0)


def test_frozen_hashable_and_serialisable():
    gaas = get_material("GaAs")
    with pytest.raises(AttributeError):
        gaas.masses = (1.0, 1.0, 1.0)  # type: ignore[misc]
    assert hash(gaas) == hash(get_material("gaas"))
    assert json.loads(json.dumps(gaas.describe()))["masses"] == [0.067, 0.067, 0.067]
    assert isinstance(gaas, Material)
