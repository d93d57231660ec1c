"""Screen calibration from the substrate's integer-order spots.

Given measured spot positions (pixels) at a known beam energy and the substrate's surface
lattice, find the screen geometry of :mod:`surfgeo.screen` (centre, scale, rotation, mirror,
ellipticity and, for the camera model, the camera distance) that puts the integer-order beams
on measured spots. Nothing about the geometry needs to be guessed beforehand except the rough
size of the pattern (the screen scale to within about 25 %, which the screen spec gives from
the image size and the acceptance angle): the integer-order spots are recognised among
fractional-order and stray spots by a search over hypotheses.

Method
------
1. **Normalised screen points.** At normal incidence a beam of parallel momentum ``k_par``
   leaves at ``theta = asin(|k_par| / k)``; the screen model's radial law turns it into the
   normalised point ``w = rho(theta) k_par / |k_par|``. The image position is then
   ``p = c + F S w`` with ``c`` the centre, ``F = diag(1, -1)`` (y down) and ``S`` the 2x2
   linear part ``scale (1 + stretch n n^T) R(rotation) Mirror`` (see
   :mod:`surfgeo.screen.geometry`). Without ellipticity this is a similarity in ``w``.
2. **Centres from inversion symmetry.** At normal incidence the beams come in pairs g, -g,
   so the spots are symmetric through the screen axis whatever the rotation, mirror,
   ellipticity or radial law. Every pair of spots votes for its midpoint; the strongest vote
   peaks are the candidate centres (:func:`centre_candidates`). The (00) spot is never
   needed, so the gun may hide it.
3. **Hypotheses (RANSAC with one point per centre).** With the centre fixed, one
   correspondence fixes a similarity: every measured spot is tried as a short integer beam
   (one representative per orbit of the lattice's rotation group, from the two shortest
   shells), for both mirror choices (one is enough when the lattice has a mirror line, as
   relabelling by that mirror turns one into the other), keeping scales inside the window.
   Each hypothesis is scored first on the two shortest shells (a soft count that prefers
   close matches), the best few hundred on every integer beam: measured spots within a
   tolerance of a predicted integer spot count as inliers; predicted integer spots inside
   the image with no measured spot cost ``MISS_WEIGHT`` inliers each (integer-order spots
   are the strongest of a pattern, which rejects a denser lattice of fractional-order spots
   posing as the substrate); measured spots beyond the acceptance rim cost
   ``OUTSIDE_WEIGHT``; inversion partners found (minus those missing) add
   ``SYMMETRY_WEIGHT`` each; a weak prior prefers scales near the nominal one.
4. **Local optimisation (LO-RANSAC).** The best hypotheses are refined by alternating a
   nearest-neighbour match with a linear least-squares fit ``p = c + A w`` -- a similarity,
   or an affine map (which absorbs the ellipticity) once at least ``MIN_AFFINE_SPOTS`` spots
   match and the ellipticity stays below ``MAX_STRETCH`` -- with a shrinking gate
   [Chum, Matas and Kittler 2003]. When only the first shell of integer spots is on the
   screen among dense fractional spots, several hypotheses can be nearly equally good:
   :func:`calibration_candidates` returns all within a margin, for indexing to choose.
5. **Robust least squares.** The screen parameters are then fitted to the matched
   integer-order spots with :func:`scipy.optimize.least_squares` and a soft-L1 loss (robust
   against the odd wrong match), re-matching once after the fit. The ellipticity is
   parametrised smoothly as ``scale' (I + E)`` with ``E`` symmetric and traceless.
   Uncertainties come from the Jacobian at the solution, ``cov = s^2 (J^T J)^-1``.
6. **Several energies.** Images of the same screen at several energies share every screen
   parameter; the scale and an energy offset ``dE`` (``E_true = E_nominal + dE``, e.g. the
   contact potential between cathode and sample) are fitted jointly, which a single energy
   cannot do (for the far-screen model only ``scale / k`` is measurable). The labels found in
   each image are first brought to a common orientation by the lattice operation that makes
   its rotation and mirror agree with the first image.

Only normal incidence is handled.

References
----------
.. [1] M. A. Fischler and R. C. Bolles, "Random sample consensus", Commun. ACM 24, 381 (1981).
.. [2] O. Chum, J. Matas and J. Kittler, "Locally optimized RANSAC", Pattern Recognition
   (DAGM 2003), LNCS 2781, 236 (2003).
.. [3] S. Umeyama, IEEE Trans. Pattern Anal. Mach. Intell. 13, 376 (1991) (similarity from
   point correspondences).
.. [4] R. O. Duda and P. E. Hart, "Use of the Hough transformation to detect lines and curves
   in pictures", Commun. ACM 15, 11 (1972) (voting in an accumulator, used for the centre).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares
from scipy.spatial import cKDTree

from surfgeo.checks import positive_number
from surfgeo.diffraction.beams import reciprocal_points_in_disc
from surfgeo.diffraction.electron import onset_energy, wavenumber
from surfgeo.errors import ComputationError, FileFormatError, InputError
from surfgeo.lattice import Lattice2D
from surfgeo.screen import CameraScreen, ScreenGeometry, default_screen, screen_from_dict

#: Fewest measured spots a calibration can work with.
MIN_SPOTS = 3
#: Fewest integer-order spots that must be recognised.
MIN_INTEGER_SPOTS = 3
#: Cost of a predicted integer spot inside the image that has no measured spot, in inliers.
MISS_WEIGHT = 4.0
#: Cost of a measured spot outside the hypothesised screen (beyond the acceptance rim), in inliers.
OUTSIDE_WEIGHT = 4.0
#: Worth of a measured spot whose inversion partner through the centre is also measured, in inliers.
SYMMETRY_WEIGHT = 0.5
#: A spot counts as outside the screen beyond this multiple of the rim radius (acceptance unsure).
RIM_SLACK = 1.08
#: Cost (in inliers) of a scale at the edge of the default window (quadratic in log scale): a
#: tie-breaker between hypotheses the spots support equally.
SCALE_PRIOR_WEIGHT = 1.0
#: Default relative window around the nominal scale searched for the true scale.
SCALE_TOLERANCE = 0.25
#: Largest ellipticity (relative stretch) accepted while recognising the integer spots.
MAX_STRETCH = 0.06
#: Fewest matched spots before the ellipticity is fitted (a similarity is used below).
MIN_AFFINE_SPOTS = 8
#: Candidate centres (from inversion-symmetry votes) tried.
N_CENTRES = 10
#: Candidate centres closer than this (px) to a stronger one are dropped; small, because a dense
#: row of fractional spots puts a second vote peak half a spacing from the true centre.
SUPPRESS_PX = 2.5
#: Hypotheses given the full score after the pre-emptive one.
N_FULL = 300
#: Hypotheses refined by local optimisation.
N_REFINE = 24


# =============================================================================== screen maps
def linear_part(screen: ScreenGeometry) -> np.ndarray:
    """The 2x2 matrix ``(I + stretch n n^T) R(rotation) Mirror`` of a screen (dimensionless).

    Image offset from the centre, with y pointing *up*, is ``scale * linear_part @ w``.
    """
    c, s = math.cos(math.radians(screen.rotation_deg)), math.sin(math.radians(screen.rotation_deg))
    rot = np.array([[c, -s], [s, c]])
    mir = np.diag([-1.0, 1.0]) if screen.mirror else np.eye(2)
    n = np.array([math.cos(math.radians(screen.stretch_deg)), math.sin(math.radians(screen.stretch_deg))])
    return (np.eye(2) + screen.stretch * np.outer(n, n)) @ rot @ mir


def normalised_points(screen: ScreenGeometry, k_parallel, k: float) -> np.ndarray:
    """Normalised screen points ``w = rho(theta) k_par / |k_par|`` (..., 2) at normal incidence.

    Parameters
    ----------
    screen : ScreenGeometry
        Supplies the radial law ``rho``.
    k_parallel : array_like, shape (..., 2)
        Parallel momenta, 1/Angstrom.
    k : float
        Electron wavenumber, 1/Angstrom.

    Returns
    -------
    ndarray, shape (..., 2)
        NaN for beams that do not emerge or lie beyond the range of the radial law.
    """
    kp = np.asarray(k_parallel, dtype=float)
    q = np.hypot(kp[..., 0], kp[..., 1]) / k
    with np.errstate(invalid="ignore", divide="ignore"):
        theta = np.arcsin(np.where(q < 1.0, q, np.nan))
        rho = screen.radial(np.nan_to_num(theta))
        # every radial law has slope 1 at the centre, so rho / q -> 1 as q -> 0
        f = np.where(q > 0, rho / np.where(q > 0, q, 1.0), 1.0)
    w = kp / k * f[..., None]
    with np.errstate(invalid="ignore"):
        beyond = ~(q < 1.0) | (
            np.nan_to_num(theta, nan=math.pi) > math.radians(screen.max_theta_deg) * (1 + 1e-12)
        )
    w[beyond] = np.nan
    return w


def pixels_from_normalised(screen: ScreenGeometry, w) -> np.ndarray:
    """Image positions (..., 2) of normalised screen points ``w`` (see :func:`normalised_points`)."""
    v = np.asarray(w, dtype=float) @ linear_part(screen).T
    return np.stack(
        [screen.centre_x + screen.scale * v[..., 0], screen.centre_y - screen.scale * v[..., 1]], axis=-1
    )


def fast_pixels(screen: ScreenGeometry, k_parallel, energy_eV: float) -> np.ndarray:
    """Image positions of beams at normal incidence; the same as ``screen.to_pixels`` but faster."""
    return pixels_from_normalised(screen, normalised_points(screen, k_parallel, wavenumber(energy_eV)))


def on_screen(screen: ScreenGeometry, pixels, k_parallel, k: float, margin: float = 0.0) -> np.ndarray:
    """True for beams inside the acceptance, inside the image and outside the gun's shadow.

    ``margin`` (px) shrinks the image and grows the shadow, for "clearly visible" tests.
    """
    px = np.asarray(pixels, dtype=float)
    kp = np.asarray(k_parallel, dtype=float)
    q = np.hypot(kp[..., 0], kp[..., 1]) / k
    with np.errstate(invalid="ignore"):
        ok = q <= math.sin(math.radians(screen.acceptance_deg))
        ok &= (px[..., 0] >= -0.5 + margin) & (px[..., 0] <= screen.width - 0.5 - margin)
        ok &= (px[..., 1] >= -0.5 + margin) & (px[..., 1] <= screen.height - 0.5 - margin)
    if screen.shadow_radius > 0:
        grown = screen if margin == 0 else screen.with_params(shadow_radius=screen.shadow_radius + margin)
        ok &= ~grown.in_shadow(np.nan_to_num(px))
    return ok & np.all(np.isfinite(px), axis=-1)


# =============================================================================== parameters
def _fields_from_params(p: np.ndarray, mirror: bool) -> dict:
    """Screen fields from the fit vector [cx, cy, ln s, phi, e1, e2, ...]."""
    cx, cy, ls, phi, e1, e2 = p[:6]
    e = math.hypot(e1, e2)
    e = min(e, 0.9)
    s = math.exp(ls)
    return {
        "centre_x": float(cx),
        "centre_y": float(cy),
        "scale": s * (1.0 - e),
        "rotation_deg": math.degrees(phi),
        "stretch": 2.0 * e / (1.0 - e),
        "stretch_deg": (math.degrees(0.5 * math.atan2(e2, e1)) if e > 0 else 0.0) % 180.0,
        "mirror": bool(mirror),
    }


def _params_from_screen(screen: ScreenGeometry) -> np.ndarray:
    e = screen.stretch / (2.0 + screen.stretch)
    s = screen.scale / (1.0 - e)
    a = 2.0 * math.radians(screen.stretch_deg)
    return np.array(
        [
            screen.centre_x,
            screen.centre_y,
            math.log(s),
            math.radians(screen.rotation_deg),
            e * math.cos(a),
            e * math.sin(a),
        ]
    )


def _params_from_affine(c: np.ndarray, A: np.ndarray) -> tuple[np.ndarray, bool]:
    """Fit vector and mirror from an affine map ``p = c + A w`` (pixels, y down)."""
    FA = np.diag([1.0, -1.0]) @ A  # y up
    u, sv, vt = np.linalg.svd(FA)
    U = u @ vt
    P = vt.T @ np.diag(sv) @ vt  # FA = U P with P symmetric; we want FA = P' U: P' = U P U^T
    P = U @ P @ U.T
    mirror = np.linalg.det(U) < 0
    R = U @ np.diag([-1.0, 1.0]) if mirror else U
    phi = math.atan2(R[1, 0], R[0, 0])
    evals, evecs = np.linalg.eigh(P)
    lam2, lam1 = float(evals[0]), float(evals[1])
    s = 0.5 * (lam1 + lam2)
    e = (lam1 - lam2) / (lam1 + lam2)
    n = evecs[:, 1]
    alpha = math.atan2(n[1], n[0])
    return np.array([c[0], c[1], math.log(s), phi, e * math.cos(2 * alpha), e * math.sin(2 * alpha)]), bool(
        mirror
    )


def _linear_from_params(p: np.ndarray, mirror: bool) -> np.ndarray:
    """``F s (I + E) R Mirror`` for the fit vector (maps w to pixel offsets, y down)."""
    _, _, ls, phi, e1, e2 = p[:6]
    c, s = math.cos(phi), math.sin(phi)
    R = np.array([[c, -s], [s, c]])
    if mirror:
        R = R @ np.diag([-1.0, 1.0])
    E = np.array([[1.0 + e1, e2], [e2, 1.0 - e1]])
    return np.diag([1.0, -1.0]) @ (math.exp(ls) * E @ R)


def _with_radial(screen: ScreenGeometry, extra: np.ndarray | None) -> ScreenGeometry:
    """The screen with the camera distance of the fit vector (camera model only)."""
    if extra is None or not isinstance(screen, CameraScreen):
        return screen
    D = _distance_from_param(screen, float(extra[0]))
    return screen.with_params(camera_distance=D, acceptance_deg=min(screen.acceptance_deg, _max_acc(D)))


def _max_acc(D: float) -> float:
    return math.degrees(math.acos(1.0 / D)) * 0.999 if D > 1 else 90.0


def _distance_param(screen: CameraScreen) -> float:
    D = screen.camera_distance
    return math.log(D - 1.0) if D > 1 else -math.log(-D - 1.0)


def _distance_from_param(screen: CameraScreen, v: float) -> float:
    v = max(min(v, 30.0), -30.0)
    return 1.0 + math.exp(v) if screen.camera_distance > 1 else -1.0 - math.exp(-v)


# =============================================================================== beams
@dataclass(frozen=True)
class _Beams:
    labels: np.ndarray  # (B, 2) int
    kp: np.ndarray  # (B, 2)
    w: np.ndarray  # (B, 2)
    shell: np.ndarray  # (B,) shell index (0 = (00))


def integer_beams(
    lattice: Lattice2D, energy_eV: float, screen: ScreenGeometry
) -> tuple[np.ndarray, np.ndarray]:
    """Integer labels (B, 2) and parallel momenta (B, 2) of the beams within the acceptance.

    Raises
    ------
    InputError
        When no integer-order beam other than (00) reaches the screen at this energy.
    """
    k = wavenumber(energy_eV)
    rmax = k * math.sin(math.radians(screen.acceptance_deg))
    labels = reciprocal_points_in_disc(lattice.reciprocal, np.zeros(2), rmax)
    if len(labels) <= 1:
        g = np.sort(np.linalg.norm(lattice.reciprocal, axis=1))
        onset = float(onset_energy(np.array([[g[0], 0.0]]), screen.acceptance_deg)[0])
        raise InputError(
            f"at {energy_eV:g} eV no integer-order beam of this lattice reaches the screen (acceptance "
            f"{screen.acceptance_deg:g} degrees); the first-order beams appear above {onset:.1f} eV."
        )
    return labels.astype(np.int64), labels @ lattice.reciprocal


def _beam_table(lattice: Lattice2D, energy_eV: float, screen: ScreenGeometry) -> _Beams:
    labels, kp = integer_beams(lattice, energy_eV, screen)
    g = np.round(
        np.linalg.norm(kp, axis=1) / np.linalg.norm(kp, axis=1)[np.any(labels != 0, axis=1)].min(), 6
    )
    _, shell = np.unique(g, return_inverse=True)
    w = normalised_points(screen, kp, wavenumber(energy_eV))
    return _Beams(labels, kp, w, shell.ravel())


def _orbit_reps(
    lattice: Lattice2D, beams: _Beams, shells: tuple[int, ...], rotations_only: bool
) -> list[int]:
    ops = lattice.point_group()
    if rotations_only:
        ops = [op for op in ops if op.is_rotation]
    idx = np.flatnonzero(np.isin(beams.shell, shells))
    seen: set[int] = set()
    reps = []
    kp = beams.kp
    for i in idx:
        if int(i) in seen:
            continue
        reps.append(int(i))
        for op in ops:
            img = np.asarray(op.cartesian) @ kp[i]
            d = np.linalg.norm(kp[idx] - img, axis=1)
            j = idx[np.argmin(d)]
            if d.min() < 1e-6 * (1 + np.linalg.norm(img)):
                seen.add(int(j))
    return reps


# =============================================================================== hypotheses
@dataclass
class Hypothesis:
    """One calibration hypothesis: an affine map ``p = centre + A w`` and its support.

    Attributes
    ----------
    centre : ndarray, shape (2,)
        Image position of the screen axis, px.
    A : ndarray, shape (2, 2)
        Linear part (normalised point -> pixel offset, y down).
    inliers : int
        Measured spots matched to predicted integer-order spots.
    misses : int
        Predicted integer-order spots inside the image with no measured spot.
    score : float
        ``inliers - MISS_WEIGHT * misses - OUTSIDE_WEIGHT * outside
        + SYMMETRY_WEIGHT * symmetric`` minus a weak prior on the scale,
        ``SCALE_PRIOR_WEIGHT (ln(s / s0) / ln(1 + SCALE_TOLERANCE))^2``.
    pairs : ndarray, shape (n, 2)
        (spot index, beam index) of the matches.
    rms : float
        RMS distance of the matches, px.
    outside : int
        Measured spots farther from the centre than the acceptance rim allows.
    symmetric : int
        Measured spots whose inversion partner through the centre is measured, minus those
        whose partner should be visible but is missing.
    """

    centre: np.ndarray
    A: np.ndarray
    inliers: int = 0
    misses: int = 0
    score: float = -math.inf
    pairs: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), dtype=np.int64))
    rms: float = math.inf
    outside: int = 0
    symmetric: int = 0

    @property
    def scale(self) -> float:
        return float(math.sqrt(abs(np.linalg.det(self.A))))


def _predict(c: np.ndarray, A: np.ndarray, w: np.ndarray) -> np.ndarray:
    return c + w @ A.T


def _inside(px: np.ndarray, screen: ScreenGeometry, margin: float) -> np.ndarray:
    return (
        (px[..., 0] >= margin - 0.5)
        & (px[..., 0] <= screen.width - 0.5 - margin)
        & (px[..., 1] >= margin - 0.5)
        & (px[..., 1] <= screen.height - 0.5 - margin)
    )


def _evaluate(
    h: Hypothesis,
    P: np.ndarray,
    tree: cKDTree,
    beams: _Beams,
    screen: ScreenGeometry,
    gate: float,
    guard: float,
) -> Hypothesis:
    """Score a hypothesis (see :class:`Hypothesis` and the module docstring).

    Every integer beam but (00) is matched to its nearest measured spot within ``gate`` (plus
    1 % of its distance from the centre, for ellipticity); each measured spot serves one beam.
    """
    pred = _predict(h.centre, h.A, beams.w)
    r = np.linalg.norm(pred - h.centre, axis=1)
    tol = gate + 0.01 * r
    d, j = tree.query(pred, k=1, distance_upper_bound=float(tol.max()))
    nonzero = np.any(beams.labels != 0, axis=1)
    hit = (d <= tol) & nonzero
    order = np.argsort(np.where(hit, d, np.inf))
    used: set[int] = set()
    keep = np.zeros(len(pred), dtype=bool)
    for b in order:
        if not hit[b]:
            break
        if int(j[b]) in used:
            continue
        used.add(int(j[b]))
        keep[b] = True
    counted = _inside(pred, screen, 3.0) & (r > guard) & nonzero
    h.inliers = int(keep.sum())
    h.misses = int((counted & ~keep).sum())
    h.outside, h.symmetric = _centre_terms(h, P, tree, screen, guard)
    h.score = (
        h.inliers
        - MISS_WEIGHT * h.misses
        - OUTSIDE_WEIGHT * h.outside
        + SYMMETRY_WEIGHT * h.symmetric
        - SCALE_PRIOR_WEIGHT * math.log(h.scale / screen.scale) ** 2 / math.log(1.0 + SCALE_TOLERANCE) ** 2
    )
    h.pairs = np.column_stack([j[keep], np.flatnonzero(keep)]).astype(np.int64)
    h.rms = float(np.sqrt(np.mean(d[keep] ** 2))) if keep.any() else math.inf
    return h


#: Inversion partners found per centre, for the spot tree in use (the score of many hypotheses
#: sharing a centre needs them once).
_PARTNERS: dict = {}


def _centre_terms(
    h: Hypothesis, P: np.ndarray, tree: cKDTree, screen: ScreenGeometry, guard: float
) -> tuple[int, int]:
    """Measured spots outside the hypothesised screen, and the inversion-symmetry balance.

    The beams of a pattern at normal incidence come in pairs g, -g, so the measured spots are
    symmetric under inversion through the true centre (up to missing and stray spots and
    what the image edge and the gun hide). ``symmetric`` counts the spots whose partner
    ``2 c - p`` is measured minus those whose partner should be visible but is not. This
    pins the centre where the (00) spot is hidden and the pattern is a lattice of spots.
    """
    c = h.centre
    v = P - c
    # radius in units of the scale, undoing the linear part (ellipticity, rotation, mirror)
    try:
        u = v @ np.linalg.inv(h.A).T
    except np.linalg.LinAlgError:
        return len(P), 0
    rho = np.hypot(u[:, 0], u[:, 1])
    rim = float(screen.radial(np.array(math.radians(screen.acceptance_deg))))
    outside = int(np.sum(rho > rim * RIM_SLACK))
    key = (round(float(c[0]), 3), round(float(c[1]), 3))
    cached = _PARTNERS.get(key) if _PARTNERS.get("tree") is tree else None
    if cached is None:
        partner = 2.0 * c - P
        r = np.linalg.norm(v, axis=1)
        tol = 3.0 + 0.01 * r
        d, _ = tree.query(partner, k=1, distance_upper_bound=float(tol.max()) if len(tol) else 1.0)
        cached = (d <= tol, _inside(partner, screen, 3.0) & (r > guard + 3.0))
        if _PARTNERS.get("tree") is not tree:
            _PARTNERS.clear()
            _PARTNERS["tree"] = tree
        _PARTNERS[key] = cached
    found, usable = cached
    # a partner lies at the same distance from the centre as its spot, so it is on the screen
    # whenever the spot is; only the image edge and the gun can hide it
    return outside, int(found.sum() - (usable & ~found).sum())


def _affine_fit(P: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    X = np.column_stack([np.ones(len(w)), w])
    coef, *_ = np.linalg.lstsq(X, P, rcond=None)
    return coef[0], coef[1:].T


def _similarity_fit(P: np.ndarray, w: np.ndarray, mirror: bool) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares similarity (complex form) p = c + conj(alpha w~)."""
    q = P[:, 0] + 1j * P[:, 1]
    z = w[:, 0] + 1j * w[:, 1]
    if mirror:
        z = -np.conj(z)
    qc, zc = q.mean(), z.mean()
    alpha = np.vdot(z - zc, np.conj(q - qc)) / np.vdot(z - zc, z - zc)
    c = qc - np.conj(alpha * zc)
    return np.array([c.real, c.imag]), _complex_to_A(alpha, mirror)


