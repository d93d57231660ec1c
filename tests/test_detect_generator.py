"""Spot detection on the rendered cases of the synthetic-measurement generator (issue 6).

Everything here is synthetic: the images come from surfgeo's own forward model
(:func:`surfgeo.measure.synthetic.synthetic_measurement`, drawn by
:func:`surfgeo.measure.render.render_pattern`), not from a measurement.

A fixed random generator draws ``N_CASES`` cases with the generator's own variety (random
lattice kind and constant, superstructure up to area 12 with its domains, energy, centre,
rotation, mirror, scale, ellipticity, 0.5-1 px jitter, missing fractional-order spots, stray
spots, gun shadow and holder, spot width 1.4-2.2 px). Each case is rendered as a 512 x 512
16-bit image with glow and shot noise (the renderer's own reproducible noise; the noise
fields of different cases are uncorrelated because they are drawn for different expected
images), read as a :class:`~surfgeo.measure.images.MeasuredImage` and given to the detector
exactly as ``surfgeo calibrate`` does: ``build_mask`` with the screen and gun found
automatically, then ``detect_spots`` with its default settings (threshold, spot width
measured, camera gain estimated).

Definitions
-----------
* **True spots** are the rendered spots (``SyntheticImage.positions``: measured beams and
  stray spots). A true spot counts towards recall when its SNR, exactly as ``render.py``
  reports it (``SyntheticImage.snr`` = N / sqrt(N + 4 pi s^2 b)), is at least 5, and it is
  *clear*: every pixel centre within ``FOOTPRINT`` = 3 spot widths of its centre (the
  detector's intensity aperture, 98.9 % of the light) lies on the image and has a
  transmission of at least 0.5, i.e. no part of the spot lies inside the gun shadow or its
  holder, beyond the screen rim or beyond the image border (0.5 is the geometric edge of the
  renderer's blurred masks). Spots that are partly shadowed or cut are excluded because part
  of them is inside the shadow or off the screen, and because the renderer's SNR (photons at
  the centre's transmission) and the localisation bound (an uncut Gaussian) do not describe
  them; their recall is printed separately.
* **Matching** is one-to-one (Hungarian assignment, ``scipy.optimize.linear_sum_assignment``)
  within a gate of ``GATE`` = 1.5 spot widths. For the faintest spots counted (SNR 5,
  background-limited) the Thompson-Larson-Webb standard error per axis is about
  sqrt(2) s / SNR = 0.28 s, so a correct detection falls outside 1.5 s with probability
  exp(-(1.5 / 0.28)^2 / 2) ~ 1e-6; one-to-one assignment keeps a detection from serving two
  spots and counts a split spot's second detection as false.
* **Recall**: matched clear spots with SNR >= 5 over all clear spots with SNR >= 5, pooled
  over all cases. **Precision**: one minus the fraction of detections the detector reports
  with snr >= 5 (the detector's documented contract: noise maxima above its threshold of 4.5
  come out below 5) that match no rendered spot at all (faint and partly shadowed spots are
  real spots, not false detections).
* **Localisation**: errors of the matched clear spots with SNR >= 5 against the variance of
  R. E. Thompson, D. R. Larson and W. W. Webb, Biophys. J. 82, 2775 (2002), eq. 17 with its
  background term (``SyntheticImage.thompson_variance``).

Number of cases: the issue asks for 100 cases; a case takes about 0.2 s here (draw 0.01 s,
render 0.03 s, masks 0.08 s, detection 0.04 s, more when the 2 cores are shared), so
``N_CASES`` = 150 (about 27 000 counted spots, 27-34 s for this file) fits the 30-40 s allowed
and narrows the sampling noise of the figures against 100 cases. Case ``i`` is the ``i + 1``-th
draw of ``synthetic_measurement`` from ``numpy.random.default_rng(CASE_STREAM)`` (rendering does
not draw from it). Run with ``-s`` to see the figures.

The pooled recall depends on how many close pairs a draw holds. Before the detector's
residual search (step 7 of :mod:`surfgeo.measure.detect`) it was 0.988 on this draw and
0.992, 0.975, 0.986 and 0.985 for CASE_STREAM 1, 2, 3, 4 (150 cases each); with it, 0.993 on
this draw and 0.994, 0.989 and 0.994 for CASE_STREAM 1, 2, 3, with close pairs (2-5 spot
widths) found at 0.977 here and 0.979, 0.932 and 0.971 there. Most of the close pairs still
missed were in crowded cases (square (9x1), spots 9-10 px apart) whose band-passed noise,
inflated by the spot wings, was 1.3-1.6 x the true noise. With that noise capped at what the
pixel differences predict (step 3): pooled recall 0.9937 on this draw (27295/27467),
precision 0.9997, close pairs 0.9837 (1387/1410); for CASE_STREAM 1, 2, 3 pooled 0.9943,
0.9892, 0.9942 and close pairs 0.982, 0.935, 0.975. The close pairs pass the requirement on
this draw but not on every draw: CASE_STREAM 2 holds a (1x11) case with spots 4.5 px
(about 2 widths) apart, at the Sparrow limit.
"""

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from scipy.spatial import cKDTree

