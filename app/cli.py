"""Command line: ``wellscape solve | potential | check | sweep | open``.

The command line runs the same pipeline as the desktop window, headless. It
imports Qt only when it opens a window (``wellscape`` with no arguments, or
``wellscape open FILE``).  User errors print one clear line on stderr and exit
with status 2; no traceback.
"""
from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from app.cli_common import EXIT_USER_ERROR, Progress, UsageError, apply_sets, jsonable, load_with_notes

SAMPLES = Path(__file__).resolve().parent.parent / "sample_projects"
DEFAULT_SAMPLE = "gaas_single_dot.json"



# --- commands ----------------------------------------------------------------------------------

def cmd_solve(args) -> int:
    from core import __version__
    from core.project import project_to_dict
    from core.report import format_level_table, level_rows, levels_csv
    from core.study import solve_project

    project, overrides = apply_sets(load_with_notes(args.project), args.set)
    bar = Progress("solving", enabled=None if not args.json else False)
    pair = None
    if project.electrons == 2:
        from core.two_electron import solve_two_electron
        result, pair = solve_two_electron(project, parameters=overrides, orbitals=args.states,
                                          progress=bar)
    else:
        result = solve_project(project, parameters=overrides, states=args.states, progress=bar)
    bar.done()
    spec = result.spectrum
    u = result.units
    cert = None
    if args.count:
        from core.inertia import certify_count
        from core.study import project_hamiltonian
        h = project_hamiltonian(project, parameters=result.parameters, scheme=result.scheme,
                                potential=result.potential)[0]
        with Progress("counting levels", enabled=None if not args.json else False).waiting(
                "Sylvester count (LDL^T factorisation)"):
            cert = certify_count(h, spec)
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        (out / "levels.csv").write_text(levels_csv(result), encoding="utf-8")
        np.savez_compressed(out / "states.npz", energies=spec.energies, states=spec.states,
                            **{f"axis_{a}": ax for a, ax in zip("xyz", result.grid.axes)},
                            energy_unit=u.energy_unit, length_unit=u.length_unit,
                            project=json.dumps(project_to_dict(project)), wellscape_version=__version__)
    if args.json:
        doc = {"energies": spec.energies.tolist(), "groups": [list(g) for g in spec.groups],
               "units": u.describe(), "levels": level_rows(result),
               "project": project_to_dict(project), "parameters": result.parameters,
               "solver": {"scheme": result.scheme, "scheme_reason": result.scheme_reason,
                          "tolerance": spec.tolerance, "degeneracy_tolerance": spec.degeneracy_tolerance,
                          "residuals": spec.residuals.tolist(), "iterations": spec.iterations,
                          "applications": spec.applications, "wall_time_s": spec.wall_time,
                          "converged": spec.converged, "multiplet_cut": spec.multiplet_cut,
                          "method": spec.method, "notes": list(spec.notes)},
               "wellscape_version": __version__}
        if cert is not None:
            doc["count"] = {"label": cert.label, "certified": cert.certified, "count_below": cert.count_below,
                            "expected": cert.expected, "shift": cert.shift, "reason": cert.reason,
                            "method": cert.method}
        if project.spin:
            from core.study import spin_levels
            sl = spin_levels(result)
            doc["spin_levels"] = {"energies": sl.energies.tolist(), "orbital": sl.orbital.tolist(),
                                  "spin": sl.spin.tolist(), "zeeman_splitting": sl.zeeman}
        if pair is not None:
            doc["two_electron"] = dict(pair.to_dict(), energy_unit=u.energy_unit)
        print(json.dumps(jsonable(doc), indent=1))
        return 0
    print(f"{project.title}")
    print(f"{result.grid.describe()}; scheme {result.scheme} ({result.scheme_reason})")
    print(f"{spec.energies.size} states in {spec.wall_time:.2f} s, {spec.iterations} iterations, "
          f"largest residual {spec.residuals.max():.2g} {u.energy_unit}; multiplets at "
          f"{spec.degeneracy_tolerance:.2g} {u.energy_unit}")
    print()
    print(format_level_table(result))
    if project.spin:
        from core.report import format_spin_table
        print()
        print(format_spin_table(result))
    if pair is not None:
        from core.report import format_two_electron_table
        print()
        print(format_two_electron_table(pair, u.energy_unit))
    for note in spec.notes:
        print(f"note: {note}")
    if spec.multiplet_cut:
        print("note: the highest multiplet may be cut; ask for more states to see all of it")
    if cert is not None:
        mark = {"count verified": "[ok]", "count NOT verified": "[!!]"}.get(cert.label, "[--]")
        print(f"{mark} {cert.label}: {cert.describe(u.energy_unit)}")
    if args.out:
        print(f"\nwrote {Path(args.out) / 'levels.csv'} and {Path(args.out) / 'states.npz'}")
    return 0