def _complex_to_A(alpha: complex, mirror: bool) -> np.ndarray:
    # p = c + conj(alpha * z~): x = Re(alpha z~), y = -Im(alpha z~)
    a, b = alpha.real, alpha.imag
    A = np.array([[a, -b], [-b, -a]])
    if mirror:
        A = A @ np.diag([-1.0, 1.0])
    return A


def _lo_refine(
    h: Hypothesis, P, tree, beams, screen, gate: float, guard: float, steps: int = 4
) -> Hypothesis:
    """Alternate matching and fitting (similarity; affine only with many matches and small
    ellipticity), with a shrinking gate."""
    g = max(gate * 2.0, 6.0)
    for _ in range(steps):
        h = _evaluate(h, P, tree, beams, screen, g, guard)
        if len(h.pairs) < 2:
            return h
        si, bi = h.pairs[:, 0], h.pairs[:, 1]
        wm = beams.w[bi]
        mirror = bool(np.linalg.det(h.A) > 0)
        c, A = _similarity_fit(P[si], wm, mirror)
        if len(h.pairs) >= MIN_AFFINE_SPOTS and np.linalg.matrix_rank(wm - wm.mean(0), tol=1e-6) == 2:
            ca, Aa = _affine_fit(P[si], wm)
            pa, ma = _params_from_affine(ca, Aa)
            if ma == mirror and 2.0 * math.hypot(pa[4], pa[5]) <= MAX_STRETCH:
                c, A = ca, Aa
        h = Hypothesis(c, A)
        g = max(gate, 0.6 * g)
    return _evaluate(h, P, tree, beams, screen, gate, guard)