from surfgeo.measure.detect import detect_spots
from surfgeo.measure.images import image_from_array
from surfgeo.measure.masks import build_mask
from surfgeo.measure.synthetic import LATTICE_KINDS, synthetic_measurement

#: Number of generator cases rendered and detected.
N_CASES = 150
#: Fixed state of the random generator that draws the cases.
CASE_STREAM = 2002
#: Smallest SNR (as render.py reports it) of a spot that must be found.
SNR_MIN = 5.0
#: Radius (spot widths) that must be free of shadow, rim and image border for a clear spot.
FOOTPRINT = 3.0
#: Matching gate, spot widths.
GATE = 1.5
#: A counted spot with another spot closer than this (spot widths) is crowded.
CROWDED = 5.0
#: Two equal Gaussian spots of width s closer than 2 s show a single maximum (Sparrow limit).
SPARROW = 2.0
_UNMATCHED = 1e9


def _footprint_clear(transmission: np.ndarray, positions: np.ndarray, sigma: float) -> np.ndarray:
    """True for spots whose pixels within FOOTPRINT spot widths are on the image with T >= 0.5."""
    h, w = transmission.shape
    r = FOOTPRINT * sigma
    n = int(np.ceil(r)) + 1
    dy, dx = np.mgrid[-n: n + 1, -n: n + 1]
    cx = np.rint(positions[:, 0]).astype(int)
    cy = np.rint(positions[:, 1]).astype(int)
    px = cx[:, None, None] + dx[None]  # (spots, k, k) pixel columns
    py = cy[:, None, None] + dy[None]
    inside_disc = (px - positions[:, 0, None, None]) ** 2 + (py - positions[:, 1, None, None]) ** 2 <= r * r
    on_image = (px >= 0) & (px < w) & (py >= 0) & (py < h)
    t = transmission[np.clip(py, 0, h - 1), np.clip(px, 0, w - 1)]
    ok = ~inside_disc | (on_image & (t >= 0.5))
    return ok.all(axis=(1, 2))


def _assign(truth: np.ndarray, found: np.ndarray, gate: float) -> tuple[np.ndarray, np.ndarray]:
    """One-to-one matching within ``gate``: index of the partner of each true / found spot, or -1."""
    t_of = np.full(len(truth), -1)
    f_of = np.full(len(found), -1)
    if len(truth) == 0 or len(found) == 0:
        return t_of, f_of
    d = np.linalg.norm(truth[:, None, :] - found[None, :, :], axis=2)
    cost = np.where(d <= gate, d, _UNMATCHED)
    rows, cols = linear_sum_assignment(cost)
    ok = d[rows, cols] <= gate
    t_of[rows[ok]] = cols[ok]
    f_of[cols[ok]] = rows[ok]
    return t_of, f_of


