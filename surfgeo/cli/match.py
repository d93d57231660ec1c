"""``surfgeo match``: compare one candidate structure's predicted spots with measured spots."""

from __future__ import annotations

import argparse

ORDER = 54

EPILOG = """\
The candidate is a superstructure (Wood notation or --matrix on --lattice, with all its
rotational and mirror domains) or a model file (--model, a slab built as by 'surfgeo build';
its kinematic intensities then say whether a spot that is not seen is extinct or weak). The
screen comes from --calibration (saved by 'surfgeo calibrate') or is calibrated on the fly
from the integer-order spots. Measured and predicted spots are paired one to one (Hungarian
assignment on squared distances, pairs farther apart than the gate forbidden); the screen is
then refitted to every matched spot, integer and fractional order (a far longer lever arm than
the first shell of integer spots), and the spots are paired again (--no-refit: not).

Spot positions fix the crystal's azimuth only up to the substrate lattice's point group (6mm
on a hexagonal lattice), while a model may be less symmetric (fcc(111) with adsorbates is
threefold: its copy turned by 60 degrees has the same spots with other intensities). A model
is therefore tried in every orientation the lattice allows, and the one with the fewest
unexplained and 'expected' missing spots is kept, then the one whose kinematic intensities
agree best with the measured ones (amplitude R factor; from the image, or the CSV's intensity
column; ties: the first, 'as modelled' first). The report names it and the next best
(--as-modelled: only the model's own orientation).

Reported: matched spots with residuals in px and in 1/Å (parallel momentum), measured spots
the candidate does not explain, and predicted spots on the screen that were not seen, each
'extinct' (zero kinematic intensity, e.g. a glide-line extinction), 'weak' (below 5 % of the
median matched intensity), 'expected' (should have been seen) or 'unknown' (no atoms).

examples:
  surfgeo match spots.csv --lattice hex:2.77 --energy 96 --wood "(sqrt3 x sqrt3)R30" \\
      --calibration screen.json --json -
      a (√3×√3)R30° superstructure against a spot list with a saved calibration

  surfgeo match pattern.png --lattice "Ni(100)" --energy 110 --model structures/ni100_s_c2x2.toml \\
      --plot match.png
      a model file (from surfgeo's structures/ folder) against an image, calibrating the screen
      from its integer-order spots
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    from surfgeo.cli._common import add_command, add_output_options, add_superstructure_options
    from surfgeo.cli.calibrate import add_contrast_option, add_gate_option, add_input_options

    p = add_command(
        subparsers,
        common,
        "match",
        help="compare a candidate's predicted spots with measured spots",
        description="Predict the spots of one candidate (superstructure with domains, or a model file) on "
        "the calibrated screen and pair them with the measured spots.",
        epilog=EPILOG,
    )
    add_input_options(p)
    add_superstructure_options(p, wood_positional=False)
    p.add_argument("--model", metavar="FILE.toml", help="a model file (slab with atoms) as the candidate")
    p.add_argument(
        "--calibration", metavar="FILE.json", help="a saved calibration ('surfgeo calibrate --json')"
    )
    add_gate_option(p)
    p.add_argument(
        "--no-domains", action="store_true", help="the candidate as given, without its symmetry domains"
    )
    p.add_argument(
        "--no-refit",
        action="store_true",
        help="use the calibration as it is (by default the screen is refitted to every matched spot, "
        "integer and fractional order, and the spots are matched again)",
    )
    p.add_argument(
        "--as-modelled",
        action="store_true",
        help="compare a --model only in its own azimuth (by default every orientation the substrate "
        "lattice allows is tried and the best kept)",
    )
    add_output_options(p, plot=True)
    add_contrast_option(p)
    p.set_defaults(func=run)


def _candidate(args, lattice):
    from surfgeo.cli._common import resolve_superstructure
    from surfgeo.errors import InputError

    if args.model:
        if args.matrix is not None or args.wood is not None:
            raise InputError("give the candidate either as --model or as Wood notation / --matrix, not both.")
        from surfgeo.slab.info import surface_info
        from surfgeo.slab.model import build_model

        atoms = build_model(args.model)
        model_lat = surface_info(atoms).lattice
        import numpy as np

        if not np.allclose(model_lat.vectors, lattice.vectors, rtol=2e-3, atol=2e-3):
            raise InputError(
                f"the surface lattice of {args.model} (a1 = {np.round(model_lat.a1, 4).tolist()}, a2 = "
                f"{np.round(model_lat.a2, 4).tolist()} Å) differs from --lattice; give the lattice of the "
                "model."
            )
        return atoms
    return resolve_superstructure(args, lattice, required=True)


def run(args: argparse.Namespace) -> int:
    from surfgeo.cli.calibrate import begin, read_spots, write_report
    from surfgeo.io import dump_json
    from surfgeo.measure.calibrate import calibrate
    from surfgeo.measure.match import match_orientations, match_spots, match_with_refit

    style, lattice, energy = begin(args)
    candidate = _candidate(args, lattice)
    m, cal = read_spots(args, energy)
    if cal is None:
        cal = calibrate(m.positions, lattice, energy, m.screen)
    choice = None
    if args.model and not args.as_modelled:
        # the crystal's azimuth: every orientation the lattice allows, on the first calibration
        choice = match_orientations(m.positions, cal, energy, candidate, lattice, usable=m.usable,
                                    intensities=m.intensities, gate_px=args.gate, domains=not args.no_domains)
    if m.momentum or args.no_refit:
        res = choice.result if choice is not None else match_spots(
            m.positions, cal, energy, candidate, lattice, gate_px=args.gate, domains=not args.no_domains
        )
    else:
        res, cal = match_with_refit(
            m.positions, cal, energy, candidate, lattice, gate_px=args.gate, domains=not args.no_domains,
            orientation=None if choice is None else choice.operation,
        )
    res = m.hide_masked(res)
    record = {"input": m.source, "calibration": cal.to_dict(), **res.to_dict(), "input_notes": m.notes}
    if choice is not None:
        record["orientation"] = choice.to_dict()
    if args.json != "-":
        from surfgeo.cli.calibrate import calibration_lines

        lines = [f"input        {m.source}: {len(m.positions)} spots at {energy:g} eV"]
        lines += calibration_lines(cal, lattice, [energy])
        lines += res.summary_lines()
        if choice is not None:
            lines.append(f"orientation  {choice.summary()}")
        lines += [f"note         {n}" for n in m.notes]
        write_report(lines)
    if args.json:
        dump_json(record, args.json, force=args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.overlay import match_figure

        save_figure(match_figure(res, image=m.image, screen=cal.screen, **style), args.plot, force=args.force)
    return 0
