"""``wellscape figure``: a figure sheet of a project (PNG, PDF or SVG), headless.

``wellscape figure PROJECT -o sheet.pdf [--layout L] [--template slide|column|double]
[--states 0,1,2,3] [--sweep SWEEP.npz] [--dpi 200]`` solves the project, draws the sheet
and writes ``sheet.sheet.json`` beside it with every plotted value;
``wellscape figure --from sheet.sheet.json -o again.pdf`` draws it again from that file
without solving.  Nothing here imports Qt: matplotlib draws with its own file canvases.
User errors print one line on stderr and exit with status 2.
"""
from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Sequence
from pathlib import Path

_LAYOUT_HELP = ("panels joined by '+': potential, cut, levels, fan, statesN (N states); e.g. "
                "potential+states4+levels (the default), potential+states2+fan (the default with --sweep), "
                "potential+cut+levels, states6, fan")


def add_figure_parser(sub) -> None:
    """Register the ``figure`` command on an argparse sub-parser collection."""
    s = sub.add_parser("figure", help="draw a figure sheet of a project (PNG, PDF or SVG)",
                       description="Draw a multi-panel figure sheet of a project: the potential, states, "
                                   "levels and, with --sweep, the level fan. Writes NAME.sheet.json beside "
                                   "the figure with every plotted value; --from redraws from that file.")
    s.add_argument("project", nargs="?", help="project file (not with --from)")
    s.add_argument("-o", "--output", required=True, metavar="FILE", help="FILE.png, FILE.pdf or FILE.svg")
    s.add_argument("--from", dest="sheet", metavar="SHEET.json",
                   help="redraw a sheet from its .sheet.json (no solve; same plotted values)")
    s.add_argument("--layout", help=_LAYOUT_HELP)
    s.add_argument("--template", help="slide (16:9, the default), column (86 mm) or double (178 mm)")
    s.add_argument("--columns", metavar="N", help="a plain grid of N columns instead of the template's arrangement")
    s.add_argument("--states", metavar="LIST", help="levels to show, e.g. 0,1,2,3 (default: the lowest)")
    s.add_argument("--sweep", metavar="SWEEP.npz", help="a sweep written by 'wellscape sweep --out', for the fan")
    s.add_argument("--mixed-states", action="store_true",
                   help="with --sweep: draw a fan swept on another project state than the solve and name both "
                        "states in the caption (by default such a sheet is refused)")
    s.add_argument("--sweep-unit", metavar="UNIT", help="unit of the swept parameter, for the fan's axis label")
    s.add_argument("--psi", choices=None, metavar="density|signed",
                   help="draw |psi|^2 (density, the default) or the signed wavefunction with its nodal lines")
    s.add_argument("--slice", action="store_true", help="3D: a slice through each state instead of the "
                                                         "density projected along z")
    s.add_argument("--set", action="append", metavar="NAME=VALUE",
                   help="fix a parameter, field component or gate voltage (repeatable)")
    s.add_argument("--converge", action="store_true",
                   help="check convergence first (solves on coarser grids too) and mark every splitting of the "
                        "level diagram as resolved or not resolved, with grid-error bars")
    s.add_argument("--factor", type=float, default=1.5,
                   help="with --converge: spacing ratio between the grids (default 1.5)")
    s.add_argument("--dpi", default="200", help="PNG resolution in dots per inch (default 200)")
    s.add_argument("--title", help="title over the sheet (default: the project's title on a slide, none in a journal)")
    s.add_argument("--no-data", action="store_true", help="do not write NAME.sheet.json")
    s.set_defaults(func=cmd_figure)


def _fail(message: str):
    from core.errors import InputError
    raise InputError(message)


def _parse_states(text: str | None) -> list | None:
    if text is None:
        return None
    out = []
    for part in text.replace(" ", "").split(","):
        if not part:
            continue
        if "-" in part[1:]:
            a, b = part.split("-", 1)
            if not (a.isdigit() and b.isdigit()) or int(b) < int(a):
                _fail(f"--states: {part!r} is not a range of levels like 0-3")
            out.extend(range(int(a), int(b) + 1))
        elif part.isdigit():
            out.append(int(part))
        else:
            _fail(f"--states expects level numbers separated by commas (e.g. 0,1,2,3), got {text!r}")
    if not out:
        _fail("--states: no levels given")
    return out


def _parse_dpi(text: str) -> float:
    try:
        dpi = float(text)
    except (TypeError, ValueError):
        _fail(f"--dpi expects a number, got {text!r}")
    if not 10 <= dpi <= 2400:
        _fail(f"--dpi expects a value from 10 to 2400, got {text}")
    return dpi


def _parse_columns(text: str | None) -> int | None:
    if text is None:
        return None
    if not text.strip().isdigit() or not 1 <= int(text) <= 8:
        _fail(f"--columns expects a whole number from 1 to 8, got {text!r}")
    return int(text)


def _check_output(path: str) -> Path:
    from core.figures import FIGURE_FORMATS
    out = Path(path)
    if out.suffix.lower().lstrip(".") not in FIGURE_FORMATS:
        _fail(f"{out.name}: unknown figure type {out.suffix or '(no extension)'}; use .png, .pdf or .svg")
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        _fail(f"cannot write {out}: the folder {folder} does not exist")
    return out