def find_integer_spots(
    positions,
    lattice: Lattice2D,
    energy_eV: float,
    screen: ScreenGeometry | None = None,
    *,
    scale_tolerance: float = SCALE_TOLERANCE,
    gate_px: float = 3.0,
    n_best: int = 5,
) -> list[Hypothesis]:
    """Recognise the integer-order spots among measured spots, without a starting guess.

    Parameters
    ----------
    positions : array_like, shape (N, 2)
        Measured spot positions [x, y], px.
    lattice : Lattice2D
        Substrate 1x1 surface lattice.
    energy_eV : float
        Beam energy (eV) as used for the pattern.
    screen : ScreenGeometry, optional
        Model and nominal geometry; only its radial law, image size, acceptance, shadow radius
        and ``scale`` (the nominal scale, searched within ``scale_tolerance``) are used.
    scale_tolerance : float
        Relative half-width of the scale window: the scale is searched in
        ``[s0 / (1 + t), s0 (1 + t)]``.
    gate_px : float
        Matching gate for the final hypotheses, px (grows by 1 % of the distance from the
        centre, for ellipticity).
    n_best : int
        Number of distinct hypotheses returned.

    Returns
    -------
    list of Hypothesis
        Best first (highest score, then smallest RMS).

    Raises
    ------
    InputError
        Fewer than :data:`MIN_SPOTS` spots, or an energy at which no integer beam reaches the
        screen.
    """
    P = _positions(positions)
    screen = screen or default_screen()
    beams = _beam_table(lattice, energy_eV, screen)
    if len(P) < MIN_SPOTS:
        raise InputError(
            f"a calibration needs at least {MIN_SPOTS} measured spots (integer-order spots of the "
            f"substrate), got {len(P)}."
        )
    tree = cKDTree(P)
    s0 = screen.scale
    s_lo, s_hi = s0 / (1.0 + scale_tolerance), s0 * (1.0 + scale_tolerance)
    guard = max(screen.shadow_radius, 0.0)

    has_mirror = any(not op.is_rotation for op in lattice.point_group())
    mirrors = (False,) if has_mirror else (False, True)
    nshell = int(beams.shell.max())
    a_idx = _orbit_reps(lattice, beams, tuple(s for s in (1, 2) if s <= nshell), rotations_only=has_mirror)
    pre_idx = np.flatnonzero((beams.shell >= 1) & (beams.shell <= 2))

    z_all = beams.w[:, 0] + 1j * beams.w[:, 1]
    Q = P[:, 0] + 1j * P[:, 1]
    centres = centre_candidates(P, screen, n=N_CENTRES)
    if len(centres) == 0:
        centres = np.array([[screen.centre_x, screen.centre_y]])

    # one-point hypotheses: spot i is beam a, for every candidate centre and mirror choice
    cand_c, cand_alpha, cand_m = [], [], []
    for c in centres:
        cq = c[0] + 1j * c[1]
        dq = np.conj(Q - cq)
        for m in mirrors:
            zt = -np.conj(z_all) if m else z_all
            for a in a_idx:
                alpha = dq / zt[a]
                ok = (np.abs(alpha) >= s_lo) & (np.abs(alpha) <= s_hi)
                cand_c.append(np.full(int(ok.sum()), cq))
                cand_alpha.append(alpha[ok])
                cand_m.append(np.full(int(ok.sum()), m))
    C = np.concatenate(cand_c)
    AL = np.concatenate(cand_alpha)
    MM = np.concatenate(cand_m)
    if len(C) == 0:
        raise InputError(
            "no measured spot lies where an integer-order spot could be at this energy and screen "
            "scale; check --lattice, --energy and the screen size or scale."
        )

    # pre-emptive score on the two shortest shells, then the full score on the best
    pre = _preemptive(C, AL, MM, z_all[pre_idx], tree, screen, chunk=20000)
    order = np.argsort(-pre, kind="stable")
    hyps: list[Hypothesis] = []
    for t in order[:N_FULL]:
        c = np.array([C[t].real, C[t].imag])
        A = _complex_to_A(AL[t], bool(MM[t]))
        hyps.append(_evaluate(Hypothesis(c, A), P, tree, beams, screen, gate_px * 2.0, guard))
    hyps.sort(key=lambda h: (-h.score, h.rms))
    refined: list[Hypothesis] = []
    tried: list[Hypothesis] = []
    for h in hyps:
        if len(refined) >= N_REFINE:
            break
        if any(_same(h, r, beams.w) for r in tried):
            continue
        tried.append(h)
        r = _lo_refine(h, P, tree, beams, screen, gate_px, guard)
        if s_lo / 1.05 <= r.scale <= s_hi * 1.05 and not any(_same(r, x, beams.w) for x in refined):
            refined.append(r)
    refined.sort(key=lambda h: (-h.score, h.rms))
    return refined[:n_best]


