"""``wellscape import-layout``: gates from the polygons of a GDSII layout, written into a project file."""
from __future__ import annotations

from pathlib import Path


def cmd_import_layout(args) -> int:
    from core.errors import InputError
    from core.layout import layout_unit_scale, parse_layer, project_with_gates, read_layout_gates
    from core.project import MapTerm, PointsTerm, load_project, save_project
    from core.units import get_units

    out = Path(args.output)
    if out.exists() and not args.force:
        raise InputError(f"{out} exists; add --force to replace it")
    if out.suffix.lower() != ".json":
        raise InputError(f"{out}: a project file ends in .json")
    into = load_project(args.into) if args.into else None
    if into is not None and out.resolve().parent != Path(into.base_dir or ".").resolve():
        if any(isinstance(t, (MapTerm, PointsTerm)) for t in into.potential):
            raise InputError(f"{args.into} reads data files by paths relative to its folder; write the output "
                             f"into that folder")
    layers = [parse_layer(text) for text in args.layer]
    units = get_units(into.units if into is not None else "semiconductor")
    scale = args.scale if args.scale is not None else layout_unit_scale(args.layout, units.length_si)
    gates = read_layout_gates(args.layout, layers, scale=scale, origin=tuple(args.origin), voltage=args.voltage,
                              cell=args.cell)
    project = project_with_gates(gates, depth=args.depth, into=into, label=f"gates from {Path(args.layout).name}",
                                 title=f"Gates from {Path(args.layout).name}")
    save_project(project, out)
    print(f"wrote {out}: {len(gates)} gates from layer{'s' if len(layers) > 1 else ''} "
          f"{', '.join(str(c) for c in layers)} at {args.voltage:g} V; scale {scale:.6g} {units.length_unit} "
          f"per layout unit, layout point ({args.origin[0]:g}, {args.origin[1]:g}) at x = y = 0")
    return 0


def add_import_layout_parser(sub) -> None:
    s = sub.add_parser(
        "import-layout", help="make gates from the polygons of a GDSII layout",
        description="Read the polygons of chosen layers of a GDSII layout and write them as surface gates "
                    "(editable rectangles and polygons) into a project file. Layout coordinates (u, v) become "
                    "x = SCALE * (u - X), y = SCALE * (v - Y).")
    s.add_argument("layout", metavar="LAYOUT.gds", help="the GDSII stream file")
    s.add_argument("--layer", action="append", required=True, metavar="LAYER[/DATATYPE]",
                   help="take the polygons of this layer (all datatypes, or only the one given); repeatable")
    s.add_argument("--cell", metavar="NAME", help="the cell to read (default: the layout's only top cell)")
    s.add_argument("--scale", type=float, metavar="S",
                   help="project length units (nm for a new project) per layout unit (default: from the "
                        "layout's own unit)")
    s.add_argument("--origin", type=float, nargs=2, default=[0.0, 0.0], metavar=("X", "Y"),
                   help="the layout point, in layout units, that becomes x = y = 0 (default: 0 0)")
    s.add_argument("--voltage", type=float, default=0.0, metavar="V",
                   help="voltage of every imported gate, in volts (default: 0)")
    s.add_argument("--depth", type=float, metavar="D",
                   help="depth of the electron gas below the gates, in project length units (nm for a new "
                        "project; default: the depth of the first gates term of --into)")
    s.add_argument("--into", metavar="PROJECT.json",
                   help="add the gates as a new term of this project (default: a new GaAs project around them)")
    s.add_argument("-o", "--output", required=True, metavar="OUT.json", help="the project file to write")
    s.add_argument("--force", action="store_true", help="replace OUT.json if it exists")
    s.set_defaults(func=cmd_import_layout)
