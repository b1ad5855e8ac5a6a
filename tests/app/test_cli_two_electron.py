"""wellscape solve on a two-electron project: the text table, the JSON section, bad electron counts."""
from __future__ import annotations

import json
from pathlib import Path

from app.cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_projects" / "gaas_double_dot_two_electrons.json"


def _small(tmp_path, electrons=2):
    doc = json.loads(SAMPLE.read_text(encoding="utf-8"))
    doc["grid"]["points"] = [40, 24]
    doc["solver"]["states"] = 12
    doc["electrons"] = electrons
    path = tmp_path / "dd.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def test_solve_json_has_two_electron_section(capsys, tmp_path):
    code = main(["solve", str(_small(tmp_path)), "--json"])
    out = capsys.readouterr().out
    assert code == 0
    pair = json.loads(out)["two_electron"]
    assert pair["energy_unit"] == "meV" and pair["spin"][0] == "singlet"
    e = pair["energies"]
    singlet = e[pair["spin"].index("singlet")]
    triplet = e[pair["spin"].index("triplet")]
    assert abs(pair["exchange"] - (triplet - singlet)) < 1e-12 and pair["exchange"] > 0
    assert pair["orbitals"] == 12 and pair["exchange_uncertainty"] is not None
    assert len(pair["convergence"]) >= 2 and pair["permittivity"] == 12.9


def test_solve_text_shows_levels_with_spin_and_units(capsys, tmp_path):
    code = main(["solve", str(_small(tmp_path))])
    out = capsys.readouterr().out
    assert code == 0
    assert "two electrons: configuration interaction in 12 orbitals" in out
    assert "singlet" in out and "triplet" in out and "exchange J = E(lowest triplet) - E(lowest singlet) =" in out
    assert "+- [meV]" in out and " meV +- " in out


def test_other_electron_counts_get_one_line_error(capsys, tmp_path):
    code = main(["solve", str(_small(tmp_path, electrons=3))])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "electrons: expected 1 or 2" in err


def test_sample_double_dot_singlet_ground():
    """The bundled sample: Lieb-Mattis (Phys. Rev. 125, 164 (1962)) singlet ground state, J > 0 beyond its
    uncertainty, and J larger at a detuning of 4 meV than at 0 (the doubly occupied singlet mixes in)."""
    from core.project import load_project
    from core.two_electron import solve_two_electron
    project = load_project(SAMPLE)
    js = []
    for eps in (0.0, 4.0):
        _study, pair = solve_two_electron(project, parameters={"eps": eps})
        assert pair.spin[0] == "singlet" and pair.exchange > pair.exchange_uncertainty
        js.append((pair.exchange, pair.exchange_uncertainty))
    assert js[1][0] - js[0][0] > js[0][1] + js[1][1]


def test_check_estimates_the_coulomb_memory(capsys, tmp_path):
    code = main(["check", str(_small(tmp_path))])
    out = capsys.readouterr().out
    assert code == 0 and "two electrons: Coulomb integrals in 12 orbitals need about" in out and "iB more" in out
