"""``surfgeo build``: a slab of any face of any crystal, written to a structure file."""

from __future__ import annotations

import argparse
import sys

from surfgeo.cli._common import add_command, add_output_options, check_outputs

ORDER = 20

EPILOG = """\
The crystal is an element (structure and lattice constants from ASE's reference data unless
given), a compound with --structure and --a, or a structure file ASE reads (CIF, POSCAR,
...). The face is --miller H K L (or H K I L for hexagonal crystals) in the conventional
cell, or --steps with a step notation such as "4(111)x(100)". The in-plane cell is the
primitive reduced surface cell (a1 along +x, +z out of the surface) unless --rectangular;
c follows the lattice stacking unless --orthogonal. --vacuum is the empty gap between the top
layer and the periodic image of the bottom layer (0: a bulk-periodic cell). The output format
follows the file ending (.extxyz keeps the surface record; .cif, .vasp/POSCAR, .xyz, .in ...).

examples:
  surfgeo build --crystal Pt --miller 1 1 1 --layers 5 --vacuum 12 -o pt111.extxyz
      a five-layer Pt(111) slab, 12 A vacuum, with a summary on the terminal

  surfgeo build --crystal Ru --miller 1 0 -1 0 --layers 8 --termination 1 --relax d12=-3%,d23=1.5% \\
      -o ru1010.extxyz --json ru1010.json
      Ru(10-10) with the other of its two terminations, top spacings relaxed, summary as JSON

  surfgeo build --crystal Pt --steps "4(111)x(100)" --layers 16 --size 3 1 -o pt533.vasp --plot pt533.png
      the stepped Pt(533) face, cell along the step edge, written for VASP, with a picture

  surfgeo build --crystal SrTiO3 --structure perovskite --a 3.905 --miller 1 1 0 --symmetric -o sto.cif
      SrTiO3(110) (polar, Tasker type 3) with the same termination at top and bottom

  surfgeo build structures/ni100_c_p4g.toml -o ni100_p4g.extxyz
      a surface model file (substrate, cell, reconstructions, adsorbates, films; see
      docs/model-file.md): here the synthetic p4g clock reconstruction with C in the hollows
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    p = add_command(
        subparsers, common, "build",
        help="build a slab of any face of a crystal (flat, stepped or kinked, optionally relaxed)",
        description="Cut a slab of any face of a bulk crystal in its primitive reduced surface cell, "
        "report its surface lattice, layers, terminations and steps, and write it to a structure file.",
        epilog=EPILOG,
    )
    p.add_argument("model", nargs="?", metavar="MODEL", help="a surface model file (instead of --crystal)")
    g = p.add_argument_group("crystal")
    g.add_argument("--crystal", metavar="SYMBOL|FILE",
                   help="element (Pt), compound formula (NaCl, SrTiO3) or structure file of the bulk")
    g.add_argument("--structure", metavar="KIND",
                   help="prototype: sc, fcc, bcc, hcp, diamond, zincblende, rocksalt, cesiumchloride, "
                   "fluorite, perovskite, wurtzite (default: the element's reference structure)")
    g.add_argument("--a", type=float, metavar="A", help="lattice constant a in Angstrom")
    g.add_argument("--c", type=float, metavar="C", help="lattice constant c in Angstrom (hexagonal)")
    g.add_argument("--species", metavar="A,B,...", help="elements of the prototype's sites, in order")
    g.add_argument("--charges", metavar="EL=Q,...",
                   help="formal charges for the polarity of terminations, e.g. Sr=2,Ti=4,O=-2")
    f = p.add_argument_group("face and slab")
    f.add_argument("--miller", nargs="+", type=int, metavar="H",
                   help="Miller indices H K L, or H K I L for hexagonal crystals")
    f.add_argument("--steps", metavar="NOTATION",
                   help='step notation of a stepped face instead of --miller, e.g. "4(111)x(100)"')
    f.add_argument("--layers", type=int, default=None,
                   help="number of atomic layers (default 4; 12 with --steps)")
    f.add_argument("--vacuum", type=float, default=None,
                   help="vacuum gap in Angstrom along the normal (default 10; 0 for a bulk-periodic cell)")
    f.add_argument("--size", nargs=2, type=int, default=(1, 1), metavar=("N1", "N2"),
                   help="in-plane repetitions of the cell (default 1 1)")
    f.add_argument("--rectangular", action="store_true",
                   help="use the rectangular (centred) cell where the surface lattice has one")
    f.add_argument("--orthogonal", action="store_true", help="put the third cell vector along the normal")
    f.add_argument("--symmetric", action="store_true",
                   help="same termination at top and bottom (adds layers if needed)")
    f.add_argument("--termination", type=int, default=0, metavar="K",
                   help="which distinct termination of the face is on top (0, 1, ...; listed in the summary)")
    r = p.add_argument_group("relaxation")
    r.add_argument("--relax", metavar="SPEC",
                   help="interlayer spacing changes and lateral shifts, e.g. d12=-2.5%%,d23=1.0%% or "
                   "d12=-0.05,x1=0.1 (Angstrom)")
    r.add_argument("--relax-side", choices=("top", "bottom", "both"), default="top",
                   help="which surface the relaxation applies to (default top)")
    o = p.add_argument_group("output")
    o.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="structure file to write; the format follows the ending (ASE)")
    add_output_options(o, plot=True)
    p.set_defaults(func=run)


def _charges(text: str | None) -> dict[str, float] | None:
    from surfgeo.errors import InputError

    if not text:
        return None
    out = {}
    for part in [t.strip() for t in text.split(",") if t.strip()]:
        el, eq, q = part.partition("=")
        try:
            out[el.strip()] = float(q)
        except ValueError:
            raise InputError(f"--charges: cannot read {part!r}; write pairs such as Sr=2,O=-2.") from None
        if not eq:
            raise InputError(f"--charges: cannot read {part!r}; write pairs such as Sr=2,O=-2.")
    return out


#: ASE formats (and picture endings) that are drawings, animations or web pages, not structure
#: files: ``-o`` refuses them and points to ``--plot``.
PICTURE_FORMATS = frozenset({
    "png", "svg", "jpg", "jpeg", "pdf", "eps", "ps", "gif", "mp4", "pov", "x3d", "html", "vti",
    "tif", "tiff", "bmp", "webp",
})


def _output_format(path: str) -> str:
    """The ASE format name for the output file, from its name."""
    from pathlib import Path

    from ase.io.formats import filetype

    from surfgeo.errors import InputError

    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix in PICTURE_FORMATS:
        raise InputError(
            f"-o {path}: .{suffix} is a drawing format, not a structure file; write the structure as "
            f".extxyz, .cif, .vasp or another structure format and draw it with --plot {Path(path).stem}.png."
        )
    try:
        fmt = filetype(path, read=False)
    except Exception:
        fmt = None
    if not fmt:
        raise InputError(
            f"cannot tell the file format from the name {path!r}; end it in .extxyz, .cif, .vasp, .xyz, "
            ".in or another ending ASE writes."
        )
    from ase.io.formats import ioformats

    io = ioformats.get(fmt)
    if io is None or not io.can_write:
        raise InputError(
            f"ASE cannot write the format {fmt!r} chosen from the name {path!r}; use .extxyz or .cif."
        )
    return fmt


def _figure_title(summary: dict) -> str:
    """``Pt(5 3 3): COPt16``, or the model's name and the formula for a model file."""
    model = summary.get("model") or {}
    head = model.get("name")
    if not head:
        bulk = (summary.get("bulk") or {}).get("formula") or ""
        miller = summary.get("miller")
        head = bulk + ("(" + " ".join(str(v) for v in miller) + ")" if miller else "")
    return f"{head}: {summary.get('formula', '')}" if head else summary.get("formula", "")


