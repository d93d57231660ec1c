"""``surfgeo calibrate``: fit the screen geometry from the substrate's integer-order spots.

Also holds the input handling shared by ``calibrate``, ``match`` and ``index``: a spot list
(CSV, pixels or momenta) or an image (spots found with the detector), the energy, and the
screen model with its nominal geometry.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass, field
from pathlib import Path

ORDER = 52

EPILOG = """\
The integer-order spots of the substrate are recognised among fractional-order and stray
spots without a starting guess of the centre, rotation or mirror (the (00) spot may be
hidden by the gun): candidate centres come from the inversion symmetry of the spots, each
spot is tried as each short integer beam, the best hypotheses are refined, and the screen
parameters (centre, scale, rotation, mirror, ellipticity, and for the camera model the
camera distance) are fitted by robust least squares. Only the rough size of the pattern must
be right: the scale is searched within 25 % of the nominal scale of --screen (by default the
image size and a 55 degree acceptance). With several inputs at different energies the scale
and an energy offset (E_true = E_nominal + offset, e.g. the contact potential) are fitted
jointly.

Inputs are spot lists (CSV with columns x,y in pixels, x right, y down, centre of the
top-left pixel at 0,0) or images (PNG/TIFF; spots are found as by 'surfgeo detect'). The
JSON output is the calibration: reuse it with 'surfgeo match --calibration FILE' or
'surfgeo index --calibration FILE'.

examples:
  surfgeo calibrate spots.csv --lattice hex:2.77 --energy 96 --screen sphere:size=1024 \\
      --json screen.json --plot calibration.png
      fits the screen from one spot list and saves the calibration

  surfgeo calibrate e80.png e120.png e160.png --lattice "Pt(111)" --energy 80 120 160 --json -
      joint fit of three images of the same screen, with the energy offset
