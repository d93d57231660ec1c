"""Which pixels of a LEED image can be trusted: screen disc, electron-gun shadow, user masks.

A rear-view LEED optics shows a round fluorescent screen; outside it the camera sees the
dark chamber. The electron gun sits in front of the screen centre and hides a disc of it,
and the gun's holder hides a bar running from the gun to the screen edge. Spots found
there are not spots, and the pixels there must not enter background and noise estimates.

The geometry can be given (:class:`ScreenDisc`, :class:`GunShadow`, an exclusion array) or
found automatically (:func:`find_screen`, :func:`find_shadow`). The automatic search works
on a block-averaged copy of at most 256 pixels across:

* the screen is the largest bright region after a median filter (removing spots) and an
  Otsu threshold (N. Otsu, IEEE Trans. Syst. Man Cybern. 9, 62 (1979)); its rim is fitted
  by a circle, algebraic least squares (I. Kasa, IEEE Trans. Instrum. Meas. 25, 8 (1976))
  iterated with rejection of outlying rim points (the holder cuts the rim);
* the shadow is where the image falls below half-way between the dark level and a smooth
  model of the screen glow; the glow model is a normalised Gaussian convolution that
  iteratively leaves the dark pixels out (H. Knutsson and C.-F. Westin, Proc. IEEE CVPR
  1993, 515, "normalized convolution").

Either search returns None when the image does not show a clear disc or shadow; then the
user can give the geometry. Saturated pixels are not masked here: the detector flags the
spots that contain them (see :mod:`surfgeo.measure.detect`).

Angles: the holder direction is measured from +x towards +y in image coordinates, so with
y pointing down 0 degrees is to the right, 90 straight down, 180 left and 270 up.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import ndimage as ndi

from surfgeo.errors import InputError

#: Largest side of the block-averaged image used by the automatic searches, px.
LOWRES_SIDE = 256


@dataclass(frozen=True)
class ScreenDisc:
    """The visible screen: a disc with centre (``centre_x``, ``centre_y``) and ``radius``, px."""

    centre_x: float
    centre_y: float
    radius: float

    def __post_init__(self) -> None:
        vals = (self.centre_x, self.centre_y, self.radius)
        if not all(math.isfinite(float(v)) for v in vals) or self.radius <= 0:
            raise InputError(
                f"a screen disc needs finite centre coordinates and a positive radius, got {vals}."
            )

    def to_dict(self) -> dict[str, float]:
        return {"centre_px": [float(self.centre_x), float(self.centre_y)], "radius_px": float(self.radius)}


@dataclass(frozen=True)
class GunShadow:
    """The electron gun's shadow: a disc plus, optionally, the bar of its holder.

    Attributes
    ----------
    centre_x, centre_y, radius : float
        The gun's shadow disc, px.
    holder_angle_deg : float or None
        Direction of the holder from the gun centre, degrees from +x towards +y
        (0 right, 90 down, 180 left, 270 up). None: no holder.
    holder_width : float
        Full width of the holder's shadow, px.
    """

    centre_x: float
    centre_y: float
    radius: float
    holder_angle_deg: float | None = None
    holder_width: float = 0.0

    def __post_init__(self) -> None:
        vals = (self.centre_x, self.centre_y, self.radius)
        if not all(math.isfinite(float(v)) for v in vals) or self.radius < 0:
            raise InputError(f"a gun shadow needs finite centre coordinates and a radius >= 0, got {vals}.")
        if self.holder_angle_deg is not None and (
            not math.isfinite(self.holder_angle_deg) or not self.holder_width > 0
        ):
            raise InputError("a gun holder needs a finite angle in degrees and a positive width in px.")

    def to_dict(self) -> dict[str, Any]:
        return {
            "centre_px": [float(self.centre_x), float(self.centre_y)],
            "radius_px": float(self.radius),
            "holder_angle_deg": None if self.holder_angle_deg is None else float(self.holder_angle_deg),
            "holder_width_px": float(self.holder_width),
        }


def _grid(shape: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    h, w = shape
    return np.arange(h, dtype=float)[:, None], np.arange(w, dtype=float)[None, :]


def disc_mask(shape: tuple[int, int], screen: ScreenDisc, margin: float = 0.0) -> np.ndarray:
    """Boolean (H, W) array, True inside the screen disc shrunk by ``margin`` px."""
    y, x = _grid(shape)
    r = screen.radius - margin
    return (x - screen.centre_x) ** 2 + (y - screen.centre_y) ** 2 <= r * r


def gun_mask(shape: tuple[int, int], gun: GunShadow, margin: float = 0.0) -> np.ndarray:
    """Boolean (H, W) array, True in the gun's shadow (disc and holder) grown by ``margin`` px."""
    y, x = _grid(shape)
    dx, dy = x - gun.centre_x, y - gun.centre_y
    r = gun.radius + margin
    out = dx * dx + dy * dy <= r * r
    if gun.holder_angle_deg is not None:
        t = math.radians(gun.holder_angle_deg)
        along = dx * math.cos(t) + dy * math.sin(t)
        across = -dx * math.sin(t) + dy * math.cos(t)
        out = out | ((along >= 0) & (np.abs(across) <= gun.holder_width / 2 + margin))
    return out


