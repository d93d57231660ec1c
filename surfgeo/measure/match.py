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


# =============================================================================== crystal azimuth
def orientation_label(operation) -> str:
    """The crystal's azimuth in words: ``as modelled``, ``turned by 60 deg`` or ``mirrored across
    the line at 30 deg from a1`` (None: ``identity``)."""
    if operation is None:
        return "identity"
    if operation.is_rotation:
        a = operation.angle_deg
        return "as modelled" if abs(a) < 1e-9 or abs(a - 360) < 1e-9 else f"turned by {a:.0f} deg"
    return f"mirrored across the line at {operation.angle_deg:.0f} deg from a1"


def turn_prediction(predicted: PredictedSpots, operation, calibration: Calibration | ScreenGeometry
                    ) -> PredictedSpots:
    """A prediction turned by a lattice point operation (the crystal's azimuth on the screen).

    Parameters
    ----------
    predicted : PredictedSpots
    operation : surfgeo.lattice.lattice2d.PointOperation
        Acts on the parallel momenta (Cartesian, ``k' = R k``); labels, intensities and
        verdict inputs stay with their beams.
    calibration : Calibration or ScreenGeometry
        The screen the turned beams are put on.
    """
    cal = _as_calibration(calibration)
    kp = predicted.k_parallel @ np.asarray(operation.cartesian).T
    px = fast_pixels(cal.screen, kp, predicted.energy)
    vis = on_screen(cal.screen, px, kp, wavenumber(predicted.energy))
    return dataclasses.replace(predicted, k_parallel=kp, pixels=px, visible=vis)


def amplitude_r_factor(measured, predicted) -> tuple[float, float]:
    """Agreement of measured and predicted spot intensities, on amplitudes.

    ``R = sum |F_m - c F_p| / sum F_m`` with ``F = sqrt(max(I, 0))`` and the scale ``c`` that
    minimises ``sum (F_m - c F_p)^2``, i.e. ``c = sum F_m F_p / sum F_p^2``. R is 0 for
    proportional intensities and insensitive to a common intensity scale (exposure, gain).
    Amplitudes rather than intensities keep the weak fractional-order spots from being drowned
    by the strong integer-order ones.

    Parameters
    ----------
    measured, predicted : array_like, shape (n,)
        Measured (any units) and predicted intensities of the same spots; a spot that was
        predicted but not seen enters with measured intensity 0.

    Returns
    -------
    r : float
        The agreement factor (NaN without measured intensity).
    scale : float
        The scale ``c``.

    References
    ----------
    The crystallographic residual R1 on structure-factor amplitudes, e.g. C. Giacovazzo (ed.),
    *Fundamentals of Crystallography*, 3rd ed., Oxford University Press (2011), ch. 5.
    """
    fm = np.sqrt(np.clip(np.asarray(measured, dtype=float), 0.0, None))
    fp = np.sqrt(np.clip(np.asarray(predicted, dtype=float), 0.0, None))
    ok = np.isfinite(fm) & np.isfinite(fp)
    fm, fp = fm[ok], fp[ok]
    den = float(fp @ fp)
    if fm.sum() <= 0:
        return math.nan, math.nan
    c = float(fm @ fp) / den if den > 0 else 0.0
    return float(np.abs(fm - c * fp).sum() / fm.sum()), c


def position_misfits(match: MatchResult) -> int:
    """Measured spots the candidate does not explain plus predicted spots that should have been
    seen and were not (verdict ``expected`` or ``unknown``; ``hidden``, ``weak`` and ``extinct``
    spots are not counted)."""
    return int(len(match.unexplained) + sum(1 for v in match.verdicts if v in ("expected", "unknown")))


@dataclass(frozen=True, eq=False)
class OrientationChoice:
    """The crystal azimuth that fits best among the lattice's point operations.

    Attributes
    ----------
    operation : PointOperation
        The chosen operation (applied to the model's beams).
    label : str
        It in words (:func:`orientation_label`).
    misfits : int
        Its position misfits (:func:`position_misfits`, summed over the predictions).
    r_factor : float
        Its intensity agreement factor (NaN when no intensities were compared).
    tried : dict
        ``label -> (misfits, r_factor)`` of every operation tried.
    result : object
        What the evaluation returned for the chosen operation (e.g. a MatchResult).
    """

    operation: object
    label: str
    misfits: int
    r_factor: float
    tried: dict
    result: object

    @property
    def key(self) -> tuple:
        """The sort key of the choice: misfits first, then the R factor (rounded to 1e-9)."""
        return _orientation_key(self.misfits, self.r_factor)

    def runner_up(self) -> tuple[str, int, float] | None:
        """The best orientation that is *worse* than the chosen one (label, misfits, R), or None
        when every orientation ties (the model has the lattice's full symmetry)."""
        worse = [(_orientation_key(m, r), lab, m, r) for lab, (m, r) in self.tried.items()
                 if _orientation_key(m, r) > self.key]
        if not worse:
            return None
        _, lab, m, r = min(worse, key=lambda t: t[0])
        return lab, m, r

    def summary(self) -> str:
        """One line: the orientation chosen and how much better it is than the next one."""
        def fmt(m, r):
            return f"{m} misfit{'s' if m != 1 else ''}" + (f", R {r:.3f}" if math.isfinite(r) else "")

        text = f"{self.label} ({fmt(self.misfits, self.r_factor)})"
        nxt = self.runner_up()
        if nxt is None:
            return text + f"; all {len(self.tried)} lattice orientations fit equally well"
        return text + f"; next best {nxt[0]} ({fmt(nxt[1], nxt[2])})"

    def to_dict(self) -> dict:
        nxt = self.runner_up()
        return {
            "chosen": self.label,
            "misfits": self.misfits,
            "r_factor": self.r_factor,
            "tried": {lab: {"misfits": m, "r_factor": r} for lab, (m, r) in self.tried.items()},
            "next_best": None if nxt is None
            else {"orientation": nxt[0], "misfits": nxt[1], "r_factor": nxt[2]},
        }


