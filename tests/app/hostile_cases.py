"""A corpus of hostile inputs, generated into a folder (nothing large is kept in the repository).

Each case is a command line for ``wellscape``: malformed or extreme project files through
``check``, ``solve``, ``potential``, ``figure`` and ``sweep``; hostile map files; crafted sweep
archives for ``figure --sweep``; crafted sheet files for ``figure --from``. Used by
``test_hostile_corpus.py``; every case must end with exit status 0 or one line
``wellscape: error: ...``.
"""
from __future__ import annotations

import copy
import io
import json
import os
import struct
import zipfile
from pathlib import Path

import numpy as np

BASE = {"schema_version": 2, "title": "hostile", "units": "semiconductor", "material": "GaAs",
        "grid": {"lower": [-60, -60], "upper": [60, 60], "points": [12, 12]},
        "parameters": {"hw": 3.0, "l0": 19.47},
        "potential": [{"kind": "formula", "label": "dot", "formula": "0.5*hw*(x**2+y**2)/l0**2"}],
        "solver": {"states": 2}}

COMMANDS = ("check", "solve", "potential", "figure", "sweep")


def _with(**changes):
    doc = copy.deepcopy(BASE)
    for path, value in changes.items():
        target = doc
        keys = path.split("__")
        for k in keys[:-1]:
            target = target[int(k)] if k.isdigit() else target[k]
        last = keys[-1]
        if last.isdigit():
            target[int(last)] = value
        else:
            target[last] = value
    return doc


def _formula(text):
    return _with(potential=[{"kind": "formula", "label": "v", "formula": text}])


def _map_term(file, **extra):
    term = {"kind": "map", "label": "map", "file": file, "lower": [-70, -70], "upper": [70, 70]}
    term.update(extra)
    return _with(potential=[term])


def _gates(polygon, voltage=-0.3, **extra):
    term = {"kind": "gates", "label": "g", "depth": 50,
            "gates": [{"label": "P", "voltage": voltage, "polygon": polygon}]}
    term.update(extra)
    return _with(potential=[term])


def _ring(n, wiggle=0.0):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 40 + wiggle * np.sin(7 * t)
    return np.column_stack([r * np.cos(t), r * np.sin(t)]).round(6).tolist()


def _npy_header_bytes(shape, descr="<f8") -> bytes:
    header = f"{{'descr': '{descr}', 'fortran_order': False, 'shape': {tuple(shape)!r}, }}"
    header += " " * ((64 - (10 + len(header) + 1) % 64) % 64) + "\n"
    return b"\x93NUMPY\x01\x00" + struct.pack("<H", len(header)) + header.encode("latin1")