def saturated_mask(data: np.ndarray, level: float | None) -> np.ndarray:
    """Boolean array, True where ``data >= level`` (all False when ``level`` is None)."""
    if level is None:
        return np.zeros(np.shape(data), dtype=bool)
    return np.asarray(data) >= level


# ---------------------------------------------------------------------------------------
# automatic search on a block-averaged copy


@dataclass(frozen=True)
class _LowRes:
    img: np.ndarray  # median-filtered block means
    factor: int
    noise: float  # robust noise of the block means


def _lowres(data: np.ndarray) -> _LowRes:
    h, w = data.shape
    f = max(1, math.ceil(max(h, w) / LOWRES_SIDE))
    hh, ww = h // f, w // f
    if hh < 8 or ww < 8:
        raise InputError(f"an image of {h} x {w} px is too small to look for the screen or the gun shadow.")
    d = np.asarray(data[: hh * f, : ww * f], dtype=np.float64)
    finite = np.isfinite(d)
    if not finite.all():
        d = np.where(finite, d, np.median(d[finite]))
    low = d.reshape(hh, f, ww, f).mean(axis=(1, 3))
    med = ndi.median_filter(low, size=5, mode="nearest")
    resid = low - med
    noise = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    return _LowRes(img=med, factor=f, noise=max(noise, 1e-12))


def _otsu(values: np.ndarray) -> float:
    """Otsu's threshold of a 1D sample (N. Otsu 1979), on a 256-bin histogram."""
    lo, hi = np.percentile(values, [0.5, 99.5])
    if not hi > lo:
        return float(hi)
    hist, edges = np.histogram(np.clip(values, lo, hi), bins=256, range=(lo, hi))
    p = hist.astype(float) / hist.sum()
    centres = 0.5 * (edges[:-1] + edges[1:])
    w0 = np.cumsum(p)
    m0 = np.cumsum(p * centres)
    mt = m0[-1]
    with np.errstate(divide="ignore", invalid="ignore"):
        between = (mt * w0 - m0) ** 2 / (w0 * (1 - w0))
    between[~np.isfinite(between)] = -1
    return float(centres[int(np.argmax(between))])


