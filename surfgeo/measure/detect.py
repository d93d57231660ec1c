"""Finding LEED spots in an image: positions to a fraction of a pixel, intensities, uncertainties.

Method
------
1. **Background at the screen scale.** The image is cut into square meshes of about 8
   spot widths (at least 16 px). A first background is the median of each mesh's usable,
   unsaturated pixels (every second row and column); meshes dominated by a bright spot are
   left out. Pixels belonging to spots (step 3 at 2.5 noise units, grown by one spot
   width) are then excluded and each mesh's background is a least-squares plane through
   its remaining pixels, evaluated at the mesh centre (a mesh cut by a mask edge is still
   centred correctly). The mesh grid is smoothed by local weighted quadratic regression
   (W. S. Cleveland and S. J. Devlin, J. Am. Stat. Assoc. 83, 596 (1988)), which fills
   masked meshes, averages the noise of single meshes down and leaves curvature intact,
   and interpolated to every pixel with a cubic spline. Meshes and their statistics follow
   the background estimators of E. Bertin and S. Arnouts, Astron. Astrophys. Suppl. 117,
   393 (1996). Masked pixels are replaced by the background before filtering, so mask
   edges do not ring.
2. **Band-pass at the spot scale.** The image is smoothed with a Gaussian of the spot width
   s and the background is subtracted: a low-pass at the spot scale minus a low-pass at
   the screen scale, as in J. C. Crocker and D. G. Grier, J. Colloid Interface Sci. 179,
   298 (1996). A Gaussian of the spot's own width is the matched filter for a Gaussian spot
   in white noise, so the filtered value at a spot centre divided by its noise is the
   spot's (background-limited) signal-to-noise ratio.
3. **Local maxima above a threshold in robust noise units.** The zero level of the
   filtered image is the smoothed median per mesh; its noise is first 1.4826 x the median
   absolute deviation (MAD) per mesh, then -- with clear spots left out -- the standard
   deviation about the zero level pooled over 3 x 3 meshes and clipped at 3 sigma (pooling
   matters for wide spots, whose correlated noise leaves few independent samples in one
   mesh). In a crowded pattern the wings of the spots inflate this spread (1.3-1.6 x the
   true noise with spots 4-5 widths apart over the whole screen), while the differences
   of pixels two apart still follow the white noise: var = 2 var(pixel), and through the
   filter's noise gain (sum of its squared weights) they predict the band-passed noise.
   When the band-passed noise, median over the meshes at least two meshes inside the
   image, exceeds 1.1 x this prediction, the noise of those meshes is capped at 1.1 x
   the prediction.
   A pixel is a candidate when it is a local maximum of its 3 x 3 neighbourhood
   and lies ``threshold`` noise units above the zero level.
4. **Sub-pixel refinement: iterated Gaussian-weighted centroid.** Each spot's position is
   the fixed point of ``x = sum(w d x) / sum(w d)``, with d the pixels minus the
   background (the mesh background plus the median offset of an annulus around the spot)
   and w a Gaussian of width s centred on the current estimate. The fixed point is the
   maximum of C(x) = sum(w d), found by Newton steps from the parabolic peak of the
   filtered image (a few iterations). It is the maximum of the matched-filtered image, i.e. the
   least-squares Gaussian fit position in background-limited noise. It is chosen over an
   explicit Gaussian fit because it is closed-form and vectorised over all spots, needs
   no starting amplitudes, cannot fail to converge on faint or saturated spots, and its
   error is known in closed form: per axis, for a Gaussian spot of width S (including the
   pixel's 1/12), weight width w, N photons and background variance b per pixel,

       var(x) = [N nu^4 / S^2 + b pi w^4 / 2] (S^2 + w^2)^2 / (N^2 tau^4),
       tau^2 = S^2 w^2 / (S^2 + w^2),  1 / nu^2 = 2 / w^2 + 1 / S^2.

   For w = S this is 16 S^2 / (9 N) + 8 pi S^4 b / N^2: the background term equals that of
   R. E. Thompson, D. R. Larson and W. W. Webb, Biophys. J. 82, 2775 (2002), and the
   photon term is 16/9 of theirs (33 % larger error). This is the ``uncertainty`` reported.
5. **Photometry.** The local background and pixel noise come from the median and MAD of an
   annulus from 4 s to 6 s around the spot. ``intensity`` is the sum over a disc of radius
   3 s (98.9 % of a Gaussian spot's light) minus the background, with its standard error
   ``intensity_error``. ``snr`` is the PSF-weighted intensity divided by its standard error
   (optimal weighting: T. Naylor, MNRAS 296, 339 (1998)); it reaches N / sqrt(N + 4 pi s^2 b).
   Shot noise of the spot itself enters the errors only when the camera gain (ADU per
   detected photon) is known or estimated (photon transfer across meshes: var = g level + c,
   J. R. Janesick, Photon Transfer, SPIE Press (2007)).
6. **Spot width.** ``sigma`` is the width from the weighted second moment, corrected for the
   Gaussian weight and the pixel size; the width used for filtering is the median of these
   over the brightest spots when not given (:func:`estimate_spot_sigma`).
7. **Residual search for spots beside brighter ones** (iterative subtraction of fitted
   spots: P. B. Stetson, Publ. Astron. Soc. Pac. 99, 191 (1987)). A faint spot 3-5 widths
   from a brighter one is, after the matched filter, often only a shoulder of it and no
   local maximum. Each accepted spot is modelled as a Gaussian (the filter width with the
   pixel's 1/12, or its own measured width when snr > 20) whose peak is fitted by least
   squares to its unsaturated pixels; the model, filtered analytically (widths add in
   quadrature), is subtracted from the band-passed image, and the residual near the spots
   is searched for maxima at the same threshold in noise units of step 3, with 3 % of the
   subtracted model added to the noise in quadrature for the mismatch between model and
   spot. When the pattern is crowded (band-passed noise, median over the meshes, more than
   1.1 x what the pixel-to-pixel differences predict for white noise) the noise is first
   measured again on the residual (not above the cap of step 3). Maxima closer than 2
   widths to a fitted spot are left out. New candidates are refined and measured with the
   fitted spots subtracted and kept when they pass the tests of step 4, their aperture
   lies on usable pixels and their own snr reaches the threshold; then the new spots and
   their neighbours are measured again with all other spots subtracted. Up to three
   rounds, while new spots are found.

Coordinates: x right, y down, the centre of the top-left pixel at (0, 0).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy import ndimage as ndi

from surfgeo.errors import InputError
from surfgeo.measure.spotlist import SpotList

#: Default detection threshold, in robust noise units of the matched-filtered image.
DEFAULT_THRESHOLD = 4.5
#: Spot width assumed when it cannot be estimated, px.
FALLBACK_SIGMA = 2.0
#: Aperture radius (spot widths) for the integrated intensity.
APERTURE = 3.0
#: Inner and outer radius (spot widths) of the background annulus.
ANNULUS = (4.0, 6.0)
#: Maxima narrower than this fraction of the spot width (and with snr > 10) are taken for
#: hot pixels and left out (only when the spot width is at least 1 px).
HOT_PIXEL_WIDTH = 0.4
#: Gaussian truncation used by scipy.ndimage.gaussian_filter (its default).
_TRUNCATE = 4.0
#: Width (in meshes) of the Gaussian weight of the local quadratic smoothing of mesh grids.
LOESS_WIDTH = 1.0
_MAD = 1.4826
#: Residual search: new maxima closer than this (spot widths) to a fitted spot are left out.
RESIDUAL_SEPARATION = 2.0
#: Residual search: fraction of the subtracted (filtered) model added to the noise in
#: quadrature, for the mismatch between the Gaussian model and real spots.
RESIDUAL_MODEL_ERROR = 0.03
#: Residual search: at most this many rounds (each with the spots found so far subtracted).
RESIDUAL_ROUNDS = 3
#: Band-passed noise above this multiple (median over the meshes) of the white-noise
#: prediction from pixel differences marks a crowded pattern, whose noise is then measured
#: again on the residual.
CROWDED_NOISE = 1.1
#: In a crowded pattern the band-passed noise per mesh is capped at this multiple of the
#: white-noise prediction from pixel differences.
CAP_NOISE = 1.1


@dataclass(frozen=True, eq=False)
class Detection:
    """Result of :func:`detect_spots`.

    Attributes
    ----------
    spots : SpotList
        The spots, brightest (highest snr) first.
    spot_sigma : float
        Gaussian spot width used for filtering and weights, px.
    sigma_estimated : bool
        True if ``spot_sigma`` was estimated from the image.
    threshold : float
        Detection threshold, robust noise units.
    gain : float or None
        Camera gain used for shot noise (ADU per photon); None if unknown.
    gain_estimated : bool
        True if ``gain`` was estimated from the image (photon transfer).
    mesh_size : int
        Side of the background meshes, px.
    background_level : float
        Median background over the usable meshes, ADU.
    pixel_noise : float
        Median noise per pixel over the usable meshes, ADU.
    candidates : int
        Number of local maxima above the threshold before merging.
    truncated : bool
        True if more candidates than ``max_spots`` were found and only the strongest kept.
    notes : list of str
        Anything the user should know (fallbacks taken).
    """

    spots: SpotList
    spot_sigma: float
    sigma_estimated: bool
    threshold: float
    gain: float | None
    gain_estimated: bool
    mesh_size: int
    background_level: float
    pixel_noise: float
    candidates: int
    truncated: bool = False
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary and spots."""
        return {
            "spot_sigma_px": self.spot_sigma,
            "spot_sigma_estimated": self.sigma_estimated,
            "threshold_noise_units": self.threshold,
            "gain_adu_per_photon": self.gain,
            "gain_estimated": self.gain_estimated,
            "mesh_size_px": self.mesh_size,
            "background_level": self.background_level,
            "pixel_noise": self.pixel_noise,
            "candidates": self.candidates,
            "truncated": self.truncated,
            "notes": list(self.notes),
            **self.spots.to_dict(),
        }


