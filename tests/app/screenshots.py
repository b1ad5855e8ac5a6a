"""Render the window and each of its views for two samples to PNG (a smoke check to look at).

Run under a virtual display (OpenGL views need the xcb platform)::

    xvfb-run -a .venv/bin/python tests/app/screenshots.py [OUTDIR] [SAMPLE ...]

Default OUTDIR: ``screenshots/`` in the current folder; default samples: the gate-defined double
dot (2D) and the lens-shaped dot (3D).  For each sample the project is opened and solved, then
one PNG of the whole window is written per view tab (``<sample>-<view>.png``), plus one of the
left column's set-up pages.  Settings and recovery copies go to a throw-away folder.
Exit status: 0 if every sample solved and every PNG was written.
"""
from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
DEFAULT_SAMPLES = ("gaas_double_dot", "lens_dot_3d")


def main(argv=None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    out = Path(argv.pop(0)) if argv else Path("screenshots")
    samples = argv or list(DEFAULT_SAMPLES)
    out.mkdir(parents=True, exist_ok=True)
    if os.environ.get("DISPLAY"):
        os.environ.setdefault("QT_QPA_PLATFORM", "xcb")
    else:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        print("no display: using the offscreen platform (3D views are not drawn); run under xvfb-run -a",
              file=sys.stderr)
    home = Path(tempfile.mkdtemp(prefix="wellscape-shots-"))
    os.environ["XDG_CONFIG_HOME"] = str(home / "config")
    os.environ["XDG_DATA_HOME"] = str(home / "data")
    sys.path.insert(0, str(ROOT))

    from PySide6.QtCore import QEventLoop, QTimer
    from PySide6.QtWidgets import QApplication

    from app.main import MainWindow
    from app.session import SAMPLES_DIR
    from app.style import share_gl_contexts
    share_gl_contexts()
    _app = QApplication.instance() or QApplication([])
    window = MainWindow(confirm_close=lambda: "discard")
    window.resize(1440, 900)
    window.show()
    status = 0

    def pump(ms: int) -> None:
        loop = QEventLoop()
        QTimer.singleShot(ms, loop.quit)
        loop.exec()

    def shoot(name: str) -> None:
        nonlocal status
        pump(400)
        path = out / f"{name}.png"
        if window.grab().save(str(path), "PNG"):
            print(f"wrote {path}")
        else:
            print(f"could not write {path}", file=sys.stderr)
            status = 1

    for sample in samples:
        path = SAMPLES_DIR / (sample if sample.endswith(".json") else sample + ".json")
        if not window.open_file(path, ask=False):
            print(f"{sample}: {window.strip.message.toolTip()}", file=sys.stderr)
            status = 1
            continue
        done = {"ok": None}
        s = window.session
        on_solved = lambda _r: done.__setitem__("ok", True)      # noqa: E731
        on_failed = lambda m: done.__setitem__("ok", m)          # noqa: E731
        s.solved.connect(on_solved)
        s.failed.connect(on_failed)
        t0 = time.perf_counter()
        window.solve()
        while done["ok"] is None and time.perf_counter() - t0 < 600:
            pump(100)
        s.solved.disconnect(on_solved)          # only ours: the window and the views stay connected
        s.failed.disconnect(on_failed)
        if done["ok"] is not True:
            print(f"{sample}: solve failed: {done['ok']}", file=sys.stderr)
            status = 1
        while s.solving:
            pump(50)
        if s.project.grid.ndim == 2 and s.project.parameter_ranges:
            # a short sweep over the first parameter that has a range, for the sweep view
            import numpy as np
            name, (lo, hi) = next(iter(s.project.parameter_ranges.items()))
            swept = {"done": None}
            on_sweep = lambda _r: swept.__setitem__("done", True)        # noqa: E731
            on_sweep_failed = lambda m: swept.__setitem__("done", m)     # noqa: E731
            s.sweep_finished.connect(on_sweep)
            s.sweep_failed.connect(on_sweep_failed)
            if s.run_sweep(name, np.linspace(lo, hi, 15)):
                t0 = time.perf_counter()
                while swept["done"] is None and time.perf_counter() - t0 < 600:
                    pump(100)
            s.sweep_finished.disconnect(on_sweep)
            s.sweep_failed.disconnect(on_sweep_failed)
            if swept["done"] is not True:
                print(f"{sample}: sweep of {name}: {swept['done']}", file=sys.stderr)
            while s.sweeping:
                pump(50)
        stem = Path(sample).stem
        for i in range(window.tabs.count()):
            window.tabs.setCurrentIndex(i)
            shoot(f"{stem}-{window.tabs.tabText(i).lower()}")
            view = window.tabs.currentWidget()
            panel = getattr(view, "pair_panel", None)
            if panel is not None and panel.available:       # two electrons: the pair-density page too
                view.kind_tabs.setCurrentIndex(1)
                shoot(f"{stem}-{window.tabs.tabText(i).lower()}-two-electrons")
                grid = panel.result.grid
                panel.set_fixed_point((grid.shape[0] // 4, grid.shape[1] // 2))
                shoot(f"{stem}-{window.tabs.tabText(i).lower()}-two-electrons-fixed")
                view.kind_tabs.setCurrentIndex(0)
        window.tabs.setCurrentIndex(0)
        window.editors.show_page("grid")
        shoot(f"{stem}-grid-page")
        window.editors.show_page("terms")
    window.session.undo_stack.setClean()
    window.close()
    return status


if __name__ == "__main__":
    sys.exit(main())
