"""``surfgeo detect``: find the spots of a LEED image (positions, intensities, uncertainties)."""

from __future__ import annotations

import argparse
import math
import sys

ORDER = 50

EPILOG = """\
The image (PNG 8/16-bit, TIFF 8/16/32-bit or float, one frame) is searched for spots:
background removal at the screen scale, a matched Gaussian filter at the spot scale, local
maxima at least THRESHOLD robust noise units high, sub-pixel positions by an iterated
Gaussian-weighted centroid, and intensities over a local background annulus. Positions are
in pixels with x to the right, y downwards and the centre of the top-left pixel at (0, 0).

Pixels outside the round screen and in the shadow of the electron gun and its holder are
ignored; both are looked for automatically unless given (--screen, --gun) or switched off
(none). Pixels at the saturation level are kept but the spots containing them are flagged.

Columns of the spot list: x, y (px), intensity and intensity_error (image units above the
local background, summed within 3 spot widths), sigma (spot width, px), snr (signal-to-noise
ratio), uncertainty (standard error of x and of y, px), saturated and edge (0/1). Spots with
snr of at least 5 are reliable; below that a few noise peaks may be listed.

examples:
  surfgeo detect pattern.png -o spots.csv --plot spots.png
      finds the spots, writes them as CSV and draws them on the image

  surfgeo detect pattern.tif --spot-sigma 2.5 --threshold 6 --screen 512,498,470 \\
      --gun 515,505,40,95,24 --json -
      with a known spot width, a stricter threshold, the screen disc (centre x,y and radius)
      and the gun shadow (centre x,y, radius, holder direction in degrees from +x towards +y
      -- 90 is straight down -- and holder width) given, JSON on stdout
"""


def register(subparsers, common: argparse.ArgumentParser) -> None:
    from surfgeo.cli._common import add_command, add_output_options

    p = add_command(
        subparsers,
        common,
        "detect",
        help="find the spots of a LEED image",
        description="Find the spots of a LEED image: sub-pixel positions, integrated intensities, "
        "widths, signal-to-noise ratios and positional uncertainties.",
        epilog=EPILOG,
    )
    p.add_argument("image", metavar="IMAGE", help="PNG or TIFF image of the screen")
    p.add_argument("-o", "--output", metavar="FILE",
                   help="write the spot list as CSV to FILE ('-' for stdout)")
    add_output_options(p, plot=True)
    p.add_argument("--spot-sigma", type=float, metavar="PX",
                   help="Gaussian width of the spots in px (default: measured on the brightest spots)")
    p.add_argument("--threshold", type=float, default=None, metavar="K",
                   help="keep maxima at least K robust noise units above the background (default 4.5; "
                   "pure noise then gives a few maxima per million pixels, all with snr below 5)")
    p.add_argument("--screen", default="auto", metavar="auto|none|X,Y,R",
                   help="the visible screen disc: centre and radius in px (default: auto)")
    p.add_argument("--gun", default="auto", metavar="auto|none|X,Y,R[,ANGLE,WIDTH]",
                   help="the gun's shadow: centre and radius in px, optionally the holder's direction "
                   "(degrees from +x towards +y) and width in px (default: auto)")
    p.add_argument("--exclude", metavar="FILE",
                   help="an image of the same size whose non-zero pixels are ignored")
    p.add_argument("--margin", type=float, default=3.0, metavar="PX",
                   help="extra width removed along the screen and shadow edges (default 3)")
    p.add_argument("--saturation", type=float, metavar="LEVEL",
                   help="pixel value at which the camera saturates (default: the largest value of "
                   "an integer image; none for float images)")
    p.add_argument("--gain", default="auto", metavar="auto|ADU",
                   help="camera gain in image units per detected photon, for the shot noise of the "
                   "spots (default: estimated from the image when possible)")
    p.set_defaults(func=run)


def _numbers(text: str, option: str, allowed: tuple[int, ...]) -> list[float]:
    from surfgeo.errors import InputError

    parts = [t for t in text.replace(";", ",").split(",")]
    try:
        vals = [float(t) for t in parts]
    except ValueError:
        vals = []
    if len(vals) not in allowed or not all(math.isfinite(v) for v in vals):
        counts = " or ".join(str(n) for n in allowed)
        raise InputError(f"{option} {text!r} must be 'auto', 'none' or {counts} comma-separated numbers.")
    return vals


def parse_screen(text: str):
    """``auto``, ``none`` or ``X,Y,R`` -> "auto", None or a ScreenDisc."""
    from surfgeo.errors import InputError
    from surfgeo.measure.masks import ScreenDisc

    t = text.strip().lower()
    if t in ("auto", "none"):
        return None if t == "none" else "auto"
    x, y, r = _numbers(text, "--screen", (3,))
    if r <= 0:
        raise InputError(f"--screen {text!r}: the radius must be positive.")
    return ScreenDisc(x, y, r)


def parse_gun(text: str):
    """``auto``, ``none``, ``X,Y,R`` or ``X,Y,R,ANGLE,WIDTH`` -> "auto", None or a GunShadow."""
    from surfgeo.errors import InputError
    from surfgeo.measure.masks import GunShadow

    t = text.strip().lower()
    if t in ("auto", "none"):
        return None if t == "none" else "auto"
    v = _numbers(text, "--gun", (3, 5))
    if v[2] < 0 or (len(v) == 5 and v[4] <= 0):
        raise InputError(f"--gun {text!r}: the radius must be >= 0 and the holder width positive.")
    return GunShadow(v[0], v[1], v[2], v[3], v[4]) if len(v) == 5 else GunShadow(v[0], v[1], v[2])