# ---------------------------------------------------------------------------------------
# small numerical helpers


def gaussian_kernel_norm2(sigma: float) -> float:
    """Sum of squared weights of the 2D kernel of ``scipy.ndimage.gaussian_filter(sigma)``.

    The noise of white noise of unit variance after filtering is the square root of this.
    """
    radius = int(_TRUNCATE * sigma + 0.5)
    x = np.arange(-radius, radius + 1)
    k = np.exp(-0.5 * x**2 / sigma**2)
    k /= k.sum()
    return float(np.sum(k**2) ** 2)


def centroid_variance(photons, width, weight_width, background_var):
    """Per-axis variance (px^2) of the iterated Gaussian-weighted centroid.

    Parameters
    ----------
    photons : array_like
        Detected photons N of the spot (ADU divided by the gain).
    width : array_like
        Gaussian width S of the spot including the pixel (S^2 = s^2 + 1/12), px.
    weight_width : float
        Width w of the Gaussian weight, px.
    background_var : array_like
        Background noise variance per pixel b, photons^2.

    Returns
    -------
    ndarray
        [N nu^4 / S^2 + b pi w^4 / 2] (S^2 + w^2)^2 / (N^2 tau^4), see the module docstring.
    """
    n = np.asarray(photons, dtype=float)
    s2 = np.asarray(width, dtype=float) ** 2
    w2 = float(weight_width) ** 2
    tau2 = s2 * w2 / (s2 + w2)
    nu2 = 1.0 / (2.0 / w2 + 1.0 / s2)
    return (n * nu2**2 / s2 + np.asarray(background_var) * np.pi * w2**2 / 2) * (s2 + w2) ** 2 / (
        n**2 * tau2**2
    )