def centre_candidates(
    positions, screen: ScreenGeometry | None = None, n: int = 8, bin_px: float = 2.0
) -> np.ndarray:
    """Likely pattern centres from the inversion symmetry of the spots (pair-midpoint votes).

    At normal incidence the beams come in pairs g, -g, so the spots are symmetric under
    inversion through the screen axis, whatever the screen's rotation, mirror, ellipticity or
    radial law. Every pair of spots votes for its midpoint; the ``n`` strongest peaks of the
    vote histogram (bins of ``bin_px``, summed over 2 x 2 bins, non-maximum suppressed within
    ``SUPPRESS_PX``) are returned, strongest first, each refined to the mean of its votes.

    Returns
    -------
    ndarray, shape (<= n, 2)
        Candidate centres [x, y], px.
    """
    P = np.asarray(positions, dtype=float).reshape(-1, 2)
    if len(P) < 2:
        return np.zeros((0, 2))
    i, j = np.triu_indices(len(P), 1)
    mid = 0.5 * (P[i] + P[j])
    if screen is not None:
        w, h = screen.width, screen.height
        keep = (mid[:, 0] > -0.5) & (mid[:, 0] < w - 0.5) & (mid[:, 1] > -0.5) & (mid[:, 1] < h - 0.5)
        mid = mid[keep]
    if len(mid) == 0:
        return np.zeros((0, 2))
    lo = mid.min(0) - bin_px
    idx = np.floor((mid - lo) / bin_px).astype(np.int64)
    shape = idx.max(0) + 2
    hist = np.zeros(shape)
    np.add.at(hist, (idx[:, 0], idx[:, 1]), 1.0)
    # votes of a 2 x 2 block of bins (a centre near a bin edge splits its votes)
    blk = hist[:-1, :-1] + hist[1:, :-1] + hist[:-1, 1:] + hist[1:, 1:]
    flat = np.argsort(blk.ravel())[::-1]
    out: list[np.ndarray] = []
    tree = cKDTree(mid)
    for f in flat[: 50 * n]:
        if len(out) >= n or blk.ravel()[f] < 2:
            break
        bx, by = np.unravel_index(f, blk.shape)
        guess = lo + (np.array([bx, by]) + 1.0) * bin_px
        near = tree.query_ball_point(guess, 1.5 * bin_px)
        if not near:
            continue
        c = mid[near].mean(0)
        near = tree.query_ball_point(c, 1.5 * bin_px)
        c = mid[near].mean(0) if near else c
        if any(np.linalg.norm(c - o) < SUPPRESS_PX for o in out):
            continue
        out.append(c)
    return np.array(out).reshape(-1, 2)