def build_from_args(args):
    """The slab (and the bulk crystal, or None for a model) for parsed ``build`` arguments."""
    from surfgeo.errors import InputError
    from surfgeo.slab.bulk import bulk_crystal
    from surfgeo.slab.cut import surface_slab
    from surfgeo.slab.relax import relax_layers
    from surfgeo.slab.steps import stepped_slab

    if args.model and args.crystal:
        raise InputError("give either a MODEL file or --crystal, not both.")
    if args.model:
        clash = [opt for opt, val in (
            ("--miller", args.miller), ("--steps", args.steps), ("--structure", args.structure),
            ("--a", args.a), ("--c", args.c), ("--species", args.species), ("--charges", args.charges),
            ("--layers", args.layers), ("--vacuum", args.vacuum is not None),
            ("--termination", args.termination), ("--rectangular", args.rectangular),
            ("--orthogonal", args.orthogonal), ("--symmetric", args.symmetric),
            ("--size", tuple(args.size) != (1, 1)),
        ) if val]
        if clash:
            raise InputError(
                f"{', '.join(clash)} cannot be combined with a MODEL file; state them in the model."
            )
    if args.model:
        try:
            from surfgeo.slab.model import build_model
        except ImportError:
            raise InputError(
                "surface model files are not supported in this version; use --crystal with --miller."
            ) from None
        atoms = build_model(args.model)
        bulk = None
    else:
        if not args.crystal:
            raise InputError("give a MODEL file or --crystal SYMBOL with --miller (or --steps).")
        if bool(args.miller) == bool(args.steps):
            raise InputError("give the face either as --miller H K L or as --steps NOTATION (one of them).")
        species = [s.strip() for s in args.species.split(",")] if args.species else None
        vacuum = 10.0 if args.vacuum is None else args.vacuum
        bulk = bulk_crystal(args.crystal, args.structure, a=args.a, c=args.c, species=species)
        if args.steps:
            if args.rectangular or args.symmetric or args.termination:
                raise InputError("--steps builds a cell along the step edge; it takes no --rectangular, "
                                 "--symmetric or --termination.")
            atoms = stepped_slab(
                bulk, args.steps, layers=12 if args.layers is None else args.layers, vacuum=vacuum,
                size=tuple(args.size), orthogonal=args.orthogonal,
            )
        else:
            if len(args.miller) not in (3, 4):
                raise InputError(f"--miller takes 3 indices (H K L) or 4 (H K I L), got {len(args.miller)}.")
            atoms = surface_slab(
                bulk, args.miller, layers=4 if args.layers is None else args.layers, vacuum=vacuum,
                orthogonal=args.orthogonal, rectangular=args.rectangular, symmetric=args.symmetric,
                termination=args.termination, size=tuple(args.size), charges=_charges(args.charges),
            )
    if args.relax:
        atoms = relax_layers(atoms, args.relax, side=args.relax_side)
    return atoms, bulk


