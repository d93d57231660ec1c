"""``surfgeo pattern``: predicted diffraction spots, on the screen, at one energy or over a range."""

from __future__ import annotations

import argparse
import math
import sys

import numpy as np

from surfgeo.cli._common import (
    add_command,
    add_frame_option,
    add_lattice_option,
    add_output_options,
    add_superstructure_options,
    resolve_lattice,
    resolve_superstructure,
)

ORDER = 30

EPILOG = """\
Beams come from a bare superstructure (--lattice with --matrix or --wood: positions only) or
from a structure (MODEL: a surface model file, or any structure file ASE reads that carries
the surfgeo surface record, e.g. the extended XYZ written by 'surfgeo build'): positions and
kinematic intensities. Symmetry domains are superposed incoherently with equal weights
unless --weights or --no-domains is given; every beam lists the domains that produce it.
Labels are exact fractions in the substrate 1x1 reciprocal basis.

A non-integer matrix is an overlayer (coincidence or incommensurate): substrate and
overlayer beams, plus double-diffraction combinations g_substrate + g_overlayer with
--double-order N (N shortest shells of each lattice).

Kinematic intensities are qualitative for LEED (multiple scattering is strong); positions and
symmetry extinctions at normal incidence are exact. A kinematic extinction at off-normal
incidence is not a prediction: multiple scattering lifts it.

Only beams within the acceptance of the screen (--theta-max, default the screen's own, 55
degrees) are listed; --theta-max 90 lists every emerging beam.

Relaxed against ideal (--reference IDEAL): MODEL is the relaxed structure (any file ASE
reads, e.g. a CONTCAR; last frame of a trajectory unless --frame) and IDEAL the structure it
started from (model file or structure file; its surfgeo record gives the surface cell). The
atoms are matched (by index, or by minimum distance under periodic boundaries) and refused
when they are not the same system; both patterns use the same beams, energy, incidence,
domains and kinematic settings, with intensities in the same units. The text lists every
beam with I_relaxed, I_ideal, their ratio and relative change, then the beams that changed
most (ranked by |ln ratio|; beams extinct in one structure only first). The JSON gains a
"reference" block: file, relaxed_file, matching {method, max_displacement_A, max_displacement_atom,
rms_displacement_A, note}, domains (of the ideal structure), beams (in the order of the
top-level beams: hk, intensity, extinct, ratio, relative_change, status = appears |
vanishes | extinct in both | ""), largest_changes (groups of equivalent beams: beams, ratio,
relative_change, status) and notes. Over an energy range, reference.beams hold per beam
intensity (list over the energies), mean_ratio, correlation (Pearson, of the two I(V)
curves), peak_eV_relaxed, peak_eV_ideal, and reference.strongest the --top strongest groups.
--plot draws split spots (left half ideal, right half relaxed) and the changes as bars, or
over an energy range the I(V) curves of the strongest beams. --csv gains the columns
intensity_reference and ratio. Kinematic intensity changes are qualitative for LEED.

examples:
  surfgeo pattern --lattice hex:2.77 --wood "(2x1)" --energy 80 --plot p2x1.png
      the three (2x1) domains on a hexagonal substrate at 80 eV, with a spot map in k-space
      and on the default screen

  surfgeo pattern slab.extxyz --energy 120 --incidence 6,0 --json - --csv beams.csv
      kinematic intensities of a slab at 6 degrees incidence, as JSON and a CSV table

  surfgeo pattern --lattice square:2.55 --matrix 2 0 0 1 --energy 40:300:2 \\
      --screen camera:dist=3,size=640x480 --plot paths.png --animate sweep.gif
      an energy sweep: onset energy of every beam, spot trajectories and a GIF animation

  surfgeo pattern CONTCAR --reference cu100.extxyz --energy 120 --json cmp.json --plot cmp.png
      the relaxed slab from a DFT run next to the ideal slab written by 'surfgeo build':
      intensity ratios per beam, the largest changes, split-spot map and bar chart

  surfgeo pattern CONTCAR --reference cu100.extxyz --energy 40:300:1 --plot iv.png --top 6
      kinematic I(V) curves of the 6 strongest (groups of equivalent) beams, relaxed and ideal
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    from surfgeo.screen.spec import SCREEN_HELP

    p = add_command(
        subparsers,
        common,
        "pattern",
        help="predicted spot pattern of a superstructure or a slab (positions, domains, intensities)",
        description="Predict which diffraction beams appear, where they land on the screen, which "
        "domains produce them and (with atoms) their kinematic intensities, at one energy or over "
        "an energy range.",
        epilog=EPILOG,
    )
    p.add_argument(
        "model", nargs="?", metavar="MODEL", help="surface model file or structure file (with atoms)"
    )
    add_lattice_option(p, required=False)
    add_superstructure_options(p, wood_positional=False)
    p.add_argument(
        "--energy",
        required=True,
        metavar="E",
        help="beam energy in eV (at most 2000): one value, a list E1,E2,... or a range START:STOP:STEP "
        "(a sweep)",
    )
    p.add_argument(
        "--incidence",
        default="0,0",
        metavar="THETA,PHI",
        help="polar angle from the surface normal and azimuth from a1 of the incident beam, degrees "
        "(default 0,0)",
    )
    p.add_argument("--screen", metavar="SPEC", help=SCREEN_HELP)
    p.add_argument(
        "--theta-max",
        type=float,
        metavar="DEG",
        help="acceptance half-angle around the screen axis, degrees (overrides the screen's)",
    )
    p.add_argument("--no-domains", action="store_true", help="only the superstructure as given, no domains")
    p.add_argument(
        "--weights", metavar="W1,W2,...", help="weights of the domains (normalised), in domain order"
    )
    p.add_argument(
        "--double-order",
        type=int,
        default=0,
        metavar="N",
        help="overlayers: add double-diffraction beams combining N shells of each lattice",
    )
    p.add_argument(
        "--inner-potential",
        type=float,
        default=10.0,
        metavar="EV",
        help="real inner potential for the kinematic intensities, eV (default 10)",
    )
    p.add_argument(
        "--temperature",
        type=float,
        default=300.0,
        metavar="K",
        help="sample temperature for the Debye-Waller factors, K (default 300)",
    )
    add_output_options(p, plot=True)
    p.add_argument("--csv", metavar="FILE",
                   help="write the beam table (or positions versus energy) as CSV to FILE ('-' for stdout)")
    p.add_argument(
        "--view",
        choices=("both", "kspace", "screen"),
        default="both",
        help="panels of the spot-map figure (default both)",
    )
    p.add_argument("--animate", metavar="FILE.gif", help="energy sweeps: write a GIF animation of the screen")
    g = p.add_argument_group("relaxed against ideal")
    g.add_argument(
        "--reference",
        metavar="IDEAL",
        help="the ideal structure (model or structure file) to compare with; MODEL is then the relaxed one",
    )
    add_frame_option(g, "MODEL (a trajectory)")
    g.add_argument(
        "--match",
        choices=("auto", "index", "distance"),
        default="auto",
        help="how to pair the atoms of MODEL and IDEAL: auto (default), index (file order) or distance",
    )
    g.add_argument(
        "--max-shift",
        type=float,
        default=2.0,
        metavar="D",
        help="refuse when an atom moved more than D Angstrom between IDEAL and MODEL (default 2.0)",
    )
    g.add_argument(
        "--top",
        type=int,
        default=8,
        metavar="N",
        help="groups of equivalent beams in the table of largest changes, or I(V) curves shown (default 8)",
    )
    p.set_defaults(func=run)


# ----------------------------------------------------------------------------- helpers
def _parse_pair(text: str, name: str) -> tuple[float, float]:
    from surfgeo.errors import InputError

    parts = [p.strip() for p in str(text).split(",")]
    try:
        if len(parts) != 2:
            raise ValueError
        return float(parts[0]), float(parts[1])
    except ValueError:
        raise InputError(
            f"{name} must be two numbers THETA,PHI in degrees, such as 10,0; got {text!r}."
        ) from None


def _parse_weights(text: str | None):
    from surfgeo.errors import InputError

    if text is None:
        return None
    try:
        return [float(p) for p in text.split(",") if p.strip()]
    except ValueError:
        raise InputError(
            f"--weights must be numbers separated by commas, such as 1,1,2; got {text!r}."
        ) from None


def _check_outputs(args) -> None:
    """Refuse unwritable or clashing outputs before any work (``-`` is standard output)."""
    from surfgeo.cli._common import check_outputs
    from surfgeo.errors import InputError

    check_outputs({"--json": args.json, "--csv": args.csv, "--plot": args.plot, "--animate": args.animate},
                  args.force, figure="--plot")
    if args.animate and not args.animate.lower().endswith(".gif"):
        raise InputError(f"--animate {args.animate}: the animation must end in .gif.")
    if args.json == "-" and args.csv == "-":
        raise InputError("--json - and --csv - both ask for standard output; send one of them to a file.")
    for opt, path in (("--plot", args.plot), ("--animate", args.animate)):
        if path == "-":
            raise InputError(f"{opt} cannot go to standard output; give a file name.")


def _write_outputs(args, text: str, data_fn, csv_text: str) -> None:
    """The text report (unless JSON or CSV go to standard output), then JSON and CSV."""
    if "-" not in (args.json, args.csv):
        sys.stdout.write(text)
    if args.json:
        from surfgeo.io import dump_json

        dump_json(data_fn(), args.json, args.force)
    if args.csv == "-":
        sys.stdout.write(csv_text)
    elif args.csv:
        from surfgeo.io import write_text

        write_text(args.csv, csv_text, args.force)


def _fmt(x, width: int, prec: int = 2) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-".rjust(width)
    return f"{round(float(x), prec) + 0.0:{width}.{prec}f}"  # + 0.0: no "-0.000"


# ----------------------------------------------------------------------------- run
def run(args: argparse.Namespace) -> int:
    from surfgeo.diffraction.sweep import parse_energies
    from surfgeo.errors import InputError
    from surfgeo.screen import parse_screen

    energies = parse_energies(args.energy)
    incidence = _parse_pair(args.incidence, "--incidence")
    weights = _parse_weights(args.weights)
    if args.theta_max is not None and not (0 < args.theta_max <= 90):
        raise InputError(f"--theta-max must be in (0, 90] degrees, got {args.theta_max:g}.")
    if args.double_order < 0:
        raise InputError(f"--double-order must be 0 or positive, got {args.double_order}.")
    screen = parse_screen(args.screen, acceptance_deg=args.theta_max)
    theta_max = screen.acceptance_deg
    sweep = energies.size > 1
    if args.animate and not sweep:
        raise InputError("--animate needs an energy range such as --energy 40:300:2.")
    _check_outputs(args)

    if args.reference is not None:
        return _run_reference(args, energies, incidence, weights, screen, theta_max, sweep)

    atoms = None
    lattice = matrix = None
    if args.model:
        if args.lattice or args.matrix is not None or args.wood is not None:
            raise InputError("give either a MODEL file or --lattice with --matrix/--wood, not both.")
        if args.double_order:
            raise InputError("--double-order applies to overlayers given with --lattice and --matrix/--wood.")
        from surfgeo.io.structures import read_structure

        atoms = read_structure(args.model, args.frame)
        _note_record(atoms, args.model)
    else:
        if not args.lattice:
            raise InputError("give a MODEL file, or the substrate with --lattice (and --matrix or --wood).")
        lattice = resolve_lattice(args.lattice)
        sup = resolve_superstructure(args, lattice, required=False)
        matrix = None if sup is None else sup.matrix

    kin = {"inner_potential": args.inner_potential, "temperature": args.temperature}
    domains = not args.no_domains
    if sweep:
        from surfgeo.diffraction.sweep import pattern_sweep

        result = pattern_sweep(
            energies,
            lattice=lattice,
            matrix=matrix,
            atoms=atoms,
            incidence=incidence,
            domains=domains,
            weights=weights,
            theta_max=theta_max,
            double_order=args.double_order,
            **(kin if atoms else {}),
        )
        text = sweep_report(result, screen)
        csv_text = sweep_csv(result, screen) if args.csv else ""
    else:
        from surfgeo.diffraction.pattern import slab_pattern, superstructure_pattern

        e = float(energies[0])
        if atoms is not None:
            result = slab_pattern(
                atoms, e, incidence, domains=domains, weights=weights, theta_max=theta_max, **kin
            )
        else:
            result = superstructure_pattern(
                lattice,
                matrix,
                e,
                incidence,
                domains=domains,
                weights=weights,
                theta_max=theta_max,
                double_order=args.double_order,
            )
        text = pattern_report(result, screen)
        csv_text = pattern_csv(result, screen) if args.csv else ""

    _write_outputs(args, text, lambda: result.to_dict(screen), csv_text)
    if args.plot or args.animate:
        from surfgeo.plot import spotmap

        if args.plot:
            if sweep:
                spotmap.plot_trajectories(result, screen, args.plot, args.force)
            else:
                spotmap.plot_pattern(result, args.plot, screen, args.force, view=args.view)
        if args.animate:
            spotmap.animate_sweep(result, screen, args.animate, args.force)
    return 0


def _note_record(atoms, name) -> None:
    if "surfgeo" not in atoms.info:
        from surfgeo.errors import StructureError

        cell = np.asarray(atoms.cell)[:2, :2]
        if not abs(np.linalg.det(cell)) > 1e-6:
            raise StructureError(
                f"{name} has neither a surfgeo surface record nor an in-plane cell (a1, a2 in the xy "
                "plane); give a periodic slab, e.g. one written by 'surfgeo build', or a model file."
            )
        print(
            f"surfgeo pattern: note: {name} has no surfgeo surface record; its cell is taken "
            "as the 1x1 surface cell.",
            file=sys.stderr,
        )


def _run_reference(args, energies, incidence, weights, screen, theta_max, sweep: bool) -> int:
    """``--reference``: the relaxed structure MODEL against its ideal reference."""
    from surfgeo.errors import InputError
    from surfgeo.io.structures import read_structure

    if not args.model:
        raise InputError("--reference needs the relaxed structure as MODEL, e.g. 'surfgeo pattern CONTCAR "
                         "--reference ideal.extxyz --energy 100'.")
    if args.lattice or args.matrix is not None or args.wood is not None:
        raise InputError("--reference compares two structure files; leave out --lattice, --matrix, --wood.")
    if args.double_order:
        raise InputError("--double-order applies to overlayers given with --lattice and --matrix/--wood.")
    if args.top < 1:
        raise InputError(f"--top must be 1 or more, got {args.top}.")
    if not (math.isfinite(args.max_shift) and args.max_shift > 0):
        raise InputError(f"--max-shift must be a positive length in Angstrom, got {args.max_shift:g}.")
    relaxed = read_structure(args.model, args.frame)
    reference = read_structure(args.reference)
    _note_record(reference, args.reference)
    opts = {
        "domains": not args.no_domains,
        "weights": weights,
        "theta_max": theta_max,
        "match": args.match,
        "max_displacement": args.max_shift,
        "inner_potential": args.inner_potential,
        "temperature": args.temperature,
    }
    names = (str(args.model), str(args.reference))
    if sweep:
        from surfgeo.diffraction.pattern import compare_slab_sweeps

        comp = compare_slab_sweeps(relaxed, reference, energies, incidence, **opts)
        text = sweep_comparison_report(comp, screen, names, args.top)
    else:
        from surfgeo.diffraction.pattern import compare_slab_patterns

        comp = compare_slab_patterns(relaxed, reference, float(energies[0]), incidence, **opts)
        text = comparison_report(comp, screen, names, args.top)

    def data():
        out = comp.to_dict(screen, top=args.top)
        out["reference"] = {"file": names[1], "relaxed_file": names[0], **out["reference"]}
        return out

    _write_outputs(args, text, data, comparison_csv(comp, screen) if args.csv else "")
    if args.plot or args.animate:
        from surfgeo.plot import spotmap

        if args.plot:
            if sweep:
                spotmap.plot_iv_comparison(comp, args.plot, args.force, top=args.top, names=names)
            else:
                spotmap.plot_comparison(
                    comp, args.plot, screen, args.force, view=args.view, top=args.top, names=names
                )
        if args.animate:
            spotmap.animate_sweep(comp.relaxed, screen, args.animate, args.force)
    return 0


# ----------------------------------------------------------------------------- text and CSV
def _domain_text(ds, nd: int) -> str:
    if nd == 1:
        return "0"
    if len(ds) == nd:
        return "all"
    return ",".join(str(d) for d in ds)


def _header(pattern_like, screen, energy_text: str) -> list[str]:
    from surfgeo.diffraction.beams import format_index
    from surfgeo.lattice import basis_note

    base = pattern_like
    lat = base.lattice
    a, b = lat.lengths
    inc = base.incidence
    lines = [
        f"energy      {energy_text}",
        f"incidence   polar {inc[0]:g} deg, azimuth {inc[1]:g} deg from a1",
        f"substrate   {lat.kind()}, |a1| = {a:.6g} A, |a2| = {b:.6g} A, gamma = {lat.gamma:.6g} deg"
        + (f" ({basis_note(lat)}; labels and matrices refer to it)" if basis_note(lat) else ""),
    ]
    desc = base.description or {}
    if desc.get("kind") == "slab":
        lines.append(
            f"structure   {desc.get('formula')} ({desc.get('atoms')} atoms), cell matrix {desc.get('matrix')}"
        )
    elif desc.get("matrix") is not None:
        lines.append(f"matrix      {desc.get('matrix')} ({desc.get('superstructure')})")
    recs = base.domain_records
    lines.append(f"domains     {len(recs)}")
    for r in recs:
        m = (
            "[["
            + "], [".join(
                ", ".join(format_index(x) if not isinstance(x, float) else f"{x:.6g}" for x in row)
                for row in r.matrix
            )
            + "]]"
        )
        extra = f", {r.structures} structural" if desc.get("kind") == "slab" else ""
        lines.append(
            f"  {r.index}: matrix {m}, weight {r.weight:.3g}, from {' '.join(o.symbol for o in r.operations)}"
            f"{extra}"
        )
    lines.append(f"screen      {screen.describe()}")
    return lines


def _beams_line(pattern, vis) -> str:
    shown = int(np.sum(vis)) if len(pattern) else 0
    if pattern.theta_max >= 90.0:
        return f"beams       {len(pattern)} emerge from the surface ({shown} on the screen)"
    return f"beams       {len(pattern)} within {pattern.theta_max:g} deg of the screen axis ({shown} visible)"


def _hidden_reasons(pattern, screen, px) -> list[str]:
    """Why each beam is not visible: outside the screen's acceptance (or behind it), or in a shadow."""
    ang = screen.angle_from_axis(pattern.k_parallel, pattern.energy, pattern.incidence_xy)
    with np.errstate(invalid="ignore"):
        off = ~(ang <= screen.acceptance_deg) | ~np.isfinite(px[:, 0])
    return ["off screen" if o else "shadow" for o in off]


