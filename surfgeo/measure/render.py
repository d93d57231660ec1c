"""Synthetic LEED images for tests and benchmarks (invented scenes, labelled synthetic).

:func:`render_pattern` draws Gaussian spots at given positions on a broad background glow,
limits them to a round screen, darkens the electron gun's shadow and its holder, and adds
Poisson shot noise, camera gain, read noise, an offset and quantisation. The same seed gives
the same image. It also returns what the truth is for every spot: its visible photon count,
background, signal-to-noise ratio and the localisation bound of Thompson, Larson and Webb.

Pixel model: pixel (row i, column j) collects the light falling on the square
``j - 1/2 <= x < j + 1/2``, ``i - 1/2 <= y < i + 1/2`` (the centre of the top-left pixel is
(0, 0)); spot light is integrated exactly over each pixel with the error function.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import ndimage as ndi
from scipy.special import erf

from surfgeo.errors import InputError
from surfgeo.measure.masks import GunShadow, ScreenDisc, disc_mask, gun_mask


@dataclass(frozen=True, eq=False)
class SyntheticImage:
    """A rendered image and the truth behind it.

    Attributes
    ----------
    image : ndarray, shape (H, W)
        Camera values (ADU) in the requested sample type (e.g. uint16).
    positions : ndarray, shape (N, 2)
        True spot centres [x, y], px.
    photons : ndarray, shape (N,)
        Expected detected photons of each spot after screen and shadow transmission.
    sigma : ndarray, shape (N,)
        Gaussian width of each spot, px.
    background : ndarray, shape (N,)
        Expected background photons per pixel at each spot centre.
    noise_var : ndarray, shape (N,)
        Background noise variance per pixel at each spot, photons^2 (shot + read + quantisation).
    visible : ndarray of bool, shape (N,)
        True when the spot centre is on the screen and not shadowed (transmission > 0.5).
    expected : ndarray, shape (H, W)
        Expected photons per pixel before noise.
    transmission : ndarray, shape (H, W)
        Fraction of the screen light reaching the camera (0 outside the screen / in shadow).
    gain, offset, read_noise : float
        ADU per photon, ADU added, read noise in ADU.
    screen, gun : ScreenDisc or None, GunShadow or None
        The geometry used.
    """

    image: np.ndarray
    positions: np.ndarray
    photons: np.ndarray
    sigma: np.ndarray
    background: np.ndarray
    noise_var: np.ndarray
    visible: np.ndarray
    expected: np.ndarray
    transmission: np.ndarray
    gain: float
    offset: float
    read_noise: float
    screen: ScreenDisc | None
    gun: GunShadow | None

    @property
    def snr(self) -> np.ndarray:
        """Signal-to-noise ratio of each spot: N / sqrt(N + 4 pi s^2 b), photons.

        4 pi s^2 is the noise-equivalent area of a Gaussian spot of width s (the SNR of a
        PSF-weighted intensity estimate; I. R. King, PASP 95, 163 (1983)); b is the
        background noise variance per pixel.
        """
        n = self.photons
        return n / np.sqrt(n + 4 * np.pi * self.sigma**2 * self.noise_var)

    @property
    def thompson_variance(self) -> np.ndarray:
        """Localisation variance per axis, px^2, of Thompson, Larson and Webb (2002), eq. 17.

        <(dx)^2> = (s^2 + a^2/12) / N + 8 pi s^4 b^2 / (a^2 N^2) with pixel size a = 1,
        spot width s, photon count N and background noise b^2 per pixel.

        References
        ----------
        R. E. Thompson, D. R. Larson and W. W. Webb, Biophys. J. 82, 2775 (2002).
        """
        n = self.photons
        s = self.sigma
        return (s**2 + 1.0 / 12.0) / n + 8 * np.pi * s**4 * self.noise_var / n**2


def _pixel_integrals(centre: np.ndarray, sigma: np.ndarray, start: np.ndarray, size: int) -> np.ndarray:
    """Fraction of a 1D Gaussian falling on pixels start .. start+size-1 (K, size)."""
    edges = start[:, None] + np.arange(size + 1)[None, :] - 0.5
    z = (edges - centre[:, None]) / (math.sqrt(2.0) * sigma[:, None])
    return 0.5 * np.diff(erf(z), axis=1)


def spot_image(shape: tuple[int, int], positions, photons, sigma) -> np.ndarray:
    """Noise-free image of Gaussian spots integrated over pixels, photons per pixel.

    Parameters
    ----------
    shape : (H, W)
        Image size.
    positions : array_like, shape (N, 2)
        Spot centres [x, y], px.
    photons : array_like, shape (N,)
        Total photons of each spot.
    sigma : float or array_like, shape (N,)
        Gaussian widths, px.
    """
    h, w = shape
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
    n = pos.shape[0]
    out = np.zeros(h * w)
    if n == 0:
        return out.reshape(h, w)
    amp = np.broadcast_to(np.asarray(photons, dtype=float), (n,))
    sig = np.broadcast_to(np.asarray(sigma, dtype=float), (n,))
    half = int(math.ceil(5 * float(sig.max()))) + 1
    size = 2 * half + 1
    x0 = np.rint(pos[:, 0]).astype(int) - half
    y0 = np.rint(pos[:, 1]).astype(int) - half
    gx = _pixel_integrals(pos[:, 0], sig, x0, size)  # (n, size)
    gy = _pixel_integrals(pos[:, 1], sig, y0, size)
    vals = amp[:, None, None] * gy[:, :, None] * gx[:, None, :]
    cols = x0[:, None, None] + np.arange(size)[None, None, :]
    rows = y0[:, None, None] + np.arange(size)[None, :, None]
    cols, rows = np.broadcast_arrays(cols, rows)
    inside = (cols >= 0) & (cols < w) & (rows >= 0) & (rows < h)
    out += np.bincount((rows * w + cols)[inside], weights=vals[inside], minlength=h * w)
    return out.reshape(h, w)


def render_pattern(
    shape: tuple[int, int],
    positions,
    photons,
    sigma: float | np.ndarray = 2.0,
    *,
    glow_level: float = 100.0,
    glow_peak: float = 300.0,
    glow_width: float | None = None,
    glow_centre: tuple[float, float] | None = None,
    screen: ScreenDisc | None = None,
    gun: GunShadow | None = None,
    shadow_transmission: float = 0.03,
    edge_blur: float = 1.5,
    stray_light: float = 2.0,
    gain: float = 1.0,
    offset: float = 100.0,
    read_noise: float = 3.0,
    sample_type: str = "uint16",
    noise: bool = True,
    seed: int | np.random.Generator | None = 0,
) -> SyntheticImage:
    """Render a synthetic LEED image.

    Expected photons per pixel: ``T * (glow + spots) + stray_light``, where T is the
    transmission (1 on the screen, 0 outside it, ``shadow_transmission`` in the gun's
    shadow; edges blurred by a Gaussian of ``edge_blur`` px) and the glow is
    ``glow_level + glow_peak * exp(-r^2 / (2 glow_width^2))`` around ``glow_centre``.
    Camera values: ``offset + gain * Poisson(expected) + Normal(0, read_noise)``, rounded
    and clipped to the sample type (values at the top are saturated).

    Parameters
    ----------
    shape : (H, W)
        Image size, px.
    positions : array_like, shape (N, 2)
        Spot centres [x, y], px.
    photons : float or array_like, shape (N,)
        Photons of each spot before transmission.
    sigma : float or array_like
        Gaussian spot widths, px.
    glow_level, glow_peak : float
        Flat and peaked parts of the background glow, photons per pixel.
    glow_width : float, optional
        Width of the peaked glow, px (default: a third of the screen radius or of the image).
    glow_centre : (x, y), optional
        Default: the screen centre, or the image centre.
    screen, gun : optional
        Geometry; None means no screen edge (the screen fills the image) / no gun.
    shadow_transmission : float
        Fraction of light passing the gun and its holder.
    edge_blur : float
        Blur of the screen rim and of the shadow edges, px.
    stray_light : float
        Photons per pixel everywhere (also outside the screen).
    gain, offset, read_noise : float
        Camera model: ADU per photon, ADU offset, read noise in ADU.
    sample_type : str
        ``uint8``, ``uint16``, ``uint32`` or ``float32``.
    noise : bool
        If False, the image is the expected value (no shot or read noise, no rounding).
    seed : int, Generator or None
        Random seed (the same seed gives the same image).

    Returns
    -------
    SyntheticImage
    """
    h, w = int(shape[0]), int(shape[1])
    if h < 1 or w < 1:
        raise InputError(f"a synthetic image needs a positive size, got {shape}.")
    if sample_type not in ("uint8", "uint16", "uint32", "float32"):
        raise InputError(f"sample_type must be uint8, uint16, uint32 or float32, not {sample_type!r}.")
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
    n = pos.shape[0]
    amp = np.broadcast_to(np.asarray(photons, dtype=float), (n,)).copy()
    sig = np.broadcast_to(np.asarray(sigma, dtype=float), (n,)).copy()
    if n and (not np.all(sig > 0) or not np.all(amp >= 0)):
        raise InputError("spot widths must be positive and photon counts non-negative.")
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)

    # transmission of the screen and the gun shadow
    trans = np.ones((h, w))
    if screen is not None:
        trans *= disc_mask((h, w), screen)
    if gun is not None:
        trans[gun_mask((h, w), gun)] *= shadow_transmission
    if edge_blur > 0 and (screen is not None or gun is not None):
        trans = ndi.gaussian_filter(trans, edge_blur, mode="nearest")

    if glow_centre is None:
        glow_centre = (screen.centre_x, screen.centre_y) if screen is not None else ((w - 1) / 2, (h - 1) / 2)
    if glow_width is None:
        glow_width = (screen.radius if screen is not None else min(h, w) / 2) / 1.5
    yy, xx = np.arange(h)[:, None], np.arange(w)[None, :]
    r2 = (xx - glow_centre[0]) ** 2 + (yy - glow_centre[1]) ** 2
    glow = glow_level + glow_peak * np.exp(-r2 / (2 * glow_width**2))

    spots = spot_image((h, w), pos, amp, sig)
    expected = trans * (glow + spots) + stray_light

    if noise:
        counts = rng.poisson(expected).astype(np.float64)
        values = offset + gain * counts + rng.normal(0.0, read_noise, size=(h, w))
    else:
        values = offset + gain * expected
    dt = np.dtype(sample_type)
    if dt.kind == "u":
        info = np.iinfo(dt)
        values = np.clip(np.rint(values) if noise else values, 0, info.max)
        image = values.astype(dt) if noise else values
    else:
        image = values.astype(dt)

    # truth per spot
    iy = np.clip(np.rint(pos[:, 1]).astype(int), 0, h - 1) if n else np.zeros(0, int)
    ix = np.clip(np.rint(pos[:, 0]).astype(int), 0, w - 1) if n else np.zeros(0, int)
    on_image = (pos[:, 0] > -0.5) & (pos[:, 0] < w - 0.5) & (pos[:, 1] > -0.5) & (pos[:, 1] < h - 0.5)
    t_spot = np.where(on_image, trans[iy, ix], 0.0) if n else np.zeros(0)
    bkg = (trans * glow + stray_light)[iy, ix] if n else np.zeros(0)
    quant = 1.0 / 12.0 if (noise and dt.kind == "u") else 0.0
    noise_var = bkg + (read_noise**2 + quant) / gain**2
    return SyntheticImage(
        image=image,
        positions=pos,
        photons=amp * t_spot,
        sigma=sig,
        background=bkg,
        noise_var=noise_var,
        visible=t_spot > 0.5,
        expected=expected,
        transmission=trans,
        gain=float(gain),
        offset=float(offset),
        read_noise=float(read_noise),
        screen=screen,
        gun=gun,
    )


def random_positions(
    rng: np.random.Generator,
    n: int,
    shape: tuple[int, int],
    min_separation: float,
    allowed: np.ndarray | None = None,
    border: float = 0.0,
    max_tries: int = 50,
) -> np.ndarray:
    """Up to ``n`` random positions [x, y] at least ``min_separation`` px apart.

    Parameters
    ----------
    rng : numpy Generator
        Source of randomness.
    n : int
        Number of positions wanted (fewer are returned if they do not fit).
    shape : (H, W)
        Image size.
    min_separation : float
        Smallest distance between two positions, px.
    allowed : ndarray of bool, shape (H, W), optional
        Positions must fall on True pixels.
    border : float
        Distance kept from the image border, px.
    """
    h, w = shape
    out: list[np.ndarray] = []
    for _ in range(max_tries):
        need = n - len(out)
        if need <= 0:
            break
        cand = np.column_stack([
            rng.uniform(border - 0.5, w - 0.5 - border, 4 * need),
            rng.uniform(border - 0.5, h - 0.5 - border, 4 * need),
        ])
        if allowed is not None:
            ix = np.clip(np.rint(cand[:, 0]).astype(int), 0, w - 1)
            iy = np.clip(np.rint(cand[:, 1]).astype(int), 0, h - 1)
            cand = cand[allowed[iy, ix]]
        for c in cand:
            if len(out) >= n:
                break
            if out and np.min(np.hypot(*(np.asarray(out) - c).T)) < min_separation:
                continue
            out.append(c)
    return np.asarray(out, dtype=float).reshape(-1, 2)


__all__ = ["SyntheticImage", "render_pattern", "spot_image", "random_positions"]
