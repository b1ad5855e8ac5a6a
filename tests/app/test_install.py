"""A plain install works: a wheel built from the source holds every subpackage, and the
command line and the window run from it with the source tree off ``sys.path``.

The fresh virtual environment reuses the dependencies already installed for this test run
(a ``.pth`` line naming their site-packages folder), so nothing is downloaded again; the
wheel itself goes in with ``--no-deps``.
"""
from __future__ import annotations

import importlib.util
import os
import shutil
import site
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_projects" / "gaas_single_dot.json"

pytestmark = pytest.mark.slow


def _can_build_offline() -> bool:
    """setuptools >= 68 and wheel in this environment: the build needs no download."""
    if importlib.util.find_spec("wheel") is None:
        return False
    try:
        import setuptools
    except ImportError:
        return False
    return int(setuptools.__version__.split(".")[0]) >= 68


def _clean_env() -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME", "PYTHONSTARTUP")}
    env["QT_QPA_PLATFORM"] = "offscreen"
    env["PYTHONNOUSERSITE"] = "1"
    return env


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    work = tmp_path_factory.mktemp("install")
    src = work / "src"                       # a copy: the build writes build/ and *.egg-info beside it
    src.mkdir()
    for name in ("pyproject.toml", "README.md", "LICENSE"):
        shutil.copy2(ROOT / name, src / name)
    for pkg in ("core", "app"):
        shutil.copytree(ROOT / pkg, src / pkg, ignore=shutil.ignore_patterns("__pycache__"))
    wheels = work / "wheels"
    cmd = [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(wheels), str(src)]
    if _can_build_offline():
        cmd.insert(4, "--no-build-isolation")
    subprocess.run(cmd, check=True, cwd=work, timeout=300, env=_clean_env())
    (wheel,) = wheels.glob("wellscape-*.whl")

    venv = work / "venv"
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(venv)], check=True, timeout=120)
    py = venv / "bin" / "python"
    purelib = Path(subprocess.run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                                  check=True, capture_output=True, text=True).stdout.strip())
    deps = {sysconfig.get_paths()["purelib"], sysconfig.get_paths()["platlib"], *site.getsitepackages()}
    (purelib / "_wellscape_test_deps.pth").write_text("\n".join(sorted(deps)) + "\n", encoding="utf-8")
    subprocess.run([sys.executable, "-m", "pip", "--python", str(py), "install", "--no-deps", "-q", str(wheel)],
                   check=True, timeout=300, env=_clean_env())
    return {"wheel": wheel, "venv": venv, "python": py, "cwd": work}


def _run(installed, *args, timeout=180):
    return subprocess.run(list(args), cwd=installed["cwd"], env=_clean_env(), capture_output=True, text=True,
                          timeout=timeout)


def test_wheel_holds_every_subpackage(installed):
    names = set(zipfile.ZipFile(installed["wheel"]).namelist())
    for package in ("core", "app", "app/editors", "app/views"):
        assert f"{package}/__init__.py" in names, package
    sources = {p.relative_to(ROOT).as_posix() for pkg in ("core", "app") for p in (ROOT / pkg).rglob("*.py")}
    assert sources <= names, sorted(sources - names)


def test_installed_command_line(installed):
    bin_ = installed["venv"] / "bin"
    r = _run(installed, str(bin_ / "wellscape"), "--version")
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip().startswith("wellscape 0.")
    r = _run(installed, str(installed["python"]), "-m", "app", "--version")
    assert r.returncode == 0 and r.stdout.strip().startswith("wellscape 0."), r.stderr
    r = _run(installed, str(bin_ / "wellscape"), "check", str(SAMPLE))
    assert r.returncode == 0, r.stderr
    assert "valid (schema 2)" in r.stdout


def test_installed_window_imports_from_the_venv(installed):
    code = ("import app, core, app.main, app.editors, app.views; "
            "print(app.__file__); print(core.__file__); print(app.main.__file__)")
    r = _run(installed, str(installed["python"]), "-c", code)
    assert r.returncode == 0, r.stderr
    venv = str(installed["venv"].resolve())
    lines = r.stdout.split()
    assert len(lines) == 3 and all(str(Path(line).resolve()).startswith(venv) for line in lines), lines
    assert not any(str(ROOT) in line for line in lines)


def test_installed_window_opens_and_draws(installed, tmp_path):
    """The installed ``wellscape open`` builds the whole window (every editor and view) and saves a
    screenshot, offscreen."""
    shot = tmp_path / "window.png"
    r = _run(installed, str(installed["venv"] / "bin" / "wellscape"), "open", str(SAMPLE), "--screenshot", str(shot),
             timeout=300)
    assert r.returncode == 0, r.stderr[-2000:]
    assert shot.is_file() and shot.stat().st_size > 10_000