def pattern_report(pattern, screen) -> str:
    """The text report of a single-energy pattern."""
    from surfgeo.diffraction.beams import format_index

    px, vis = pattern.screen_positions(screen)
    hidden = _hidden_reasons(pattern, screen, px)
    nd = len(pattern.domain_records)
    ext = pattern.extinct
    lines = _header(pattern, screen, f"{pattern.energy:g} eV")
    lines.append(_beams_line(pattern, vis))
    lines.append("")
    head = (
        f"{'h':>6} {'k':>6}  {'order':<10} {'source':<14} {'theta':>6} {'phi':>6} {'kx':>7} {'ky':>7} "
        f"{'domains':<8}"
    )
    if pattern.intensity is not None:
        head += f" {'intensity':>10}"
    head += f" {'x':>7} {'y':>7}"
    if pattern.terrace_hk is not None:
        head += f" {'terrace h_t,k_t':>16}"
    lines.append(head)
    for i, (h, k) in enumerate(pattern.hk):
        row = (
            f"{format_index(h):>6} {format_index(k):>6}  {pattern.order[i]:<10} {pattern.source[i]:<14} "
            f"{_fmt(pattern.theta[i], 6, 1)} {_fmt(pattern.phi[i], 6, 1)} "
            f"{_fmt(pattern.k_parallel[i, 0], 7, 3)} "
            f"{_fmt(pattern.k_parallel[i, 1], 7, 3)} {_domain_text(pattern.domains[i], nd):<8}"
        )
        if pattern.intensity is not None:
            row += " " + ("extinct".rjust(10) if ext[i] else f"{pattern.intensity[i]:10.4g}")
        row += f" {_fmt(px[i, 0], 7, 1)} {_fmt(px[i, 1], 7, 1)}"
        if pattern.terrace_hk is not None:
            row += f" {pattern.terrace_hk[i, 0]:8.3f},{pattern.terrace_hk[i, 1]:7.3f}"
        if not vis[i]:
            row += f"  ({hidden[i]})"
        lines.append(row)
    lines.append("")
    lines += [f"note: {n}" for n in pattern.notes]
    return "\n".join(lines) + "\n"