def _run_case(rng: np.random.Generator) -> dict:
    """Draw, render, mask and detect one case; return what the checks need."""
    m = synthetic_measurement(rng)
    syn = m.render()  # 512 x 512 uint16, the renderer's reproducible shot and read noise
    image = image_from_array(syn.image, source="synthetic case")
    masks = build_mask(image.data)  # screen and gun shadow found automatically
    det = detect_spots(image, mask=masks.usable)  # default settings
    truth = syn.positions
    found = det.spots.positions
    t_of, f_of = _assign(truth, found, GATE * m.spot_sigma)
    clear = _footprint_clear(syn.transmission, truth, m.spot_sigma)
    snr = syn.snr
    counted = clear & (snr >= SNR_MIN)
    with np.errstate(divide="ignore", invalid="ignore"):  # spots off the image have no photons
        bound_var = syn.thompson_variance
    hit = counted & (t_of >= 0)
    err = found[t_of[hit]] - truth[hit]
    partial = ~clear & syn.visible & (snr >= SNR_MIN)
    nn = cKDTree(truth).query(truth, k=2)[0][:, 1] if len(truth) > 1 else np.full(len(truth), np.inf)
    crowded = counted & (nn < CROWDED * m.spot_sigma)
    resolvable = crowded & (nn >= SPARROW * m.spot_sigma)
    ix = np.clip(np.rint(truth[:, 0]).astype(int), 0, syn.image.shape[1] - 1)
    iy = np.clip(np.rint(truth[:, 1]).astype(int), 0, syn.image.shape[0] - 1)
    centre_masked = ~masks.usable[iy, ix]
    return {
        "kind": m.lattice.kind(length_tol=1e-2, angle_tol=1.0),
        "matrix": m.matrix.tolist(),
        "area": m.area,
        "energy": m.energy,
        "mirror": m.screen.mirror,
        "strays": int(np.sum(m.origin < 0)),
        "missing": len(m.missing),
        "shadow_found": masks.shadow_found,
        "screen_found": masks.screen_found,
        "spot_sigma": m.spot_sigma,
        "n_counted": int(counted.sum()),
        "n_hit": int(hit.sum()),
        "missed_snr": snr[counted & (t_of < 0)],
        "n_crowded": int(crowded.sum()),
        "n_crowded_hit": int((crowded & (t_of >= 0)).sum()),
        "n_resolvable": int(resolvable.sum()),
        "n_resolvable_hit": int((resolvable & (t_of >= 0)).sum()),
        "n_clear_hidden": int(np.sum(clear & ~syn.visible)),
        "n_missed_faint": int(np.sum(counted & (t_of < 0) & (snr < 6))),
        "n_missed_masked": int(np.sum(counted & (t_of < 0) & centre_masked)),
        "n_partial": int(partial.sum()),
        "n_partial_hit": int((partial & (t_of >= 0)).sum()),
        "n_claimed": int(np.sum(det.spots.snr >= SNR_MIN)),
        "n_false": int(np.sum((det.spots.snr >= SNR_MIN) & (f_of < 0))),
        "false_xy": found[(det.spots.snr >= SNR_MIN) & (f_of < 0)],
        "err": err,
        "bound_var": bound_var[hit],
        # the renderer's gain is 1 ADU per photon, so both are in ADU
        "noise_ratio": det.pixel_noise / float(np.median(np.sqrt(syn.noise_var[counted])))
        if counted.any() else np.nan,
        "spacing": float(np.median(nn[counted])) if counted.any() else np.nan,
    }


@pytest.fixture(scope="module")
def cases() -> list[dict]:
    rng = np.random.default_rng(CASE_STREAM)
    return [_run_case(rng) for _ in range(N_CASES)]