def _same(h1: Hypothesis, h2: Hypothesis, w: np.ndarray | None = None) -> bool:
    """True when two hypotheses put the integer beams at the same places (relabelling by a
    lattice symmetry changes A but not the predicted set)."""
    if np.linalg.norm(h1.centre - h2.centre) > 3.0:
        return False
    if abs(h1.scale / h2.scale - 1.0) > 0.02:
        return False
    if w is None:
        return np.linalg.norm(h1.A - h2.A) < 0.01 * np.linalg.norm(h1.A)
    p1 = _predict(h1.centre, h1.A, w)
    p2 = _predict(h2.centre, h2.A, w)
    d, _ = cKDTree(p2).query(p1)
    return bool(np.all(d < 2.0 + 0.01 * np.linalg.norm(p1 - h1.centre, axis=1)))


def _preemptive(C, AL, MM, z, tree, screen, chunk: int) -> np.ndarray:
    out = np.empty(len(C))
    for s in range(0, len(C), chunk):
        c, al, m = C[s : s + chunk], AL[s : s + chunk], MM[s : s + chunk]
        zt = np.where(m[:, None], -np.conj(z)[None, :], z[None, :])
        q = c[:, None] + np.conj(al[:, None] * zt)
        pts = np.stack([q.real.ravel(), q.imag.ravel()], axis=1)
        r = np.abs(q - c[:, None]).ravel()
        tol = 3.0 + 0.03 * r
        d, _ = tree.query(pts, k=1, distance_upper_bound=float(tol.max()))
        hit_flat = d <= tol
        hit = hit_flat.reshape(q.shape)
        # soft count: a match at distance d counts 1 - (d / tol)^2 / 2, so that among the many
        # hypotheses of a dense pattern that hit as many spots the well-fitting ones come first
        soft = np.where(hit_flat, 1.0 - 0.5 * (np.minimum(d, tol) / tol) ** 2, 0.0).reshape(q.shape)
        inside = _inside(pts, screen, 3.0).reshape(q.shape)
        out[s : s + chunk] = soft.sum(1) - 0.5 * (inside & ~hit).sum(1)
    return out


# =============================================================================== calibration
@dataclass(frozen=True, eq=False)
class Calibration:
    """A calibrated screen: geometry, energy offset and the integer spots it rests on.

    Attributes
    ----------
    screen : ScreenGeometry
        The fitted screen (centre, scale, rotation, mirror, ellipticity, camera distance)
        with the acceptance, shadow and image size of the screen it started from.
    energy_offset : float
        ``E_true - E_nominal`` in eV (0 unless fitted from several energies).
    energies : tuple of float
        Nominal energies of the images used, eV.
    lattice : Lattice2D or None
        The substrate lattice used.
    rms_px : float
        RMS distance between matched integer spots and their predicted positions, px.
    n_matched : int
        Number of matched integer-order spots (all images).
    uncertainties : dict
        Standard errors of the fitted quantities (same names as the screen fields;
        ``energy_offset`` in eV).
    matches : tuple
        One ``(image, spot, h, k, dx, dy)`` tuple per matched integer spot (residual in px).
    fitted_energy_offset : bool
        True when the energy offset was fitted.
    n_refit : int
        Spots of every order (integer and fractional) the screen was refitted to by
        :func:`refine_calibration`, 0 when it rests on the integer-order spots alone; ``rms_px``
        is then the RMS of that refit.
    """

    screen: ScreenGeometry
    energy_offset: float = 0.0
    energies: tuple = ()
    lattice: Lattice2D | None = None
    rms_px: float = math.nan
    n_matched: int = 0
    uncertainties: dict = field(default_factory=dict)
    matches: tuple = ()
    fitted_energy_offset: bool = False
    n_refit: int = 0

    def energy(self, nominal_eV: float) -> float:
        """The true energy (eV) of a nominal beam energy: ``nominal + energy_offset``."""
        return float(nominal_eV) + self.energy_offset

    def to_k_parallel(self, pixels, nominal_eV: float) -> np.ndarray:
        """Parallel momenta (1/Angstrom) of image positions at a nominal energy."""
        return self.screen.to_k_parallel(pixels, self.energy(nominal_eV))

    def to_pixels(self, k_parallel, nominal_eV: float) -> np.ndarray:
        """Image positions of beams of parallel momentum ``k_parallel`` at a nominal energy."""
        return fast_pixels(self.screen, k_parallel, self.energy(nominal_eV))

    def to_dict(self) -> dict:
        """JSON record; :func:`calibration_from_dict` reads it back."""
        s = self.screen
        return {
            "kind": "surfgeo screen calibration",
            "centre_px": [s.centre_x, s.centre_y],
            "rotation_deg": s.rotation_deg,
            "mirror": s.mirror,
            "scale_px_per_rad": s.scale,
            "stretch": s.stretch,
            "stretch_deg": s.stretch_deg,
            "model": s.kind,
            "camera_distance": getattr(s, "camera_distance", None),
            "energy_offset_eV": self.energy_offset,
            "energy_offset_fitted": self.fitted_energy_offset,
            "energies_eV": list(self.energies),
            "rms_px": self.rms_px,
            "integer_spots": self.n_matched,
            "refit_spots": self.n_refit,
            "uncertainty": dict(self.uncertainties),
            "lattice": None if self.lattice is None else self.lattice.to_dict(),
            "matched": [
                {
                    "image": int(i),
                    "spot": int(j),
                    "hk": [int(h), int(k)],
                    "residual_px": [float(dx), float(dy)],
                }
                for i, j, h, k, dx, dy in self.matches
            ],
            "screen": s.to_dict(),
        }

    def describe(self) -> str:
        """One paragraph for reports."""
        u = self.uncertainties
        s = self.screen

        def pm(name, fmt=".3g"):
            return f" ± {u[name]:{fmt}}" if name in u and math.isfinite(u[name]) else ""

        lines = [
            f"centre ({s.centre_x:.2f}{pm('centre_x', '.2f')}, {s.centre_y:.2f}{pm('centre_y', '.2f')}) px, "
            f"scale {s.scale:.2f}{pm('scale', '.2f')} px/rad, rotation {s.rotation_deg % 360:.2f}"
            f"{pm('rotation_deg', '.2f')} deg{', mirrored' if s.mirror else ''}",
            f"ellipticity {100 * s.stretch:.2f} % along {s.stretch_deg:.1f} deg"
            + (
                f", camera distance {s.camera_distance:.3g} screen radii"
                if isinstance(s, CameraScreen)
                else ""
            ),
            (
                f"{self.n_matched} integer-order spots; refitted to all {self.n_refit} matched spots "
                f"(integer and fractional order), rms {self.rms_px:.2f} px"
                if self.n_refit
                else f"{self.n_matched} integer-order spots, rms {self.rms_px:.2f} px"
            )
            + (
                f", energy offset {self.energy_offset:+.2f}{pm('energy_offset', '.2f')} eV"
                if self.fitted_energy_offset
                else (
                    f", energy offset {self.energy_offset:+.2f} eV (set, not fitted)"
                    if self.energy_offset
                    else ""
                )
            ),
        ]
        return "\n".join(lines)