def _sorted_median_mad(blocks: np.ndarray, ok: np.ndarray, count: np.ndarray):
    """Median and MAD along the last axis over entries where ``ok``; ``count`` = ok.sum(-1)."""
    big = np.float32(np.inf)
    v = np.sort(np.where(ok, blocks, big), axis=-1)
    n = np.maximum(count, 1)
    lo = np.take_along_axis(v, ((n - 1) // 2)[..., None], axis=-1)[..., 0]
    hi = np.take_along_axis(v, (n // 2)[..., None], axis=-1)[..., 0]
    med = 0.5 * (lo + hi)
    dev = np.sort(np.where(ok, np.abs(blocks - med[..., None]), big), axis=-1)
    lo = np.take_along_axis(dev, ((n - 1) // 2)[..., None], axis=-1)[..., 0]
    hi = np.take_along_axis(dev, (n // 2)[..., None], axis=-1)[..., 0]
    return med, 0.5 * (lo + hi)


def _mesh_stats(a: np.ndarray, o: np.ndarray, m: int):
    """Median, MAD and weight per m x m mesh of ``a`` over the entries where ``o``.

    The weight is the fraction of the mesh used, or 0 when fewer than a quarter (or 8).
    """
    h, w = a.shape[0] // m, a.shape[1] // m
    blocks = a.reshape(h, m, w, m).transpose(0, 2, 1, 3).reshape(h, w, m * m)
    okb = o.reshape(h, m, w, m).transpose(0, 2, 1, 3).reshape(h, w, m * m)
    count = okb.sum(axis=-1)
    med, mad = _sorted_median_mad(blocks, okb, count)
    usable = count >= max(8, int(0.25 * m * m))
    return med.astype(np.float64), mad.astype(np.float64), np.where(usable, count / (m * m), 0.0)


def _mesh_planes(a: np.ndarray, o: np.ndarray, m: int, b: int, level: np.ndarray, noise: np.ndarray,
                 step: int = 2):
    """Least-squares plane per m x m mesh of the subsampled image ``a`` over entries ``o``.

    ``a`` holds every second row and column, so its entries sit at full-resolution offsets
    0, 2, ..., b - 2 inside each mesh of side b = 2 m.
    Returns the plane's value at the mesh centre and a weight: the fraction of the mesh
    used (0 when too few entries).
    Entries more than 5 noise units from ``level`` (hot pixels) are left out. For a fully
    usable mesh this is the mean; for a mesh cut by a mask edge the plane carries the
    value to the centre.
    """
    h, w = a.shape[0] // m, a.shape[1] // m
    v = a.reshape(h, m, w, m).transpose(0, 2, 1, 3).reshape(h, w, m * m).astype(np.float64)
    ok = o.reshape(h, m, w, m).transpose(0, 2, 1, 3).reshape(h, w, m * m)
    ok = ok & (np.abs(v - level[..., None]) <= 5 * noise[..., None])
    off = step * np.arange(m) - (b - 1) / 2.0
    X = np.tile(off, m)
    Y = np.repeat(off, m)
    wgt = ok.astype(np.float64)
    v = np.where(ok, v, 0.0)  # masked entries may hold NaN
    basis = (np.ones_like(X), X, Y)
    A = np.empty((h, w, 3, 3))
    r = np.empty((h, w, 3))
    for i, bi in enumerate(basis):
        r[..., i] = (wgt * v) @ bi
        for j, bj in enumerate(basis):
            A[..., i, j] = wgt @ (bi * bj)
    n = A[..., 0, 0]
    usable = n >= max(8, int(0.25 * m * m))
    A[~usable] = np.eye(3)
    r[~usable] = 0.0
    det = np.linalg.det(A)
    usable &= np.abs(det) > 1e-9 * np.maximum(np.abs(A[..., 1, 1] * A[..., 2, 2]), 1.0) * np.maximum(n, 1.0)
    A[~usable] = np.eye(3)
    r[~usable] = 0.0
    coef = np.linalg.solve(A, r[..., None])[..., 0]
    return coef[..., 0], np.where(usable, n / (m * m), 0.0)


@functools.lru_cache(maxsize=8)
def _loess_maps(q: float, keys_w: tuple, keys_v: tuple) -> tuple[np.ndarray, np.ndarray]:
    """Linear maps from stacked moments to the normal matrix (flattened) and right-hand side.

    Basis: 1, u, v, u^2 + q, u v, v^2 + q; moments are keyed by the exponents (a, c) of u^a v^c.
    """
    basis = [{(0, 0): 1.0}, {(1, 0): 1.0}, {(0, 1): 1.0}, {(2, 0): 1.0, (0, 0): q}, {(1, 1): 1.0},
             {(0, 2): 1.0, (0, 0): q}]
    nb = len(basis)
    iw = {k: n for n, k in enumerate(keys_w)}
    iv = {k: n for n, k in enumerate(keys_v)}
    ca = np.zeros((len(keys_w), nb * nb))
    cr = np.zeros((len(keys_v), nb))
    for i, pi in enumerate(basis):
        for (a1, c1), k1 in pi.items():
            cr[iv[(a1, c1)], i] += k1
            for j, pj in enumerate(basis):
                for (a2, c2), k2 in pj.items():
                    ca[iw[(a1 + a2, c1 + c2)], i * nb + j] += k1 * k2
    return ca, cr


def _loess_grid(values: np.ndarray, weights: np.ndarray, width: float = LOESS_WIDTH,
                mesh_means: bool = True) -> np.ndarray:
    """Smooth a mesh grid by local weighted quadratic regression, returning centre values.

    At each mesh a quadratic in the mesh offsets (u, v) is fitted to the neighbouring mesh
    values with weights ``weights`` times a Gaussian of ``width`` meshes (locally weighted
    regression: W. S. Cleveland and S. J. Devlin, J. Am. Stat. Assoc. 83, 596 (1988); as a
    normalised convolution with a polynomial basis). Its constant term is the smoothed
    value. A quadratic surface passes unchanged, noise is averaged down, meshes with zero
    weight (masked) are filled in. With ``mesh_means`` the data are taken as averages over
    each mesh square, so the fitted quadratic is the one whose square averages match (the
    u^2 and v^2 basis terms gain 1/12), giving the value *at* the mesh centre.
    Where the weighted support is thin the fit falls back to a plane, then a constant.
    """
    h, w = values.shape
    wv = np.where(weights > 0, weights, 0.0).astype(np.float64)
    val = np.where(wv > 0, values, 0.0).astype(np.float64)
    r = int(math.ceil(3 * width))
    off = np.arange(-r, r + 1, dtype=np.float64)
    g1 = np.exp(-0.5 * off**2 / width**2)
    q = 1.0 / 12.0 if mesh_means else 0.0

    def moments(field, order):
        # correlate with g(u) g(v) u^a v^b for all a + b <= order (separable)
        rows = [ndi.correlate1d(field, g1 * off**a, axis=0, mode="constant") for a in range(order + 1)]
        return {(a, c): ndi.correlate1d(rows[a], g1 * off**c, axis=1, mode="constant")
                for a in range(order + 1) for c in range(order + 1 - a)}

    mw = moments(wv, 4)
    mv = moments(wv * val, 2)
    keys_w, keys_v = list(mw), list(mv)
    ca, cr = _loess_maps(q, tuple(keys_w), tuple(keys_v))
    nb = cr.shape[1]
    A = (np.stack([mw[k] for k in keys_w], axis=-1) @ ca).reshape(h, w, nb, nb)
    rhs = np.stack([mv[k] for k in keys_v], axis=-1) @ cr
    # fall back to lower orders where the normal equations are ill-conditioned (Hadamard
    # ratio det(A) / prod(diag A) tiny: too little or too one-sided support)
    support = mw[(0, 0)]
    level = np.where(support > 1e-9, 1, 0)

    def well_posed(k, where):
        Ak = A[where][:, :k, :k]
        d = np.sqrt(np.maximum(np.einsum("nii->ni", Ak), 1e-300))
        return np.linalg.det(Ak / (d[:, :, None] * d[:, None, :])) > 1e-5

    # meshes whose whole neighbourhood carries weight are well posed; test only the others
    typical = max(float(np.median(wv)), 1e-300)
    interior = ndi.minimum_filter(wv, size=2 * r + 1, mode="constant") > 0.25 * typical
    level[interior] = nb
    cand = (level > 0) & ~interior
    if cand.any():
        good = np.zeros((h, w), dtype=bool)
        good[cand] = well_posed(nb, cand)
        level[good] = nb
        rest = cand & ~good
        if rest.any():
            good3 = np.zeros((h, w), dtype=bool)
            good3[rest] = well_posed(3, rest)
            level[good3] = 3
    out = np.zeros((h, w))
    for k in (nb, 3, 1):
        sel = level == k
        if not sel.any():
            continue
        Ak = A[sel][:, :k, :k]
        ridge = 1e-9 * np.einsum("nii->n", Ak)[:, None, None] * np.eye(k)
        out[sel] = np.linalg.solve(Ak + ridge, rhs[sel][:, :k, None])[:, 0, 0]
    if (level == 0).any():
        known = level > 0
        out = _fill_meshes(out, known) if known.any() else np.full((h, w), float(np.median(values)))
    return out


def _sources(s_sub: np.ndarray, zero: np.ndarray, noise: np.ndarray, k: float, grow: float, m: int):
    """Subsampled pixels more than k noise units above the zero level, grown by ``grow`` px."""
    hb, wb = zero.shape
    thr = (zero + k * noise).astype(np.float32)
    src = (s_sub.reshape(hb, m, wb, m) > thr[:, None, :, None]).reshape(s_sub.shape)
    steps = int(round(grow / 2))
    if steps > 0 and src.any():
        src = ndi.binary_dilation(src, iterations=steps)
    return src


def _pooled_noise(dev: np.ndarray, ok: np.ndarray, guess: np.ndarray, m: int,
                  pool: bool = True) -> np.ndarray:
    """Standard deviation of ``dev`` per mesh, pooled over the 3 x 3 neighbouring meshes.

    Entries beyond 3 ``guess`` (per mesh) are clipped away and the result is corrected for
    the clipping (a normal distribution cut at +-3 sigma keeps 0.9733 of its variance).
    Pooling gives enough independent samples even when the spots -- and so the
    correlation length of the band-passed noise -- are a sizeable fraction of a mesh.
    NaN where no entries are left.
    """
    hb, wb = guess.shape
    d = dev.reshape(hb, m, wb, m)
    keep = ok.reshape(hb, m, wb, m) & (np.abs(d) <= 3 * guess[:, None, :, None])
    dk = np.where(keep, d, 0.0)
    n = keep.sum(axis=3).sum(axis=1).astype(np.float64)
    s1 = dk.sum(axis=3, dtype=np.float64).sum(axis=1)
    s2 = (dk * dk).sum(axis=3, dtype=np.float64).sum(axis=1)
    if pool:
        n, s1, s2 = (ndi.uniform_filter(a, size=3, mode="constant") * 9 for a in (n, s1, s2))
    with np.errstate(divide="ignore", invalid="ignore"):
        var = s2 / n - (s1 / n) ** 2
    var = np.where(n >= 8, var, np.nan)
    return np.sqrt(np.maximum(var, 0) / 0.97334)


def _smooth_meshes(grid: np.ndarray, weights: np.ndarray, width: float = 1.0) -> np.ndarray:
    """Normalised Gaussian convolution of a mesh grid (``width`` meshes); zero-weight meshes filled."""
    wv = np.maximum(np.asarray(weights, dtype=float), 0.0)
    num = ndi.gaussian_filter(np.where(wv > 0, grid, 0.0) * wv, width, mode="constant")
    den = ndi.gaussian_filter(wv, width, mode="constant")
    out = np.where(den > 1e-9, num / np.maximum(den, 1e-300), np.nan)
    known = np.isfinite(out)
    return _fill_meshes(out, known) if known.any() else np.asarray(grid, dtype=float)


def _fill_meshes(grid: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """Replace unusable mesh values by the nearest usable one."""
    if usable.all():
        return grid
    _, (iy, ix) = ndi.distance_transform_edt(~usable, return_indices=True)
    return grid[iy, ix]


def _bspline_weights(t: np.ndarray) -> list[np.ndarray]:
    """Cubic B-spline weights of the four neighbours (offsets -1, 0, 1, 2) at fraction t."""
    return [(1 - t) ** 3 / 6, (3 * t**3 - 6 * t**2 + 4) / 6, (-3 * t**3 + 3 * t**2 + 3 * t + 1) / 6, t**3 / 6]


class _Upsampler:
    """Cubic spline interpolation from mesh centres to pixel centres, as sparse matrices.

    The mesh grid is first extended by two rows and columns on every side, continued
    linearly, so that pixels beyond the outer mesh centres are extrapolated smoothly; its
    cubic B-spline coefficients (``scipy.ndimage.spline_filter``) are then evaluated with
    the four local B-spline weights per axis. The result interpolates the mesh values
    exactly and is fourth-order accurate (M. Unser, IEEE Signal Process. Mag. 16(6), 22
    (1999)).
    """

    PAD = 2

    def __init__(self, n_rows: int, n_cols: int, hb: int, wb: int, b: int):
        self.hb, self.wb = hb, wb
        self.ry = self._matrix(n_rows, hb, b)
        self.rx = self._matrix(n_cols, wb, b)
        self.ry_sub = self.ry[::2]
        self.rx_sub = self.rx[::2]

    @classmethod
    def _matrix(cls, n_pix: int, n_mesh: int, b: int):
        from scipy import sparse

        u = (np.arange(n_pix) - (b - 1) / 2.0) / b + cls.PAD
        i0 = np.floor(u).astype(int)
        w = _bspline_weights(u - i0)
        cols = np.concatenate([np.clip(i0 + d, 0, n_mesh + 2 * cls.PAD - 1) for d in (-1, 0, 1, 2)])
        rows = np.tile(np.arange(n_pix), 4)
        return sparse.csr_matrix((np.concatenate(w).astype(np.float32), (rows, cols)),
                                 shape=(n_pix, n_mesh + 2 * cls.PAD))

    @classmethod
    def _extend(cls, grid: np.ndarray) -> np.ndarray:
        g = np.asarray(grid, dtype=np.float64)
        for axis in (0, 1):
            g = np.moveaxis(g, axis, 0)
            if g.shape[0] >= 2:
                lo = [g[0] + k * (g[0] - g[1]) for k in (cls.PAD, 1)]
                hi = [g[-1] + k * (g[-1] - g[-2]) for k in (1, cls.PAD)]
            else:
                lo, hi = [g[0]] * cls.PAD, [g[-1]] * cls.PAD
            g = np.moveaxis(np.concatenate([np.stack(lo), g, np.stack(hi)]), 0, axis)
        return ndi.spline_filter(g, order=3, mode="mirror").astype(np.float32)

    def full(self, grid: np.ndarray) -> np.ndarray:
        """The grid interpolated to every pixel, (n_rows, n_cols) float32."""
        g = self._extend(grid)
        return self.ry @ np.ascontiguousarray((self.rx @ g.T).T)

    def sub(self, grid: np.ndarray) -> np.ndarray:
        """The grid interpolated to every second row and column."""
        g = self._extend(grid)
        return self.ry_sub @ np.ascontiguousarray((self.rx_sub @ g.T).T)


def _interp_points(grid: np.ndarray, y: np.ndarray, x: np.ndarray, b: int) -> np.ndarray:
    """Bilinear interpolation of a mesh grid at pixel coordinates (y, x)."""
    h, w = grid.shape
    u = np.clip((y - (b - 1) / 2.0) / b, 0, h - 1)
    v = np.clip((x - (b - 1) / 2.0) / b, 0, w - 1)
    i0 = np.minimum(np.floor(u).astype(int), max(h - 2, 0))
    j0 = np.minimum(np.floor(v).astype(int), max(w - 2, 0))
    fu, fv = u - i0, v - j0
    i1, j1 = np.minimum(i0 + 1, h - 1), np.minimum(j0 + 1, w - 1)
    return ((1 - fu) * (1 - fv) * grid[i0, j0] + (1 - fu) * fv * grid[i0, j1]
            + fu * (1 - fv) * grid[i1, j0] + fu * fv * grid[i1, j1])


def _mesh_size(sigma: float, shape: tuple[int, int], mesh_size: int | None) -> int:
    if mesh_size is not None:
        b = int(mesh_size)
        if b < 4:
            raise InputError(f"the background mesh size must be at least 4 px, got {mesh_size}.")
    else:
        b = max(16, int(math.ceil(8 * sigma)))
    b += b % 2
    # no larger than the image (its shorter side): a mesh must hold enough usable pixels
    return min(b, max(4, 2 * (min(shape) // 2)))


# ---------------------------------------------------------------------------------------
# the filtering front end


@dataclass
class _Front:
    filled: np.ndarray  # padded image, masked pixels replaced by the background
    background: np.ndarray  # padded background (mesh medians interpolated)
    valid: np.ndarray  # padded usable pixels (finite, unmasked, inside the image)
    saturated: np.ndarray  # padded saturated pixels
    bg_mesh: np.ndarray
    s_med: np.ndarray  # median of the filtered image per mesh
    s_noise: np.ndarray  # robust noise of the filtered image per mesh (smoothed)
    raw_noise: np.ndarray  # the same before smoothing
    pixel_var: np.ndarray  # variance of single pixels per mesh (pixel differences), or NaN
    mesh_fraction: np.ndarray  # fraction of each mesh's pixels that are usable
    usable_mesh: np.ndarray
    rows: np.ndarray  # candidate local maxima (padded coordinates = image coordinates)
    cols: np.ndarray
    stat: np.ndarray  # significance in noise units
    peak: np.ndarray  # sub-pixel peak from a parabola through the 3 x 3 neighbourhood [x, y]
    b: int
    filtered: np.ndarray | None = None  # the band-passed image (padded)
    up: Any = None  # the _Upsampler from meshes to pixels
    capped: bool = False  # crowded: s_noise capped by the pixel-difference prediction


def _front(
    data: np.ndarray,
    usable: np.ndarray,
    saturated: np.ndarray,
    sigma: float,
    b: int,
    threshold: float,
    quick: bool = False,
) -> _Front:
    """Background, band-pass, noise and candidate maxima (method steps 1-3).

    ``quick`` (used for the provisional pass of the width estimate) keeps the first,
    median-based background and the per-mesh MAD noise.
    """
    h, w = data.shape
    hp, wp = -(-h // b) * b, -(-w // b) * b
    m = b // 2
    if (hp, wp) == (h, w) and data.dtype == np.float32:
        img = data
    else:
        img = np.zeros((hp, wp), dtype=np.float32)
        img[:h, :w] = data
    if (hp, wp) == (h, w):
        valid, sat = usable, saturated
    else:
        valid = np.zeros((hp, wp), dtype=bool)
        valid[:h, :w] = usable
        sat = np.zeros((hp, wp), dtype=bool)
        sat[:h, :w] = saturated
    any_sat = bool(saturated.any())
    # mesh statistics use every second row and column
    ok_sub = valid[::2, ::2] & ~sat[::2, ::2] if any_sat else valid[::2, ::2]

    # background, first pass: mesh medians; meshes dominated by bright spots (far above the
    # median of their 3 x 3 neighbourhood) take that median, then a 3 x 3 median filter
    img_sub = img[::2, ::2]
    bg0, mad0, w0 = _mesh_stats(img_sub, ok_sub, m)
    usable_mesh = w0 > 0
    if not usable_mesh.any():
        raise InputError("too few usable pixels to estimate the background; check the masks.")
    bg0 = _fill_meshes(bg0, usable_mesh)
    # a noise floor relative to the level: a noise-free (e.g. constant) image must not have
    # zero noise, which would reject every pixel of the background planes below
    floor = 1e-6 * max(1.0, float(np.max(np.abs(bg0))))
    pix_noise0 = np.maximum(_fill_meshes(_MAD * mad0, usable_mesh), floor)
    around = ndi.median_filter(bg0, size=3, mode="nearest")
    bright = bg0 - around > 3 * 1.25 * pix_noise0 / m
    if quick:
        bg0 = ndi.median_filter(np.where(bright, around, bg0), size=3, mode="nearest")
    else:
        bg0 = _loess_grid(bg0, np.where(bright, 0.0, w0))
    hb, wb = bg0.shape
    up = _Upsampler(hp, wp, hb, wb, b)
    all_valid = bool(valid.all())
    filled = img if all_valid else np.where(valid, img, up.full(bg0))

    smooth = ndi.gaussian_filter(filled, sigma)
    # pixels of spots (more than 2.5 robust noise units up in the band-passed image, grown
    # by one spot width) are left out; the background is measured again without them: a
    # plane fit per mesh, smoothed by local quadratic regression, interpolated by cubic
    # convolution
    s_sub = smooth[::2, ::2] - up.sub(bg0)
    med, mad, wt = _mesh_stats(s_sub, ok_sub, m)
    wt = wt * usable_mesh
    zero = _fill_meshes(med, wt > 0) if (wt > 0).any() else np.zeros_like(med)
    noise = np.maximum(_fill_meshes(_MAD * mad, wt > 0) if (wt > 0).any() else pix_noise0, floor)
    if quick:  # the first background and the per-mesh MAD noise are good enough
        background = up.full(bg0)
        np.subtract(smooth, background, out=smooth)
        bg, s_med, s_noise, raw_noise = bg0, zero, noise, noise
        pixel_var = np.full(bg0.shape, np.nan)
        capped = False
    else:
        ok = ok_sub & ~_sources(s_sub, zero, noise, 2.5, sigma, m)
        plane, wt = _mesh_planes(img_sub, ok & ~sat[::2, ::2] if any_sat else ok, m, b, bg0, pix_noise0)
        bg = _loess_grid(plane, wt * (np.median(pix_noise0) / pix_noise0) ** 2)
        background = up.full(bg)
        np.subtract(smooth, background, out=smooth)  # now the band-passed image
        s_sub = smooth[::2, ::2]

        # the noise of the band-passed image: leave out only clear spots (above the
        # detection threshold, grown by two spot widths) so that noise peaks do not bias it
        # low; the standard deviation about the zero level, pooled over 3 x 3 meshes,
        # clipped at 3 sigma
        def zero_level(ok_now):
            med, mad, wt = _mesh_stats(s_sub, ok_now, m)
            wt = wt * usable_mesh
            if not (wt > 0).any():
                wt = usable_mesh.astype(float)
            guess = np.maximum(_fill_meshes(_MAD * mad, wt > 0), floor)
            return _fill_meshes(med, wt > 0), guess, wt

        s_med, s_noise, wt = zero_level(ok)
        ok = ok_sub & ~_sources(s_sub, s_med, s_noise, max(threshold, 4.0), 2 * sigma, m)
        s_med, raw_noise, wt = zero_level(ok)
        s_med = _smooth_meshes(s_med, wt)
        dev = s_sub - up.sub(s_med)
        for _ in range(2):
            raw_noise = _pooled_noise(dev, ok, raw_noise, m)
            raw_noise = np.maximum(_fill_meshes(raw_noise, np.isfinite(raw_noise) & (wt > 0)), floor)
        s_noise = _smooth_meshes(raw_noise, (wt > 0).astype(float))
        # single-pixel variance for the photon-transfer gain: differences of horizontal
        # neighbours two pixels apart (independent for white noise; var = 2 sigma^2)
        diff = np.zeros_like(img_sub)
        diff[:, :-1] = img_sub[:, 1:] - img_sub[:, :-1]
        both = ok.copy()
        both[:, :-1] &= ok[:, 1:]
        both[:, -1] = False
        spread = np.sqrt(2) * noise / np.sqrt(gaussian_kernel_norm2(sigma))
        for _ in range(2):  # the second pass clips at 3 of its own sigma
            spread = _pooled_noise(diff, both, np.where(np.isfinite(spread), spread, np.inf), m, pool=False)
        pixel_var = spread**2 / 2
        s_noise, capped = _cap_noise(s_noise, pixel_var, sigma, usable_mesh, (h, w), b)

    rows, cols, stat, peak = _maxima(smooth, s_med, s_noise, valid, all_valid, threshold, b, (h, w))
    return _Front(filled=filled, background=background, valid=valid, saturated=sat, bg_mesh=bg,
                  s_med=s_med, s_noise=s_noise, raw_noise=raw_noise, pixel_var=pixel_var, mesh_fraction=w0,
                  usable_mesh=usable_mesh,
                  rows=rows, cols=cols, stat=stat, peak=peak, b=b, filtered=smooth, up=up, capped=capped)


def _cap_noise(s_noise: np.ndarray, pixel_var: np.ndarray, sigma: float, usable_mesh: np.ndarray,
               shape: tuple[int, int], b: int) -> tuple[np.ndarray, bool]:
    """Cap the band-passed noise per mesh at what the pixel-to-pixel differences predict.

    The wings of spots inflate the spread of the band-passed image in crowded meshes, but
    barely the differences of pixels two apart, whose variance is twice the pixel variance
    for white noise; through the filter's noise gain (:func:`gaussian_kernel_norm2`) that
    predicts the band-passed noise. The pattern counts as crowded when the band-passed
    noise, median over the meshes, exceeds ``CROWDED_NOISE`` times the prediction; then
    each mesh is capped at ``CAP_NOISE`` times the prediction (smoothed over meshes like
    the noise itself). Only meshes at least two meshes inside the image take part: near
    the border the reflecting filter and the 3 x 3 pooling raise the band-passed noise above
    the white-noise gain. Returns the noise and whether it was capped.
    """
    hb, wb = s_noise.shape
    inner = np.zeros((hb, wb), dtype=bool)
    inner[2:shape[0] // b - 2, 2:shape[1] // b - 2] = True
    expected = np.sqrt(pixel_var * gaussian_kernel_norm2(sigma))
    known = usable_mesh & np.isfinite(expected) & (expected > 0)
    if not (known & inner).any():
        return s_noise, False
    if float(np.median(s_noise[known & inner] / expected[known & inner])) <= CROWDED_NOISE:
        return s_noise, False
    expected = _smooth_meshes(np.where(known, expected, 0.0), known.astype(float))
    return np.where(inner, np.minimum(s_noise, CAP_NOISE * expected), s_noise), True


def _maxima(smooth: np.ndarray, s_med: np.ndarray, s_noise: np.ndarray, valid: np.ndarray, all_valid: bool,
            threshold: float, b: int, shape: tuple[int, int], region: np.ndarray | None = None,
            extra_noise: np.ndarray | None = None, extra_scale: float = 1.0):
    """Local maxima of the band-passed (padded) image ``threshold`` noise units above zero (step 3).

    Only pixels in ``region`` (if given) are searched; ``extra_noise`` (a padded image, if
    given, times ``extra_scale``) is added in quadrature to the noise. Returns rows, cols,
    significance and the parabolic sub-pixel peak [x, y].
    """
    h, w = shape
    hp, wp = smooth.shape
    hb, wb = s_med.shape
    # candidates: above a conservative piecewise-constant threshold, then exact test
    thr = ndi.minimum_filter(s_med + 0.9 * threshold * s_noise, size=3, mode="nearest").astype(np.float32)
    flat = smooth.ravel()
    # maxima on masked pixels next to usable ones are kept for now: a spot with a few dead
    # pixels may peak on one; after refinement only spots whose centre lies mostly on
    # usable pixels remain
    if region is None:
        cand = (smooth.reshape(hb, b, wb, b) > thr[:, None, :, None]).reshape(hp, wp)
        cand[0, :] = False
        cand[:, 0] = False
        cand[h - 1:, :] = False
        cand[:, w - 1:] = False
        idx = np.flatnonzero(cand)
    else:  # only the pixels of the region (few)
        idx = np.flatnonzero(region)
        r_, c_ = np.divmod(idx, wp)
        inner = (r_ > 0) & (c_ > 0) & (r_ < h - 1) & (c_ < w - 1)
        idx, r_, c_ = idx[inner], r_[inner], c_[inner]
        idx = idx[flat[idx] > thr[r_ // b, c_ // b]]
    v = flat[idx]
    is_max = np.ones(idx.shape, dtype=bool)
    for off in (-wp - 1, -wp, -wp + 1, -1):
        is_max &= v > flat[idx + off]
    for off in (1, wp - 1, wp, wp + 1):
        is_max &= v >= flat[idx + off]
    idx = idx[is_max]
    if not all_valid:  # on a masked pixel: keep only next to usable ones (dead pixels)
        vflat = valid.ravel()
        near = vflat[idx].copy()
        for off in (-wp - 1, -wp, -wp + 1, -1, 1, wp - 1, wp, wp + 1):
            near |= vflat[idx + off]
        idx = idx[near]
    rows, cols = np.divmod(idx, wp)
    # parabolic sub-pixel peak of the filtered image: its position starts the refinement,
    # its height (not the pixel's) is compared with the threshold
    c = flat[idx].astype(np.float64)
    l, r = flat[idx - 1], flat[idx + 1]
    u, d = flat[idx - wp], flat[idx + wp]
    with np.errstate(divide="ignore", invalid="ignore"):
        cx, cy = l - 2 * c + r, u - 2 * c + d
        dx = np.where(cx < 0, 0.5 * (l - r) / cx, 0.0)
        dy = np.where(cy < 0, 0.5 * (u - d) / cy, 0.0)
    dx = np.clip(np.nan_to_num(dx), -0.5, 0.5)
    dy = np.clip(np.nan_to_num(dy), -0.5, 0.5)
    top = c - 0.5 * (cx * dx**2 + cy * dy**2)  # c + the parabolas' rise to their vertices
    med = _interp_points(s_med, rows, cols, b)
    noise = _interp_points(s_noise, rows, cols, b)
    if extra_noise is not None:
        noise = np.hypot(noise, extra_scale * extra_noise[rows, cols])
    stat = (top - med) / noise
    keep = stat > threshold
    rows, cols, stat = rows[keep], cols[keep], stat[keep]
    peak = np.column_stack([cols + dx[keep], rows + dy[keep]])
    return rows, cols, stat, peak


# ---------------------------------------------------------------------------------------
# refinement and photometry on patches around the candidates


@dataclass
class _Patches:
    values: np.ndarray  # (K, P, P) pixel values minus the background (masked pixels: 0)
    valid: np.ndarray  # (K, P, P)
    saturated: np.ndarray  # (K, P, P)
    X: np.ndarray  # (K, 1, P) column coordinates
    Y: np.ndarray  # (K, P, 1) row coordinates


def _patches(image, valid, saturated, background, rows, cols, half: int, shape) -> _Patches:
    """(2 half + 1)^2 patches of ``image - background`` around (rows, cols)."""
    h, w = shape
    off = np.arange(-half, half + 1)
    rr = rows[:, None] + off[None, :]
    cc = cols[:, None] + off[None, :]
    inr = (rr >= 0) & (rr < h)
    inc = (cc >= 0) & (cc < w)
    ri = np.clip(rr, 0, h - 1)[:, :, None]
    ci = np.clip(cc, 0, w - 1)[:, None, :]
    inside = inr[:, :, None] & inc[:, None, :]
    values = image[ri, ci].astype(np.float64)
    if background is not None:
        values -= background[ri, ci]
    return _Patches(
        values=values,
        valid=valid[ri, ci] & inside,
        saturated=saturated[ri, ci] & inside,
        X=cc[:, None, :].astype(np.float64),
        Y=rr[:, :, None].astype(np.float64),
    )


def _ring_stats(p: _Patches, x: np.ndarray, y: np.ndarray, r_in: float, r_out: float):
    """Median and robust noise (1.4826 MAD) of the usable pixels in an annulus; and the count."""
    d2 = (p.X - x[:, None, None]) ** 2 + (p.Y - y[:, None, None]) ** 2
    ring = (d2 >= r_in**2) & (d2 <= r_out**2) & p.valid & ~p.saturated
    k = ring.shape[0]
    count = ring.reshape(k, -1).sum(axis=1)
    med, mad = _sorted_median_mad(p.values.reshape(k, -1), ring.reshape(k, -1), count)
    return med, _MAD * mad, count


def _weighted_centroid(p: _Patches, d: np.ndarray, x: np.ndarray, y: np.ndarray, w: float,
                       iterations: int = 20, tol: float = 1e-4):
    """Iterated Gaussian-weighted centroid; returns x, y and a convergence flag.

    The fixed point of ``x = sum(g d x) / sum(g d)`` (g a Gaussian of width w centred on x)
    is a stationary point of C(x) = sum(g d). It is found as the local maximum of C by
    Newton steps (gradient and Hessian of C in closed form); where C is not concave the
    step is the plain centroid shift. Steps are limited to 1 px.
    """
    x, y = x.astype(float).copy(), y.astype(float).copy()
    active = np.arange(x.size)
    converged = np.zeros(x.size, dtype=bool)
    dv = d * p.valid
    inv = -0.5 / w**2
    for _ in range(iterations):
        if active.size == 0:
            break
        U = p.X[active] - x[active, None, None]  # (k, 1, P)
        V = p.Y[active] - y[active, None, None]  # (k, P, 1)
        e = dv[active] * np.exp(inv * V**2) * np.exp(inv * U**2)
        ex = e.sum(axis=1)  # (k, P) summed over rows
        ey = e.sum(axis=2)  # (k, P) summed over columns
        u, v = U[:, 0, :], V[:, :, 0]
        s0 = ex.sum(axis=1)
        su = (ex * u).sum(axis=1)
        sv = (ey * v).sum(axis=1)
        suu = (ex * u * u).sum(axis=1)
        svv = (ey * v * v).sum(axis=1)
        suv = (np.einsum("kij,ki->kj", e, v) * u).sum(axis=1)
        # gradient and Hessian of C times w^2
        gx, gy = su, sv
        hxx = suu / w**2 - s0
        hyy = svv / w**2 - s0
        hxy = suv / w**2
        det = hxx * hyy - hxy**2
        concave = (hxx < 0) & (det > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            nx = -(hyy * gx - hxy * gy) / det
            ny = -(-hxy * gx + hxx * gy) / det
            cx = np.where(s0 > 0, su / s0, 0.0)
            cy = np.where(s0 > 0, sv / s0, 0.0)
        step_x = np.where(concave, nx, cx)
        step_y = np.where(concave, ny, cy)
        step_x = np.where(np.isfinite(step_x), step_x, 0.0)
        step_y = np.where(np.isfinite(step_y), step_y, 0.0)
        norm = np.hypot(step_x, step_y)
        scale = np.where(norm > 1.0, 1.0 / np.maximum(norm, 1e-300), 1.0)
        step_x, step_y = step_x * scale, step_y * scale
        x[active] += step_x
        y[active] += step_y
        done = (np.abs(step_x) < tol) & (np.abs(step_y) < tol) & concave
        converged[active[done]] = True
        active = active[~done]
    return x, y, converged


def _gaussian_fit(p: _Patches, d: np.ndarray, x: np.ndarray, y: np.ndarray, sigma: float,
                  sel: np.ndarray, iterations: int = 15):
    """Least-squares fit of A exp(-r^2 / 2 sigma^2) at (x, y) to the usable pixels of the
    selected patches (Gauss-Newton with steps limited to 1 px); returns the new x, y."""
    idx = np.nonzero(sel)[0]
    X, Y, V = p.X[idx], p.Y[idx], p.valid[idx]
    D = d[idx] * V
    cx, cy = x[idx].astype(float).copy(), y[idx].astype(float).copy()
    for _ in range(iterations):
        u, v = X - cx[:, None, None], Y - cy[:, None, None]
        g = np.exp(-0.5 * (u**2 + v**2) / sigma**2) * V
        amp = (g * D).sum(axis=(1, 2)) / np.maximum((g * g).sum(axis=(1, 2)), 1e-300)
        res = D - amp[:, None, None] * g
        jx = amp[:, None, None] * g * u / sigma**2  # d model / d x
        jy = amp[:, None, None] * g * v / sigma**2
        jxx, jyy, jxy = (jx * jx).sum(axis=(1, 2)), (jy * jy).sum(axis=(1, 2)), (jx * jy).sum(axis=(1, 2))
        bx, by = (jx * res).sum(axis=(1, 2)), (jy * res).sum(axis=(1, 2))
        det = jxx * jyy - jxy**2
        ok = (det > 1e-300) & (amp > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            sx = np.where(ok, (jyy * bx - jxy * by) / det, 0.0)
            sy = np.where(ok, (jxx * by - jxy * bx) / det, 0.0)
        norm = np.hypot(sx, sy)
        scale = np.where(norm > 1.0, 1.0 / np.maximum(norm, 1e-300), 1.0)
        cx += sx * scale
        cy += sy * scale
        if np.all(norm < 1e-4):
            break
    return cx, cy


def _refine(front: _Front, shape, sigma: float, gain: float | None, aperture: float,
            model: np.ndarray | None = None, own: tuple | None = None):
    """Refined positions and photometry of the candidates of ``front``.

    With ``model`` (a padded image of fitted spots, see :func:`_spot_model`) the neighbours
    are subtracted first; ``own`` = (x, y, amplitude) of each candidate's own term in
    ``model`` (added back), or None when the candidates are not in it.
    """
    r_in, r_out = ANNULUS[0] * sigma, ANNULUS[1] * sigma
    half = int(math.ceil(r_out)) + 1
    p = _patches(front.filled, front.valid, front.saturated, front.background, front.rows, front.cols,
                 half, shape)
    if model is not None:
        pm = _patches(model, front.valid, front.saturated, None, front.rows, front.cols, half, shape)
        p.values -= pm.values
        if own is not None:
            ox, oy, oa, ow2 = own
            r2own = (p.X - ox[:, None, None]) ** 2 + (p.Y - oy[:, None, None]) ** 2
            p.values += oa[:, None, None] * np.exp(-0.5 * r2own / ow2[:, None, None])
    x0, y0 = front.peak[:, 0].copy(), front.peak[:, 1].copy()
    # local background offset and pixel noise from the annulus around the start (the
    # refinement moves a spot by a fraction of a pixel; the annulus is 2 widths wide)
    bg, noise, nring = _ring_stats(p, x0, y0, r_in, r_out)
    mesh_noise = _interp_points(front.s_noise, y0, x0, front.b) / math.sqrt(gaussian_kernel_norm2(sigma))
    few = nring < 10
    bg = np.where(few, 0.0, bg)  # values are relative to the mesh background
    noise = np.where(few | (noise <= 0), mesh_noise, noise)
    nring = np.maximum(nring, 1)
    d = p.values - bg[:, None, None]
    x, y, conv = _weighted_centroid(p, d, x0, y0, sigma)
    # spots missing pixels near their centre (mask edges, dead pixels): the weighted
    # centroid over the remaining pixels is pulled away from the gap; fit a Gaussian instead
    r2 = (p.X - x[:, None, None]) ** 2 + (p.Y - y[:, None, None]) ** 2
    gap = ((r2 <= (2 * sigma) ** 2) & ~p.valid).any(axis=(1, 2))
    if gap.any():
        x[gap], y[gap] = _gaussian_fit(p, d, x, y, sigma, gap)
    dx, dy = p.X - x[:, None, None], p.Y - y[:, None, None]
    r2 = dx**2 + dy**2
    var_pix = noise**2
    var_bg = (np.pi / 2) * var_pix / nring  # variance of an annulus median
    g = 0.0 if gain is None else gain

    # aperture sum
    ap_all = r2 <= (aperture * sigma) ** 2
    ap = ap_all & p.valid
    n_ap = ap.sum(axis=(1, 2))
    flux_ap = (d * ap).sum(axis=(1, 2))
    var_ap = n_ap * var_pix + n_ap**2 * var_bg + g * np.maximum(flux_ap, 0)
    # PSF-weighted intensity (matched filter) and its signal-to-noise ratio
    psf = np.exp(-0.5 * r2 / sigma**2) / (2 * np.pi * sigma**2) * (p.valid & (r2 <= (4 * sigma) ** 2))
    sp1 = psf.sum(axis=(1, 2))
    sp2 = (psf**2).sum(axis=(1, 2))
    sp3 = (psf**3).sum(axis=(1, 2))
    with np.errstate(divide="ignore", invalid="ignore"):
        flux_psf = (psf * d).sum(axis=(1, 2)) / sp2
        var_psf = var_pix / sp2 + sp1**2 * var_bg / sp2**2 + g * np.maximum(flux_psf, 0) * sp3 / sp2**2
        snr = flux_psf / np.sqrt(var_psf)
    # width from the weighted second moment (weight width w = sigma), minus the pixel's 1/12
    wgt = np.exp(-0.5 * r2 / sigma**2) * d * p.valid
    sw = wgt.sum(axis=(1, 2))
    with np.errstate(divide="ignore", invalid="ignore"):
        m2 = (wgt * r2).sum(axis=(1, 2)) / (2 * sw)
        s_pix2 = m2 * sigma**2 / (sigma**2 - m2)
    s_pix2 = np.where((sw > 0) & (m2 > 0) & (m2 < 0.95 * sigma**2), s_pix2, np.nan)
    width = np.sqrt(np.maximum(s_pix2 - 1.0 / 12.0, 1e-6))
    # positional uncertainty (module docstring, step 4)
    s_eff = np.sqrt(np.where(np.isfinite(s_pix2), s_pix2, sigma**2 + 1.0 / 12.0))
    flux = np.where(flux_psf > 0, flux_psf, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        if g > 0:
            unc2 = centroid_variance(flux / g, s_eff, sigma, var_pix / g**2)
        else:  # background term only
            s2, w2 = s_eff**2, sigma**2
            tau2 = s2 * w2 / (s2 + w2)
            unc2 = var_pix * np.pi * w2**2 / 2 * (s2 + w2) ** 2 / (flux**2 * tau2**2)
    unc = np.sqrt(unc2)
    edge = (ap_all & ~p.valid).any(axis=(1, 2))
    core = r2 <= (1.5 * sigma) ** 2
    core_usable = (core & p.valid).sum(axis=(1, 2)) / np.maximum(core.sum(axis=(1, 2)), 1)
    sat = (ap_all & p.saturated).any(axis=(1, 2))
    moved = np.hypot(x - x0, y - y0)
    # peak value of the least-squares Gaussian (width sigma with the pixel) at (x, y), fitted to
    # the unsaturated pixels within 4 widths: the spot's term of the model image
    # bright spots with their own measured width (widths can differ from spot to spot)
    mw2 = np.where((snr > 20) & np.isfinite(s_pix2), s_pix2, sigma**2 + 1.0 / 12.0)
    mw2 = np.clip(mw2, 0.25 * sigma**2 + 1.0 / 12.0, 4 * sigma**2 + 1.0 / 12.0)
    gm = np.exp(-0.5 * r2 / mw2[:, None, None]) * (p.valid & ~p.saturated & (r2 <= (4 * sigma) ** 2))
    with np.errstate(divide="ignore", invalid="ignore"):
        amp = (gm * d).sum(axis=(1, 2)) / (gm * gm).sum(axis=(1, 2))
    amp = np.where(np.isfinite(amp) & (amp > 0), amp, 0.0)
    return {
        "amplitude": amp, "model_width2": mw2,
        "x": x, "y": y, "intensity": flux_ap, "intensity_error": np.sqrt(var_ap), "sigma": width,
        "snr": snr, "uncertainty": unc, "saturated": sat, "edge": edge, "converged": conv,
        "moved": moved, "core_usable": core_usable, "second_moment": np.where(sw > 0, m2, np.nan),
    }


def _merge(x: np.ndarray, y: np.ndarray, score: np.ndarray, radius: float) -> np.ndarray:
    """Indices to keep: the highest score among spots closer than ``radius`` to each other."""
    order = np.argsort(-score, kind="stable")
    if order.size < 2:
        return order
    from scipy.spatial import cKDTree

    tree = cKDTree(np.column_stack([x, y]))
    pairs = tree.query_pairs(radius, output_type="ndarray")
    if pairs.size == 0:
        return order
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    neighbours: dict[int, list[int]] = {}
    for a, b in pairs:
        neighbours.setdefault(int(a), []).append(int(b))
        neighbours.setdefault(int(b), []).append(int(a))
    removed = np.zeros(order.size, dtype=bool)
    for i in order:
        if removed[i]:
            continue
        for j in neighbours.get(int(i), ()):
            if rank[j] > rank[i]:
                removed[j] = True
    return order[~removed[order]]


# ---------------------------------------------------------------------------------------
# public functions


def _accepted(res: dict, shape, sigma: float) -> tuple[np.ndarray, np.ndarray]:
    """Refined candidates that are spots (on the image, centre usable, not run away), and hot pixels."""
    h, w = shape
    x, y = res["x"], res["y"]
    ok = (res["moved"] <= 1.5 * sigma + 1) & (x > -0.5) & (x < w - 0.5) & (y > -0.5) & (y < h - 0.5)
    ok &= np.isfinite(x) & np.isfinite(y)
    ok &= res["core_usable"] >= 0.5  # the spot's centre lies on usable pixels
    # single hot pixels (or cosmic-ray hits): bright, and far narrower than the spots
    narrow2 = (HOT_PIXEL_WIDTH * sigma) ** 2 + 1.0 / 12.0  # incl. the pixel's 1/12
    m2_narrow = narrow2 * sigma**2 / (narrow2 + sigma**2)  # its weighted moment
    hot = ok & (sigma >= 1.0) & (res["snr"] > 10) & (res["second_moment"] < m2_narrow)
    return ok, hot


def _spot_model(shape: tuple[int, int], x: np.ndarray, y: np.ndarray, amp: np.ndarray,
                width2: np.ndarray) -> np.ndarray:
    """Image of Gaussian spots ``amp exp(-r^2 / (2 width2))`` at (x, y), each drawn to 4 widths."""
    hp, wp = shape
    width = np.sqrt(width2)[:, None]
    half = int(math.ceil(4 * float(np.max(width))))
    off = np.arange(-half, half + 1)
    rr = np.rint(y).astype(int)[:, None] + off
    cc = np.rint(x).astype(int)[:, None] + off
    gy = np.exp(-0.5 * (rr - y[:, None]) ** 2 / width**2) * ((rr >= 0) & (rr < hp))
    gx = np.exp(-0.5 * (cc - x[:, None]) ** 2 / width**2) * ((cc >= 0) & (cc < wp))
    vals = amp[:, None, None] * gy[:, :, None] * gx[:, None, :]
    idx = np.clip(rr, 0, hp - 1)[:, :, None] * wp + np.clip(cc, 0, wp - 1)[:, None, :]
    return np.bincount(idx.ravel(), weights=vals.ravel(), minlength=hp * wp).reshape(hp, wp)


def _residual_noise(front: _Front, resid: np.ndarray, fm: np.ndarray, threshold: float,
                    sigma: float) -> np.ndarray:
    """Noise per mesh of the band-passed residual (as in step 3, the fitted spots subtracted).

    In a crowded pattern the wings of the spots inflate the noise of step 3; measured on the
    residual they do not. Pixels of clear sources in the residual and of the cores of the
    fitted spots are left out.
    """
    m = front.b // 2
    up = front.up
    r_sub = np.ascontiguousarray(resid[::2, ::2])
    ok = front.valid[::2, ::2] & ~front.saturated[::2, ::2]
    ok &= ~_sources(r_sub, front.s_med, front.s_noise, max(threshold, 4.0), 2 * sigma, m)
    ok &= ~(fm[::2, ::2] > 3.0 * up.sub(front.s_noise))
    dev = r_sub - up.sub(front.s_med)
    floor = 1e-6 * max(1.0, float(np.max(np.abs(front.bg_mesh))))
    noise = front.raw_noise
    for _ in range(2):
        noise = _pooled_noise(dev, ok, noise, m)
        known = np.isfinite(noise) & front.usable_mesh
        if not known.any():
            return front.s_noise
        noise = np.maximum(_fill_meshes(noise, known), floor)
    return _smooth_meshes(noise, front.usable_mesh.astype(float))


def _residual_pass(front: _Front, res: dict, shape, sigma: float, threshold: float, gain, aperture: float):
    """Search the residual of the fitted spots for spots hidden beside brighter ones (step 7).

    ``res`` holds the accepted spots of the first pass (with ``amplitude`` and ``stat``).
    Returns the spots with the new ones appended (neighbours of new spots re-measured with
    them subtracted) and the number of new candidates.
    """
    from scipy.spatial import cKDTree

    x, y, a, s2 = res["x"], res["y"], res["amplitude"], res["model_width2"]
    f2 = s2 + sigma**2  # a Gaussian spot of width^2 s2 after the filter of width sigma
    fm = _spot_model(front.filtered.shape, x, y, a * s2 / f2, f2).astype(np.float32)
    resid = front.filtered - fm
    # crowding: where the band-passed noise exceeds what the pixel-to-pixel noise predicts
    # for white noise, the wings of the spots inflate it; measure it again on the residual
    # (not above the cap of step 3 where that applies)
    expected = np.sqrt(front.pixel_var * gaussian_kernel_norm2(sigma))
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = front.s_noise / expected
    ratio = ratio[front.usable_mesh & np.isfinite(ratio)]
    crowded = front.capped or (ratio.size > 0 and float(np.median(ratio)) > CROWDED_NOISE)
    s_noise = front.s_noise
    if crowded:
        s_noise = _residual_noise(front, resid, fm, threshold, sigma)
        if front.capped:
            s_noise = np.minimum(s_noise, front.s_noise)
    all_valid = bool(front.valid.all())
    rows, cols, stat, peak = _maxima(resid, front.s_med, s_noise, front.valid, all_valid,
                                     threshold,
                                     front.b, shape, region=fm > 0, extra_noise=fm,
                                     extra_scale=RESIDUAL_MODEL_ERROR)
    if rows.size:
        far = cKDTree(np.column_stack([x, y])).query(peak)[0] >= RESIDUAL_SEPARATION * sigma
        rows, cols, stat, peak = rows[far], cols[far], stat[far], peak[far]
    n_new = int(rows.size)
    if n_new == 0:
        return res, 0
    model = _spot_model(front.filled.shape, x, y, a, s2)
    new = _refine(replace(front, rows=rows, cols=cols, stat=stat, peak=peak), shape, sigma, gain,
                  aperture, model=model)
    ok, hot = _accepted(new, shape, sigma)
    # a new spot must stand on its own after the subtraction: significant in its own
    # photometry and with its aperture on usable pixels (beside a mask edge or the image
    # border the band-passed background is least certain)
    ok &= ~hot & ~new["edge"] & (new["snr"] >= threshold)
    if not ok.any():
        return res, n_new
    new = {k: v[ok] for k, v in new.items()}
    new["stat"] = stat[ok]
    both = {k: np.concatenate([res[k], new[k]]) for k in res}
    # measure again, with all other spots subtracted: the new spots and their old neighbours
    n_old = x.size
    reach = (ANNULUS[1] + 4) * sigma
    near = np.zeros(both["x"].size, dtype=bool)
    near[n_old:] = True
    hits = cKDTree(np.column_stack([new["x"], new["y"]])).query_ball_point(np.column_stack([x, y]), reach)
    near[:n_old] = np.array([len(h) > 0 for h in hits])
    bx, by, ba, bw2 = both["x"], both["y"], both["amplitude"], both["model_width2"]
    model = _spot_model(front.filled.shape, bx, by, ba, bw2)
    i = np.nonzero(near)[0]
    sub = replace(front, rows=np.rint(by[i]).astype(int), cols=np.rint(bx[i]).astype(int),
                  stat=both["stat"][i], peak=np.column_stack([bx[i], by[i]]))
    again = _refine(sub, shape, sigma, gain, aperture, model=model, own=(bx[i], by[i], ba[i], bw2[i]))
    fine = np.isfinite(again["x"]) & np.isfinite(again["y"]) & (again["moved"] <= sigma)
    for k in both:
        if k in again:
            both[k][i[fine]] = again[k][fine]
    return both, n_new


def _prepare(image, mask, saturation):
    from surfgeo.measure.images import MeasuredImage

    if isinstance(image, MeasuredImage):
        if saturation is None:
            saturation = image.saturation
        image = image.data
    data = np.asarray(image)
    if data.ndim != 2:
        raise InputError(f"spot detection needs a 2D grey image, got an array of shape {data.shape}.")
    if min(data.shape) < 8:
        raise InputError(f"an image of {data.shape[1]} x {data.shape[0]} px is too small to find spots in.")
    finite = np.isfinite(data)
    usable = finite
    if mask is not None:
        m = np.asarray(mask, dtype=bool)
        if m.shape != data.shape:
            raise InputError(
                f"the mask is {m.shape[1]} x {m.shape[0]} px but the image is {data.shape[1]} x "
                f"{data.shape[0]} px; they must match."
            )
        usable = usable & m
    if not usable.any():
        raise InputError(
            "no usable pixels are left after masking; check the screen, gun and exclusion masks."
        )
    if saturation is not None and not math.isfinite(float(saturation)):
        raise InputError(f"the saturation level must be a finite number of image units, got {saturation!r}.")
    sat = (data >= saturation) & finite if saturation is not None else np.zeros(data.shape, dtype=bool)
    if sat[usable].all():
        raise InputError(
            f"every usable pixel is at or above the saturation level {float(saturation):g}; give the "
            "camera's real saturation level."
        )
    return data, usable, sat


def _block2(a: np.ndarray, how: str = "sum") -> np.ndarray:
    """2 x 2 block sum (or logical and / or) of an array, dropping an odd last row/column."""
    h, w = a.shape[0] // 2, a.shape[1] // 2
    q = (a[0: 2 * h: 2, 0: 2 * w: 2], a[1: 2 * h: 2, 0: 2 * w: 2],
         a[0: 2 * h: 2, 1: 2 * w: 2], a[1: 2 * h: 2, 1: 2 * w: 2])
    if how == "and":
        return q[0] & q[1] & q[2] & q[3]
    if how == "or":
        return q[0] | q[1] | q[2] | q[3]
    return q[0] + q[1] + q[2] + q[3]


def estimate_spot_sigma(image, mask=None, saturation=None, max_spots: int = 40) -> float | None:
    """Estimate the Gaussian width (px) of the spots from the brightest ones; None if too few.

    A provisional detection at width 2 px (on a 2 x 2 block sum for images at least 256 px
    across) picks up to ``max_spots`` spots at least 10 noise units strong. On the full
    image, minus the provisional background, each spot's Gaussian-weighted second moment
    gives its width (corrected for the weight and the pixel); the weight width is set to
    the median of these and the step repeated until it settles (for a Gaussian spot the
    fixed point is its true width). Widths above about 8 px are measured on a 2 x 2 block
    sum and scaled back. Tested from 0.8 to 10 px; give the width for wider spots.
    """
    data, usable, sat = _prepare(image, mask, saturation)
    return _estimate_sigma(data, usable, sat, max_spots)


def _estimate_sigma(data, usable, sat, max_spots: int, depth: int = 0) -> float | None:
    h, w = data.shape
    if min(h, w) >= 256:
        # provisional detection on a 2 x 2 block sum, positions mapped back
        d2 = _block2(data.astype(np.float32, copy=False))
        u2 = _block2(usable, "and")
        s2 = _block2(sat, "or")
        f = 2
    else:
        d2, u2, s2, f = data, usable, sat, 1
    s0 = FALLBACK_SIGMA / f
    front = _front(d2, u2, s2, s0, _mesh_size(s0, d2.shape, 64 // f), 10.0, quick=True)
    if front.rows.size < 3:
        return None
    order = np.argsort(-front.stat)
    px, py = front.peak[order, 0] * f + (f - 1) / 2, front.peak[order, 1] * f + (f - 1) / 2
    keep = _merge(px, py, front.stat[order], 10.0)[:max_spots]
    px, py = px[keep], py[keep]
    # iterate the weighted second moment on the full-resolution image; one common weight
    # width per round (the median of the spots' estimates)
    rows, cols = np.rint(py).astype(int), np.rint(px).astype(int)
    ws = FALLBACK_SIGMA
    x, y = px.copy(), py.copy()
    for _ in range(10):
        p = _patches(data, usable, sat, None, rows, cols, int(math.ceil(ANNULUS[1] * ws)) + 1, (h, w))
        # subtract the provisional background (a block-sum image: divide by f^2), so that a
        # curved glow under the spot does not widen it; then the annulus median offset
        yy = np.broadcast_to((p.Y - (f - 1) / 2) / f, p.values.shape)
        xx = np.broadcast_to((p.X - (f - 1) / 2) / f, p.values.shape)
        p.values = p.values - ndi.map_coordinates(front.background, [yy, xx], order=1, mode="nearest") / f**2
        bg, _, _ = _ring_stats(p, x, y, ANNULUS[0] * ws, ANNULUS[1] * ws)
        d = p.values - bg[:, None, None]
        x, y, _ = _weighted_centroid(p, d, x, y, ws, iterations=10)
        r2 = (p.X - x[:, None, None]) ** 2 + (p.Y - y[:, None, None]) ** 2
        wgt = np.exp(-0.5 * r2 / ws**2) * d * p.valid
        sw = wgt.sum(axis=(1, 2))
        with np.errstate(divide="ignore", invalid="ignore"):
            m2 = (wgt * r2).sum(axis=(1, 2)) / (2 * sw)
            s_pix2 = m2 * ws**2 / (ws**2 - m2)
        # a moment at or above the weight's own width means the spot is much wider: double
        new = np.where((sw > 0) & (m2 > 0) & (m2 < 0.95 * ws**2),
                       np.sqrt(np.maximum(s_pix2 - 1 / 12, 0.09)), 2 * ws)
        est = float(np.clip(np.median(new), 0.3, 8.5))
        converged = abs(est - ws) < 0.005 * est
        ws = est
        if converged:
            break
    if ws >= 8.0 and depth < 3 and min(h, w) >= 64:
        d2 = _block2(np.where(usable, data, 0.0))
        u2 = _block2(usable, "and")
        s2 = _block2(sat, "or")
        sub = _estimate_sigma(d2, u2, s2, max_spots, depth + 1)
        return None if sub is None else 2.0 * sub
    return ws


def _estimate_gain(front: _Front, sigma: float) -> float | None:
    """Camera gain (ADU per photon) by photon transfer across background meshes, or None.

    Fits var = g * level + c over the usable meshes (level: the mesh background; var: the
    single-pixel variance from differences of neighbouring pixels, spots left out) by
    least squares with 3-sigma rejection (J. R. Janesick, Photon Transfer, SPIE Press
    (2007)). Returns None unless the levels span a useful range (10-90 % spread above 10 %
    of the median) and g is positive and determined to 25 %.
    """
    # whole meshes only: next to a mask edge the level at the mesh centre is extrapolated
    use = front.usable_mesh & np.isfinite(front.pixel_var) & (front.mesh_fraction > 0.99)
    level = (front.bg_mesh + front.s_med)[use]
    var = front.pixel_var[use]
    if level.size < 8:
        return None
    lo, hi = np.percentile(level, [10, 90])
    if not hi - lo > 0.1 * max(abs(np.median(level)), 1e-12):
        return None
    keep = np.ones(level.size, dtype=bool)
    for _ in range(5):
        A = np.column_stack([level[keep], np.ones(keep.sum())])
        coef, *_ = np.linalg.lstsq(A, var[keep], rcond=None)
        res = var - (coef[0] * level + coef[1])
        scale = _MAD * np.median(np.abs(res[keep] - np.median(res[keep])))
        new = np.abs(res) <= 3 * max(scale, 1e-12)
        if new.sum() < 8 or np.array_equal(new, keep):
            break
        keep = new
    A = np.column_stack([level[keep], np.ones(keep.sum())])
    coef, *_ = np.linalg.lstsq(A, var[keep], rcond=None)
    res = var[keep] - A @ coef
    dof = max(keep.sum() - 2, 1)
    cov = np.linalg.inv(A.T @ A) * float(res @ res) / dof
    g, g_err = float(coef[0]), float(math.sqrt(max(cov[0, 0], 0)))
    if g <= 0 or g_err > 0.25 * g:
        return None
    return g


def detect_spots(
    image,
    *,
    spot_sigma: float | None = None,
    threshold: float = DEFAULT_THRESHOLD,
    mask: np.ndarray | None = None,
    saturation: float | None = None,
    gain: float | str | None = "auto",
    mesh_size: int | None = None,
    aperture: float = APERTURE,
    max_spots: int = 20000,
) -> Detection:
    """Find the spots of a LEED image (method in the module docstring).

    Parameters
    ----------
    image : ndarray, shape (H, W), or MeasuredImage
        Grey image, ``image[y, x]``; any units (ADU).
    spot_sigma : float, optional
        Gaussian width of the spots, px; estimated from the image when omitted.
    threshold : float
        Detection threshold in robust noise units of the matched-filtered image (roughly
        the smallest background-limited signal-to-noise ratio kept). At the default 4.5,
        pure noise gives a few maxima per million pixels (about 5 for spot widths of
        1.4-3 px), reported with snr below 5; on synthetic tests recall and precision are
        >= 0.98 for spots with snr >= 5.
    mask : ndarray of bool, shape (H, W), optional
        True where pixels are usable (see :func:`surfgeo.measure.masks.build_mask`).
    saturation : float, optional
        Pixels at or above this value are saturated (default: from a MeasuredImage).
    gain : float, "auto" or None
        ADU per detected photon, for the shot noise of the spots; "auto" estimates it by
        photon transfer and falls back to None (background noise only).
    mesh_size : int, optional
        Side of the background meshes, px (default: 12 spot widths, at least 16).
    aperture : float
        Radius of the intensity aperture, in spot widths.
    max_spots : int
        Keep at most this many of the most significant candidates.

    Returns
    -------
    Detection

    Raises
    ------
    InputError
        For a non-2D image, a mask of the wrong shape, no usable pixels, or a
        non-positive width, threshold or aperture.
    """
    data, usable, sat = _prepare(image, mask, saturation)
    notes: list[str] = []
    if not (isinstance(threshold, (int, float)) and math.isfinite(threshold) and threshold > 0):
        raise InputError(
            f"the detection threshold must be a positive number of noise units, got {threshold!r}."
        )
    if not (math.isfinite(aperture) and aperture > 0):
        raise InputError(f"the aperture must be a positive number of spot widths, got {aperture!r}.")
    estimated = False
    if spot_sigma is None:
        est = _estimate_sigma(data, usable, sat, 40)
        if est is None:
            notes.append(f"too few bright spots to measure the spot width; assumed {FALLBACK_SIGMA} px.")
            spot_sigma = FALLBACK_SIGMA
        else:
            spot_sigma, estimated = est, True
    spot_sigma = float(spot_sigma)
    if not (math.isfinite(spot_sigma) and 0.3 <= spot_sigma <= 0.25 * min(data.shape)):
        raise InputError(
            f"the spot width must be between 0.3 px and a quarter of the image side, got {spot_sigma}."
        )
    b = _mesh_size(spot_sigma, data.shape, mesh_size)
    front = _front(data, usable, sat, spot_sigma, b, threshold)
    gain_estimated = False
    if isinstance(gain, str):
        if gain != "auto":
            raise InputError(f"gain must be a positive number, 'auto' or None, got {gain!r}.")
        gain = _estimate_gain(front, spot_sigma)
        gain_estimated = gain is not None
        if gain is None:
            notes.append("camera gain unknown: uncertainties and snr include background noise only.")
    elif gain is not None and not (math.isfinite(gain) and gain > 0):
        raise InputError(f"the camera gain must be a positive number of ADU per photon, got {gain!r}.")
    candidates = int(front.rows.size)
    truncated = candidates > max_spots
    if truncated:
        top = np.argsort(-front.stat)[:max_spots]
        front.rows, front.cols, front.stat, front.peak = (
            front.rows[top], front.cols[top], front.stat[top], front.peak[top])
        notes.append(f"{candidates} candidates found; only the {max_spots} most significant were kept.")
    if candidates == 0:
        spots = SpotList.empty()
    else:
        res = _refine(front, data.shape, spot_sigma, gain, aperture)
        x, y = res["x"], res["y"]
        ok, hot = _accepted(res, data.shape, spot_sigma)
        if hot.any():
            notes.append(f"{int(hot.sum())} maxima much narrower than the spots (hot pixels) were left out.")
        ok &= ~hot
        sel = np.nonzero(ok)[0]
        keep = sel[_merge(x[sel], y[sel], front.stat[sel], max(1.0, spot_sigma))]
        res = {k: v[keep] for k, v in res.items()}
        res["stat"] = front.stat[keep]
        for _ in range(RESIDUAL_ROUNDS):
            if not keep.size:
                break
            n_before = keep.size
            res, n_new = _residual_pass(front, res, data.shape, spot_sigma, threshold, gain, aperture)
            candidates += n_new
            keep = _merge(res["x"], res["y"], res["stat"], max(1.0, spot_sigma))
            res = {k: v[keep] for k, v in res.items()}
            if keep.size == n_before:
                break
        spots = SpotList.from_columns(**{k: res[k] for k in (
            "x", "y", "intensity", "intensity_error", "sigma", "snr", "uncertainty", "saturated", "edge")})
        spots = spots.sorted_by("snr")
    bg_level = float(np.median(front.bg_mesh[front.usable_mesh]))
    kernel_norm = math.sqrt(gaussian_kernel_norm2(spot_sigma))
    pix_noise = float(np.median(front.s_noise[front.usable_mesh]) / kernel_norm)
    return Detection(
        spots=spots, spot_sigma=spot_sigma, sigma_estimated=estimated, threshold=float(threshold),
        gain=None if gain is None else float(gain), gain_estimated=gain_estimated, mesh_size=b,
        background_level=bg_level, pixel_noise=pix_noise, candidates=candidates, truncated=truncated,
        notes=notes,
    )


__all__ = [
    "Detection",
    "detect_spots",
    "estimate_spot_sigma",
    "centroid_variance",
    "gaussian_kernel_norm2",
    "DEFAULT_THRESHOLD",
    "APERTURE",
    "ANNULUS",
]