def _orientation_key(misfits: int, r: float) -> tuple:
    # rounded, so that orientations equivalent under the substrate's symmetry tie exactly and the
    # first of them (the identity first) is kept
    return (int(misfits), round(r, 9) if math.isfinite(r) else math.inf)


def best_orientation(predictions, calibration: Calibration | ScreenGeometry, evaluate, operations
                     ) -> OrientationChoice:
    """Try a candidate in every crystal azimuth the substrate lattice allows; keep the best.

    Spot positions fix the screen's azimuth only up to the point group of the substrate
    *lattice* (6mm for a hexagonal one), while a model may have lower symmetry (fcc(111) with
    adsorbates is threefold, 3m): its copy turned by 60 degrees predicts the same positions but
    other intensities, so the extinct / weak verdicts and any intensity comparison depend on the
    azimuth. Each operation is applied to the predicted beams (:func:`turn_prediction`) and
    scored by ``evaluate``; the lowest ``(misfits, R)`` wins, ties going to the earlier
    operation (the identity comes first).

    Parameters
    ----------
    predictions : list of PredictedSpots
        The candidate's predictions (e.g. one per image), as modelled.
    calibration : Calibration or ScreenGeometry
        The screen the turned beams are put on.
    evaluate : callable
        ``evaluate(turned_predictions) -> (misfits, r_factor, result)`` for one orientation.
    operations : sequence of PointOperation
        The operations tried, e.g. ``lattice.point_group()``.

    Returns
    -------
    OrientationChoice
    """
    best = None
    tried: dict = {}
    for op in operations:
        misfits, r, result = evaluate([turn_prediction(p, op, calibration) for p in predictions])
        label = orientation_label(op)
        tried[label] = (int(misfits), float(r))
        key = _orientation_key(misfits, r)
        if best is None or key < best[0]:
            best = (key, op, label, int(misfits), float(r), result)
    if best is None:
        raise InputError("no crystal orientation to try: the list of lattice operations is empty.")
    _, op, label, misfits, r, result = best
    return OrientationChoice(op, label, misfits, r, tried, result)


def match_orientations(
    spots,
    calibration: Calibration | ScreenGeometry,
    energy_eV: float,
    candidate,
    lattice: Lattice2D | None = None,
    *,
    usable=None,
    intensities=None,
    operations=None,
    gate_px: float | None = None,
    weak_fraction: float = WEAK_FRACTION,
    **kinematic,
) -> OrientationChoice:
    """Match a candidate in every lattice orientation (:func:`best_orientation`) to one spot list.

    Each orientation is scored by its :func:`position_misfits` (with the absent spots on masked
    pixels ``hidden`` when ``usable`` is given) and, with measured ``intensities``, by the
    :func:`amplitude_r_factor` of the matched spots plus the visible absent ones (as zeros).

    Parameters
    ----------
    spots, calibration, energy_eV, candidate, lattice, gate_px, weak_fraction, **kinematic
        As for :func:`match_spots`.
    usable : ndarray of bool, shape (H, W), optional
        Usable pixels of the image (:func:`masked_spots`).
    intensities : array_like, shape (N,), optional
        Measured intensities of the spots.
    operations : sequence of PointOperation, optional
        Default: the point group of the candidate's substrate lattice (``lattice``, or the
        superstructure's, or the slab's surface lattice).

    Returns
    -------
    OrientationChoice
        ``result`` is the :class:`MatchResult` in the chosen orientation.
    """
    cal = _as_calibration(calibration)
    pred = predict_spots(cal, energy_eV, candidate, lattice, **kinematic)
    if operations is None:
        operations = _substrate_lattice(candidate, lattice).point_group()
    meas_i = None if intensities is None else np.asarray(intensities, dtype=float).ravel()

    def evaluate(preds):
        m = match_spots(spots, cal, energy_eV, None, predicted=preds[0], gate_px=gate_px,
                        weak_fraction=weak_fraction)
        if usable is not None:
            m = m.with_hidden(masked_spots(preds[0], usable))
        r = math.nan
        if meas_i is not None and preds[0].intensity is not None:
            missing = np.array([j for j, v in zip(m.absent, m.verdicts, strict=True) if v != "hidden"],
                               dtype=int)
            meas = np.concatenate([meas_i[m.pairs[:, 0]], np.zeros(len(missing))])
            pidx = np.concatenate([m.pairs[:, 1], missing]).astype(int)
            r, _ = amplitude_r_factor(meas, preds[0].intensity[pidx])
        return position_misfits(m), r, m

    return best_orientation([pred], cal, evaluate, operations)


def _substrate_lattice(candidate, lattice: Lattice2D | None) -> Lattice2D:
    if lattice is not None:
        return lattice
    if isinstance(candidate, Superstructure):
        return candidate.lattice
    if hasattr(candidate, "get_positions"):
        from surfgeo.slab.info import surface_info

        return surface_info(candidate).lattice
    raise InputError("a substrate lattice is needed to try the crystal orientations of a candidate.")


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
    orientation=None,
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
    orientation : PointOperation, optional
        Turn the candidate's beams by this lattice operation first (the crystal azimuth chosen
        by :func:`match_orientations`).

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
    if orientation is not None:
        pred = turn_prediction(pred, orientation, cal)
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
    "orientation_label",
    "turn_prediction",
    "amplitude_r_factor",
    "position_misfits",
    "OrientationChoice",
    "best_orientation",
    "match_orientations",
    "WEAK_FRACTION",
]