def pattern_csv(pattern, screen) -> str:
    """CSV of a single-energy pattern (same columns as a sweep)."""
    return _csv_rows(
        [
            (
                pattern.energy,
                i,
                pattern.hk[i],
                pattern.order[i],
                pattern.source[i],
                pattern.domains[i],
                pattern.theta[i],
                pattern.phi[i],
                pattern.k_parallel[i],
                None if pattern.intensity is None else pattern.intensity[i],
                None if pattern.terrace_hk is None else pattern.terrace_hk[i],
            )
            for i in range(len(pattern))
        ],
        *pattern.screen_positions(screen),
    )


_CSV_HEAD = (
    "energy_eV,h,k,order,source,domains,theta_deg,phi_deg,kx,ky,screen_x,screen_y,on_screen,intensity,"
    "terrace_h,terrace_k"
)


def _csv_rows(rows, px, vis) -> str:
    from surfgeo.diffraction.beams import format_index

    out = [_CSV_HEAD]
    for j, (e, _, hk, order, src, doms, th, ph, kp, inten, terr) in enumerate(rows):
        vals = [
            f"{e:g}",
            format_index(hk[0]),
            format_index(hk[1]),
            order,
            src,
            " ".join(str(d) for d in doms),
            f"{th:.6f}",
            f"{ph:.6f}",
            f"{kp[0]:.6f}",
            f"{kp[1]:.6f}",
            f"{px[j][0]:.4f}" if np.isfinite(px[j][0]) else "",
            f"{px[j][1]:.4f}" if np.isfinite(px[j][1]) else "",
            "1" if vis[j] else "0",
            "" if inten is None or not np.isfinite(inten) else f"{inten:.6g}",
            "" if terr is None else f"{terr[0]:.6f}",
            "" if terr is None else f"{terr[1]:.6f}",
        ]
        out.append(",".join(vals))
    return "\n".join(out) + "\n"


