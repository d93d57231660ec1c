"""Wood notation of superstructures: parsing, printing, and conversion to and from matrices.

Definitions (with respect to the substrate basis a1, a2 as given)
-----------------------------------------------------------------
Primitive ``(p×q)Rφ``: the superlattice has the basis ``b1 = p R(φ) a1``,
``b2 = q R(φ) a2``, with R(φ) the rotation by φ (anticlockwise seen from the vacuum, +z).

Centred ``c(p×q)Rφ``: the superlattice is spanned by ``w1 = p R(φ) a1``, ``w2 = q R(φ) a2``
and the centre ``(w1 + w2) / 2``; the cell (w1, w2) is the conventional (centred) cell and
holds two lattice points. On a hexagonal substrate this is the usual reading of, e.g.,
c(4×2) on fcc(111) (conventional cell 4a1 × 2a2 with the 120 degree basis).

The prefix ``p`` is optional on input and omitted on output. No rotation means φ = 0.

A superlattice may have several Wood forms (for instance c(2×2) = (√2×√2)R45° on a square
substrate) or none at all, when no basis of it is a scaled copy of the substrate basis rotated
by one common angle. :func:`matrix_to_wood` finds all of them, in the order of preference
documented there. Forms related by a rotation of 180 degrees are the same lattice, so angles are
reported in (-90, 90].

References
----------
.. [1] E. A. Wood, "Vocabulary of surface crystallography", J. Appl. Phys. 35, 1306 (1964).
.. [2] R. L. Park and H. H. Madden, "Annealing changes on the (100) surface of some clean
   metals", Surf. Sci. 11, 188 (1968) (the matrix notation, B = M A).
.. [3] K. Hermann, *Crystallography and Surface Structure*, Wiley-VCH (2011), ch. 6.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from surfgeo.errors import NotationError
from surfgeo.lattice.lattice2d import Lattice2D, gauss_reduce
from surfgeo.lattice.rational import (
    SMALL_DENOMINATOR,
    Surd,
    as_matrix,
    det2,
    parse_number,
    snap_rational,
    to_float,
)

#: Tolerance, in units of the longer substrate vector, on the distance between a candidate second
#: Wood vector and the nearest superlattice vector when testing membership in the Wood search.
#: (A tolerance on superlattice coordinates instead would grow with the cell and accept
#: spurious, slightly rotated forms of very long cells such as (1000x1).)
MEMBER_TOL = 1e-6

#: Largest denominator tried when snapping a matrix derived from rounded Wood notation.
SNAP_DENOMINATOR = SMALL_DENOMINATOR

_EXAMPLES = "(2x1), c(4x2), (sqrt3 x sqrt3)R30, (√3×√3)R30° or (1.5x1.5)R15"


# --------------------------------------------------------------------------- the notation object
@dataclass(frozen=True)
class WoodNotation:
    """One Wood form ``c(p×q)Rφ`` (centred) or ``(p×q)Rφ`` (primitive).

    Attributes
    ----------
    p, q : Surd or float
        Scale factors along the rotated a1 and a2: exact :class:`Surd` values (``2``,
        ``√3``, ``3/2``) where exact, floats otherwise.
    angle : float
        Rotation φ in degrees (anticlockwise seen from the vacuum side).
    centred : bool
        True for the centred form ``c(...)``.
    p_decimals, q_decimals, angle_decimals : int or None
        For values read from text as decimals: the number of digits after the decimal point
        (the value is uncertain by half a unit of the last digit). ``None`` means exact or
        full float precision. They control printing and the snapping in
        :func:`wood_to_matrix`; they take no part in comparisons.
    """

    p: Surd | float
    q: Surd | float
    angle: float = 0.0
    centred: bool = False
    p_decimals: int | None = field(default=None, compare=False)
    q_decimals: int | None = field(default=None, compare=False)
    angle_decimals: int | None = field(default=None, compare=False)

    # ---------------------------------------------------------------- properties
    @property
    def rotated(self) -> bool:
        """True when the form has a rotation (φ not 0)."""
        return abs(self.angle) > 1e-9

    @property
    def exact(self) -> bool:
        """True when both scale factors are exact surds."""
        return isinstance(self.p, Surd) and isinstance(self.q, Surd)

    @property
    def area(self) -> float:
        """Superlattice cell area in substrate cells: p q (primitive) or p q / 2 (centred)."""
        return float(self.p) * float(self.q) / (2.0 if self.centred else 1.0)

    def _factor(self, value, decimals, unicode: bool) -> str:
        if decimals is not None:
            return f"{float(value):.{decimals}f}"
        if isinstance(value, Surd):
            return value.unicode if unicode else value.ascii
        return f"{float(value):.4f}"

    def _angle_text(self) -> str:
        a = self.angle
        if self.angle_decimals is not None:
            return f"{a:.{self.angle_decimals}f}"
        for k in range(4):
            if abs(a - round(a, k)) <= 1e-9:
                text = f"{round(a, k):.{k}f}"
                return "0" if text in ("-0", "0") else text
        return f"{a:.1f}"

    def _spell(self, unicode: bool) -> str:
        times = "\u00d7" if unicode else "x"
        body = (
            f"{'c' if self.centred else ''}({self._factor(self.p, self.p_decimals, unicode)}{times}"
            f"{self._factor(self.q, self.q_decimals, unicode)})"
        )
        angle = self._angle_text()
        if self.rotated:
            body += f"R{angle}" + ("\u00b0" if unicode else "")
        return body

    @property
    def unicode(self) -> str:
        """The form spelled with √, × and °, e.g. ``(√3×√3)R30°``; angles to 0.1 degree."""
        return self._spell(True)

    @property
    def ascii(self) -> str:
        """The form spelled in ASCII, e.g. ``(sqrt3xsqrt3)R30``; angles to 0.1 degree."""
        return self._spell(False)

    def __str__(self) -> str:
        return self.unicode

    def __repr__(self) -> str:
        return f"WoodNotation({self.ascii!r})"

    def to_dict(self) -> dict:
        """Plain description: unicode, ascii, centred, p, q (floats), angle_deg."""
        return {
            "unicode": self.unicode,
            "ascii": self.ascii,
            "centred": self.centred,
            "p": float(self.p),
            "q": float(self.q),
            "angle_deg": self.angle,
        }


# --------------------------------------------------------------------------- parsing
_FACTOR = re.compile(
    r"^(?P<c>\d+(?:\.\d*)?|\.\d+)?"  # coefficient
    r"(?:\*?(?:\u221a|sqrt)\(?(?P<r>\d+)\)?)?"  # optional root
    r"(?:/(?P<d>\d+))?$"  # optional denominator
)
_WOOD = re.compile(
    r"^(?P<prefix>[pPcC]?)\((?P<body>[^()]*(?:\([^()]*\)[^()]*)*)\)"
    r"(?:[rR](?P<angle>[+-]?(?:\d+(?:\.\d*)?|\.\d+))(?:\u00b0|deg|degrees?)?)?$"
)


def _parse_factor(text: str, which: str, whole: str) -> tuple[Surd | float, int | None]:
    s = text.lower()
    if not s:
        raise NotationError(
            f"Wood notation {whole!r} lacks scale factor {which}; write two, as in {_EXAMPLES}."
        )
    m = _FACTOR.match(s)
    if s.startswith("-") and _FACTOR.match(s[1:]):
        raise NotationError(f"scale factor {text!r} in Wood notation {whole!r} must be positive.")
    if not s or not m or (m.group("c") is None and m.group("r") is None):
        raise NotationError(
            f"scale factor {text!r} in Wood notation {whole!r} is not a number; write it as 2, 1.5, "
            "3/2, sqrt3, 2sqrt3 or 2√3."
        )
    decimals = None
    if m.group("c") is None:
        coef: Fraction | float = Fraction(1)
    else:
        coef, decimals = parse_number(m.group("c"), f"scale factor {which}")
    rad = int(m.group("r")) if m.group("r") is not None else 1
    den = int(m.group("d")) if m.group("d") is not None else 1
    if rad == 0 or den == 0 or float(coef) == 0:
        raise NotationError(f"scale factor {text!r} in Wood notation {whole!r} must be positive.")
    if rad != 1 or den != 1 or isinstance(coef, Fraction):
        # exact (a decimal such as 1.5 stands for 3/2), or a float printed from its value
        decimals = None
    if isinstance(coef, Fraction):
        return Surd.from_square(coef**2 * rad / den**2), decimals
    return float(coef) * math.sqrt(rad) / den, decimals


def parse_wood(text: str) -> WoodNotation:
    """Read Wood notation in Unicode or ASCII spelling.

    Accepted: an optional ``p`` or ``c`` prefix, ``(P×Q)`` or ``(PxQ)`` with spaces anywhere,
    scale factors as integers, decimals, fractions (``3/2``) or surds (``√3``, ``2√3``,
    ``sqrt3``, ``2sqrt(3)``, ``√3/2``), and an optional rotation ``R30``, ``R-19.1``,
    ``R19.1°``. A decimal angle is taken as rounded to its printed digits (see
    :func:`wood_to_matrix`).

    Examples
    --------
    >>> parse_wood("(sqrt3 x sqrt3)R30").unicode
    '(√3×√3)R30°'
    >>> parse_wood("c(4×2)").ascii
    'c(4x2)'

    Raises
    ------
    NotationError
        With one sentence saying what is wrong and what would be valid.
    """
    if not isinstance(text, str) or not text.strip():
        raise NotationError(f"Wood notation must be text such as {_EXAMPLES}.")
    whole = text.strip()
    s = re.sub(r"\s+", "", whole).replace("\u2212", "-").replace("\u00ba", "\u00b0")
    s = s.replace("\u2a2f", "\u00d7").replace("\u22c5", "*")
    m = _WOOD.match(s)
    if not m:
        hint = ""
        if re.search(r"\)[-\u2013][A-Za-z0-9]", s):
            hint = " (drop the adsorbate suffix after the closing bracket)"
        raise NotationError(f"Wood notation {whole!r} is malformed{hint}; write it like {_EXAMPLES}.")
    parts = re.split(r"[x\u00d7X]", m.group("body"))
    if len(parts) != 2:
        raise NotationError(
            f"Wood notation {whole!r} needs two scale factors separated by x or ×, as in {_EXAMPLES}."
        )
    p, pd = _parse_factor(parts[0], "p", whole)
    q, qd = _parse_factor(parts[1], "q", whole)
    angle, ad = 0.0, None
    if m.group("angle") is not None:
        a = m.group("angle")
        angle = float(a)
        mant = a.lstrip("+-")
        ad = len(mant.split(".")[1]) if "." in mant else 0
        if not math.isfinite(angle):  # pragma: no cover - the pattern only admits digits
            raise NotationError(f"rotation angle in {whole!r} must be a number of degrees.")
    return WoodNotation(p, q, angle, m.group("prefix").lower() == "c", pd, qd, ad)


# --------------------------------------------------------------------------- Wood -> matrix
def _rot(phi: float) -> np.ndarray:
    c, s = math.cos(phi), math.sin(phi)
    return np.array([[c, -s], [s, c]])


def _basis(A: np.ndarray, p: float, q: float, phi: float, centred: bool, choice: int | None = None):
    """Cartesian superlattice basis (rows) of a Wood form; for centred forms also which of the
    three candidate primitive bases was used (the shortest, first on ties)."""
    R = _rot(phi)
    w1 = p * (R @ A[0])
    w2 = q * (R @ A[1])
    if not centred:
        return np.array([w1, w2]), None
    c = 0.5 * (w1 + w2)
    cands = [np.array([c, c - w1]), np.array([c, w2]), np.array([w1, c])]
    if choice is None:
        sizes = [float(np.sum(b * b)) for b in cands]
        best = min(sizes)
        choice = next(i for i, s in enumerate(sizes) if s <= best * (1 + 1e-9))
    return cands[choice], choice


def _exact_unrotated(lattice: Lattice2D, wood: WoodNotation) -> np.ndarray | None:
    if wood.rotated or not (isinstance(wood.p, Surd) and isinstance(wood.q, Surd)):
        return None
    if not (wood.p.is_rational and wood.q.is_rational):
        return None
    p, q = wood.p.coefficient, wood.q.coefficient
    out = np.empty((2, 2), dtype=object)
    if not wood.centred:
        out[:] = [[p, Fraction(0)], [Fraction(0), q]]
        return out
    _, choice = _basis(lattice.vectors, float(p), float(q), 0.0, True)
    w1, w2 = (p, Fraction(0)), (Fraction(0), q)
    c = (p / 2, q / 2)
    rows = [(c, (c[0] - w1[0], c[1] - w1[1])), (c, w2), (w1, c)][choice]
    out[:] = [list(rows[0]), list(rows[1])]
    return out


def _matches(form: WoodNotation, wood: WoodNotation, dp: float, dq: float, dphi: float) -> bool:
    if form.centred != wood.centred:
        return False
    # exact scale factors must come back exactly
    if dp == 0.0 and isinstance(wood.p, Surd) and form.p != wood.p:
        return False
    if dq == 0.0 and isinstance(wood.q, Surd) and form.q != wood.q:
        return False
    if abs(float(form.p) - float(wood.p)) > dp + 1e-9 * float(wood.p):
        return False
    if abs(float(form.q) - float(wood.q)) > dq + 1e-9 * float(wood.q):
        return False
    diff = (form.angle - wood.angle + 90.0) % 180.0 - 90.0
    return abs(diff) <= dphi + 1e-7


def wood_to_matrix(lattice: Lattice2D, wood: WoodNotation | str) -> np.ndarray:
    """Superstructure matrix M (B = M A) of a Wood form on ``lattice``.

    Primitive forms give the Wood basis itself (b1 = p R a1, b2 = q R a2). Centred forms give
    the shortest of the primitive bases ``(c, c - w1)``, ``(c, w2)``, ``(w1, c)`` with
    ``c = (w1 + w2) / 2`` (the first on ties); c(2×2) on a square lattice gives
    [[1, 1], [-1, 1]].

    Numbers printed to a few digits are rounded, so the float matrix is snapped to a nearby
    exact rational matrix when (1) each entry lies within the change that the rounding of the
    angle and of decimal scale factors allows (half a unit of the last printed digit; an angle
    printed without decimals is uncertain by 0.5 degree; scale factors that are integers,
    fractions, surds or decimals standing for a small rational, such as 1.5, are exact),
    (2) its denominator is at most :data:`SNAP_DENOMINATOR` (the smallest that works is used),
    and (3) that rational matrix has a Wood form of the same kind with the same scale factors
    and an angle within those uncertainties. Forms given to full precision (computed from a
    matrix, not read from text) may also snap to denominators up to 10^4 within 1e-9.
    Otherwise the float matrix is returned (an incommensurate superstructure).

    Parameters
    ----------
    lattice : Lattice2D
        The substrate.
    wood : WoodNotation or str
        The form, or text for :func:`parse_wood`.

    Returns
    -------
    ndarray, shape (2, 2)
        An ``object`` array of Fractions when exact, else float64.
    """
    if isinstance(wood, str):
        wood = parse_wood(wood)
    exact = _exact_unrotated(lattice, wood)
    if exact is not None:
        return exact
    A = lattice.vectors
    Ainv = np.linalg.inv(A)
    p, q, phi = float(wood.p), float(wood.q), math.radians(wood.angle)
    B, choice = _basis(A, p, q, phi, wood.centred)
    M = B @ Ainv
    dp = 0.5 * 10.0 ** -wood.p_decimals if wood.p_decimals is not None else 0.0
    dq = 0.5 * 10.0 ** -wood.q_decimals if wood.q_decimals is not None else 0.0
    dphi = 0.5 * 10.0 ** -wood.angle_decimals if wood.angle_decimals is not None else 0.0
    tol = np.zeros((2, 2))
    for sp in (-1, 1):
        for sq in (-1, 1):
            for sa in (-1, 1):
                Bc, _ = _basis(A, p + sp * dp, q + sq * dq, phi + sa * math.radians(dphi),
                               wood.centred, choice)
                tol = np.maximum(tol, np.abs(Bc @ Ainv - M))
    # shrink a hair so that a value exactly half a unit away is not taken, allow float noise
    tol = tol * (1 - 1e-6) + 1e-9 * max(1.0, float(np.max(np.abs(M))))
    for d in range(1, SNAP_DENOMINATOR + 1):
        R = np.rint(M * d)
        if np.any(np.abs(R / d - M) > tol):
            continue
        cand = np.empty((2, 2), dtype=object)
        cand[:] = [[Fraction(int(R[i, j]), d) for j in range(2)] for i in range(2)]
        if det2(cand) == 0:
            continue
        if any(_matches(f, wood, dp, dq, dphi) for f in matrix_to_wood(lattice, cand)):
            return cand
    if dp == dq == dphi == 0.0:
        # full precision (a form computed from a matrix): larger denominators are safe
        cand = np.empty((2, 2), dtype=object)
        cand[:] = [[Fraction(float(x)).limit_denominator(10**4) for x in row] for row in M]
        if np.all(np.abs(to_float(cand) - M) <= tol) and det2(cand) != 0 and any(
            _matches(f, wood, dp, dq, dphi) for f in matrix_to_wood(lattice, cand)
        ):
            return cand
    return M


# --------------------------------------------------------------------------- matrix -> Wood
def _search(lattice: Lattice2D, Mf: np.ndarray) -> list[tuple[bool, float, float, float]]:
    """(centred, p^2, q^2, phi in radians) of every Wood form of B = Mf A.

    One pass over the superlattice vectors v1 (candidate first Wood vectors) up to the
    largest length a centred form allows; for each, the second Wood vector
    q R(phi) a2 is tested for membership (and the centre (w1 + w2) / 2 for centred forms).
    """
    A = lattice.vectors
    B = Mf @ A
    detm = abs(float(np.linalg.det(Mf)))
    la1, la2 = lattice.lengths
    red, T = gauss_reduce(B)
    r1, r2 = red
    lam1 = math.hypot(*r1)
    rad_p = detm * la1 * la2 / lam1  # both Wood vectors are at least lam1 long
    rad_c = 2.0 * rad_p
    area = abs(float(np.linalg.det(red)))
    nx = int(rad_c * math.hypot(*r2) / area) + 1
    ny = int(rad_c * lam1 / area) + 1
    if (2 * nx + 1) * (2 * ny + 1) > 4_000_000:
        raise NotationError(
            "this superlattice is too elongated for the Wood search (over four million candidate "
            "vectors); give a less extreme matrix."
        )
    xs, ys = np.meshgrid(np.arange(-nx, nx + 1), np.arange(-ny, ny + 1), indexing="ij")
    xy = np.stack([xs.ravel(), ys.ravel()], axis=1)
    v1 = xy @ red
    n2 = np.einsum("ij,ij->i", v1, v1)
    # v and -v give the same form (angles differ by 180 degrees): keep one half-plane
    half = (xy[:, 0] > 0) | ((xy[:, 0] == 0) & (xy[:, 1] > 0))
    keep = (n2 <= rad_c * rad_c * (1 + 1e-9)) & half
    k1, v1, n2 = xy[keep] @ T, v1[keep], n2[keep]
    a1, a2 = A
    phi = np.arctan2(a1[0] * v1[:, 1] - a1[1] * v1[:, 0], v1 @ a1)
    p2 = n2 / (la1 * la1)
    p = np.sqrt(p2)
    c, s = np.cos(phi), np.sin(phi)
    dir2 = np.stack([c * a2[0] - s * a2[1], s * a2[0] + c * a2[1]], axis=1)
    Binv = np.linalg.inv(B)
    out = []
    for centred in (False, True):
        factor = 2.0 if centred else 1.0
        sel = n2 <= (rad_c if centred else rad_p) ** 2 * (1 + 1e-9)
        k2 = (dir2[sel] * (factor * detm / p[sel])[:, None]) @ Binv
        k2r = np.rint(k2)
        miss = np.linalg.norm((k2 - k2r) @ B, axis=1)  # Angstrom from the nearest superlattice vector
        ok = miss <= MEMBER_TOL * max(la1, la2) + 1e-9 * np.linalg.norm(k2 @ B, axis=1)
        if centred:
            ok &= np.all((k1[sel] + k2r.astype(np.int64)) % 2 == 0, axis=1)
        idx = np.nonzero(ok)[0]
        if idx.size == 0:
            continue
        vb = k2r[idx] @ B
        q2 = np.einsum("ij,ij->i", vb, vb) / (la2 * la2)
        out.extend(zip([centred] * idx.size, p2[sel][idx].tolist(), q2.tolist(), phi[sel][idx].tolist(),
                       strict=True))
    return out


def _preference(form: WoodNotation) -> tuple:
    return (form.rotated, form.centred, round(abs(form.angle), 7), form.angle < 0,
            float(form.p), float(form.q))


def matrix_to_wood(lattice: Lattice2D, M) -> list[WoodNotation]:
    """All Wood forms of the superlattice ``B = M A`` on ``lattice``, preferred first.

    The search runs over every superlattice vector that could serve as the first Wood vector
    (their length is bounded because both Wood vectors must be at least as long as the
    shortest superlattice vector), and keeps those for which the matching second vector is a
    superlattice vector as well (and, for centred forms, the centre too).

    Order of preference (the first is the preferred form):

    1. unrotated primitive forms, then unrotated centred forms;
    2. then rotated primitive forms by increasing |φ|, then rotated centred forms by
       increasing |φ| (so (√5×√5)R26.6° is preferred to c(√10×√10)R-18.4° on a square
       substrate, as in the literature);
    3. ties: positive angle before negative, then smaller p, then smaller q.

    Returns an empty list when the superlattice has no Wood form (the matrix is the only
    notation then). Scale factors are exact :class:`Surd` values when their squares are
    rationals (denominator up to 10^4), else floats.
    """
    Mx = as_matrix(M)
    Mf = to_float(Mx)
    found: dict[tuple, WoodNotation] = {}
    for centred, p2, q2, phi in _search(lattice, Mf):
        deg = math.degrees(phi)
        deg = (deg + 90.0) % 180.0 - 90.0
        if deg <= -90.0 + 1e-9:
            deg += 180.0
        if abs(deg) < 1e-9:
            deg = 0.0
        key = (centred, round(p2, 8), round(q2, 8), round(deg, 7))
        if key in found:
            continue
        p = Surd.recognise(p2) or math.sqrt(p2)
        q = Surd.recognise(q2) or math.sqrt(q2)
        found[key] = WoodNotation(p, q, deg, centred)
    return sorted(found.values(), key=_preference)


def preferred_wood(lattice: Lattice2D, M) -> WoodNotation | None:
    """The preferred Wood form of ``M`` on ``lattice`` (see :func:`matrix_to_wood`), or None."""
    forms = matrix_to_wood(lattice, M)
    return forms[0] if forms else None


__all__ = [
    "SMALL_DENOMINATOR",
    "WoodNotation",
    "matrix_to_wood",
    "parse_wood",
    "preferred_wood",
    "snap_rational",
    "wood_to_matrix",
]