def _fit_circle(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Algebraic circle fit (Kasa 1976): minimise sum (x^2 + y^2 + D x + E y + F)^2."""
    A = np.column_stack([x, y, np.ones_like(x)])
    rhs = -(x * x + y * y)
    (D, E, F), *_ = np.linalg.lstsq(A, rhs, rcond=None)
    cx, cy = -D / 2, -E / 2
    r2 = cx * cx + cy * cy - F
    return float(cx), float(cy), float(math.sqrt(r2)) if r2 > 0 else float("nan")


def _robust_circle(x: np.ndarray, y: np.ndarray, iterations: int = 8):
    keep = np.ones(x.shape, dtype=bool)
    cx = cy = r = float("nan")
    for _ in range(iterations):
        if keep.sum() < 10:
            return None
        cx, cy, r = _fit_circle(x[keep], y[keep])
        if not math.isfinite(r):
            return None
        res = np.hypot(x - cx, y - cy) - r
        scale = 1.4826 * float(np.median(np.abs(res[keep])))
        new = np.abs(res) <= max(1.5, 3.0 * scale)
        if np.array_equal(new, keep):
            break
        keep = new
    res = np.hypot(x - cx, y - cy) - r
    return cx, cy, r, keep, float(np.sqrt(np.mean(res[keep] ** 2)))


def find_screen(data: np.ndarray, lowres: _LowRes | None = None) -> ScreenDisc | None:
    """Find the bright screen disc automatically, or return None when there is no clear one.

    The bright region is first the part above Otsu's threshold; when the glow peaks strongly
    at the centre that threshold can follow a contour of the glow inside the screen, so two
    lower thresholds (half and a quarter of the way from the dark level, the 2nd percentile)
    are tried next. A disc is accepted only if its rim is well described by a circle (at
    least half of the rim pixels within 1.5 block-pixels of it, RMS deviation at most 1.5
    block-pixels), the bright region fills most of the circle, the contrast between the
    screen and the surroundings is at least 5 times the noise of the block averages, and the
    rim is sharp (across +-2 block-pixels of the circle more than half of the change between
    +-6 block-pixels is crossed).

    Parameters
    ----------
    data : ndarray, shape (H, W)
        The image.

    Returns
    -------
    ScreenDisc or None
        Centre and radius in full-resolution pixels.
    """
    lr = lowres or _lowres(np.asarray(data))
    img = lr.img
    t = _otsu(img.ravel())
    bright = img > t
    dark = ~bright
    if bright.sum() < 50 or dark.sum() < 50:
        return None
    if float(np.median(img[bright]) - np.median(img[dark])) < 5 * lr.noise:
        return None
    low = float(np.percentile(img, 2.0))
    for level in (t, low + 0.5 * (t - low), low + 0.25 * (t - low)):
        disc = _disc_above(lr, level)
        if disc is not None:
            return disc
    return None


def _disc_above(lr: _LowRes, level: float) -> ScreenDisc | None:
    """The screen disc as the largest region of ``lr.img`` above ``level``, if it passes the tests."""
    img, f = lr.img, lr.factor
    bright = img > level
    if bright.sum() < 50 or (~bright).sum() < 50:
        return None
    labels, n = ndi.label(bright)
    if n == 0:
        return None
    sizes = np.bincount(labels.ravel())[1:]
    comp = labels == (1 + int(np.argmax(sizes)))
    comp = ndi.binary_fill_holes(comp)
    rim = comp & ~ndi.binary_erosion(comp)
    rim[0, :] = rim[-1, :] = rim[:, 0] = rim[:, -1] = False  # the frame is not the screen's rim
    ys, xs = np.nonzero(rim)
    if xs.size < 30:
        return None
    fit = _robust_circle(xs.astype(float), ys.astype(float))
    if fit is None:
        return None
    cx, cy, r, keep, rms = fit
    if keep.mean() < 0.5 or rms > 1.5 or r < 0.1 * min(img.shape):
        return None
    # the bright region must fill the circle (apart from the gun) and stay inside it
    yy, xx = _grid(img.shape)
    circle = (xx - cx) ** 2 + (yy - cy) ** 2 <= (r + 0.5) ** 2
    if comp[circle].mean() < 0.7 or circle[comp].mean() < 0.95:
        return None
    # a screen has a sharp rim: across +-2 block-pixels most of the change in brightness
    # between +-6 block-pixels is crossed (the iso-line of a smooth glow is round too, but its
    # edge is gentle). The comparison is local: the glow usually peaks at the centre, so the
    # screen is dimmer at its rim than on average.
    ang = np.linspace(0, 2 * np.pi, 180, endpoint=False)
    cos, sin = np.cos(ang), np.sin(ang)

    def ring(dr):
        y, x = cy + (r + dr) * sin, cx + (r + dr) * cos
        on = (x >= 0) & (x <= img.shape[1] - 1) & (y >= 0) & (y <= img.shape[0] - 1)
        return ndi.map_coordinates(img, [y, x], order=1, mode="nearest"), on

    far = min(6.0, 0.5 * r)
    inner, _ = ring(-2.0)
    outer, on_image = ring(2.0)
    inner_far, _ = ring(-far)
    outer_far, on_far = ring(far)
    if on_image.sum() < 30:
        return None
    if on_far.sum() < 30:  # the screen touches the image border: the far side is not seen
        outer_far, on_far = outer, on_image
    step = float(np.median((inner - outer)[on_far]))
    local = float(np.median((inner_far - outer_far)[on_far]))
    if not (local > 5 * lr.noise and step > 0.5 * local):
        return None
    # rim pixels are the outermost bright pixels: the threshold crossing is half a block further
    return ScreenDisc(centre_x=(cx + 0.5) * f - 0.5, centre_y=(cy + 0.5) * f - 0.5, radius=(r + 0.5) * f)


def find_shadow(
    data: np.ndarray,
    screen: ScreenDisc | None = None,
    lowres: _LowRes | None = None,
    min_area_fraction: float = 0.001,
    grow: float = 0.0,
) -> np.ndarray | None:
    """Find dark regions inside the screen (the gun and its holder), or None if there are none.

    A pixel of the block-averaged, median-filtered image is dark when it lies below
    half-way between the dark level and the smooth glow model, and at least 5 noise units
    below the glow model; dark regions smaller than ``min_area_fraction`` of the searched
    area are ignored. The dark level is the median outside the screen (when a screen is
    known) or the 0.1 percentile of the searched area.

    Parameters
    ----------
    data : ndarray, shape (H, W)
        The image.
    screen : ScreenDisc, optional
        Search only inside this disc.
    min_area_fraction : float
        Smallest shadow, as a fraction of the searched area.
    grow : float
        Widen the shadow by about this many pixels (rounded up to whole blocks).

    Returns
    -------
    ndarray of bool, shape (H, W), or None
        True in the shadow (one block-pixel, plus ``grow``, wider than found).
    """
    data = np.asarray(data)
    lr = lowres or _lowres(data)
    img, f = lr.img, lr.factor
    hh, ww = img.shape
    if screen is not None:
        low_screen = ScreenDisc((screen.centre_x + 0.5) / f - 0.5, (screen.centre_y + 0.5) / f - 0.5,
                                screen.radius / f)
        region = disc_mask(img.shape, low_screen, margin=1.0)
        outside = ~disc_mask(img.shape, low_screen, margin=-2.0)
        if region.sum() < 50:
            return None
        dark_level = float(np.median(img[outside])) if outside.sum() >= 20 else float(np.min(img[region]))
    else:
        region = np.ones(img.shape, dtype=bool)
        dark_level = float(np.percentile(img, 0.1))
    keep = region.copy()
    smooth = max(hh, ww) / 12.0
    glow = img
    dark = np.zeros_like(region)
    for _ in range(5):
        num = ndi.gaussian_filter(np.where(keep, img, 0.0), smooth, mode="constant")
        den = ndi.gaussian_filter(keep.astype(float), smooth, mode="constant")
        glow = np.where(den > 1e-3, num / np.maximum(den, 1e-3), dark_level)
        new_dark = region & (img < dark_level + 0.5 * (glow - dark_level)) & (glow - img > 5 * lr.noise)
        if np.array_equal(new_dark, dark):
            break
        dark = new_dark
        keep = region & ~ndi.binary_dilation(dark, iterations=2)
    labels, n = ndi.label(dark)
    if n == 0:
        return None
    sizes = np.bincount(labels.ravel())[1:]
    big = np.nonzero(sizes >= max(9, min_area_fraction * region.sum()))[0] + 1
    if big.size == 0:
        return None
    shadow_low = ndi.binary_dilation(np.isin(labels, big), iterations=1 + math.ceil(max(grow, 0.0) / f))
    full = np.zeros(data.shape, dtype=bool)
    up = np.repeat(np.repeat(shadow_low, f, axis=0), f, axis=1)
    full[: up.shape[0], : up.shape[1]] = up
    # rows/columns beyond the last full block copy their neighbours
    if up.shape[0] < data.shape[0]:
        full[up.shape[0]:, : up.shape[1]] = up[-1:, :]
    if up.shape[1] < data.shape[1]:
        full[:, up.shape[1]:] = full[:, up.shape[1] - 1: up.shape[1]]
    return full


@dataclass(frozen=True, eq=False)
class MaskSet:
    """The usable pixels of an image and how they were decided.

    Attributes
    ----------
    usable : ndarray of bool, shape (H, W)
        True where pixels may be used (finite, on the screen, not shadowed, not excluded).
    screen : ScreenDisc or None
        The screen disc, if one was given or found.
    screen_found : bool
        True if ``screen`` was found automatically.
    gun : GunShadow or None
        The gun geometry, if given.
    shadow : ndarray of bool or None
        The shadow region (from ``gun`` or found automatically).
    shadow_found : bool
        True if ``shadow`` was found automatically.
    excluded : ndarray of bool or None
        Pixels the user excluded.
    """

    usable: np.ndarray
    screen: ScreenDisc | None = None
    screen_found: bool = False
    gun: GunShadow | None = None
    shadow: np.ndarray | None = None
    shadow_found: bool = False
    excluded: np.ndarray | None = None

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready summary."""
        n = self.usable.size
        return {
            "usable_fraction": float(self.usable.sum() / n),
            "screen": None if self.screen is None else {**self.screen.to_dict(), "found": self.screen_found},
            "gun": None if self.gun is None else self.gun.to_dict(),
            "shadow_fraction": None if self.shadow is None else float(self.shadow.sum() / n),
            "shadow_found": self.shadow_found,
            "excluded_fraction": None if self.excluded is None else float(self.excluded.sum() / n),
        }


def build_mask(
    data: np.ndarray,
    screen: ScreenDisc | str | None = "auto",
    gun: GunShadow | str | None = "auto",
    exclude: np.ndarray | None = None,
    margin: float = 3.0,
) -> MaskSet:
    """Decide which pixels of an image are usable.

    Parameters
    ----------
    data : ndarray, shape (H, W)
        The image.
    screen : ScreenDisc, "auto" or None
        The screen disc; ``"auto"`` looks for it (:func:`find_screen`); None: no disc.
    gun : GunShadow, "auto" or None
        The gun shadow; ``"auto"`` looks for dark regions (:func:`find_shadow`); None: none.
    exclude : ndarray of bool, shape (H, W), optional
        True where the user excludes pixels.
    margin : float
        Extra width in px removed along every mask edge (penumbra, rim blur).

    Raises
    ------
    InputError
        If ``exclude`` does not have the image's shape, or a string option is unknown.
    """
    data = np.asarray(data)
    if data.ndim != 2:
        raise InputError(f"masks need a 2D image, got an array of shape {data.shape}.")
    for name, val in (("screen", screen), ("gun", gun)):
        if isinstance(val, str) and val != "auto":
            raise InputError(f"{name} must be 'auto', None or a geometry, got {val!r}.")
    usable = np.isfinite(data)
    lr = None
    if (isinstance(screen, str) or isinstance(gun, str)) and min(data.shape) >= 32:
        lr = _lowres(data)
    screen_found = False
    if isinstance(screen, str):
        screen = find_screen(data, lr) if lr is not None else None
        screen_found = screen is not None
    if screen is not None:
        usable &= disc_mask(data.shape, screen, margin=margin)
    shadow = None
    shadow_found = False
    if isinstance(gun, str):
        shadow = find_shadow(data, screen, lr, grow=margin) if lr is not None else None
        shadow_found = shadow is not None
        gun = None
    elif gun is not None:
        shadow = gun_mask(data.shape, gun, margin=margin)
    if shadow is not None:
        usable &= ~shadow
    if exclude is not None:
        exclude = np.asarray(exclude, dtype=bool)
        if exclude.shape != data.shape:
            raise InputError(
                f"the exclusion mask is {exclude.shape[1]} x {exclude.shape[0]} px but the image is "
                f"{data.shape[1]} x {data.shape[0]} px; they must match."
            )
        usable &= ~exclude
    return MaskSet(usable=usable, screen=screen, screen_found=screen_found, gun=gun, shadow=shadow,
                   shadow_found=shadow_found, excluded=exclude)


__all__ = [
    "ScreenDisc",
    "GunShadow",
    "MaskSet",
    "disc_mask",
    "gun_mask",
    "saturated_mask",
    "find_screen",
    "find_shadow",
    "build_mask",
]