def sweep_report(sweep, screen) -> str:
    """The text report of an energy sweep: onset energy of every beam."""
    lines = _sweep_lines(sweep, screen)
    lines += [f"note: {n}" for n in sweep.base.notes]
    return "\n".join(lines) + "\n"


def _sweep_lines(sweep, screen) -> list[str]:
    from surfgeo.diffraction.beams import format_index

    base = sweep.base
    e = sweep.energies
    lines = _header(base, screen, f"{e[0]:g} to {e[-1]:g} eV, {len(e)} energies")
    lines.append(
        f"beams       {len(sweep.index)} reach the screen (within {sweep.theta_max:g} deg of its axis) "
        "in this range"
    )
    lines.append("")
    lines.append(
        f"{'h':>6} {'k':>6}  {'order':<10} {'source':<14} {'domains':<8} {'onset_eV':>9} {'theta@max':>9}"
    )
    nd = len(base.domain_records)
    order = np.argsort(sweep.onset, kind="stable")
    for j in order:
        i = sweep.index[j]
        h, k = base.hk[i]
        lines.append(
            f"{format_index(h):>6} {format_index(k):>6}  {base.order[i]:<10} {base.source[i]:<14} "
            f"{_domain_text(base.domains[i], nd):<8} {_fmt(float(sweep.onset[j]), 9, 1)} "
            f"{_fmt(float(sweep.theta[-1, j]), 9, 1)}"
        )
    lines.append("")
    lines.append(
        "Positions versus energy: --csv FILE or --json FILE; trajectories: --plot; animation: --animate."
    )
    return lines


