"""Hostile input through every command: each run ends with exit status 0 or a one-line
``wellscape: error: ...`` (status 2), never a traceback, a kill or a hang.

The corpus (``hostile_cases.py``) is generated into a temporary folder. The cases run in a child
process limited to :data:`ADDRESS_SPACE` bytes of address space (``resource.setrlimit`` in
``preexec_fn``) with a deadline per case and one for the whole run; a second test runs ``check``
and ``potential`` on a 1000^3 grid in their own processes and requires a refusal with a small
peak memory.
"""
from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time
from collections import Counter
from pathlib import Path

import pytest

from tests.app.hostile_cases import BASE, build_cases

ROOT = Path(__file__).resolve().parents[2]
DRIVER = Path(__file__).with_name("hostile_driver.py")
#: address space of the child that runs the corpus (numpy, scipy, numba and matplotlib map ~1 GiB)
ADDRESS_SPACE = 3 * 2**30


def _limited(limit: int):
    def apply():
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    return apply


def _child_env() -> dict:
    env = dict(os.environ)
    env.pop("WELLSCAPE_MAP_FOLDERS", None)       # only the project's own folder: what a fresh shell allows
    env.update(OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", NUMBA_NUM_THREADS="1", MPLBACKEND="Agg",
               PYTHONPATH=str(ROOT))
    return env


@pytest.fixture(scope="module")
def references(tmp_path_factory):
    """A real sweep archive and a real sheet file, the starting points of the crafted ones."""
    from app.cli import main
    folder = tmp_path_factory.mktemp("reference")
    project = folder / "p.json"
    project.write_text(json.dumps(BASE), encoding="utf-8")
    assert main(["sweep", str(project), "--vary", "hw", "--from", "2", "--to", "3", "--steps", "3",
                 "--out", str(folder)]) == 0
    assert main(["figure", str(project), "-o", str(folder / "f.png"), "--layout", "levels", "--dpi", "40"]) == 0
    return folder / "sweep.npz", folder / "f.sheet.json"


def _verdict(row) -> str:
    if row.get("escaped"):
        return "traceback" if not row["escaped"].startswith("hang") else "hang"
    if row["traceback"]:
        return "traceback"
    if row["rc"] == 0:
        return "ok"
    tail = row["stderr_tail"]
    if row["rc"] == 2 and tail and tail[-1].startswith("wellscape: error: ") and not any(
            line.startswith(("  File ", "Traceback")) for line in tail):
        return "one-line error"
    return f"bad exit {row['rc']}"


def test_every_hostile_input_ends_in_success_or_one_line(tmp_path, references):
    cases = build_cases(tmp_path, *references)
    spec = tmp_path / "cases.json"
    spec.write_text(json.dumps(cases), encoding="utf-8")
    log = tmp_path / "results.jsonl"
    proc = subprocess.run([sys.executable, str(DRIVER), str(spec), str(log), "45"], cwd=ROOT, env=_child_env(),
                          preexec_fn=_limited(ADDRESS_SPACE), capture_output=True, text=True, timeout=900)
    rows = [json.loads(line) for line in log.read_text(encoding="utf-8").splitlines()]
    done = {r["name"]: r for r in rows if "name" in r}
    started = [r["start"] for r in rows if "start" in r]
    assert proc.returncode == 0, (f"the driver died (status {proc.returncode}) during {started[-1] if started else '?'}"
                                  f": {proc.stderr[-2000:]}")
    assert len(done) == len(cases)
    verdicts = {name: _verdict(row) for name, row in done.items()}
    tally = Counter(verdicts.values())
    print(f"\nhostile corpus: {len(cases)} runs: " + ", ".join(f"{k} {v}" for k, v in sorted(tally.items())))
    by_command = Counter(name.split(":")[0] for name in verdicts)
    print("by command: " + ", ".join(f"{k} {v}" for k, v in sorted(by_command.items())))
    bad = {name: (verdict, done[name]) for name, verdict in verdicts.items()
           if verdict not in ("ok", "one-line error")}
    assert not bad, "\n".join(f"{n}: {v}: {r.get('escaped') or r['stderr_tail']}" for n, (v, r) in bad.items())
    # no error message quotes a map file's content
    for name, row in done.items():
        text = " ".join(row["stderr_tail"])
        assert "swordfish" not in text and "root:x:0" not in text and "PATH=" not in text, name
    # classes that must be refused (not silently solved)
    for name in ("check:points_1000_cubed", "check:points_400_digits", "check:mass_1e-300",
                 "solve:potential_1e300_r2", "check:map_npy_declares_8_TiB", "check:map_csv_link_to_system_file",
                 "check:map_path_outside", "check:duplicate_keys", "check:title_lone_surrogate",
                 "check:kind_is_a_list", "check:polygon_over_the_limit", "check:title_terminal_escape",
                 "check:points_product_overflows"):
        assert verdicts[name] == "one-line error", name
    assert verdicts["check:polygon_10000_vertices"] == "ok"


@pytest.mark.parametrize("command", ["check", "potential"])
def test_a_1000_cubed_grid_is_refused_small_and_fast(tmp_path, command):
    """The documented estimate-only command, and the potential writer, refuse before allocating:
    the child runs under an address-space limit of 300 MiB (importing numpy and scipy maps about
    250 MiB) and its peak resident memory (VmHWM) must stay under 200 MiB."""
    doc = dict(BASE, grid={"lower": [-50] * 3, "upper": [50] * 3, "points": [1000] * 3},
               potential=[{"kind": "formula", "label": "bowl", "formula": "0.01*r**2"}])
    project = tmp_path / "big.json"
    project.write_text(json.dumps(doc), encoding="utf-8")
    hwm = tmp_path / "hwm.txt"
    # VmHWM of the process after exec: ru_maxrss would also count the forked copy of this test process
    code = ("import atexit, sys\n"
            "def report():\n"
            "    for line in open('/proc/self/status'):\n"
            "        if line.startswith('VmHWM:'):\n"
            f"            open({str(hwm)!r}, 'w').write(line.split()[1])\n"
            "atexit.register(report)\n"
            "from app.cli import main\n"
            "sys.exit(main(sys.argv[1:]))\n")
    argv = [sys.executable, "-c", code, command, str(project)]
    if command == "potential":
        argv += ["-o", str(tmp_path / "v.npy")]
    err_path = tmp_path / "stderr.txt"
    t0 = time.perf_counter()
    with open(err_path, "wb") as err:
        proc = subprocess.Popen(argv, cwd=ROOT, env=_child_env(), preexec_fn=_limited(300 * 2**20),
                                stdout=subprocess.DEVNULL, stderr=err)
        try:
            _pid, status, _usage = os.wait4(proc.pid, 0)
        finally:
            proc.returncode = 0
    elapsed = time.perf_counter() - t0
    code = os.waitstatus_to_exitcode(status)
    text = err_path.read_text(encoding="utf-8")
    peak_mib = int(hwm.read_text()) / 1024
    print(f"\n{command} on 1000^3: exit {code} in {elapsed:.2f} s, peak resident memory {peak_mib:.0f} MiB")
    assert code == 2, text
    lines = text.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("wellscape: error: ") and "needs about" in lines[0]
    assert peak_mib < 200
    assert not (tmp_path / "v.npy").exists()