"""


# =============================================================================== shared input
@dataclass
class Measurement:
    """Spots read from one input, with the nominal screen to calibrate against."""

    positions: object  # ndarray (N, 2), px
    source: str
    screen: object  # ScreenGeometry (nominal)
    image: object = None  # ndarray (H, W) or None
    momentum: bool = False
    calibration: object = None  # a fixed Calibration for momentum lists
    notes: list = field(default_factory=list)
    usable: object = None  # ndarray (H, W) of bool for images: pixels outside the masks
    intensities: object = None  # ndarray (N,) of measured intensities (NaN: unknown or saturated)

    def hide_masked(self, match):
        """A match result with its absent spots on masked pixels of the image called hidden."""
        if match is None or self.usable is None:
            return match
        from surfgeo.measure.match import masked_spots

        return match.with_hidden(masked_spots(match.predicted, self.usable))


def add_input_options(p: argparse.ArgumentParser, multiple: bool = False) -> None:
    """The input(s), --lattice, --energy and --screen."""
    from surfgeo.cli._common import add_lattice_option

    if multiple:
        p.add_argument(
            "inputs",
            nargs="+",
            metavar="SPOTS.csv|IMAGE",
            help="spot lists (CSV, columns x,y in px) or images (PNG/TIFF), one per energy",
        )
    else:
        p.add_argument(
            "input",
            metavar="SPOTS.csv|IMAGE",
            help="spot list (CSV with columns x,y in px, or kx,ky in 1/Å) or image (PNG/TIFF)",
        )
    add_lattice_option(p)
    p.add_argument(
        "--energy",
        required=True,
        nargs="+" if multiple else None,
        metavar="EV",
        help="beam energy in eV" + (" (one per input)" if multiple else ""),
    )
    p.add_argument(
        "--screen",
        default=None,
        metavar="SPEC",
        help="screen model and nominal geometry: sphere (hemispherical screen seen from afar, the "
        "default), camera or flat, with settings such as size=WxH, accept=DEG, shadow=PX, scale=, "
        "dist= (see 'surfgeo pattern --help'); the size defaults to the image's",
    )


def add_gate_option(p: argparse.ArgumentParser) -> None:
    """``--gate PX``: the largest distance of a matched spot."""
    p.add_argument(
        "--gate",
        type=float,
        default=None,
        metavar="PX",
        help="largest distance of a matched spot, px (default: 3.5 times the RMS position error)",
    )


def add_contrast_option(p: argparse.ArgumentParser) -> None:
    """``--contrast LO HI [FLATTEN]`` for the overlay figure."""
    p.add_argument(
        "--contrast",
        nargs="+",
        type=float,
        default=None,
        metavar="V",
        help="figure contrast: image percentiles LO HI shown black and white (default 2 99.8), and "
        "optionally the half-width in px of the features kept when the background glow is removed "
        "(default 12; 0 shows the raw image)",
    )


def contrast_kwargs(args) -> dict:
    """Keyword arguments of the overlay figure from ``--contrast``."""
    from surfgeo.errors import InputError

    c = getattr(args, "contrast", None)
    if not c:
        return {}
    if len(c) not in (2, 3) or not (0 <= c[0] < c[1] <= 100) or (len(c) == 3 and not c[2] >= 0):
        raise InputError(
            "--contrast takes two percentiles 0 <= LO < HI <= 100 and optionally a glow width "
            f">= 0 px, got {' '.join(f'{v:g}' for v in c)}."
        )
    out = {"contrast": (c[0], c[1])}
    if len(c) == 3:
        out["flatten"] = c[2] or None
    return out


def parse_energy(text, what: str = "--energy") -> float:
    """A positive, finite energy in eV, or an InputError naming the option."""
    from surfgeo.checks import positive_number

    return positive_number(text, what, "energy", "eV")


def _is_csv(path: Path) -> bool:
    return path.suffix.lower() in (".csv", ".txt", ".tsv", ".dat")


def load_measurement(
    path: str, screen_spec: str | None, energy: float | None = None, screen=None
) -> Measurement:
    """Read one input: a spot-list CSV (pixels or momenta) or an image (spots detected).

    The nominal screen is ``screen_spec``; for an image whose size the spec does not state,
    the image's size is used, and when the detector's mask finds the screen disc and the spec
    gives no scale, the nominal scale follows from the disc radius and the acceptance.
    ``screen`` (the screen of a saved calibration) replaces the spec: the spots must lie in its
    image, and an image must have its size.
    """
    import numpy as np

    from surfgeo.errors import FileFormatError, InputError
    from surfgeo.measure.spotlist import MomentumSpotList
    from surfgeo.screen import parse_screen

    p = Path(path)
    spec = screen_spec or "sphere"
    explicit = {k.strip().split("=")[0].lower() for k in spec.partition(":")[2].split(",") if k.strip()}
    if _is_csv(p):
        from surfgeo.io.spots import read_spot_csv

        spots = read_spot_csv(p)
        if isinstance(spots, MomentumSpotList):
            return _momentum_measurement(spots, str(p), energy)
        given = screen is not None
        screen = screen if given else parse_screen(spec)
        P = spots.positions
        outside = (
            np.flatnonzero(
                (P[:, 0] < -0.5)
                | (P[:, 0] > screen.width - 0.5)
                | (P[:, 1] < -0.5)
                | (P[:, 1] > screen.height - 0.5)
            )
            if len(P)
            else []
        )
        if len(outside):
            i = int(outside[0])
            raise InputError(
                f"{p}: spot {i + 1} at ({P[i, 0]:g}, {P[i, 1]:g}) px lies outside the "
                f"{screen.width}x{screen.height} px image "
                + (
                    "of the calibration; give the calibration made for these spots."
                    if given
                    else "of the screen spec; give the image size with --screen sphere:size=WxH."
                )
            )
        return Measurement(P, str(p), screen, intensities=spots.intensity)
    # an image
    from surfgeo.measure.detect import detect_spots
    from surfgeo.measure.images import read_image
    from surfgeo.measure.masks import build_mask

    if not p.exists():
        raise FileFormatError(f"{p} does not exist; give a spot-list CSV file or a PNG/TIFF image.")
    image = read_image(p)
    h, w = image.shape
    if h < 16 or w < 16:
        raise FileFormatError(f"{p} is only {w}x{h} pixels; a LEED image needs at least 16x16.")
    if screen is not None and (screen.width, screen.height) != (w, h):
        raise InputError(
            f"{p} is {w}x{h} px but the calibration was made for {screen.width}x{screen.height} px "
            "images; give the calibration made with this camera setting."
        )
    masks = build_mask(image.data, screen="auto", gun="auto")
    det = detect_spots(image, mask=masks.usable)
    if len(det.spots) < 3:
        raise InputError(
            f"{p}: the spot finder found only {len(det.spots)} spot(s) in the image, but a calibration needs "
            "at least 3; check the image with 'surfgeo detect' (threshold, masks) or give a spot list."
        )
    notes = list(det.notes)
    # saturated spots and spots touching a mask have intensities that are only lower bounds
    inten = np.where(det.spots.saturated | det.spots.edge, np.nan, det.spots.intensity)
    found = {"image": image.data, "notes": notes, "usable": masks.usable, "intensities": inten}
    if screen is not None:
        return Measurement(det.spots.positions, str(p), screen, **found)
    if "size" not in explicit and not spec.lower().endswith(".json"):
        spec = spec + ("," if ":" in spec else ":") + f"size={w}x{h}"
    screen = parse_screen(spec)
    if masks.screen is not None and "scale" not in explicit and not spec.lower().endswith(".json"):
        rho = float(screen.radial(np.array(math.radians(screen.acceptance_deg))))
        screen = screen.with_params(scale=masks.screen.radius / rho)
        notes.append(
            f"nominal scale {screen.scale:.1f} px/rad from the screen disc found in the image "
            f"(radius {masks.screen.radius:.1f} px, acceptance {screen.acceptance_deg:g} degrees)."
        )
    return Measurement(det.spots.positions, str(p), screen, **found)


def _momentum_measurement(spots, source: str, energy: float | None) -> Measurement:
    """Momenta become positions on a virtual far screen (1000 px per radian) with a known
    calibration, so that matching and indexing work unchanged."""
    import numpy as np

    from surfgeo.diffraction.electron import wavenumber
    from surfgeo.errors import InputError
    from surfgeo.measure.calibrate import Calibration, fast_pixels
    from surfgeo.screen import FarScreen

    if energy is None:
        raise InputError("a momentum-space spot list needs the beam energy (--energy).")
    k = wavenumber(energy)
    K = spots.momenta
    if len(K) and np.max(np.hypot(K[:, 0], K[:, 1])) >= k:
        raise InputError(
            f"{source}: a spot has |k_parallel| above the wavenumber {k:.3f} 1/Å at {energy:g} eV; "
            "check the units (1/Å with 2 pi) and the energy."
        )
    scale = 1000.0
    size = int(2 * scale + 3)
    screen = FarScreen(
        centre_x=(size - 1) / 2,
        centre_y=(size - 1) / 2,
        scale=scale,
        acceptance_deg=89.9,
        width=size,
        height=size,
    )
    cal = Calibration(screen=screen, rms_px=scale * 0.01 / k, n_matched=0)
    return Measurement(
        fast_pixels(screen, K, energy),
        source,
        screen,
        momentum=True,
        calibration=cal,
        notes=[
            "momentum-space spot list: no screen calibration needed (virtual screen, 1000 px per radian)."
        ],
    )


def check_outputs(args) -> None:
    """``--json`` and ``--plot`` must differ, be writable (or ``--force``), and the figure end
    in .png or .svg (:func:`surfgeo.cli._common.check_outputs`)."""
    from surfgeo.cli._common import check_outputs as check

    check({"--json": args.json, "--plot": args.plot}, args.force, figure="--plot")


def begin(args):
    """What 'match' and 'index' do first: check the outputs and ``--contrast``, read ``--lattice``,
    ``--energy`` and ``--gate``. Returns the figure style, the lattice and the energy (eV)."""
    from surfgeo.cli._common import resolve_lattice
    from surfgeo.errors import InputError

    check_outputs(args)
    style = contrast_kwargs(args)
    lattice = resolve_lattice(args.lattice)
    energy = parse_energy(args.energy)
    if args.gate is not None and not (args.gate > 0):
        raise InputError(f"--gate must be a positive number of pixels, got {args.gate}.")
    return style, lattice, energy


def read_spots(args, energy: float):
    """The input of 'match' and 'index' and the calibration to use with it: a saved
    ``--calibration``, the exact one of a momentum-space list, or None (to be fitted to the
    spots, of which there must then be enough)."""
    from surfgeo.errors import InputError

    saved = saved_calibration(args)
    m = load_measurement(args.input, args.screen, energy, screen=None if saved is None else saved.screen)
    if saved is not None and m.momentum:
        raise InputError(f"{m.source} lists momenta (kx, ky); a momentum-space list needs no --calibration.")
    cal = saved if saved is not None else m.calibration
    require_spots(m, calibrating=cal is None)
    return m, cal


def saved_calibration(args):
    """The calibration of ``--calibration`` (None without it); ``--screen`` must not be given
    too, as both describe the screen."""
    from surfgeo.errors import InputError
    from surfgeo.measure.calibrate import load_calibration

    if not args.calibration:
        return None
    if args.screen:
        raise InputError(
            "--screen and --calibration both describe the screen; give only --calibration (it holds "
            "the fitted screen and its image size)."
        )
    return load_calibration(args.calibration)


def require_spots(m: Measurement, calibrating: bool, saved_hint: bool = True) -> None:
    """Refuse a spot list without spots, or, when the screen is to be calibrated from it, with
    fewer than a calibration needs; the sentence names the file (and, with ``saved_hint``,
    points to ``--calibration``)."""
    from surfgeo.errors import InputError
    from surfgeo.measure.calibrate import MIN_SPOTS

    n = len(m.positions)
    if n == 0:
        raise InputError(
            f"{m.source} holds no spots; give a list with one spot per line (columns x,y in px)."
        )
    if calibrating and not m.momentum and n < MIN_SPOTS:
        raise InputError(
            f"{m.source} holds {n} spot(s), but calibrating the screen needs at least {MIN_SPOTS} "
            "(integer-order spots of the substrate); give more spots"
            + (" or a saved --calibration." if saved_hint else ".")
        )


def unicode_ok(stream) -> bool:
    try:
        "\u221a\u00d7\u00b0\u00c5".encode(getattr(stream, "encoding", None) or "ascii")
    except (UnicodeEncodeError, LookupError):
        return False
    return True


def write_report(lines: list[str]) -> None:
    text = "\n".join(lines) + "\n"
    if not unicode_ok(sys.stdout):
        text = (
            text.replace("\u221a", "sqrt")
            .replace("\u00d7", "x")
            .replace("\u00b0", " deg")
            .replace("\u00c5", "A")
            .replace("\u00b1", "+-")
        )
    sys.stdout.write(text)
    sys.stdout.flush()


# =============================================================================== the command
def register(subparsers, common: argparse.ArgumentParser) -> None:
    from surfgeo.cli._common import add_command, add_output_options

    p = add_command(
        subparsers,
        common,
        "calibrate",
        help="fit the screen geometry from the integer-order spots",
        description="Recognise the substrate's integer-order spots and fit the screen geometry (centre, "
        "scale, rotation, mirror, ellipticity; energy offset from several energies).",
        epilog=EPILOG,
    )
    add_input_options(p, multiple=True)
    p.add_argument(
        "--scale-tolerance",
        type=float,
        default=None,
        metavar="FRACTION",
        help="relative window around the nominal scale searched (default 0.25)",
    )
    add_output_options(p, plot=True)
    add_contrast_option(p)
    p.set_defaults(func=run)


def calibration_lines(cal, lattice, energies) -> list[str]:
    s = cal.screen
    lines = [
        f"screen       {s.kind} model, {s.width}x{s.height} px, acceptance {s.acceptance_deg:g} deg",
        *(f"             {line}" for line in cal.describe().splitlines()),
        f"energies     {', '.join(f'{e:g}' for e in energies)} eV"
        + (
            f" (true = nominal {cal.energy_offset:+.2f} eV)"
            if cal.fitted_energy_offset or cal.energy_offset
            else ""
        ),
    ]
    return lines


def run(args: argparse.Namespace) -> int:
    from surfgeo.cli._common import resolve_lattice
    from surfgeo.errors import InputError
    from surfgeo.io import dump_json
    from surfgeo.measure.calibrate import (
        MIN_SPOTS,
        SCALE_TOLERANCE,
        calibrate_series,
        calibration_candidates,
        unseen_integer_spots,
    )

    check_outputs(args)
    contrast_kwargs(args)
    lattice = resolve_lattice(args.lattice)
    energies = [parse_energy(e) for e in args.energy]
    if len(energies) != len(args.inputs):
        raise InputError(
            f"give one --energy per input: {len(args.inputs)} input(s) but {len(energies)} energies."
        )
    tol = SCALE_TOLERANCE if args.scale_tolerance is None else args.scale_tolerance
    if not (math.isfinite(tol) and 0 < tol < 1):
        raise InputError(f"--scale-tolerance must be a fraction between 0 and 1, got {tol}.")
    meas = [load_measurement(path, args.screen, e) for path, e in zip(args.inputs, energies, strict=True)]
    for m in meas:
        if m.momentum:
            raise InputError(
                f"{m.source} lists momenta (kx, ky); a momentum-space list needs no calibration."
            )
        require_spots(m, calibrating=True, saved_hint=False)
    images = [m for m in meas if m.image is not None]
    for m in images[1:]:
        if m.image.shape != images[0].image.shape:
            (h0, w0), (h, w) = images[0].image.shape, m.image.shape
            raise InputError(
                "a joint calibration needs images of one camera frame, but "
                f"{images[0].source} is {w0}x{h0} px and {m.source} is {w}x{h} px."
            )
    screen = meas[0].screen
    notes = []
    if len(meas) == 1:
        cands = calibration_candidates(meas[0].positions, lattice, energies[0], screen, scale_tolerance=tol)
        cal = cands[0]
        if len(cands) > 1:
            notes.append(
                f"{len(cands) - 1} other calibration(s) fit the integer-order spots nearly as well "
                "(typical when only the first shell of integer spots is on the screen); 'surfgeo index' "
                "chooses among them with all the spots."
            )
    else:
        cal = calibrate_series([m.positions for m in meas], lattice, energies, screen, scale_tolerance=tol)
    for m, e in zip(meas, energies, strict=True):
        n_pred, n_unseen = unseen_integer_spots(cal, m.positions, lattice, e)
        if n_unseen > max(n_pred - n_unseen, MIN_SPOTS):
            notes.append(
                f"{m.source}: {n_unseen} of the {n_pred} integer-order spots this calibration puts on the "
                f"screen at {e:g} eV have no measured spot near them; check --energy and --lattice (at a "
                "wrong energy or lattice constant the fractional-order spots can pass for the integer-order "
                "spots of a denser lattice)."
            )
    record = cal.to_dict()
    record["inputs"] = [m.source for m in meas]
    record["notes"] = notes
    if args.json != "-":
        lines = [f"input        {', '.join(m.source for m in meas)}"]
        lines += calibration_lines(cal, lattice, energies)
        for m in meas:
            lines += [f"note         {n}" for n in m.notes]
        lines += [f"note         {n}" for n in notes]
        write_report(lines)
    if args.json:
        dump_json(record, args.json, force=args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.overlay import calibration_figure

        fig = calibration_figure(
            cal, meas[0].positions, lattice, energies[0], image=meas[0].image, **contrast_kwargs(args)
        )
        save_figure(fig, args.plot, force=args.force)
    return 0
