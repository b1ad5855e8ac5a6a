"""``wellscape sweep`` arguments: refused or capped in one line before any work; a scheduler that
accepts a connection and never answers is given up on in time."""
from __future__ import annotations

import socket
import threading
import time
from pathlib import Path

import pytest

from app.cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = str(ROOT / "sample_projects" / "gaas_single_dot.json")


def run(capsys, *args):
    code = main(list(args))
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def silent_port():
    """A socket on 127.0.0.1 that accepts every connection and never sends a byte."""
    server = socket.socket()
    server.bind(("127.0.0.1", 0))
    server.listen(8)
    server.settimeout(0.2)
    held, stop = [], threading.Event()

    def accept():
        while not stop.is_set():
            try:
                held.append(server.accept()[0])
            except OSError:
                continue

    thread = threading.Thread(target=accept, daemon=True)
    thread.start()
    yield server.getsockname()[1]
    stop.set()
    thread.join(timeout=5)
    for c in held:
        c.close()
    server.close()


def test_scheduler_that_accepts_and_never_answers_times_out(capsys, silent_port):
    pytest.importorskip("distributed")
    t0 = time.monotonic()
    code, out, err = run(capsys, "sweep", SAMPLE, "--vary", "VP", "--from", "0", "--to", "1", "--steps", "3",
                         "--cluster", f"tcp://127.0.0.1:{silent_port}", "--cluster-timeout", "1.5")
    elapsed = time.monotonic() - t0
    assert code == 2
    assert "did not connect and answer within 1.5 s" in err and "Traceback" not in err
    assert elapsed < 30          # the deadline held (a generous bound on a shared machine; it hung for ever)


@pytest.mark.parametrize("args, message", [
    (["--to", "nan"], "--to must be a finite number"),
    (["--steps", "0"], "--steps must be between 1 and"),
    (["--steps", "10000000"], "--steps must be between 1 and"),
    (["--workers", "0"], "--workers must be at least 1"),
    (["--states", "0"], "--states must be between 1 and"),
    (["--cluster", "http://example"], "expected an address like tcp://host:8786"),
    (["--cluster", "tcp://127.0.0.1:70000"], "expected an address like tcp://host:8786"),
    (["--cluster-timeout", "-1"], "--cluster-timeout must be between"),
])
def test_bad_sweep_arguments_are_refused_in_one_line(capsys, args, message):
    base = {"--from": "0", "--to": "1", "--steps": "3"}
    for k, v in zip(args[::2], args[1::2]):
        base[k] = v
    flat = [x for kv in base.items() for x in kv]
    code, out, err = run(capsys, "sweep", SAMPLE, "--vary", "VP", *flat)
    assert code == 2
    lines = err.strip().splitlines()
    assert lines[-1].startswith("wellscape: error:") and message in lines[-1], err


def test_too_many_workers_are_capped_with_a_note(capsys):
    import os
    code, out, err = run(capsys, "sweep", SAMPLE, "--vary", "VP", "--from", "-0.1", "--to", "-0.05",
                         "--steps", "2", "--states", "2", "--workers", "500")
    assert code == 0, err
    cap = min(64, os.cpu_count() or 1)
    assert f"--workers 500 is more than this machine's {cap} processors; using {cap}" in err


def test_cluster_help_says_the_scheduler_must_be_trusted(capsys):
    with pytest.raises(SystemExit):
        main(["sweep", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "pickled Python objects" in text and "trust" in text
