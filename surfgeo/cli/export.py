"""``surfgeo export``: write a slab as the input of a DFT (or force-field) code."""

from __future__ import annotations

import sys

ORDER = 60

EPILOG = """\
example:
  surfgeo export pt111.extxyz POSCAR --fix-bottom 2 --kspacing 0.2
      writes POSCAR (species grouped, the bottom two layers fixed by selective dynamics) and
      POSCAR.note.json with the k-point mesh for 0.2 1/A, the vacuum thickness, whether a
      dipole correction is advisable and where its plane goes, and the model's provenance

  surfgeo export slab.extxyz slab.pwi --fix-middle 3 --pseudo Pt=Pt.pbe.UPF
      a pw.x input with the k-point mesh and the three middle layers of a symmetric slab fixed

Formats (from the file name or --format): vasp (POSCAR, *.vasp), espresso (*.pwi, pw.x input),
aims (geometry.in), cif, extxyz, lammps (*.lmp, atom_style atomic). CIF and LAMMPS data cannot
hold fixed atoms; the note lists them.

Caution: the exported input is a starting point. Converging k-points, cut-off or basis, slab
thickness and vacuum, and choosing pseudopotentials and the functional, are up to you.
"""


def register(subparsers, common) -> None:
    from surfgeo.cli._common import add_command, add_frame_option, add_layer_tol_option, add_output_options

    p = add_command(
        subparsers, common, "export", epilog=EPILOG,
        help="write a slab as a DFT input with fixed layers, k-points and a companion note",
        description="Write a slab for a DFT or force-field code: fixed atoms, a k-point mesh from a "
        "k-point spacing, the vacuum and a dipole-correction recommendation, in the file where the "
        "format allows and in a companion note <OUTPUT>.note.json.",
    )
    p.add_argument("model", metavar="MODEL", help="the slab: any structure file ASE reads, or a model file")
    p.add_argument("output", metavar="OUTPUT", help="the file to write; its name chooses the format")
    p.add_argument("--format", dest="fmt", metavar="NAME",
                   help="vasp, espresso, aims, cif, extxyz or lammps (instead of guessing from OUTPUT)")
    add_frame_option(p, "a multi-frame MODEL file")
    fix = p.add_mutually_exclusive_group()
    fix.add_argument("--fix-bottom", type=int, metavar="N", help="fix the N lowest atomic layers")
    fix.add_argument("--fix-below", type=float, metavar="Z", help="fix every atom lower than Z (Angstrom)")
    fix.add_argument("--fix-middle", type=int, metavar="N",
                     help="fix the N central layers of a symmetric slab (both faces relax alike)")
    p.add_argument("--kspacing", type=float, default=None, metavar="K",
                   help="largest k-point spacing in 1/Angstrom, 2 pi included (default 0.25)")
    p.add_argument("--vacuum", type=float, default=None, metavar="V",
                   help="reset the vacuum to V Angstrom (atoms keep their positions)")
    add_layer_tol_option(p)
    p.add_argument("--pseudo", action="append", default=[], metavar="SYMBOL=FILE",
                   help="pseudopotential file of a species for the pw.x input (repeat per species)")
    p.add_argument("--no-note", action="store_true", help="do not write the companion note file")
    add_output_options(p, plot=False)
    p.set_defaults(func=run)


def _pseudos(items: list[str]) -> dict:
    from surfgeo.errors import InputError

    out = {}
    for item in items:
        sym, sep, name = item.partition("=")
        if not sep or not sym.strip() or not name.strip():
            raise InputError(f"--pseudo takes SYMBOL=FILE (e.g. Pt=Pt.pbe.UPF), got {item!r}.")
        out[sym.strip()] = name.strip()
    return out


def run(args) -> int:
    from surfgeo.cli._common import check_outputs
    from surfgeo.io import dump_json
    from surfgeo.io.dft import export_slab, format_for, note_path
    from surfgeo.io.structures import read_structure

    fmt = format_for(args.output, args.fmt)
    note_file = None if args.no_note else note_path(args.output)
    check_outputs({"OUTPUT": args.output, "the companion note": note_file, "--json": args.json}, args.force)
    atoms = read_structure(args.model, args.frame)
    note = export_slab(
        atoms, args.output, fmt.name, bottom=args.fix_bottom, below=args.fix_below, middle=args.fix_middle,
        kspacing=args.kspacing, vacuum=args.vacuum, layer_tol=args.layer_tol,
        pseudopotentials=_pseudos(args.pseudo), write_note=not args.no_note, force=args.force,
        source=str(args.model),
    )
    kp = note["kpoints"]
    dip = note["dipole_correction"]
    out = sys.stdout if args.json != "-" else sys.stderr
    lines = [
        f"wrote {args.output} ({fmt.description}): {note['atoms']} atoms, {note['formula']}",
        f"fixed atoms: {note['constraints']['rule']} ({note['constraints']['fixed']} atoms"
        + ("" if note["constraints_in_file"] or not note["constraints"]["fixed"] else
           "; the format cannot hold them, see the note") + ")",
        f"k-point mesh: {' x '.join(map(str, kp['mesh']))} (spacing {kp['spacing']:g} 1/A; achieved "
        f"{kp['achieved_spacing'][0]:.3f}, {kp['achieved_spacing'][1]:.3f} 1/A)",
        f"vacuum: {note['vacuum']['thickness']:.2f} A; "
        f"slab thickness {note['vacuum']['slab_thickness']:.2f} A",
    ]
    if dip["recommended"]:
        lines.append(f"dipole correction advised (asymmetric slab): along c, plane at fractional c = "
                     f"{dip['plane_fraction']:.4f}, height {dip['plane_height']:.3f} A "
                     "(middle of the vacuum)")
    else:
        lines.append("dipole correction: not needed (the two faces are related by symmetry)")
    if note.get("note_file"):
        lines.append(f"note: {note['note_file']}")
    for c in note["caution"]:
        lines.append(f"caution: {c}")
    print("\n".join(lines), file=out)
    if args.json:
        dump_json(note, args.json, args.force)
    return 0