def calibration_from_dict(data: dict, source: str = "calibration") -> Calibration:
    """Rebuild a :class:`Calibration` from :meth:`Calibration.to_dict` output.

    Raises
    ------
    FileFormatError
        When the record has no ``screen`` object or the screen does not parse.
    """
    if not isinstance(data, dict) or not isinstance(data.get("screen"), dict):
        raise FileFormatError(f"{source} is not a screen calibration: it has no 'screen' object.")
    try:
        screen = screen_from_dict(data["screen"])
    except (InputError, TypeError) as exc:
        raise FileFormatError(f"{source}: the 'screen' object is not valid ({exc}).") from None
    try:
        offset = float(data.get("energy_offset_eV", 0.0) or 0.0)
    except (TypeError, ValueError):
        raise FileFormatError(f"{source}: 'energy_offset_eV' must be a number of eV.") from None
    lat = None
    if isinstance(data.get("lattice"), dict) and "a1" in data["lattice"]:
        try:
            lat = Lattice2D.from_vectors(data["lattice"]["a1"], data["lattice"]["a2"])
        except (InputError, KeyError, TypeError):
            lat = None
    matches = tuple(
        (
            m.get("image", 0),
            m["spot"],
            m["hk"][0],
            m["hk"][1],
            *(m.get("residual_px") or (math.nan, math.nan)),
        )
        for m in data.get("matched", [])
        if isinstance(m, dict) and "spot" in m and "hk" in m
    )
    unc = {k: float(v) for k, v in (data.get("uncertainty") or {}).items() if isinstance(v, (int, float))}
    return Calibration(
        screen=screen,
        energy_offset=offset,
        energies=tuple(float(e) for e in data.get("energies_eV", []) or []),
        lattice=lat,
        rms_px=float(data.get("rms_px") or math.nan),
        n_matched=int(data.get("integer_spots") or len(matches)),
        uncertainties=unc,
        matches=matches,
        fitted_energy_offset=bool(data.get("energy_offset_fitted", False)),
        n_refit=int(data.get("refit_spots") or 0),
    )


def load_calibration(path: str | os.PathLike) -> Calibration:
    """Read a calibration JSON file written from :meth:`Calibration.to_dict`.

    Raises
    ------
    FileFormatError
        Missing file, unreadable JSON, or not a calibration record.
    """
    p = Path(path)
    if not p.is_file():
        raise FileFormatError(
            f"calibration file {p} does not exist; give a JSON file from 'surfgeo calibrate'."
        )
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise FileFormatError(f"calibration file {p} is not readable JSON ({exc}).") from None
    return calibration_from_dict(data, source=f"calibration file {p}")


def _positions(spots) -> np.ndarray:
    if hasattr(spots, "positions"):
        P = np.asarray(spots.positions, dtype=float)
    else:
        P = np.asarray(spots, dtype=float)
    if P.size == 0:
        return np.zeros((0, 2))
    if P.ndim != 2 or P.shape[1] != 2:
        raise InputError(f"spot positions must be an (N, 2) array of [x, y] pixels, got shape {P.shape}.")
    if not np.all(np.isfinite(P)):
        raise InputError("spot positions must be finite numbers of pixels.")
    return P


def _check_energy(e) -> float:
    return positive_number(e, "the beam energy", "energy", "eV")


# ------------------------------------------------------------------------------- least squares
@dataclass
class _Image:
    P: np.ndarray
    energy: float
    beams: _Beams
    tree: cKDTree
    pairs: np.ndarray  # (n, 2) spot, beam


def _model_pixels(
    p: np.ndarray,
    mirror: bool,
    screen: ScreenGeometry,
    kp: np.ndarray,
    energy: float,
    n_extra: int,
    fit_offset: bool,
    centre_shift=None,
) -> np.ndarray:
    extra = p[6 : 6 + n_extra] if n_extra else None
    scr = _with_radial(screen, extra)
    dE = p[6 + n_extra] if fit_offset else 0.0
    k = wavenumber(max(energy + dE, 1e-3))
    w = normalised_points(scr, kp, k)
    c = p[:2] if centre_shift is None else p[:2] + centre_shift
    return c + w @ _linear_from_params(p, mirror).T


def _fit(
    images: list[_Image],
    screen: ScreenGeometry,
    p0: np.ndarray,
    mirror: bool,
    fit_distance: bool,
    fit_offset: bool,
    f_scale: float,
):
    n_extra = 1 if (fit_distance and isinstance(screen, CameraScreen)) else 0
    x0 = list(p0[:6])
    if n_extra:
        x0.append(_distance_param(screen))
    if fit_offset:
        x0.append(0.0)
    return _solve(images, screen, np.array(x0, dtype=float), mirror, n_extra, fit_offset, f_scale), n_extra


def _solve(images: list[_Image], screen, x0: np.ndarray, mirror: bool, n_extra: int, fit_offset: bool,
           f_scale: float):
    """Robust (soft-L1) least squares of the fit vector (screen, camera distance, energy offset)
    on the matched integer spots of every image, from ``x0``; the offset keeps every true energy
    above 1 eV."""
    x0 = np.array(x0, dtype=float)
    lo = np.full(len(x0), -np.inf)
    hi = np.full(len(x0), np.inf)
    if fit_offset:
        lo[-1] = -min(im.energy for im in images) + 1.0
        hi[-1] = 1000.0
        x0[-1] = min(max(x0[-1], lo[-1] + 1e-6), hi[-1] - 1e-6)

    def resid(x):
        out = []
        for im in images:
            si, bi = im.pairs[:, 0], im.pairs[:, 1]
            pred = _model_pixels(x, mirror, screen, im.beams.kp[bi], im.energy, n_extra, fit_offset)
            out.append((pred - im.P[si]).ravel())
        return np.nan_to_num(np.concatenate(out), nan=1e3)

    return least_squares(resid, x0, loss="soft_l1", f_scale=f_scale, bounds=(lo, hi), x_scale="jac")


def _rematch(images: list[_Image], x, mirror, screen, n_extra, fit_offset, gate: float) -> None:
    for im in images:
        pred = _model_pixels(x, mirror, screen, im.beams.kp, im.energy, n_extra, fit_offset)
        good = np.all(np.isfinite(pred), axis=1)
        d, j = im.tree.query(np.nan_to_num(pred), k=1, distance_upper_bound=gate)
        hit = good & (d <= gate)
        order = np.argsort(np.where(hit, d, np.inf))
        used: set[int] = set()
        pairs = []
        for b in order:
            if not hit[b]:
                break
            if int(j[b]) in used:
                continue
            used.add(int(j[b]))
            pairs.append((int(j[b]), int(b)))
        if len(pairs) >= MIN_INTEGER_SPOTS:
            im.pairs = np.array(pairs, dtype=np.int64)


def _screen_from_fit(screen: ScreenGeometry, x: np.ndarray, mirror: bool, n_extra: int) -> ScreenGeometry:
    fields = _fields_from_params(x, mirror)
    if n_extra:
        D = _distance_from_param(screen, float(x[6]))
        fields["camera_distance"] = D
        fields["acceptance_deg"] = min(screen.acceptance_deg, _max_acc(D))
    return screen.with_params(**fields)


