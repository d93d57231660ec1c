"""``surfgeo notation``: matrix and Wood notation, kind and domains of a superstructure."""

from __future__ import annotations

import argparse
import sys

from surfgeo.cli._common import (
    add_command,
    add_lattice_option,
    add_output_options,
    add_superstructure_options,
    check_outputs,
    resolve_lattice,
    resolve_superstructure,
)

ORDER = 10

EPILOG = """\
The superstructure is given either in Wood notation (one quoted argument; Unicode or ASCII,
spaces allowed) or as the matrix M of b_i = sum_j M_ij a_j (Park and Madden). The output
lists the matrix, the preferred Wood form and every other Wood form of the same superlattice
(or "no Wood form"), the determinant (cell area in substrate cells), the kind
(commensurate: integer M; coincidence: rational M; incommensurate: irrational M) and the
number of rotational and mirror domains under the substrate point group.

Preferred Wood form: unrotated primitive, then unrotated centred, then the smallest rotation
(primitive before centred). A printed angle such as R19.1 is taken as rounded and the matrix
is snapped to the exact one when it lies within that precision.

examples:
  surfgeo notation --lattice hex:2.77 "(sqrt3 x sqrt3)R30"
      matrix [[2, 1], [-1, 1]] (120 degree hexagonal basis), Wood (√3×√3)R30°, determinant 3,
      commensurate, 1 domain

  surfgeo notation --lattice square:2.55 --matrix 1 1 -1 1 --json -
      c(2×2) = (√2×√2)R45° on a square substrate, as JSON with the keys
      matrix, wood, wood_all, determinant, kind, domains

  surfgeo notation --lattice hex:2.77 --matrix 3 1 -1 2 --plot sqrt7.png
      (√7×√7)R19.1°, two mirror domains, and a drawing of both cells on the substrate
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    p = add_command(
        subparsers, common, "notation",
        help="matrix and Wood notation, kind and domains of a superstructure",
        description="Convert a superstructure between Wood and matrix notation and report its "
        "kind and symmetry domains on the substrate.",
        epilog=EPILOG,
    )
    add_lattice_option(p)
    add_superstructure_options(p)
    add_output_options(p, plot=True)
    p.set_defaults(func=run)


def _unicode_ok(stream) -> bool:
    try:
        "\u221a\u00d7\u00b0\u00c5\u00b2".encode(getattr(stream, "encoding", None) or "ascii")
    except (UnicodeEncodeError, LookupError):
        return False
    return True


def report_lines(sup, unicode: bool = True) -> list[str]:
    """The human-readable report of a superstructure, one line per item."""
    from surfgeo.lattice.rational import format_matrix, format_number

    lat = sup.lattice
    a, b = lat.lengths
    ang = "\u00c5" if unicode else "A"
    deg = "\u00b0" if unicode else " deg"
    note = sup.basis_note
    lines = [
        f"substrate    {lat.kind()}, |a1| = {a:.6g} {ang}, |a2| = {b:.6g} {ang}, "
        f"gamma = {lat.gamma:.6g}{deg}" + (f" ({note})" if note else ""),
        f"matrix       {format_matrix(sup.matrix)}   (b_i = sum_j M_ij a_j"
        + (f"; {note})" if note else ")"),
    ]
    forms = sup.wood_forms()

    def spell(f):
        return f"{f.unicode}   [{f.ascii}]" if unicode else f.ascii

    if forms:
        lines.append(f"Wood         {spell(forms[0])}")
        for i, f in enumerate(forms[1:]):
            lines.append(f"{'other forms' if i == 0 else '':<12} {spell(f)}")
    else:
        lines.append("Wood         no Wood form (the matrix is the only notation)")
    det = sup.determinant
    area2 = "\u00c5\u00b2" if unicode else "A^2"
    lines.append(
        f"determinant  {format_number(det)}   (cell area {sup.area:.4f} {area2}; one adsorbate per "
        f"cell is {format_number(sup.coverage(1))} ML)"
    )
    lines.append(f"kind         {sup.kind}")
    doms = sup.domains()
    lines.append(f"domains      {len(doms)} under the substrate point group {sup.point_group_symbol}")
    for d in doms:
        lines.append(f"             {format_matrix(d.matrix)}   from {' '.join(d.symbols)}")
    return lines


def run(args: argparse.Namespace) -> int:
    from surfgeo.io import dump_json

    lattice = resolve_lattice(args.lattice)
    sup = resolve_superstructure(args, lattice)
    check_outputs({"--json": args.json, "--plot": args.plot}, args.force, figure="--plot")
    record = sup.to_dict()
    if args.json != "-":
        out = sys.stdout
        lines = report_lines(sup, unicode=_unicode_ok(out))
        out.write("\n".join(lines) + "\n")
        out.flush()
    if args.json:
        dump_json(record, args.json, force=args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.superlattice import superstructure_figure

        save_figure(superstructure_figure(sup), args.plot, force=args.force)
    return 0