def project_texts(folder: Path) -> dict:
    """name -> text of a project file (JSON that is malformed, hostile or extreme)."""
    out = {}
    js = {
        "kind_is_a_list": _with(potential=[{"kind": ["formula"], "formula": "x"}]),
        "kind_is_an_object": _with(potential=[{"kind": {"a": 1}}]),
        "grid_is_a_list": _with(grid=[1, 2, 3]),
        "points_are_text": _with(grid__points=["12", "12"]),
        "points_400_digits": _with(grid__points=[int("9" * 400), 12]),
        "points_overflow_int64": _with(grid__points=[2**40, 2**40]),
        "points_1000_cubed": _with(grid={"lower": [-50] * 3, "upper": [50] * 3, "points": [1000] * 3}),
        "points_product_overflows": _with(grid={"lower": [-50] * 3, "upper": [50] * 3,
                                                "points": [3037000500, 3037000500, 4]}),
        "states_400_digits": _with(solver={"states": int("9" * 400)}),
        "states_more_than_points": _with(solver={"states": 10**6}),
        "mass_1e-300": _with(material={"mass": 1e-300}),
        "mass_1e300": _with(material={"mass": 1e300}),
        "mass_formula_tiny": _with(material={"mass": "hw*1e-300"}),
        "mass_negative": _with(material={"mass": -0.067}),
        "potential_1e300_r2": _formula("1e300*r**2"),
        "potential_1e200": _formula("1e200 + 0*x"),
        "potential_overflows": _formula("exp(1000*x)"),
        "potential_nan": _formula("sqrt(-1 - x**2)"),
        "electric_field_1e300": _with(electric_field=[1e300, 0], potential=[{"kind": "uniform_field"}]),
        "magnetic_field_1e300": _with(magnetic_field=[0, 0, 1e300]),
        "magnetic_field_formula_huge": _with(magnetic_field=[0, 0, "hw*1e300"]),
        "voltage_1e300": _gates(_ring(16), voltage=1e300),
        "lever_1e300": _gates(_ring(16), lever=1e300),
        "depth_tiny": _gates(_ring(16), depth=1e-300),
        "grid_box_1e300": _with(grid={"lower": [-1e300, -1e300], "upper": [1e300, 1e300], "points": [12, 12]}),
        "grid_box_tiny": _with(grid={"lower": [0, 0], "upper": [1e-300, 1e-300], "points": [12, 12]}),
        "tolerance_tiny": _with(solver={"states": 2, "tolerance": 1e-300}),
        "title_lone_surrogate": _with(title="\ud800"),
        "title_terminal_escape": _with(title="\x1b]0;owned\x07\x1b[2J"),
        "label_lone_surrogate": _with(potential=[{"kind": "formula", "label": "\udfff", "formula": "x**2"}]),
        "parameter_name_surrogate": _with(parameters={"\ud800": 1.0}),
        "map_path_nul": _map_term("a\u0000b.npy"),
        "map_path_long": _map_term("m" * 5000 + ".npy"),
        "map_path_outside": _map_term("../outside/map.npy"),
        "map_path_absolute_system": _map_term("/etc/hostname"),
        "map_csv_link_to_system_file": _map_term("maps/passwd.csv"),
        "map_link_to_environment": _map_term("maps/environ.csv"),
        "map_npy_declares_8_TiB": _map_term("maps/huge_header.npy"),
        "map_npz_member_declares_3_GiB": _map_term("maps/huge_member.npz"),
        "map_npz_truncated_member": _map_term("maps/truncated.npz"),
        "map_npy_object_array": _map_term("maps/objects.npy"),
        "map_npy_truncated": _map_term("maps/truncated.npy"),
        "map_text_not_numbers": _map_term("maps/words.csv"),
        "map_is_a_folder": _map_term("maps/folder.npy"),
        "map_link_loop": _map_term("maps/loop.npy"),
        "map_no_such_file": _map_term("maps/missing.npy"),
        "polygon_10000_vertices": _gates(_ring(10_000, wiggle=3.0)),
        "polygon_self_crossing": _gates([[0, 0], [40, 40], [40, 0], [0, 40]]),
        "polygon_over_the_limit": _gates(_ring(100_001)),
        "polygon_vertex_is_text": _gates([[0, 0], ["a", 1], [1, 0]]),
        "formula_too_long": _formula("x+" * 3000 + "x"),
        "formula_calls_import": _formula("__import__('os').system('true')"),
        "formula_attribute": _formula("x.__class__"),
    }
    for name, doc in js.items():
        out[name] = json.dumps(doc, ensure_ascii=True)
    base = json.dumps(BASE)
    out["duplicate_keys"] = base[:-1] + ', "grid": {"lower": [0], "upper": [1], "points": [5]}}'
    out["nested_too_deep"] = '{"schema_version": 2, "notes": ' + "[" * 100_000 + "]" * 100_000 + "}"
    out["not_utf8"] = base.replace("hostile", "h\udcffostile")     # written with surrogatepass: bytes ED B3 BF
    out["empty_file"] = ""
    out["not_an_object"] = "[1, 2, 3]"
    out["infinity_literal"] = base.replace('"hw": 3.0', '"hw": Infinity')
    out["number_1e400"] = base.replace('"hw": 3.0', '"hw": 1e400')
    out["integer_5000_digits"] = base.replace('"hw": 3.0', '"hw": ' + "7" * 5000)
    return out


