"""Matching a candidate structure's predicted spots to measured spots.

Given a calibrated screen (:class:`surfgeo.measure.calibrate.Calibration`) and a candidate --
a superstructure (lattice plus matrix or Wood notation, with all its symmetry domains) or a
slab (``ase.Atoms`` with surfgeo's surface record, e.g. built from a model file) -- predict
where every beam lands on the screen, assign measured spots to predicted ones, and report:

* **matched** pairs with their residuals in pixels and in 1/Angstrom (parallel momentum);
* **unexplained** measured spots (no predicted spot within the gate);
* **absent** predicted spots (on the screen, but nothing measured there), each with the
  kinematic verdict when the candidate has atoms: ``extinct`` (kinematic intensity zero, e.g.
  a glide-line extinction), ``weak`` (below ``weak_fraction`` of the median intensity of the
  matched spots) or ``expected`` (it should have been seen); ``unknown`` without atoms; and
  ``hidden`` when an image mask shows that it could not be seen (:meth:`MatchResult.with_hidden`).

The assignment is the Hungarian method (:func:`scipy.optimize.linear_sum_assignment`) on the
squared distances, with pairs farther apart than the gate forbidden: it finds the largest
number of within-gate pairs and, among those, the smallest sum of squared distances; each
measured and each predicted spot is used at most once.

References
----------
.. [1] H. W. Kuhn, "The Hungarian method for the assignment problem", Naval Research
   Logistics Quarterly 2, 83 (1955).
.. [2] D. F. Crouse, "On implementing 2D rectangular assignment algorithms", IEEE Trans.
   Aerosp. Electron. Syst. 52, 1679 (2016) (the algorithm behind scipy's solver).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.spatial import cKDTree

from surfgeo.diffraction.beams import format_index
from surfgeo.diffraction.electron import wavenumber
from surfgeo.errors import InputError
from surfgeo.lattice import Lattice2D, Superstructure
from surfgeo.measure.calibrate import Calibration, fast_pixels, on_screen
from surfgeo.screen import ScreenGeometry

#: Default matching gate when the calibration gives no residual scale, px.
DEFAULT_GATE_PX = 4.0
#: Absent spots with kinematic intensity below this fraction of the matched median are "weak".
WEAK_FRACTION = 0.05

#: Unexplained and absent spots listed one by one in the text summary.
SUMMARY_ITEMS = 20

_FORBIDDEN = 1e12


@dataclass(frozen=True, eq=False)
class PredictedSpots:
    """Where a candidate's beams land on a calibrated screen.

    Attributes
    ----------
    labels : list of (Fraction, Fraction) or (float, float)
        Beam labels in the substrate reciprocal basis (exact for rational matrices).
    k_parallel : ndarray, shape (n, 2)
        Parallel momentum, 1/Angstrom.
    pixels : ndarray, shape (n, 2)
        Image positions [x, y], px (NaN for beams that do not reach the screen).
    visible : ndarray of bool
        On the screen: inside the acceptance and the image, outside the gun's shadow.
    integer : ndarray of bool
        Integer-order beams.
    domains : list of tuple of int
        Domains producing each beam.
    n_domains : int
        Number of domains of the candidate.
    intensity : ndarray or None
        Kinematic intensity (domain average), None without atoms.
    extinct : ndarray of bool or None
        Kinematically extinct beams, None without atoms.
    energy : float
        The energy used (after the calibration's energy offset), eV.
    description : str
        The candidate in words.
    """

    labels: list
    k_parallel: np.ndarray
    pixels: np.ndarray
    visible: np.ndarray
    integer: np.ndarray
    domains: list
    n_domains: int
    intensity: np.ndarray | None
    extinct: np.ndarray | None
    energy: float
    description: str = ""

    def __len__(self) -> int:
        return len(self.labels)

    def label_text(self, i: int) -> str:
        """The label of beam ``i`` as text, e.g. ``"1/2,0"``."""
        h, k = self.labels[i]
        return f"{format_index(h)},{format_index(k)}"


def _as_calibration(cal) -> Calibration:
    if isinstance(cal, Calibration):
        return cal
    if isinstance(cal, ScreenGeometry):
        return Calibration(screen=cal)
    raise InputError("a calibration (surfgeo.measure.calibrate.Calibration) or a screen geometry is needed.")


def predict_spots(
    calibration: Calibration | ScreenGeometry,
    energy_eV: float,
    candidate,
    lattice: Lattice2D | None = None,
    *,
    domains: bool = True,
    **kinematic,
) -> PredictedSpots:
    """Predict the spots of a candidate on a calibrated screen (normal incidence).

    Parameters
    ----------
    calibration : Calibration or ScreenGeometry
        The screen; a Calibration's energy offset is applied to ``energy_eV``.
    energy_eV : float
        Nominal beam energy, eV.
    candidate : Superstructure, array_like (2, 2), ase.Atoms or None
        A superstructure (or its matrix, with ``lattice``), a slab with surfgeo's surface
        record (kinematic intensities are then computed), or None for the bare substrate.
    lattice : Lattice2D, optional
        The substrate, needed when ``candidate`` is a bare matrix or None.
    domains : bool
        Superpose all symmetry domains (default).
    **kinematic
        Options passed to :func:`surfgeo.diffraction.pattern.slab_pattern` for slabs.

    Returns
    -------
    PredictedSpots
    """
    from surfgeo.diffraction.pattern import slab_pattern, superstructure_pattern

    cal = _as_calibration(calibration)
    E = cal.energy(energy_eV)
    if hasattr(candidate, "get_positions"):
        pat = slab_pattern(candidate, E, domains=domains, **kinematic)
        desc = f"slab {candidate.get_chemical_formula()}"
    else:
        if isinstance(candidate, Superstructure):
            lat, M = candidate.lattice, candidate.matrix
        else:
            if lattice is None:
                raise InputError("a substrate lattice is needed to predict the spots of a matrix.")
            lat, M = lattice, candidate
        pat = superstructure_pattern(lat, M, E, domains=domains)
        desc = "substrate (1×1)" if M is None else f"superstructure {Superstructure(lat, M)}"
    px = fast_pixels(cal.screen, pat.k_parallel, E)
    vis = on_screen(cal.screen, px, pat.k_parallel, wavenumber(E))
    return PredictedSpots(
        labels=list(pat.hk),
        k_parallel=pat.k_parallel,
        pixels=px,
        visible=vis,
        integer=np.asarray(pat.integer, dtype=bool),
        domains=list(pat.domains),
        n_domains=len(pat.domain_records),
        intensity=None if pat.intensity is None else np.asarray(pat.intensity, dtype=float),
        extinct=None if pat.extinct is None else np.asarray(pat.extinct, dtype=bool),
        energy=E,
        description=desc,
    )


def assign(measured_px, predicted_px, gate_px: float) -> tuple[np.ndarray, np.ndarray]:
    """Gated one-to-one assignment of measured to predicted positions (Hungarian method).

    Parameters
    ----------
    measured_px, predicted_px : array_like, shape (N, 2) and (M, 2)
        Positions, px (NaN rows never match).
    gate_px : float
        Largest distance of an assigned pair, px.

    Returns
    -------
    pairs : ndarray of int, shape (P, 2)
        (measured index, predicted index) of each assigned pair, by measured index.
    distance : ndarray, shape (P,)
        Their distances, px.
    """
    a = np.asarray(measured_px, dtype=float).reshape(-1, 2)
    b = np.asarray(predicted_px, dtype=float).reshape(-1, 2)
    if not (gate_px > 0):
        raise InputError(f"the matching gate must be a positive number of pixels, got {gate_px!r}.")
    good_b = np.flatnonzero(np.all(np.isfinite(b), axis=1))
    if len(a) == 0 or len(good_b) == 0:
        return np.zeros((0, 2), dtype=np.int64), np.zeros(0)
    tree = cKDTree(b[good_b])
    near = tree.query_ball_point(a, gate_px)
    rows = sorted({i for i, lst in enumerate(near) if lst})
    cols = sorted({good_b[j] for lst in near for j in lst})
    if not rows:
        return np.zeros((0, 2), dtype=np.int64), np.zeros(0)
    sa, sb = a[rows], b[cols]
    d2 = np.sum((sa[:, None, :] - sb[None, :, :]) ** 2, axis=-1)
    cost = np.where(d2 <= gate_px * gate_px, d2, _FORBIDDEN)
    r, c = linear_sum_assignment(cost)
    ok = cost[r, c] < _FORBIDDEN
    pairs = np.column_stack([np.asarray(rows)[r[ok]], np.asarray(cols)[c[ok]]]).astype(np.int64)
    order = np.argsort(pairs[:, 0])
    pairs = pairs[order]
    dist = np.sqrt(d2[r[ok], c[ok]])[order]
    return pairs, dist


@dataclass(frozen=True, eq=False)
class MatchResult:
    """Measured spots against one candidate's prediction.

    Attributes
    ----------
    predicted : PredictedSpots
    measured_px : ndarray, shape (N, 2)
    measured_k : ndarray, shape (N, 2)
        Parallel momenta of the measured spots (calibrated), 1/Angstrom.
    pairs : ndarray of int, shape (P, 2)
        (measured index, predicted index).
    residual_px : ndarray, shape (P, 2)
        Measured minus predicted position, px.
    residual_k : ndarray, shape (P, 2)
        Measured minus predicted parallel momentum, 1/Angstrom.
    unexplained : ndarray of int
        Measured spots with no predicted spot within the gate.
    absent : ndarray of int
        Visible predicted spots with no measured spot.
    verdicts : list of str
        For each absent spot: ``extinct``, ``weak``, ``expected``, ``unknown`` or ``hidden``.
    gate_px : float
    """

    predicted: PredictedSpots
    measured_px: np.ndarray
    measured_k: np.ndarray
    pairs: np.ndarray
    residual_px: np.ndarray
    residual_k: np.ndarray
    unexplained: np.ndarray
    absent: np.ndarray
    verdicts: list
    gate_px: float
    notes: list = field(default_factory=list)

    @property
    def rms_px(self) -> float:
        """RMS residual of the matched spots, px (NaN without matches)."""
        r = self.residual_px
        return float(np.sqrt(np.mean(np.sum(r * r, axis=1)))) if len(r) else math.nan

    @property
    def rms_k(self) -> float:
        """RMS residual of the matched spots, 1/Angstrom."""
        r = self.residual_k
        return float(np.sqrt(np.nanmean(np.sum(r * r, axis=1)))) if len(r) else math.nan

    def to_dict(self) -> dict:
        """JSON record: matched, unexplained, absent (with verdicts) and the residual summary."""
        p = self.predicted
        matched = []
        for (i, j), rp, rk in zip(self.pairs, self.residual_px, self.residual_k, strict=True):
            matched.append(
                {
                    "spot": int(i),
                    "hk": [format_index(p.labels[j][0]), format_index(p.labels[j][1])],
                    "order": "integer" if p.integer[j] else "fractional",
                    "domains": list(p.domains[j]),
                    "measured_px": [float(v) for v in self.measured_px[i]],
                    "predicted_px": [float(v) for v in p.pixels[j]],
                    "residual_px": [float(v) for v in rp],
                    "residual_inv_angstrom": [float(v) for v in rk],
                }
            )
        absent = []
        for j, verdict in zip(self.absent, self.verdicts, strict=True):
            absent.append(
                {
                    "hk": [format_index(p.labels[j][0]), format_index(p.labels[j][1])],
                    "order": "integer" if p.integer[j] else "fractional",
                    "domains": list(p.domains[j]),
                    "predicted_px": [float(v) for v in p.pixels[j]],
                    "intensity": None if p.intensity is None else float(p.intensity[j]),
                    "verdict": verdict,
                }
            )
        return {
            "candidate": p.description,
            "energy_eV": p.energy,
            "gate_px": self.gate_px,
            "matched_count": len(self.pairs),
            "unexplained_count": len(self.unexplained),
            "absent_count": len(self.absent),
            "rms_px": self.rms_px,
            "rms_inv_angstrom": self.rms_k,
            "matched": matched,
            "unexplained": [
                {"spot": int(i), "measured_px": [float(v) for v in self.measured_px[i]]}
                for i in self.unexplained
            ],
            "absent": absent,
            "notes": list(self.notes),
        }

    def with_hidden(self, hidden) -> MatchResult:
        """The same result with the absent spots among ``hidden`` (indices into the prediction,
        e.g. from :func:`masked_spots`) given the verdict ``hidden``: they could not be seen."""
        hid = {int(j) for j in np.asarray(hidden).ravel()}
        verdicts = ["hidden" if int(j) in hid else v for j, v in zip(self.absent, self.verdicts, strict=True)]
        return dataclasses.replace(self, verdicts=verdicts)

    def summary_lines(self) -> list[str]:
        """A short report, one line per item."""
        p = self.predicted
        shown = SUMMARY_ITEMS
        unexpl = [f"#{i + 1} ({self.measured_px[i, 0]:.1f}, {self.measured_px[i, 1]:.1f})"
                  for i in self.unexplained[:shown]]
        more = len(self.unexplained) - shown
        lines = [
            f"candidate    {p.description} ({p.n_domains} domain{'s' if p.n_domains != 1 else ''})",
            f"matched      {len(self.pairs)} spots, rms {self.rms_px:.2f} px = {self.rms_k:.4f} 1/Å",
            f"unexplained  {len(self.unexplained)} measured spot(s)"
            + (" (#n: the n-th spot of the input, at (x, y) px): " + ", ".join(unexpl) if unexpl else "")
            + (f" and {more} more" if more > 0 else ""),
        ]
        if len(self.absent):
            counts: dict[str, int] = {}
            for v in self.verdicts:
                counts[v] = counts.get(v, 0) + 1
            lines.append(
                f"absent       {len(self.absent)} predicted spot(s) not seen ("
                + ", ".join(f"{n} {v}" for v, n in sorted(counts.items()))
                + ")"
            )
            for j, v in list(zip(self.absent, self.verdicts, strict=True))[:shown]:
                lines.append(f"             ({p.label_text(j)})  {v}")
            if len(self.absent) > shown:
                lines.append(f"             ... and {len(self.absent) - shown} more (all in the JSON output)")
        else:
            lines.append("absent       none")
        lines.extend(f"note         {n}" for n in self.notes)
        return lines


def match_spots(
    spots,
    calibration: Calibration | ScreenGeometry,
    energy_eV: float,
    candidate,
    lattice: Lattice2D | None = None,
    *,
    gate_px: float | None = None,
    weak_fraction: float = WEAK_FRACTION,
    predicted: PredictedSpots | None = None,
    **kinematic,
) -> MatchResult:
    """Match measured spots to a candidate's predicted spots (see the module docstring).

    Parameters
    ----------
    spots : SpotList or array_like, shape (N, 2)
        Measured positions [x, y], px.
    calibration : Calibration or ScreenGeometry
        The calibrated screen (and energy offset).
    energy_eV : float
        Nominal beam energy, eV.
    candidate, lattice
        As for :func:`predict_spots`.
    gate_px : float, optional
        Largest distance of a match, px; default ``max(3.5 rms, 2.5)`` from the
        calibration's RMS residual, or :data:`DEFAULT_GATE_PX`.
    weak_fraction : float
        Threshold of the ``weak`` verdict (fraction of the median matched intensity).
    predicted : PredictedSpots, optional
        A prediction already made (skips :func:`predict_spots`).

    Returns
    -------
    MatchResult
    """
    cal = _as_calibration(calibration)
    P = np.asarray(spots.positions if hasattr(spots, "positions") else spots, dtype=float).reshape(-1, 2)
    pred = (
        predicted if predicted is not None else predict_spots(cal, energy_eV, candidate, lattice, **kinematic)
    )
    if gate_px is None:
        gate_px = max(3.5 * cal.rms_px, 2.5) if math.isfinite(cal.rms_px) else DEFAULT_GATE_PX
    pairs, _ = assign(P, pred.pixels, gate_px)
    E = pred.energy
    mk = cal.screen.to_k_parallel(P, E) if len(P) else np.zeros((0, 2))
    res_px = P[pairs[:, 0]] - pred.pixels[pairs[:, 1]] if len(pairs) else np.zeros((0, 2))
    res_k = mk[pairs[:, 0]] - pred.k_parallel[pairs[:, 1]] if len(pairs) else np.zeros((0, 2))
    used_m = np.zeros(len(P), dtype=bool)
    used_m[pairs[:, 0]] = True
    used_p = np.zeros(len(pred), dtype=bool)
    used_p[pairs[:, 1]] = True
    unexplained = np.flatnonzero(~used_m)
    absent = np.flatnonzero(pred.visible & ~used_p)
    verdicts = _verdicts(pred, absent, pairs, weak_fraction)
    notes = []
    if pred.intensity is not None:
        notes.append(
            "Verdicts use kinematic intensities: qualitative for LEED; extinctions at normal "
            "incidence are exact."
        )
    return MatchResult(
        pred, P, mk, pairs, res_px, res_k, unexplained, absent, verdicts, float(gate_px), notes
    )


def masked_spots(predicted: PredictedSpots, usable) -> np.ndarray:
    """Visible predicted spots that land on unusable pixels of the image (the gun's shadow and
    holder, beyond the screen's rim, a user mask) or off it: indices into ``predicted``.

    Parameters
    ----------
    predicted : PredictedSpots
    usable : ndarray of bool, shape (H, W)
        True where the image can be trusted (e.g. ``MaskSet.usable`` of :mod:`surfgeo.measure.masks`).
    """
    usable = np.asarray(usable, dtype=bool)
    h, w = usable.shape
    px = predicted.pixels
    ok = np.all(np.isfinite(px), axis=1)
    ix = np.clip(np.rint(np.nan_to_num(px[:, 0])).astype(int), 0, w - 1)
    iy = np.clip(np.rint(np.nan_to_num(px[:, 1])).astype(int), 0, h - 1)
    on = ok & (px[:, 0] > -0.5) & (px[:, 0] < w - 0.5) & (px[:, 1] > -0.5) & (px[:, 1] < h - 0.5)
    return np.flatnonzero(predicted.visible & ~(on & usable[iy, ix]))


#: Fewest matched spots a calibration is refitted to by :func:`match_with_refit`.
MIN_REFIT_SPOTS = 6


def match_with_refit(
    spots,
    calibration: Calibration,
    energy_eV: float,
    candidate,
    lattice: Lattice2D | None = None,
    *,
    rounds: int = 2,
    **options,
) -> tuple[MatchResult, Calibration]:
    """Match, refit the screen to every matched spot, and match again.

    A calibration fitted to the few integer-order spots of the first shell extrapolates poorly
    to the rim of a large image, where fractional-order spots then fall outside the gate. Each
    round refits the screen to all matched spots, integer and fractional order, whose parallel
    momenta the assignment gives (:func:`surfgeo.measure.calibrate.refine_calibration`, the
    same refit the indexing makes), then assigns again; it stops when the matched spots no
    longer change. With fewer than :data:`MIN_REFIT_SPOTS` matches the calibration is kept.

    Parameters
    ----------
    spots, calibration, energy_eV, candidate, lattice, **options
        As for :func:`match_spots` (``predicted`` is not accepted: the screen changes).
    rounds : int
        Most refits.

    Returns
    -------
    MatchResult
        The last assignment.
    Calibration
        The calibration it was made with (``n_refit`` says how many spots it rests on).
    """
    from surfgeo.measure.calibrate import refine_calibration

    if "predicted" in options:
        raise TypeError("match_with_refit predicts the spots itself; do not pass 'predicted'.")
    match_options = {k: options.pop(k) for k in ("gate_px", "weak_fraction") if k in options}
    cal = _as_calibration(calibration)
    pred = predict_spots(cal, energy_eV, candidate, lattice, **options)
    res = match_spots(spots, cal, energy_eV, None, predicted=pred, **match_options)
    for _ in range(rounds):
        if len(res.pairs) < MIN_REFIT_SPOTS:
            break
        cal = refine_calibration(
            cal, res.measured_px[res.pairs[:, 0]], pred.k_parallel[res.pairs[:, 1]], energy_eV
        )
        # the same beams on the refitted screen (the energy offset is kept)
        px = fast_pixels(cal.screen, pred.k_parallel, pred.energy)
        pred = dataclasses.replace(
            pred, pixels=px, visible=on_screen(cal.screen, px, pred.k_parallel, wavenumber(pred.energy))
        )
        new = match_spots(spots, cal, energy_eV, None, predicted=pred, **match_options)
        same = np.array_equal(new.pairs, res.pairs)
        res = new
        if same:
            break
    return res, cal


def _verdicts(pred: PredictedSpots, absent: np.ndarray, pairs: np.ndarray, weak_fraction: float) -> list[str]:
    if pred.intensity is None:
        return ["unknown"] * len(absent)
    inten = pred.intensity
    seen = inten[pairs[:, 1]] if len(pairs) else np.zeros(0)
    seen = seen[seen > 0]
    ref = float(np.median(seen)) if len(seen) else float(np.nanmax(inten) if len(inten) else 0.0)
    out = []
    for j in absent:
        if pred.extinct is not None and pred.extinct[j]:
            out.append("extinct")
        elif inten[j] < weak_fraction * ref:
            out.append("weak")
        else:
            out.append("expected")
    return out


__all__ = [
    "PredictedSpots",
    "MatchResult",
    "predict_spots",
    "assign",
    "match_spots",
    "match_with_refit",
    "masked_spots",
    "WEAK_FRACTION",
]