def sweep_csv(sweep, screen) -> str:
    """Positions (and intensities) versus energy, one row per emerging beam and energy."""
    base = sweep.base
    px, vis = sweep.screen_positions(screen)
    rows, pxs, viss = [], [], []
    for f, e in enumerate(sweep.energies):
        for j, i in enumerate(sweep.index):
            if not np.isfinite(sweep.theta[f, j]):
                continue
            rows.append(
                (
                    e,
                    i,
                    base.hk[i],
                    base.order[i],
                    base.source[i],
                    base.domains[i],
                    sweep.theta[f, j],
                    sweep.phi[f, j],
                    sweep.k_parallel[f, j],
                    None if sweep.intensity is None else sweep.intensity[f, j],
                    None if sweep.terrace_hk is None else sweep.terrace_hk[f, j],
                )
            )
            pxs.append(px[f, j])
            viss.append(vis[f, j])
    return _csv_rows(rows, pxs, viss)


# ----------------------------------------------------------------------------- relaxed against ideal
def _labels(hk, idx) -> str:
    from surfgeo.diffraction.beams import format_index

    return " ".join(f"({format_index(hk[i][0])},{format_index(hk[i][1])})" for i in idx)


def _ratio_text(r: float, width: int = 8) -> str:
    if math.isnan(r):
        return "-".rjust(width)
    if math.isinf(r):
        return "inf".rjust(width)
    return f"{r:{width}.4g}"