def cmd_potential(args) -> int:
    from core.potentials import evaluate_potential
    from core.units import get_units

    project, overrides = apply_sets(load_with_notes(args.project), args.set)
    v = evaluate_potential(project, parameters=overrides)
    u = get_units(project.units)
    out = Path(args.output)
    axes = project.grid.axes
    suffix = out.suffix.lower()
    if suffix == ".npy":
        np.save(out, v, allow_pickle=False)
        for a, ax in zip("xyz", axes):
            np.save(out.with_name(f"{out.stem}_axis_{a}.npy"), ax, allow_pickle=False)
    elif suffix == ".npz":
        np.savez(out, potential=v, **{f"axis_{a}": ax for a, ax in zip("xyz", axes)})
    elif suffix in (".csv", ".txt"):
        if project.grid.ndim == 1:
            table = np.column_stack([axes[0], v])
            header = f"x [{u.length_unit}], V [{u.energy_unit}]"
        elif project.grid.ndim == 2:
            table = np.column_stack([axes[0], v])
            header = (f"first column: x [{u.length_unit}]; other columns: V [{u.energy_unit}] at "
                      f"y [{u.length_unit}] = " + " ".join(f"{y:.6g}" for y in axes[1]))
        else:
            raise UsageError("a 3D potential cannot be written as CSV; use .npy or .npz")
        np.savetxt(out, table, delimiter=",", header=header, fmt="%.10g")
    else:
        raise UsageError(f"unknown output type {out.suffix!r}; use .npy, .npz or .csv")
    print(f"wrote {out}: potential on a {project.grid.describe()}, range {v.min():.6g} .. {v.max():.6g} "
          f"{u.energy_unit}")
    return 0