def make_map_files(folder: Path) -> None:
    maps = folder / "maps"
    maps.mkdir()
    for name, target in (("passwd.csv", "/etc/passwd"), ("environ.csv", "/proc/self/environ")):
        if os.path.exists(target):
            (maps / name).symlink_to(target)
        else:
            (maps / name).write_text("root:x:0:0:secret\n", encoding="utf-8")
    (maps / "huge_header.npy").write_bytes(_npy_header_bytes((1 << 20, 1 << 20, 1 << 3)) + b"\0" * 64)
    with zipfile.ZipFile(maps / "huge_member.npz", "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("potential.npy", _npy_header_bytes((20000, 20000)) + b"\0" * 4096)
    buf = io.BytesIO()
    np.save(buf, np.zeros((40, 40)))
    with zipfile.ZipFile(maps / "truncated.npz", "w") as z:
        z.writestr("potential.npy", buf.getvalue()[:300])
    (maps / "objects.npy").write_bytes(_npy_header_bytes((2,), "|O") + b"\x80\x04N.")
    np.save(maps / "truncated.npy", np.zeros((40, 40)))
    data = (maps / "truncated.npy").read_bytes()
    (maps / "truncated.npy").write_bytes(data[: len(data) // 2])
    (maps / "words.csv").write_text("1,2,3\nthe secret password is swordfish,5,6\n", encoding="utf-8")
    (maps / "folder.npy").mkdir()
    (maps / "loop.npy").symlink_to(maps / "loop2.npy")
    (maps / "loop2.npy").symlink_to(maps / "loop.npy")
    outside = folder.parent / "outside"
    outside.mkdir(exist_ok=True)
    np.save(outside / "map.npy", np.zeros((8, 8)))


def sweep_archives(folder: Path, good: Path) -> dict:
    """name -> path of a crafted sweep archive (built from a real one, ``good``)."""
    with np.load(good, allow_pickle=False) as z:
        real = {k: z[k] for k in z.files}
    out = {}

    def write(name, arrays=None, raw=None):
        p = folder / f"{name}.npz"
        if raw is not None:
            p.write_bytes(raw)
        else:
            np.savez(p, **arrays)
        out[name] = p

    def changed(**kw):
        d = dict(real)
        for k, v in kw.items():
            if v is None:
                d.pop(k, None)
            else:
                d[k] = v
        return d

    write("not_a_zip", raw=b"this is not an archive")
    write("empty_zip", raw=b"PK\x05\x06" + b"\0" * 18)
    write("missing_energies", changed(energies=None))
    write("missing_project", changed(project=None))
    write("energies_wrong_shape", changed(energies=np.zeros((2, 7, 3))))
    write("energies_text", changed(energies=np.array(["a", "b"])))
    write("energies_nan", changed(energies=np.full(real["energies"].shape, np.nan)))
    write("energies_huge", changed(energies=np.full(real["energies"].shape, 1e300)))
    write("values_text", changed(values=np.array(["x", "y", "z"])))
    write("values_mismatch", changed(values=np.arange(50.0)))
    write("values_2d", changed(values=np.zeros((3, 3))))
    write("tracks_out_of_range", changed(tracks=np.full(real["tracks"].shape, 10**9)))
    write("tracks_negative", changed(tracks=np.full(real["tracks"].shape, -5)))
    write("tracks_float", changed(tracks=np.full(real["tracks"].shape, 0.5)))
    write("project_not_json", changed(project=np.array("{not json")))
    write("project_wrong_schema", changed(project=np.array('{"schema_version": 99}')))
    write("project_duplicate_keys", changed(project=np.array(str(real["project"])[:-1] + ', "title": "x"}')))
    write("approaches_not_a_list", changed(approaches=np.array('{"a": 1}')))
    write("approaches_items_wrong", changed(approaches=np.array('[1, "x", null]')))
    write("approaches_fields_wrong", changed(approaches=np.array(
        '[{"at": "here", "gap": [1], "levels": 7, "kind": 3}]')))
    write("approaches_huge_levels", changed(approaches=np.array(
        '[{"at": 0.1, "gap": 1.0, "levels": [0, 100000000], "kind": "anticrossing"}]')))
    write("parameter_array", changed(parameter=np.arange(3.0)))
    write("units_not_json", changed(units=np.array("[[[")))
    write("observable_wrong_shape", changed(obs_x=np.zeros((1, 1, 1, 1))))
    p = folder / "member_declares_8_TiB.npz"
    with zipfile.ZipFile(p, "w", zipfile.ZIP_DEFLATED) as z:
        for k, v in real.items():
            b = io.BytesIO()
            np.save(b, v)
            z.writestr(f"{k}.npy", b.getvalue() if k != "energies" else
                       _npy_header_bytes((1 << 21, 1 << 21)) + b"\0" * 128)
    out["member_declares_8_TiB"] = p
    p = folder / "object_member.npz"
    with zipfile.ZipFile(p, "w") as z:
        z.writestr("energies.npy", _npy_header_bytes((2,), "|O") + b"\x80\x04N.")
    out["object_member"] = p
    return out


def sheet_files(folder: Path, good: Path) -> dict:
    """name -> path of a crafted sheet file (built from a real one, ``good``)."""
    doc = json.loads(good.read_text(encoding="utf-8"))
    out = {}

    def write(name, value=None, raw=None):
        p = folder / f"{name}.sheet.json"
        p.write_text(raw if raw is not None else json.dumps(value), encoding="utf-8")
        out[name] = p

    def changed(fn):
        d = copy.deepcopy(doc)
        fn(d)
        return d

    write("not_json", raw="{")
    write("a_list", [])
    write("no_panels", changed(lambda d: d.pop("panels")))
    write("panels_text", changed(lambda d: d.__setitem__("panels", "all")))
    write("panel_kind_list", changed(lambda d: d["panels"][0].__setitem__("kind", ["levels"])))
    write("panel_is_number", changed(lambda d: d["panels"].__setitem__(0, 5)))
    write("caption_object", changed(lambda d: d.__setitem__("caption", {"a": 1})))
    write("template_unknown", changed(lambda d: d.__setitem__("template", "poster" * 100)))
    write("columns_huge", changed(lambda d: d.__setitem__("columns", 10**400)))
    write("title_surrogate", raw=json.dumps(changed(lambda d: d.__setitem__("title", "x"))).replace(
        '"title": "x"', '"title": "\\ud800"'))
    write("duplicate_keys", raw=json.dumps(doc)[:-1] + ', "panels": []}')
    write("project_bad", changed(lambda d: d.__setitem__("project", {"schema_version": "two"})))
    write("hash_mismatch", changed(lambda d: d.__setitem__("project_hash", "0" * 64)))
    write("many_panels", changed(lambda d: d.__setitem__("panels", d["panels"] * 500)))
    write("units_number", changed(lambda d: d.__setitem__("units", 5)))

    def mutate_values(d, value):
        for panel in d["panels"]:
            for k, v in list(panel.items()):
                if isinstance(v, list) and k != "kind":
                    panel[k] = value
    write("panel_arrays_text", changed(lambda d: mutate_values(d, ["a", "b"])))
    write("panel_arrays_nested", changed(lambda d: mutate_values(d, [[[[[1]]]]])))
    write("panel_arrays_huge_numbers", changed(lambda d: mutate_values(d, [1e308, -1e308, 10**300])))
    write("panel_arrays_null", changed(lambda d: mutate_values(d, None)))
    write("panel_arrays_empty", changed(lambda d: mutate_values(d, [])))
    write("nested_deep", raw='{"panels": ' + "[" * 50_000 + "]" * 50_000 + "}")
    return out


def build_cases(folder: Path, good_sweep: Path, good_sheet: Path) -> list:
    """Every case as ``{"name", "argv", "cwd"}`` (the files written under ``folder``)."""
    proj = folder / "projects"
    proj.mkdir()
    make_map_files(proj)
    out_dir = folder / "out"
    out_dir.mkdir()
    cases = []
    for name, text in project_texts(proj).items():
        path = proj / f"{name}.json"
        path.write_text(text, encoding="utf-8", errors="surrogatepass")
        for command in COMMANDS:
            argv = {"check": ["check", str(path)],
                    "solve": ["solve", str(path)],
                    "potential": ["potential", str(path), "-o", str(out_dir / f"{name}.npy")],
                    "figure": ["figure", str(path), "-o", str(out_dir / f"{name}.png"), "--layout", "levels",
                               "--dpi", "40"],
                    "sweep": ["sweep", str(path), "--vary", "hw", "--from", "2", "--to", "3", "--steps", "2"]}[command]
            cases.append({"name": f"{command}:{name}", "argv": argv, "cwd": str(folder)})
    big = proj / "oversized.json"
    with open(big, "wb") as fh:
        fh.truncate(30 * 2**20)                  # a sparse 30 MiB file: refused by its size
    cases.append({"name": "check:oversized_file", "argv": ["check", str(big)], "cwd": str(folder)})
    cases.append({"name": "check:no_such_file", "argv": ["check", str(proj / "missing.json")], "cwd": str(folder)})
    cases.append({"name": "check:a_folder", "argv": ["check", str(proj)], "cwd": str(folder)})
    cases.append({"name": "check:path_with_nul", "argv": ["check", "a\0b.json"], "cwd": str(folder)})
    cases.append({"name": "check:path_too_long", "argv": ["check", "p" * 5000 + ".json"], "cwd": str(folder)})
    sweeps = folder / "sweeps"
    sweeps.mkdir()
    sample = proj / "sample.json"
    sample.write_text(json.dumps(BASE), encoding="utf-8")
    for name, path in sweep_archives(sweeps, good_sweep).items():
        cases.append({"name": f"figure --sweep:{name}",
                      "argv": ["figure", str(sample), "-o", str(out_dir / f"sw_{name}.png"), "--sweep", str(path),
                               "--layout", "fan", "--dpi", "40"], "cwd": str(folder)})
    sheets = folder / "sheets"
    sheets.mkdir()
    for name, path in sheet_files(sheets, good_sheet).items():
        cases.append({"name": f"figure --from:{name}",
                      "argv": ["figure", "--from", str(path), "-o", str(out_dir / f"sh_{name}.png"), "--dpi", "40"],
                      "cwd": str(folder)})
    missing = folder / "no_such_folder"
    for name, argv in (("solve:states_negative", ["solve", str(sample), "--states", "-5"]),
                       ("solve:set_nan", ["solve", str(sample), "--set", "hw=nan"]),
                       ("solve:set_1e400", ["solve", str(sample), "--set", "hw=1e400"]),
                       ("solve:out_is_a_file", ["solve", str(sample), "--out", str(sample)]),
                       ("potential:output_folder_missing", ["potential", str(sample), "-o", str(missing / "v.npy")]),
                       ("potential:output_type_unknown", ["potential", str(sample), "-o", str(out_dir / "v.xyz")]),
                       ("figure:dpi_huge", ["figure", str(sample), "-o", str(out_dir / "d.png"), "--dpi", "1e9"]),
                       ("figure:layout_many_states", ["figure", str(sample), "-o", str(out_dir / "l.png"),
                                                      "--layout", "states100000"]),
                       ("figure:output_folder_missing", ["figure", str(sample), "-o", str(missing / "f.png"),
                                                         "--layout", "levels", "--dpi", "40"])):
        cases.append({"name": name, "argv": argv, "cwd": str(folder)})
    for name, extra in (("workers_huge", ["--workers", "100000"]), ("steps_huge", ["--steps", "10000000"]),
                        ("from_nan", ["--from", "nan"]), ("cluster_bad", ["--cluster", "udp://x"])):
        argv = ["sweep", str(sample), "--vary", "hw", "--from", "2", "--to", "3", "--steps", "2"]
        for k, v in zip(extra[::2], extra[1::2]):
            if k in argv:
                argv[argv.index(k) + 1] = v
            else:
                argv += [k, v]
        cases.append({"name": f"sweep:{name}", "argv": argv, "cwd": str(folder)})
    return cases