def _uncertainties(res, mirror: bool, screen: ScreenGeometry, n_extra: int, fit_offset: bool) -> dict:
    J = res.jac
    r = res.fun
    m, n = J.shape
    if m <= n:
        return {}
    try:
        cov = np.linalg.pinv(J.T @ J) * float(r @ r) / (m - n)
    except np.linalg.LinAlgError:
        return {}
    x = res.x

    def fields(v):
        f = _fields_from_params(v, mirror)
        out = [f["centre_x"], f["centre_y"], f["scale"], f["rotation_deg"], f["stretch"], f["stretch_deg"]]
        if n_extra:
            out.append(_distance_from_param(screen, float(v[6])))
        if fit_offset:
            out.append(v[-1])
        return np.array(out)

    names = ["centre_x", "centre_y", "scale", "rotation_deg", "stretch", "stretch_deg"]
    if n_extra:
        names.append("camera_distance")
    if fit_offset:
        names.append("energy_offset")
    f0 = fields(x)
    G = np.zeros((len(f0), len(x)))
    for i in range(len(x)):
        h = 1e-6 * max(1.0, abs(x[i]))
        dx = np.zeros(len(x))
        dx[i] = h
        df = fields(x + dx) - fields(x - dx)
        if len(f0) > 5:
            df[5] = (df[5] + 90.0) % 180.0 - 90.0  # stretch direction wraps at 180
        G[:, i] = df / (2 * h)
    cf = G @ cov @ G.T
    return {name: float(math.sqrt(max(cf[i, i], 0.0))) for i, name in enumerate(names)}


def _finish(images, screen, res, mirror, n_extra, fit_offset, energies, lattice) -> Calibration:
    x = res.x
    fitted = _screen_from_fit(screen, x, mirror, n_extra)
    matches = []
    d2 = []
    for i, im in enumerate(images):
        si, bi = im.pairs[:, 0], im.pairs[:, 1]
        pred = _model_pixels(x, mirror, screen, im.beams.kp[bi], im.energy, n_extra, fit_offset)
        dxy = im.P[si] - pred
        for s, b, (dx, dy) in zip(si, bi, dxy, strict=True):
            h, k = im.beams.labels[b]
            matches.append((i, int(s), int(h), int(k), float(dx), float(dy)))
            d2.append(dx * dx + dy * dy)
    rms = float(math.sqrt(np.mean(d2))) if d2 else math.nan
    return Calibration(
        screen=fitted,
        energy_offset=float(x[-1]) if fit_offset else 0.0,
        energies=tuple(float(e) for e in energies),
        lattice=lattice,
        rms_px=rms,
        n_matched=len(matches),
        uncertainties=_uncertainties(res, mirror, screen, n_extra, fit_offset),
        matches=tuple(matches),
        fitted_energy_offset=fit_offset,
    )


def _no_integer_spots(n: int) -> InputError:
    return InputError(
        f"only {n} measured spot(s) could be recognised as integer-order spots of the substrate, but a "
        f"calibration needs at least {MIN_INTEGER_SPOTS}; check --lattice, --energy and the screen size "
        "or scale, or give more spots."
    )


def calibrate(
    spots,
    lattice: Lattice2D,
    energy_eV: float,
    screen: ScreenGeometry | None = None,
    *,
    scale_tolerance: float = SCALE_TOLERANCE,
    gate_px: float = 3.0,
    fit_distance: bool = True,
    robust_scale_px: float = 1.0,
) -> Calibration:
    """Calibrate a screen from one image's spots at one energy.

    Parameters
    ----------
    spots : SpotList or array_like, shape (N, 2)
        Measured spot positions [x, y], px; integer-order, fractional-order and stray spots
        mixed, the (00) spot may be missing.
    lattice : Lattice2D
        Substrate 1x1 surface lattice.
    energy_eV : float
        Beam energy, eV.
    screen : ScreenGeometry, optional
        Model and starting geometry (see :func:`find_integer_spots`); default: the
        hemispherical screen of 512 x 512 pixels.
    scale_tolerance : float
        Relative window around ``screen.scale`` in which the scale is searched.
    gate_px : float
        Matching gate after the fit, px.
    fit_distance : bool
        Also fit the camera distance (camera model only).
    robust_scale_px : float
        Residual scale (px) of the soft-L1 loss beyond which residuals count linearly.

    Returns
    -------
    Calibration

    Raises
    ------
    InputError
        Too few spots, an energy at which no integer beam reaches the screen, or fewer than
        three recognisable integer-order spots.
    """
    return calibrate_series(
        [spots],
        lattice,
        [energy_eV],
        screen,
        scale_tolerance=scale_tolerance,
        gate_px=gate_px,
        fit_distance=fit_distance,
        robust_scale_px=robust_scale_px,
    )


def calibrate_series(
    spot_lists,
    lattice: Lattice2D,
    energies,
    screen: ScreenGeometry | None = None,
    *,
    scale_tolerance: float = SCALE_TOLERANCE,
    gate_px: float = 3.0,
    fit_distance: bool = True,
    fit_energy_offset: bool | None = None,
    robust_scale_px: float = 1.0,
    hypotheses: list | None = None,
) -> Calibration:
    """Calibrate a screen jointly from images at several energies.

    Every screen parameter is shared between the images; with at least two different
    energies the energy offset ``dE`` (``E_true = E_nominal + dE``) is fitted together with
    the scale.

    Parameters
    ----------
    spot_lists : sequence of SpotList or (N, 2) arrays
        One list of measured spots per image.
    lattice : Lattice2D
        Substrate 1x1 surface lattice.
    energies : sequence of float
        Nominal beam energy of each image, eV.
    screen : ScreenGeometry, optional
        Model and starting geometry, as for :func:`calibrate`.
    fit_energy_offset : bool, optional
        Fit ``dE``; default: when the energies are not all equal.
    scale_tolerance, gate_px, fit_distance, robust_scale_px
        As for :func:`calibrate`.
    hypotheses : list of Hypothesis, optional
        One recognised set of integer spots per image (from :func:`find_integer_spots`) to
        start from instead of the best one.

    Returns
    -------
    Calibration
    """
    screen = screen or default_screen()
    spot_lists = list(spot_lists)
    energies = [_check_energy(e) for e in energies]
    if len(spot_lists) != len(energies) or not spot_lists:
        raise InputError(
            f"give one energy per spot list: {len(spot_lists)} spot list(s) and {len(energies)} energies."
        )
    if fit_energy_offset is None:
        fit_energy_offset = len(set(energies)) > 1
    if fit_energy_offset and len(set(energies)) < 2:
        raise InputError("an energy offset can only be fitted from images at two or more different energies.")

    images: list[_Image] = []
    inits = []
    for n_im, (spots, e) in enumerate(zip(spot_lists, energies, strict=True)):
        P = _positions(spots)
        if hypotheses is not None:
            hyps = [hypotheses[n_im]]
        else:
            hyps = find_integer_spots(P, lattice, e, screen, scale_tolerance=scale_tolerance, gate_px=gate_px)
        if not hyps or len(hyps[0].pairs) < MIN_INTEGER_SPOTS:
            raise _no_integer_spots(len(hyps[0].pairs) if hyps else 0)
        h = hyps[0]
        beams = _beam_table(lattice, e, screen)
        images.append(_Image(P, e, beams, cKDTree(P), h.pairs.copy()))
        inits.append(h)

    # bring every image's labels to the orientation of the first
    c0, A0 = inits[0].centre, inits[0].A
    U0 = _orthogonal(A0)
    ops = lattice.point_group()
    for im, h in zip(images[1:], inits[1:], strict=True):
        best, best_d = None, math.inf
        for op in ops:
            R = np.asarray(op.cartesian)
            d = np.linalg.norm(_orthogonal(h.A @ R.T) - U0)
            if d < best_d:
                best, best_d = R, d
        if best is not None:
            kp_new = im.beams.kp[im.pairs[:, 1]] @ best.T
            lab = np.rint(kp_new @ lattice.vectors.T / (2 * math.pi)).astype(np.int64)
            index = {tuple(v): i for i, v in enumerate(im.beams.labels.tolist())}
            new_b = [index.get(tuple(v)) for v in lab.tolist()]
            keep = np.array([b is not None for b in new_b])
            im.pairs = np.column_stack([im.pairs[keep, 0], np.array([b for b in new_b if b is not None])])

    p0, mirror = _params_from_affine(c0, A0)
    res, n_extra = _fit(images, screen, p0, mirror, fit_distance, fit_energy_offset, robust_scale_px)
    for _ in range(2):
        r = res.fun.reshape(-1, 2)
        rms = float(np.sqrt(np.median(np.sum(r * r, axis=1)))) if len(r) else gate_px
        _rematch(images, res.x, mirror, screen, n_extra, fit_energy_offset, max(gate_px, 3.0 * rms))
        if sum(len(im.pairs) for im in images) < MIN_INTEGER_SPOTS:
            raise _no_integer_spots(sum(len(im.pairs) for im in images))
        res = _refit(images, screen, res, mirror, n_extra, fit_energy_offset, robust_scale_px)
    if not res.success and res.status <= 0:  # pragma: no cover - least_squares rarely fails outright
        raise ComputationError(f"the screen fit did not converge ({res.message}).")
    return _finish(images, screen, res, mirror, n_extra, fit_energy_offset, energies, lattice)