def cmd_check(args) -> int:
    from core.eigensolve import solver_memory_bytes
    from core.estimate import estimate_solve
    from core.potentials import evaluate_potential
    from core.resources import available_memory_bytes, format_bytes
    from core.study import project_scheme
    from core.units import get_units

    project = load_with_notes(args.project)
    g = project.grid
    k = project.solver.states
    estimate_solve(project, measure=False).check()      # sizes first: refused before anything is allocated
    from core.potentials import magnetic_field, project_masses, resolve_parameters
    params = resolve_parameters(project)
    project_masses(project, params)                      # formulas of parameters: their values are checked too
    magnetic_field(project, params)
    v = evaluate_potential(project)
    u = get_units(project.units)
    scheme = project.solver.scheme
    reason = "set in the project"
    if scheme == "auto":
        scheme, reason = project_scheme(project, g, v, params)
    mem = solver_memory_bytes(g.size, k + max(4, k // 2), bool(any(project.magnetic_field)))
    print(f"{args.project}: valid (schema {project.schema_version})")
    print(f"  title: {project.title}")
    print(f"  grid: {g.describe()} ({u.length_unit})")
    print(f"  potential: {len(project.potential)} terms, range {v.min():.6g} .. {v.max():.6g} {u.energy_unit}")
    print(f"  scheme: {scheme} ({reason})")
    print(f"  memory for {k} states: about {format_bytes(mem)} of {format_bytes(available_memory_bytes())} available")
    if project.electrons == 2:
        from core.coulomb import coulomb_memory_bytes
        pair_mem = coulomb_memory_bytes(g, k, bool(any(project.magnetic_field)))
        print(f"  two electrons: Coulomb integrals in {k} orbitals need about {format_bytes(pair_mem)} more")
    if project.warnings:
        print(f"  {len(project.warnings)} warning(s) above")
    return 0


def cmd_open(args) -> int:
    try:
        from app.main import run_gui
    except ImportError as exc:
        raise UsageError(f"the desktop window is not available here ({exc}); the command line works: "
                          f"wellscape solve PROJECT") from None
    return run_gui(args)


_PROJECT_HELP = "the project file (JSON)"
_SET_HELP = ("fix a parameter (NAME=VALUE), a field component (magnetic_field[2]=1, in the project's field "
             "units) or a gate voltage (gate:P1=-0.3, volts); repeatable")


def build_parser() -> argparse.ArgumentParser:
    from core import __version__
    p = argparse.ArgumentParser(prog="wellscape", description="Bound states of quantum dots and atom traps.")
    p.add_argument("--version", action="version", version=f"wellscape {__version__}")
    p.add_argument("--map-folder", action="append", metavar="DIR", default=[],
                   help="also read potential maps from DIR (by default only from the project's own folder); "
                        "repeatable")
    sub = p.add_subparsers(dest="command")

    s = sub.add_parser("solve", help="solve a project and print its levels",
                       description="Solve a project for its lowest bound states and print the level table "
                                   "(energies in the project's energy unit, positions in its length unit).")
    s.add_argument("project", help=_PROJECT_HELP)
    s.add_argument("--states", type=int, metavar="K",
                   help="number of states to compute, a count (default: the project's solver.states)")
    s.add_argument("--set", action="append", metavar="NAME=VALUE", help=_SET_HELP)
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.add_argument("--out", metavar="DIR", help="write levels.csv and states.npz into DIR")
    s.add_argument("--count", action="store_true",
                   help="count the eigenvalues below the highest level independently (Sylvester's law of "
                        "inertia) to confirm that no level was missed")
    s.set_defaults(func=cmd_solve)

    s = sub.add_parser("potential", help="write the evaluated potential on the grid",
                       description="Evaluate the project's potential on its grid and write it with the grid "
                                   "axes (energy unit and length unit of the project).")
    s.add_argument("project", help=_PROJECT_HELP)
    s.add_argument("-o", "--output", required=True, help="FILE.npy, FILE.npz or FILE.csv (1D/2D)")
    s.add_argument("--set", action="append", metavar="NAME=VALUE", help=_SET_HELP)
    s.set_defaults(func=cmd_potential)

    s = sub.add_parser("check", help="validate a project without solving",
                       description="Read and validate a project, evaluate its potential and estimate the "
                                   "memory a solve needs, without solving.")
    s.add_argument("project", help=_PROJECT_HELP)
    s.set_defaults(func=cmd_check)

    from app.sweep_cli import add_sweep_parser
    add_sweep_parser(sub)
    from app.converge_cli import add_converge_parser
    from app.figure_cli import add_figure_parser
    from app.layout_cli import add_import_layout_parser
    for adder in (add_converge_parser, add_figure_parser, add_import_layout_parser):
        adder(sub)             # our own modules: an import error must show, not hide a subcommand

    s = sub.add_parser("open", help="open a project in the desktop window",
                       description="Open the desktop window, with a project if one is given.")
    s.add_argument("project", nargs="?", help=_PROJECT_HELP + " (default: a new project)")
    s.add_argument("--solve", action="store_true", help="solve once the window is open")
    s.add_argument("--screenshot", metavar="PNG", help="save a screenshot of the window and exit")
    s.set_defaults(func=cmd_open)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    from core.errors import WellscapeError

    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        try:
            import app.main  # noqa: F401
        except ImportError:
            parser.print_help()
            return 0
        args = parser.parse_args(["open"])
    try:
        if args.map_folder:
            from core.maps import allow_map_folder
            for folder in args.map_folder:
                allow_map_folder(folder)
        return int(args.func(args) or 0)
    except (WellscapeError, UsageError) as exc:
        print(f"wellscape: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    except MemoryError:            # the estimates refuse what will not fit; this is the last line of defence
        print("wellscape: error: ran out of memory (more than the estimate allowed for); use a coarser grid or "
              "fewer states", file=sys.stderr)
        return EXIT_USER_ERROR
    except OSError as exc:         # a file named on the command line cannot be read or written
        if isinstance(exc, BrokenPipeError):
            return 0
        where = f" {exc.filename}" if getattr(exc, "filename", None) else ""
        print(f"wellscape: error: cannot use{where}: {exc.strerror or type(exc).__name__}", file=sys.stderr)
        return EXIT_USER_ERROR
    except KeyboardInterrupt:
        print("wellscape: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