def _pooled(cases):
    n_true = sum(c["n_counted"] for c in cases)
    n_hit = sum(c["n_hit"] for c in cases)
    n_claimed = sum(c["n_claimed"] for c in cases)
    n_false = sum(c["n_false"] for c in cases)
    return n_true, n_hit, n_claimed, n_false


def _worst(cases, k=5) -> str:
    """The k cases with the lowest recall, described for a report."""
    order = sorted(range(len(cases)), key=lambda i: cases[i]["n_hit"] / max(cases[i]["n_counted"], 1))
    lines = []
    for i in order[:k]:
        c = cases[i]
        lines.append(
            f"  case {i}: recall {c['n_hit']}/{c['n_counted']}, {c['kind']} M={c['matrix']}, "
            f"E={c['energy']:.0f} eV, spot width {c['spot_sigma']:.2f} px, median neighbour distance "
            f"{c['spacing']:.1f} px, detector pixel noise / true {c['noise_ratio']:.2f}, "
            f"missed SNR {np.round(np.sort(c['missed_snr'])[::-1][:6], 1).tolist()}"
        )
    return "\n".join(lines)


def test_cases_show_the_generators_variety(cases):
    # the population is what the issue describes, not a narrow corner of it
    assert len(cases) == N_CASES
    assert {c["kind"] for c in cases} == set(LATTICE_KINDS)
    assert {c["mirror"] for c in cases} == {False, True}
    assert max(c["area"] for c in cases) >= 10 and min(c["area"] for c in cases) == 2
    assert sum(c["strays"] for c in cases) > N_CASES  # about 2 per case
    assert sum(c["missing"] for c in cases) > N_CASES
    assert min(c["energy"] for c in cases) < 80 and max(c["energy"] for c in cases) > 200
    # the automatic masks found a screen and a gun shadow in nearly every case
    assert sum(c["screen_found"] for c in cases) >= 0.95 * N_CASES
    assert sum(c["shadow_found"] for c in cases) >= 0.95 * N_CASES
    # enough close pairs to measure their recall (test_recall_of_resolvable_close_pairs)
    assert sum(c["n_resolvable"] for c in cases) > 500
    # the footprint rule agrees with the renderer: a clear spot is a visible spot
    assert sum(c["n_clear_hidden"] for c in cases) == 0


def test_recall_and_precision_at_snr_5(cases):
    n_true, n_hit, n_claimed, n_false = _pooled(cases)
    recall = n_hit / n_true
    precision = 1.0 - n_false / n_claimed
    n_partial = sum(c["n_partial"] for c in cases)
    n_partial_hit = sum(c["n_partial_hit"] for c in cases)
    print(
        f"\n[detect on generator cases] {N_CASES} cases, {n_true} clear spots with SNR >= {SNR_MIN:g}: "
        f"recall {recall:.4f} ({n_true - n_hit} missed); {n_claimed} detections with snr >= "
        f"{SNR_MIN:g}: precision {precision:.4f} ({n_false} false)"
    )
    print(
        f"  excluded, partly shadowed / cut by the rim or the image border (SNR >= {SNR_MIN:g}): "
        f"{n_partial_hit}/{n_partial} found"
    )
    n_crowded = sum(c["n_crowded"] for c in cases)
    n_crowded_hit = sum(c["n_crowded_hit"] for c in cases)
    print(
        f"  of the counted spots: {n_crowded_hit}/{n_crowded} found with a neighbour closer than "
        f"{CROWDED:g} spot widths, {n_hit - n_crowded_hit}/{n_true - n_crowded} without; missed with "
        f"SNR < 6: {sum(c['n_missed_faint'] for c in cases)}; missed with the centre under the "
        f"automatic mask: {sum(c['n_missed_masked'] for c in cases)}"
    )
    print("  lowest-recall cases:\n" + _worst(cases))
    assert n_true > 10_000  # enough spots for the third decimal to mean something
    # Source: the project's requirement (issue 6, "Robustness the tests must show"):
    # detection recall and precision >= 0.98 for spots with SNR >= 5
    assert recall >= 0.98, f"recall {recall:.4f} over {n_true} spots\n{_worst(cases)}"
    false_xy = np.concatenate([c["false_xy"] for c in cases])
    assert precision >= 0.98, f"precision {precision:.4f} of {n_claimed} detections; false: {false_xy[:10]}"