def _describe(out: Path) -> str:
    """Size of a written figure, read back from the file: pixels for PNG, millimetres otherwise."""
    import re
    import struct
    try:
        head = out.read_bytes()[:4096]
    except OSError:
        return "size unknown"
    if head[:8] == b"\x89PNG\r\n\x1a\n":
        w, h = struct.unpack(">II", head[16:24])
        return f"{w} x {h} px"
    text = head.decode("latin-1")
    m = re.search(r"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)", text)
    if m is None:
        m = re.search(r'<svg[^>]*?width="([\d.]+)pt"[^>]*?height="([\d.]+)pt"', text, re.S)
    if m is None:
        return "vector"
    w, h = (float(v) * 25.4 / 72.0 for v in m.groups())
    return f"{w:.0f} x {h:.0f} mm"


def cmd_figure(args) -> int:
    from core.figures import TEMPLATES, build_sheet, load_sheet, parse_layout, save_sheet

    out = _check_output(args.output)
    dpi = _parse_dpi(args.dpi)
    columns = _parse_columns(args.columns)
    if args.template is not None and args.template not in TEMPLATES:
        _fail(f"--template: unknown template {args.template!r}; choose one of {', '.join(TEMPLATES)}")
    if args.psi is not None and args.psi not in ("density", "signed"):
        _fail(f"--psi: expected density or signed, got {args.psi!r}")

    if args.sheet:
        if args.project:
            _fail("give either a PROJECT to solve or --from SHEET.json to redraw, not both")
        fixed = [name for name, value in (("--layout", args.layout), ("--states", args.states),
                                          ("--sweep", args.sweep), ("--set", args.set), ("--psi", args.psi),
                                          ("--sweep-unit", args.sweep_unit),
                                          ("--mixed-states", args.mixed_states)) if value]
        if args.slice:
            fixed.append("--slice")
        if args.converge:
            fixed.append("--converge")
        if fixed:
            verb = "changes" if len(fixed) == 1 else "change"
            _fail(f"{', '.join(fixed)} {verb} what is plotted; a sheet redrawn --from its data keeps its values "
                  f"(only --template, --columns, --dpi and --title apply)")
        sheet = load_sheet(args.sheet)
        changes = {}
        if args.template:
            changes["template"] = args.template
        if columns is not None:
            changes["columns"] = columns
        if args.title is not None:
            changes["title"] = args.title
        if changes:
            sheet = sheet.with_options(**changes)
        fig_path, data_path = save_sheet(sheet, out, dpi=dpi, data=not args.no_data)
        _report(fig_path, data_path, dpi, sheet)
        return 0

    if not args.project:
        _fail("give a PROJECT file to draw, or --from SHEET.json to redraw a sheet")
    from app.cli_common import Progress, apply_sets, load_with_notes

    project, overrides = apply_sets(load_with_notes(args.project), args.set)
    states = _parse_states(args.states)
    sweep = None
    if args.sweep:
        try:
            from core.sweep import load_sweep
        except ImportError:
            _fail("this Wellscape has no sweep support (core.sweep is missing)")
        sweep = load_sweep(args.sweep)
    layout = args.layout
    tokens = parse_layout(layout) if layout else None
    needs_solve = tokens is None or any(name != "fan" for name, _ in tokens)
    result = None
    if needs_solve:
        from core.study import solve_project
        wanted = project.solver.states
        if states:
            wanted = max(wanted, max(states) + 1)
        if tokens:
            wanted = max([wanted] + [n for name, n in tokens if name == "states"])
        bar = Progress("solving")
        result = solve_project(project, parameters=overrides, states=wanted, progress=bar)
        bar.done()
    elif args.set:
        _fail("--set changes the solved project, but this layout only draws the sweep")
    report = None
    if args.converge:
        if result is None or (tokens is not None and not any(name == "levels" for name, _ in tokens)):
            _fail("--converge marks the level diagram, but this layout has no levels panel")
        if not (math.isfinite(args.factor) and args.factor > 1.0):
            _fail(f"--factor must be a number above 1, got {args.factor}")
        from core.convergence import convergence_study
        from core.estimate import estimate_convergence
        est = estimate_convergence(project, factor=args.factor, levels=project.solver.states,
                                   parameters=overrides).check()
        print(f"wellscape: {est.describe()}", file=sys.stderr)
        bar = Progress("converging")
        report = convergence_study(project, factor=args.factor, levels=project.solver.states,
                                   parameters=overrides, progress=bar)
        bar.done()
    sheet = build_sheet(result, sweep=sweep, layout=layout, template=args.template or "slide", states=states,
                        wavefunction=args.psi or "density", three_d="slice" if args.slice else "projection",
                        columns=columns, parameter_unit=args.sweep_unit, title=args.title, convergence=report,
                        mixed_states="name" if args.mixed_states else "refuse")
    fig_path, data_path = save_sheet(sheet, out, dpi=dpi, data=not args.no_data)
    _report(fig_path, data_path, dpi, sheet)
    return 0


def _report(fig_path: Path, data_path: Path | None, dpi: float, sheet) -> None:
    size = _describe(fig_path)
    panels = ", ".join(p["kind"] for p in sheet.panels)
    line = f"wrote {fig_path} ({size}; {len(sheet.panels)} panels: {panels}; project hash {sheet.project_hash})"
    print(line)
    if data_path is not None:
        print(f"wrote {data_path} (the plotted values; redraw with: wellscape figure --from {data_path} -o FILE)")


def main(argv: Sequence[str] | None = None) -> int:
    """Run ``figure`` on its own (the same handling of errors as ``wellscape``)."""
    from app.cli_common import UsageError
    from core.errors import WellscapeError
    parser = argparse.ArgumentParser(prog="wellscape")
    sub = parser.add_subparsers(dest="command", required=True)
    add_figure_parser(sub)
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except (WellscapeError, UsageError) as exc:
        print(f"wellscape: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("wellscape: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