def _change_text(r: float, width: int = 9) -> str:
    if math.isnan(r):
        return "-".rjust(width)
    if math.isinf(r):
        return "new".rjust(width)
    return f"{100.0 * (r - 1.0):+{width - 1}.1f}%"


def _match_lines(matching: dict, names) -> list[str]:
    return [
        f"relaxed     {names[0]}",
        f"reference   {names[1]} (ideal)",
        f"matching    by {matching['method']}; largest displacement {matching['max_displacement_A']:.3f} A "
        f"(atom {matching['max_displacement_atom']} of the reference), "
        f"rms {matching['rms_displacement_A']:.3f} A",
    ]


def comparison_report(comp, screen, names=("relaxed", "ideal"), top: int = 8) -> str:
    """Text report of a relaxed structure against its ideal reference at one energy."""
    from surfgeo.diffraction.beams import format_index

    rel, ideal = comp.relaxed, comp.ideal
    px, vis = rel.screen_positions(screen)
    hidden = _hidden_reasons(rel, screen, px)
    nd = len(rel.domain_records)
    ratio = comp.ratio
    status = comp.status
    lines = _match_lines(comp.matching, names) + _header(rel, screen, f"{rel.energy:g} eV")
    lines.append(_beams_line(rel, vis))
    lines.append("")
    lines.append(
        f"{'h':>6} {'k':>6}  {'order':<10} {'theta':>6} {'phi':>6} {'domains':<8} {'I_relaxed':>10} "
        f"{'I_ideal':>10} {'ratio':>8} {'change':>9} {'x':>7} {'y':>7}"
    )

    def inten(p, i):
        return "extinct".rjust(10) if p.extinct[i] else f"{p.intensity[i]:10.4g}"

    for i, (h, k) in enumerate(rel.hk):
        row = (
            f"{format_index(h):>6} {format_index(k):>6}  {rel.order[i]:<10} {_fmt(rel.theta[i], 6, 1)} "
            f"{_fmt(rel.phi[i], 6, 1)} {_domain_text(rel.domains[i], nd):<8} {inten(rel, i)} "
            f"{inten(ideal, i)} "
            f"{_ratio_text(ratio[i])} {_change_text(ratio[i])} {_fmt(px[i, 0], 7, 1)} {_fmt(px[i, 1], 7, 1)}"
        )
        if status[i]:
            row += f"  ({status[i]})"
        elif not vis[i]:
            row += f"  ({hidden[i]})"
        lines.append(row)
    lines.append("")
    groups = comp.change_groups(top)
    top_r = float(np.nanmax(rel.intensity)) if len(rel) else 0.0
    lines.append(
        f"largest changes, relaxed against ideal ({len(groups)} groups of equivalent beams, ranked by "
        "|ln ratio|; beams extinct in one structure only first):"
    )
    lines.append(f"{'ratio':>8} {'change':>9} {'% of max':>9}  beams")
    for g in groups:
        i = g[0]
        share = 100.0 * rel.intensity[i] / top_r if top_r > 0 else float("nan")
        extra = f"  ({status[i]})" if status[i] else ""
        lines.append(
            f"{_ratio_text(ratio[i])} {_change_text(ratio[i])} {share:9.3g}  {_labels(rel.hk, g)}{extra}"
        )
    if not groups:
        lines.append("  (none: every beam is extinct in both structures)")
    lines.append("")
    lines.append("'% of max': the beam's relaxed intensity in % of the strongest relaxed beam.")
    lines += [f"note: {n}" for n in [*comp.notes, *rel.notes]]
    return "\n".join(lines) + "\n"