def test_sparrow_limit_of_two_gaussians():
    # From memory: C. M. Sparrow, Astrophys. J. 44, 76 (1916): two equal peaks are just resolved
    # when the curvature of their sum vanishes midway; for Gaussians of width s that is at
    # separation 2 s (the second derivative of exp(-x^2/2s^2) vanishes at x = s)
    x = np.linspace(-6.0, 6.0, 24001)

    def maxima(d):
        f = np.exp(-0.5 * (x - d / 2) ** 2) + np.exp(-0.5 * (x + d / 2) ** 2)
        return int(np.sum((f[1:-1] > f[:-2]) & (f[1:-1] > f[2:])))

    assert maxima(0.98 * SPARROW) == 1
    assert maxima(1.02 * SPARROW) == 2


def test_recall_of_resolvable_close_pairs(cases):
    # the same requirement as above, on the spots it is hardest for: those with another spot
    # between 2 and 5 spot widths away (about 5 % of the counted spots; the pooled recall
    # passes or fails with how many of them a draw of cases holds). CASE_STREAM 2002: 0.9837
    # (1387/1410); 0.879 before the residual search and 0.977 before the noise cap of step 3
    # (see the module docstring for other draws, not all of which reach 0.98)
    n = sum(c["n_resolvable"] for c in cases)
    hit = sum(c["n_resolvable_hit"] for c in cases)
    print(f"\n[detect on generator cases] resolvable close pairs: recall {hit / n:.4f} ({hit}/{n})")
    # From memory: C. M. Sparrow, Astrophys. J. 44, 76 (1916): two equal Gaussians of width s
    # closer than 2 s sum to a single maximum, so pairs beyond 2 s are resolvable in the image.
    # Source: the project's requirement (issue 6): recall >= 0.98 for spots with SNR >= 5
    assert hit / n >= 0.98


def test_position_error_within_twice_the_thompson_bound(cases):
    e = np.concatenate([c["err"] for c in cases])  # (n, 2): x and y errors, px
    v = np.concatenate([c["bound_var"] for c in cases])  # per-axis variance, px^2
    rms = float(np.sqrt(np.mean(e**2)))  # per axis, x and y pooled
    limit = float(np.sqrt(np.mean(v)))
    z = e / np.sqrt(v)[:, None]  # error in units of each spot's own bound
    z_rms = float(np.sqrt(np.mean(z**2)))
    print(
        f"\n[detect on generator cases] localisation of {len(e)} spots: rms error {rms:.4f} px per "
        f"axis, Thompson-Larson-Webb bound {limit:.4f} px, ratio {rms / limit:.3f}; rms of "
        f"error / own bound {z_rms:.3f}; |error| > 5 bounds: {int(np.sum(np.abs(z) > 5))} of {z.size}"
    )
    assert len(e) > 10_000
    # Source: R. E. Thompson, D. R. Larson and W. W. Webb, Biophys. J. 82, 2775 (2002), eq. 17
    # with its background term: <(dx)^2> = (s^2 + a^2/12)/N + 8 pi s^4 b^2/(a^2 N^2); the
    # project's requirement (issue 6) is an error within twice this bound
    assert rms <= 2 * limit, f"rms {rms:.4f} px, bound {limit:.4f} px"
    # the same spot by spot, so that the faint spots' large bounds cannot hide the bright ones
    assert z_rms <= 2.0, f"rms of error / bound {z_rms:.3f}"
    # and no estimator beats the bound by a factor of two (guards against truth leaking in)
    assert rms >= 0.5 * limit
