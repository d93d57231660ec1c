"""``surfgeo relaxations``: what relaxed in a relaxed slab, compared with its reference."""

from __future__ import annotations

import sys

ORDER = 70

EPILOG = """\
example:
  surfgeo relaxations CONTCAR --reference pt111.extxyz --json relax.json --plot relax.png
      matches the atoms of the relaxed VASP structure to the ideal slab (by index when the order
      was kept, otherwise by a minimum-distance assignment under periodic boundaries), prints
      the change of every interlayer spacing (A and % of the reference spacing), the buckling
      and lateral shift of each layer, and the heights, bonds and sites of adsorbates

  surfgeo relaxations run.extxyz --frame 10 --reference ideal.extxyz --adsorbates O,C
      the 11th frame of a trajectory, with the O and C atoms treated as adsorbates

Layers are numbered from the top face (layer 1; d12 between layers 1 and 2). Percentages refer
to the spacings of the reference, i.e. to the bulk when the reference is bulk-terminated.
"""


def register(subparsers, common) -> None:
    from surfgeo.cli._common import add_command, add_frame_option, add_layer_tol_option, add_output_options

    p = add_command(
        subparsers, common, "relaxations", epilog=EPILOG,
        help="measure the relaxations of a relaxed slab against its reference",
        description="Compare a relaxed slab (any file ASE reads: CONTCAR, OUTCAR, vasprun.xml, pw.x "
        "output, extxyz trajectories ...) with its reference slab, layer by layer and adsorbate by "
        "adsorbate.",
    )
    p.add_argument("relaxed", metavar="RELAXED", help="the relaxed structure file")
    p.add_argument("--reference", required=True, metavar="FILE",
                   help="the ideal slab (structure file or model file) the relaxation started from")
    add_frame_option(p, "RELAXED")
    p.add_argument("--format", dest="fmt", metavar="NAME",
                   help="ASE format name of RELAXED when it cannot be guessed (e.g. vasp-out, espresso-out)")
    p.add_argument("--match", choices=("auto", "index", "distance"), default="auto",
                   help="how to pair atoms: auto (default), index (file order) or distance")
    p.add_argument("--adsorbates", metavar="SPEC",
                   help="adsorbate atoms: species (O,C), indices of the reference (36,37) or 'none' "
                   "(default: detected)")
    add_layer_tol_option(p)
    p.add_argument("--max-shift", type=float, default=2.0, metavar="D",
                   help="refuse when an atom moved more than D Angstrom (default 2.0)")
    add_output_options(p, plot=True)
    p.set_defaults(func=run)


def _adsorbate_spec(text: str | None):
    from surfgeo.errors import InputError

    if text is None:
        return None
    t = text.strip()
    if t.lower() == "none":
        return "none"
    items = [s.strip() for s in t.split(",") if s.strip()]
    if not items:
        raise InputError("--adsorbates takes species (O,C), atom indices (36,37) or 'none'.")
    if all(s.lstrip("-").isdigit() for s in items):
        return [int(s) for s in items]
    if any(s.lstrip("-").isdigit() for s in items):
        raise InputError(f"--adsorbates takes either species or indices, not both: {text!r}.")
    return items


def run(args) -> int:
    from surfgeo.cli._common import check_outputs
    from surfgeo.io import dump_json
    from surfgeo.io.structures import read_structure
    from surfgeo.slab.relaxations import analyse_relaxation

    check_outputs({"--json": args.json, "--plot": args.plot}, args.force, figure="--plot")
    adsorbates = _adsorbate_spec(args.adsorbates)
    reference = read_structure(args.reference)
    relaxed = read_structure(args.relaxed, args.frame, args.fmt)
    report = analyse_relaxation(reference, relaxed, method=args.match, adsorbates=adsorbates,
                                layer_tol=args.layer_tol, max_displacement=args.max_shift)
    out = sys.stdout if args.json != "-" else sys.stderr
    print(f"relaxations of {args.relaxed} against {args.reference}", file=out)
    print(report.table(), file=out)
    if args.json:
        d = report.to_dict()
        d = {"relaxed": str(args.relaxed), "reference": str(args.reference), **d}
        dump_json(d, args.json, args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.relaxations import relaxation_figure

        save_figure(relaxation_figure(report, title=f"Relaxation of {args.relaxed}"), args.plot, args.force)
    return 0