def sweep_comparison_report(comp, screen, names=("relaxed", "ideal"), top: int = 8) -> str:
    """Text report of the I(V) curves of a relaxed structure against its ideal reference."""
    rel = comp.relaxed
    lines = _match_lines(comp.matching, names) + _sweep_lines(rel, screen)
    lines.append("")
    groups = comp.strongest(top)
    mr, mi, ratio = comp.mean_relaxed, comp.mean_ideal, comp.mean_ratio
    corr = comp.correlation()
    pr, pi = comp.peak_energies()
    lines.append(
        f"kinematic I(V) curves of the {len(groups)} strongest groups of equivalent beams, relaxed against "
        "ideal (means over the energies where the beam emerges; corr: Pearson correlation of the curves):"
    )
    lines.append(
        f"{'mean_relaxed':>12} {'mean_ideal':>11} {'ratio':>8} {'corr':>6} {'peak_eV_rel':>11} "
        f"{'peak_eV_ideal':>13}  beams"
    )
    for g in groups:
        j = g[0]
        lines.append(
            f"{mr[j]:12.4g} {mi[j]:11.4g} {_ratio_text(ratio[j])} {_fmt(float(corr[j]), 6, 3)} "
            f"{_fmt(float(pr[j]), 11, 1)} {_fmt(float(pi[j]), 13, 1)}  {_labels(rel.hk, g)}"
        )
    lines.append("")
    lines += [f"note: {n}" for n in [*comp.notes, *rel.base.notes]]
    return "\n".join(lines) + "\n"


def comparison_csv(comp, screen) -> str:
    """CSV of the relaxed structure (columns of :func:`pattern_csv`) with ``intensity_reference``
    (the ideal structure) and ``ratio`` (relaxed over ideal; empty where undefined)."""
    from surfgeo.diffraction.pattern import PatternComparison, intensity_ratio

    def fmt(x):
        return "" if not np.isfinite(x) and not np.isinf(x) else ("inf" if np.isinf(x) else f"{x:.6g}")

    if isinstance(comp, PatternComparison):
        base = pattern_csv(comp.relaxed, screen)
        ref = comp.ideal.intensity
        ratio = comp.ratio
    else:
        base = sweep_csv(comp.relaxed, screen)
        emerges = np.isfinite(comp.relaxed.theta)
        ref = comp.ideal.intensity[emerges]  # row-major over (energy, beam), as sweep_csv
        ratio = intensity_ratio(comp.relaxed.intensity, comp.ideal.intensity)[emerges]
    lines = base.rstrip("\n").split("\n")
    out = [lines[0] + ",intensity_reference,ratio"]
    for row, r_i, q in zip(lines[1:], ref, ratio, strict=True):
        out.append(f"{row},{fmt(r_i)},{fmt(q)}")
    return "\n".join(out) + "\n"
