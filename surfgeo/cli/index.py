"""``surfgeo index``: which superstructures explain a measured pattern, ranked and grouped."""

from __future__ import annotations

import argparse

ORDER = 56

EPILOG = """\
Every superlattice up to --max-area substrate cells (Hermite normal forms) is tried, with
all the rotational and mirror domains the substrate allows, after calibrating the screen from
the integer-order spots (or with --calibration). Each candidate gets a score (lower is
better): a negative log-likelihood in which a measured spot no candidate spot explains costs
much (about 9), a predicted spot that is not seen costs little (about 2, spots can be weak),
positions enter through their residuals, and ln(area) prefers smaller cells. Candidates that
predict the same spots are grouped: "same at every energy" when their spot sets are identical
(tell them apart by intensities: domain symmetry, glide extinctions, I(V)); otherwise the
differing spots are off the screen or hidden at this energy and another energy shows them.
When no commensurate cell explains the fractional-order spots, a general incommensurate
overlayer lattice (with domains) is fitted and reported with uncertainties.

The JSON has 'calibration' (centre_px, rotation_deg, mirror, scale_px_per_rad, ...) and
'candidates' (best first) with matrix, wood, domains, score, matched, unexplained, absent,
rms_px, predicted_px (every predicted spot on the screen, [x, y] px in the input's frame) and
indistinguishable_from.

examples:
  surfgeo index spots.csv --lattice hex:2.77 --energy 96 --screen sphere:size=1024 --json -
      ranks superstructures up to 12 substrate cells for a spot list

  surfgeo index pattern.png --lattice "Pt(111)" --energy 120 --max-area 20 --plot overlay.png
      finds the spots in the image, indexes them and draws the best candidate on the image

  surfgeo index spots.csv --lattice square:2.55 --energy 80 --calibration screen.json
      uses a calibration saved by 'surfgeo calibrate'
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    from surfgeo.cli._common import add_command, add_output_options
    from surfgeo.cli.calibrate import add_contrast_option, add_gate_option, add_input_options

    p = add_command(
        subparsers,
        common,
        "index",
        help="rank the superstructures that explain a measured pattern",
        description="Index a measured LEED pattern: calibrate, try every superlattice up to a cell area "
        "with its domains, rank, group the indistinguishable ones, fit an incommensurate overlayer if "
        "needed.",
        epilog=EPILOG,
    )
    add_input_options(p)
    p.add_argument(
        "--calibration", metavar="FILE.json", help="a saved calibration ('surfgeo calibrate --json')"
    )
    p.add_argument(
        "--max-area",
        type=int,
        default=12,
        metavar="N",
        help="largest superlattice cell area searched, in substrate cells (default 12)",
    )
    p.add_argument("--top", type=int, default=10, metavar="N", help="candidates listed (default 10)")
    add_gate_option(p)
    add_output_options(p, plot=True)
    add_contrast_option(p)
    p.set_defaults(func=run)


def report_lines(res, source: str) -> list[str]:
    """The human-readable ranking."""
    from surfgeo.cli.calibrate import calibration_lines
    from surfgeo.lattice.superstructure import basis_note

    lat = res.lattice
    note = basis_note(lat)
    lines = [f"input        {source}: {res.n_spots} spots at {res.energy:g} eV"]
    lines += calibration_lines(res.calibration, lat, [res.energy])
    lines.append(
        f"searched     {res.searched} superlattice classes up to {res.max_area} substrate cells "
        f"(gate {res.gate_px:.2f} px, sigma {res.sigma_px:.2f} px)"
        + (f"; matrices in the {note}" if note else "")
    )
    lines.append("")
    lines.append(
        f"{'rank':>4}  {'score':>8}  {'prob':>5}  {'candidate':<34} {'matched':>7} {'unexpl':>6} "
        f"{'absent':>6} {'rms px':>6}"
    )
    for i, c in enumerate(res.candidates, 1):
        mat = "[[{}, {}], [{}, {}]]".format(
            *[
                (f"{v:g}" if isinstance(v, int) else f"{v:.3f}")
                for v in c.to_dict()["matrix"][0] + c.to_dict()["matrix"][1]
            ]
        )
        name = f"{c.wood or mat} {c.domains}d" + (" incomm." if c.kind == "incommensurate" else "")
        lines.append(
            f"{i:>4}  {c.score:8.1f}  {c.relative_probability:5.2f}  {name:<34} {c.matched:>7} "
            f"{c.unexplained:>6} {c.absent:>6} {c.rms_px:6.2f}"
        )
        if c.wood:
            lines.append(f"{'':>23}matrix {mat}")
        if c.parameters:
            q = c.parameters
            lines.append(
                f"{'':>23}overlayer |b1| = {q['b1_length_angstrom']:.4f} ± "
                f"{q['b1_length_angstrom_error']:.4f} Å, "
                f"|b2| = {q['b2_length_angstrom']:.4f} ± {q['b2_length_angstrom_error']:.4f} Å, "
                f"gamma = {q['gamma_deg']:.2f} ± {q['gamma_deg_error']:.2f}°, "
                f"rotation = {q['rotation_deg']:.2f} ± {q['rotation_deg_error']:.2f}°"
            )
        for note in c.notes:
            lines.append(f"{'':>23}note: {note}")
        for d in c.indistinguishable_from:
            other = d["wood"] or str(d["matrix"])
            when = "at every energy" if d["same_at_every_energy"] else "on this screen at this energy"
            lines.append(
                f"{'':>23}indistinguishable by positions from {other} ({d['domains']} domain(s)), {when}"
            )
            lines.append(f"{'':>25}to tell apart: {d['how_to_tell']}")
    if res.match is not None:
        lines.append("")
        lines.append("best candidate in detail")
        lines += [f"  {line}" for line in res.match.summary_lines()]
    for n in res.notes:
        lines.append(f"note         {n}")
    return lines


def run(args: argparse.Namespace) -> int:
    from surfgeo.cli.calibrate import begin, read_spots, write_report
    from surfgeo.errors import InputError
    from surfgeo.io import dump_json
    from surfgeo.measure.index import index_pattern

    style, lattice, energy = begin(args)
    if args.top is not None and args.top < 1:
        raise InputError(f"--top must be at least 1, got {args.top}.")
    m, cal = read_spots(args, energy)
    res = index_pattern(
        m.positions,
        lattice,
        energy,
        m.screen,
        calibration=cal,
        max_area=args.max_area,
        top=args.top,
        gate_px=args.gate,
        usable=m.usable,
    )
    res.notes.extend(m.notes)
    res.match = m.hide_masked(res.match)
    record = res.to_dict()
    record["input"] = m.source
    if args.json != "-":
        write_report(report_lines(res, m.source))
    if args.json:
        dump_json(record, args.json, force=args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.overlay import index_figure

        save_figure(index_figure(res, image=m.image, **style), args.plot, force=args.force)
    return 0