def run(args) -> int:
    import ase.io

    from surfgeo.io import atomic_output, dump_json
    from surfgeo.slab.summary import format_summary, slab_summary

    fmt = _output_format(args.output)
    check_outputs({"-o": args.output, "--json": args.json, "--plot": args.plot}, args.force, figure="--plot")
    atoms, bulk = build_from_args(args)
    summary = slab_summary(atoms)
    if bulk is not None and args.miller:
        from surfgeo.slab.cut import terminations

        summary["terminations"] = terminations(bulk, args.miller, charges=_charges(args.charges))
    summary["output"] = args.output

    with atomic_output(args.output, args.force) as tmp:
        ase.io.write(tmp, atoms, format=fmt)
    if args.plot:
        from surfgeo.plot.slab import save_slab_figure

        save_slab_figure(atoms, args.plot, force=args.force, title=_figure_title(summary))
    if args.json:
        dump_json(summary, args.json, force=args.force)
    if args.json != "-":
        text = format_summary(summary)
        terms = summary.get("terminations") or []
        if len(terms) > 1:
            text += "\nterminations of this face: " + "; ".join(
                f"{t['index']}: " + " ".join(f"{k}{v if v != 1 else ''}" for k, v in t["top_layer"].items())
                + ("" if t["polar"] is None else (" polar" if t["polar"] else " non-polar"))
                for t in terms
            )
        print(text)
        print(f"wrote {args.output}" + (f", {args.plot}" if args.plot else "")
              + (f", {args.json}" if args.json else ""))
    sys.stdout.flush()
    return 0