def calibration_candidates(
    spots,
    lattice: Lattice2D,
    energy_eV: float,
    screen: ScreenGeometry | None = None,
    *,
    n: int = 8,
    margin: float = 15.0,
    **options,
) -> list[Calibration]:
    """Full calibrations from the best distinct hypotheses of :func:`find_integer_spots`.

    When the integer spots are few (only the first shell on the screen) and the
    fractional-order spots dense, several hypotheses can be almost equally good; a later step
    (indexing) can choose between them by how well each explains *all* spots.

    Parameters
    ----------
    spots, lattice, energy_eV, screen
        As for :func:`calibrate`.
    n : int
        Most calibrations returned, best hypothesis first.
    margin : float
        Only hypotheses whose score is within ``margin`` of the best are kept (near-ties):
        one calibration when the integer spots are decisive, several when they are not.
    **options
        ``scale_tolerance``, ``gate_px``, ``fit_distance``, ``robust_scale_px``.

    Raises
    ------
    InputError
        As :func:`calibrate`, when not even the best hypothesis gives a calibration.
    """
    P = _positions(spots)
    screen = screen or default_screen()
    e = _check_energy(energy_eV)
    hyps = find_integer_spots(
        P,
        lattice,
        e,
        screen,
        scale_tolerance=options.get("scale_tolerance", SCALE_TOLERANCE),
        gate_px=options.get("gate_px", 3.0),
        n_best=n,
    )
    out = []
    for h in hyps:
        if len(h.pairs) < MIN_INTEGER_SPOTS or h.score < hyps[0].score - margin:
            continue
        try:
            out.append(calibrate_series([P], lattice, [e], screen, hypotheses=[h], **options))
        except InputError:
            continue
    if not out:
        raise _no_integer_spots(len(hyps[0].pairs) if hyps else 0)
    return out


def unseen_integer_spots(
    calibration: Calibration, spots, lattice: Lattice2D, nominal_eV: float, margin_px: float = 3.0
) -> tuple[int, int]:
    """How many integer-order spots a calibration puts clearly on the screen, and how many of
    those have no measured spot near them.

    A calibration that rests on a few matched spots but predicts many more integer-order spots
    that are not there is suspect: a wrong energy or lattice constant can make a pattern of
    fractional-order spots look like the integer-order spots of a denser lattice.

    Parameters
    ----------
    calibration : Calibration
    spots : SpotList or array_like, shape (N, 2)
        Measured positions, px.
    lattice : Lattice2D
        Substrate 1x1 lattice.
    nominal_eV : float
        Nominal energy of the image, eV (the calibration's energy offset is applied).
    margin_px : float
        Beams closer than this to an image edge or the gun's shadow are not counted.

    Returns
    -------
    predicted, unseen : int
        Integer-order beams other than (00) clearly on the screen, and those of them with no
        measured spot within ``max(3 px, 3 rms)``.
    """
    P = _positions(spots)
    E = calibration.energy(nominal_eV)
    labels, kp = integer_beams(lattice, E, calibration.screen)
    px = fast_pixels(calibration.screen, kp, E)
    clear = on_screen(calibration.screen, px, kp, wavenumber(E), margin=margin_px)
    clear &= np.any(labels != 0, axis=1)
    if not clear.any():
        return 0, 0
    rms = calibration.rms_px if math.isfinite(calibration.rms_px) else 1.0
    gate = max(3.0, 3.0 * rms)
    if len(P) == 0:
        return int(clear.sum()), int(clear.sum())
    d, _ = cKDTree(P).query(px[clear], k=1)
    return int(clear.sum()), int(np.sum(d > gate))


def refine_calibration(
    calibration: Calibration,
    positions,
    k_parallel,
    energy_eV: float,
    *,
    fit_distance: bool = True,
    robust_scale_px: float = 1.0,
) -> Calibration:
    """Refit a calibration's screen to spots whose parallel momenta are known.

    Used after indexing: every spot the best candidate explains (integer and fractional
    order) then anchors the screen, not only the integer-order spots, which is a much longer
    lever arm when few integer spots are on the screen. Robust (soft-L1) least squares from
    the current parameters; the mirror and the energy offset are kept.

    Parameters
    ----------
    calibration : Calibration
        Starting point.
    positions : array_like, shape (n, 2)
        Measured positions, px.
    k_parallel : array_like, shape (n, 2)
        The parallel momenta they are assigned to, 1/Angstrom.
    energy_eV : float
        Nominal energy, eV.

    Returns
    -------
    Calibration
        With ``n_refit = n`` and ``rms_px`` of the refit; ``n_matched`` and the integer-spot
        ``matches`` of the starting calibration are kept for the record.
    """
    P = _positions(positions)
    kp = np.asarray(k_parallel, dtype=float).reshape(-1, 2)
    if len(P) != len(kp) or len(P) < MIN_INTEGER_SPOTS:
        raise InputError(f"a calibration refit needs at least {MIN_INTEGER_SPOTS} spots with momenta.")
    screen = calibration.screen
    E = calibration.energy(energy_eV)
    mirror = screen.mirror
    n_extra = 1 if (fit_distance and isinstance(screen, CameraScreen)) else 0
    x0 = list(_params_from_screen(screen))
    if n_extra:
        x0.append(_distance_param(screen))
    x0 = np.array(x0)

    def resid(x):
        return np.nan_to_num((_model_pixels(x, mirror, screen, kp, E, n_extra, False) - P).ravel(), nan=1e3)

    res = least_squares(resid, x0, loss="soft_l1", f_scale=robust_scale_px, x_scale="jac")
    fitted = _screen_from_fit(screen, res.x, mirror, n_extra)
    r = _model_pixels(res.x, mirror, screen, kp, E, n_extra, False) - P
    rms = float(np.sqrt(np.nanmean(np.sum(r * r, axis=1))))
    return Calibration(
        screen=fitted,
        energy_offset=calibration.energy_offset,
        energies=calibration.energies,
        lattice=calibration.lattice,
        rms_px=rms,
        n_matched=calibration.n_matched,
        uncertainties=_uncertainties(res, mirror, screen, n_extra, False),
        matches=calibration.matches,
        fitted_energy_offset=calibration.fitted_energy_offset,
        n_refit=len(P),
    )


def _refit(images, screen, res, mirror, n_extra, fit_offset, f_scale):
    """Least squares again from the previous solution (all parameters)."""
    return _solve(images, screen, res.x, mirror, n_extra, fit_offset, f_scale)


def _orthogonal(A: np.ndarray) -> np.ndarray:
    u, _, vt = np.linalg.svd(np.diag([1.0, -1.0]) @ A)
    return u @ vt


__all__ = [
    "Calibration",
    "Hypothesis",
    "calibrate",
    "calibrate_series",
    "calibration_candidates",
    "calibration_from_dict",
    "fast_pixels",
    "find_integer_spots",
    "integer_beams",
    "linear_part",
    "load_calibration",
    "normalised_points",
    "on_screen",
    "pixels_from_normalised",
    "refine_calibration",
    "unseen_integer_spots",
    "MIN_SPOTS",
]
