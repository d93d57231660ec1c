"""``surfgeo demo``: the whole job on built-in synthetic data, with a report."""

from __future__ import annotations

import argparse
import sys

from surfgeo.cli._common import add_command, add_output_options

ORDER = 90

EPILOG = """\
The built-in data are an invented scenario, synthetic throughout: two LEED images of a Rh(111)
crystal after oxygen dosing (72 and 118 eV, a hemispherical screen with noise, the gun shadow
and a mildly distorted geometry), generated once by surfgeo's own forward model, and three
candidate oxygen models (structures/demo_*.toml). The demo finds the spots, calibrates the
screen from the substrate spots, indexes the superstructure (and shows which candidates the
spot positions alone cannot separate), matches the three models with kinematic intensities,
exports the best model's slab for a DFT code and predicts the spots at 160 eV for the next
measurement. It takes a few seconds.

The folder holds report.html (self-contained: open it in a browser), results.json, the
figures as PNG, the detected spots (CSV), the screen calibration (JSON) and the DFT input
best_model.vasp with its note. Without --out a new folder surfgeo-demo (or surfgeo-demo-2,
...) is made in the current directory; an existing folder is only replaced with --force, and
only when it holds an earlier demo output.

examples:
  surfgeo demo
      run everything, write ./surfgeo-demo/ and print the answer and where each file is

  surfgeo demo --out /tmp/o-rh111 --json -
      the same into /tmp/o-rh111, and the full results as JSON on stdout

  surfgeo demo --out /tmp/o-rh111 --force
      run again, replacing the earlier demo folder
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    p = add_command(
        subparsers,
        common,
        "demo",
        help="run the whole job on built-in synthetic data and write a report",
        description="Run the main job end to end on built-in synthetic data (an invented scenario): "
        "spots -> screen calibration -> indexing -> candidate models -> DFT input -> expected "
        "spots at a new energy; write a self-contained HTML report with figures and JSON results.",
        epilog=EPILOG,
    )
    p.add_argument("--out", metavar="DIR",
                   help="folder to create for the results (default: a new surfgeo-demo folder here)")
    p.add_argument("--fast", action="store_true",
                   help="smaller indexing search and figures (for tests); same answer")
    add_output_options(p, plot=False)
    p.set_defaults(func=run)


def summary_lines(result, files) -> list[str]:
    """The short terminal summary: the answer and where each file is."""
    from surfgeo.workflows.demo import SYNTHETIC_LABEL

    folder = files.folder
    ans = result.answer()
    lines = [
        f"surfgeo demo: {result.scenario.get('title', '')}",
        SYNTHETIC_LABEL,
        "",
        f"answer   {ans['sentence']}",
    ]
    same = [g for g in result.position_groups if len(g) > 1]
    for g in same:
        lines.append(f"         spot positions alone cannot separate {', '.join(g)}")
    ranking = "; ".join(f"{c.rank}. {c.file} R = {c.r_factor:.3f}" for c in result.candidates)
    lines.append(f"ranking  {ranking}")
    cal = result.best.calibration  # the one saved in calibration.json
    lines.append(f"screen   centre ({cal.screen.centre_x:.1f}, {cal.screen.centre_y:.1f}) px, "
                 f"{cal.n_matched} integer-order spots, rms {cal.rms_px:.2f} px; energy offset "
                 f"{cal.energy_offset:+.2f} eV (refined on the intensities of the answer)")
    lines.append("")
    lines.append(f"files in {folder}/")
    width = max(len(p.name) for p in files.all_files())
    lines.append(f"  {files.report.name:<{width}}  the report (open it in a browser; figures embedded)")
    lines.append(f"  {files.results.name:<{width}}  every result as JSON")
    for role, p in files.others.items():
        lines.append(f"  {p.name:<{width}}  {role}")
    for _name, p in sorted(files.figures.items()):
        lines.append(f"  {p.name:<{width}}  figure")
    return lines


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from surfgeo.errors import InputError
    from surfgeo.io import check_writable, dump_json
    from surfgeo.workflows.demo import run_demo
    from surfgeo.workflows.report import check_output_folder, default_folder, write_demo_folder

    out = check_output_folder(args.out, args.force) if args.out else default_folder(".")
    if args.json and args.json != "-":
        target = Path(args.json).resolve()
        if target == out.resolve() or out.resolve() in target.parents:
            raise InputError(
                f"--json {args.json} lies in the demo folder {out}, which holds results.json already; "
                "give a file outside it or '-' for the terminal."
            )
        check_writable(args.json, args.force)
    result = run_demo(fast=args.fast)
    files = write_demo_folder(result, out, force=args.force, dpi=60 if args.fast else 110)
    to_stdout = args.json == "-"
    stream = sys.stderr if to_stdout else sys.stdout
    print("\n".join(summary_lines(result, files)), file=stream)
    if args.json:
        import json

        data = json.loads(files.results.read_text(encoding="utf-8"))
        dump_json(data, args.json, force=args.force)
    return 0