def _gain(text: str):
    from surfgeo.errors import InputError

    if text.strip().lower() == "auto":
        return "auto"
    try:
        g = float(text)
    except ValueError:
        g = float("nan")
    if not (math.isfinite(g) and g > 0):
        raise InputError(f"--gain {text!r} must be 'auto' or a positive number of image units per photon.")
    return g


def _fmt(v: float, spec: str) -> str:
    return format(v, spec) if math.isfinite(v) else "-"


def report_lines(image, masks, det) -> list[str]:
    """The printed summary and spot table."""
    h, w = image.shape
    lines = [f"image        {image.source}: {w} x {h} px, {image.sample_type}"]
    if masks.screen is not None:
        s = masks.screen
        how = "found" if masks.screen_found else "given"
        lines.append(
            f"screen       centre ({s.centre_x:.1f}, {s.centre_y:.1f}) px, radius {s.radius:.1f} px ({how})"
        )
    else:
        lines.append("screen       no edge (the whole image is used)")
    if masks.shadow is not None:
        how = "found" if masks.shadow_found else "given"
        lines.append(f"gun shadow   {100 * masks.shadow.mean():.1f} % of the image ({how})")
    else:
        lines.append("gun shadow   none")
    lines.append(f"usable       {100 * masks.usable.mean():.1f} % of the pixels")
    est = "measured" if det.sigma_estimated else "given"
    lines.append(f"spot width   {det.spot_sigma:.3f} px ({est}); threshold {det.threshold:g} noise units")
    gain = "unknown" if det.gain is None else f"{det.gain:.4g} per photon" + (
        " (estimated)" if det.gain_estimated else "")
    lines.append(f"background   {det.background_level:.4g}, pixel noise {det.pixel_noise:.3g}, gain {gain}")
    for note in det.notes:
        lines.append(f"note         {note}")
    sp = det.spots
    lines.append(f"spots        {len(sp)} (x right, y down, centre of the top-left pixel at 0,0)")
    if len(sp):
        lines.append(f"{'#':>5} {'x':>9} {'y':>9} {'intensity':>11} {'snr':>8} {'sigma':>6} "
                     f"{'unc':>7}  flags")
        for i in range(len(sp)):
            flags = ",".join(f for f, on in (("saturated", sp.saturated[i]), ("edge", sp.edge[i])) if on)
            lines.append(
                f"{i:>5} {sp.x[i]:>9.3f} {sp.y[i]:>9.3f} {_fmt(sp.intensity[i], '11.4g')} "
                f"{_fmt(sp.snr[i], '8.1f')} {_fmt(sp.sigma[i], '6.2f')} "
                f"{_fmt(sp.uncertainty[i], '7.4f')}  {flags}"
            )
    return lines


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from surfgeo.cli._common import check_outputs
    from surfgeo.errors import InputError
    from surfgeo.io import dump_json
    from surfgeo.measure.detect import DEFAULT_THRESHOLD, detect_spots
    from surfgeo.measure.images import read_image
    from surfgeo.measure.masks import build_mask

    check_outputs({"--output": args.output, "--json": args.json, "--plot": args.plot}, args.force,
                  figure="--plot")
    if args.output == "-" and args.json == "-":
        raise InputError("-o - and --json - both ask for standard output; send one of them to a file.")
    if args.plot == "-":
        raise InputError("--plot cannot go to standard output; give a file name.")
    if args.margin is not None and not (math.isfinite(args.margin) and args.margin >= 0):
        raise InputError(f"--margin must be a number of pixels >= 0, got {args.margin}.")
    if args.spot_sigma is not None and not (math.isfinite(args.spot_sigma) and args.spot_sigma > 0):
        raise InputError(f"--spot-sigma must be a positive width in px, got {args.spot_sigma}.")
    if args.saturation is not None and not math.isfinite(args.saturation):
        raise InputError(f"--saturation must be a finite pixel value, got {args.saturation}.")
    threshold = DEFAULT_THRESHOLD if args.threshold is None else args.threshold
    if not (math.isfinite(threshold) and threshold > 0):
        raise InputError(f"--threshold must be a positive number of noise units, got {threshold}.")
    screen = parse_screen(args.screen)
    gun = parse_gun(args.gun)
    gain = _gain(args.gain)

    image = read_image(args.image, saturation=args.saturation)
    exclude = None
    if args.exclude:
        ex = read_image(args.exclude)
        exclude = np.nan_to_num(ex.data) != 0
    masks = build_mask(image.data, screen=screen, gun=gun, exclude=exclude, margin=args.margin)
    det = detect_spots(image, spot_sigma=args.spot_sigma, threshold=threshold, mask=masks.usable,
                       gain=gain)

    record = {
        "image": image.source,
        "width_px": image.shape[1],
        "height_px": image.shape[0],
        "sample_type": image.sample_type,
        "saturation": image.saturation,
        "masks": masks.to_dict(),
        **det.to_dict(),
    }
    if "-" not in (args.json, args.output):
        sys.stdout.write("\n".join(report_lines(image, masks, det)) + "\n")
        sys.stdout.flush()
    if args.output == "-":
        from surfgeo.io.spots import spot_csv_text

        sys.stdout.write(spot_csv_text(det.spots))
    elif args.output:
        from surfgeo.io.spots import write_spot_csv

        write_spot_csv(args.output, det.spots, force=args.force)
    if args.json:
        dump_json(record, args.json, force=args.force)
    if args.plot:
        from surfgeo.plot import save_figure
        from surfgeo.plot.spots import spots_figure

        title = f"{image.source}: {len(det.spots)} spots"
        fig = spots_figure(image.data, det.spots, usable=masks.usable, title=title,
                           radius=3 * det.spot_sigma)
        save_figure(fig, args.plot, force=args.force)
    return 0
