"""Two-dimensional Bravais lattices of surfaces.

Conventions (see DEVELOPERS.md): row vectors; a lattice is a 2x2 array whose rows are
``a1`` and ``a2`` in Angstrom; reciprocal vectors include the factor 2 pi so that
``a_i . b_j = 2 pi delta_ij``; hexagonal lattices use |a1| = |a2| at 120 degrees unless a
60 degree basis is asked for explicitly.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.errors import LatticeError

#: The five 2D Bravais lattice kinds, in the names used everywhere in surfgeo.
KINDS: tuple[str, ...] = ("oblique", "rectangular", "centred-rectangular", "square", "hexagonal")

#: Hermann-Mauguin symbol of the holohedral point group of each kind.
HOLOHEDRY: dict[str, str] = {
    "oblique": "2",
    "rectangular": "2mm",
    "centred-rectangular": "2mm",
    "square": "4mm",
    "hexagonal": "6mm",
}

#: Default relative length tolerance and angle tolerance (degrees) for classification.
LENGTH_TOL = 1e-4
ANGLE_TOL = 0.01


def _positive(name: str, value: float) -> float:
    return positive_number(value, name, error=LatticeError)


def _angle(name: str, value: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise LatticeError(f"{name} must be an angle in degrees, got {value!r}.") from None
    if not (0.0 < v < 180.0):
        raise LatticeError(f"{name} must be an angle between 0 and 180 degrees, got {value!r}.")
    return v


@dataclass(frozen=True)
class PointOperation:
    """One operation of a 2D point group.

    Attributes
    ----------
    integer : ndarray of int, shape (2, 2)
        The operation in the lattice basis, row convention: the image of ``a_i`` is
        ``sum_j integer[i, j] a_j``.
    cartesian : ndarray, shape (2, 2)
        The orthogonal matrix acting on Cartesian column vectors (``v' = cartesian @ v``).
    """

    integer: np.ndarray
    cartesian: np.ndarray

    @property
    def is_rotation(self) -> bool:
        """True for proper rotations (det +1), false for mirrors."""
        return round(float(np.linalg.det(self.cartesian))) == 1

    @property
    def angle_deg(self) -> float:
        """Rotation angle (rotations) or angle of the mirror line from +x (mirrors), degrees."""
        c = self.cartesian
        if self.is_rotation:
            return math.degrees(math.atan2(c[1, 0], c[0, 0])) % 360.0
        return (math.degrees(math.atan2(c[1, 0], c[0, 0])) / 2.0) % 180.0

    @property
    def symbol(self) -> str:
        """A short name: ``1``, ``2``, ``3+``, ``4-``, ``6+`` ..., or ``m(30)`` for a mirror
        whose line makes 30 degrees with +x."""
        ang = self.angle_deg
        if self.is_rotation:
            if abs(ang) < 1e-6 or abs(ang - 360) < 1e-6:
                return "1"
            if abs(ang - 180) < 1e-6:
                return "2"
            n = round(360.0 / min(ang, 360 - ang))
            return f"{n}{'+' if ang < 180 else '-'}"
        a = round(ang, 6) % 180.0
        return f"m({a:g})"

    def __repr__(self) -> str:
        return f"PointOperation({self.symbol}, {self.integer.tolist()})"


def gauss_reduce(B) -> tuple[np.ndarray, np.ndarray]:
    """Lagrange-Gauss reduction of the two rows of ``B`` on plain floats.

    The fast core for callers that need only a short basis (Wood search, face geometry,
    symmetry), without the orientation and tie rules of :meth:`Lattice2D.reduced` and without
    building a :class:`Lattice2D`.

    Parameters
    ----------
    B : array_like, shape (2, 2)
        Basis vectors as rows (any units, any orientation).

    Returns
    -------
    reduced : ndarray, shape (2, 2)
        Rows r1, r2 with |r1| <= |r2| and |r1 . r2| <= |r1|^2 / 2.
    T : ndarray of int, shape (2, 2)
        Unimodular matrix with ``reduced = T @ B``.

    References
    ----------
    .. [1] P. Q. Nguyen and D. Stehle, "Low-dimensional lattice basis reduction revisited",
       ACM Trans. Algorithms 5, 46 (2009) (Lagrange-Gauss algorithm).
    """
    (x1, y1), (x2, y2) = np.asarray(B, dtype=float).tolist()
    t = [[1, 0], [0, 1]]
    for _ in range(200):
        n1, n2 = x1 * x1 + y1 * y1, x2 * x2 + y2 * y2
        if n1 > n2:
            x1, y1, x2, y2 = x2, y2, x1, y1
            t = [t[1], t[0]]
            n1 = n2
        r = (x1 * x2 + y1 * y2) / n1
        # |r| <= 1/2 is reduced; at r = +-1/2 (up to rounding) both a2 and a2 -+ a1 are, and
        # rounding r would swap between them forever (a 200-step spin, e.g. on fcc(997))
        if abs(r) <= 0.5 + 1e-10:
            break
        mu = round(r)
        x2, y2 = x2 - mu * x1, y2 - mu * y1
        t[1] = [t[1][0] - mu * t[0][0], t[1][1] - mu * t[0][1]]
    return np.array([[x1, y1], [x2, y2]]), np.array(t, dtype=np.int64)


@dataclass(frozen=True, eq=False)
class Lattice2D:
    """A 2D Bravais lattice given by two basis vectors (rows of ``vectors``, Angstrom).

    Construct with the class methods (:meth:`hexagonal`, :meth:`square`,
    :meth:`rectangular`, :meth:`rhombic`, :meth:`oblique`, :meth:`from_vectors`) or from a
    spec string with :func:`surfgeo.lattice.parse_lattice`.

    Examples
    --------
    >>> lat = Lattice2D.hexagonal(2.77)
    >>> round(lat.area, 4)
    6.645
    >>> lat.kind()
    'hexagonal'
    """

    vectors: np.ndarray
    label: str = field(default="", compare=False)

    def __post_init__(self) -> None:
        try:
            v = np.array(self.vectors, dtype=float)
        except (TypeError, ValueError):
            raise LatticeError("lattice vectors must be two pairs of numbers.") from None
        if v.shape != (2, 2):
            raise LatticeError(f"lattice vectors must form a 2x2 array, got shape {v.shape}.")
        if not np.all(np.isfinite(v)):
            raise LatticeError("lattice vectors must be finite numbers.")
        norms = np.linalg.norm(v, axis=1)
        if np.any(norms <= 0):
            raise LatticeError("lattice vectors must have non-zero length.")
        if abs(np.linalg.det(v)) <= 1e-10 * norms[0] * norms[1]:
            raise LatticeError("lattice vectors are parallel; they do not span a 2D lattice.")
        v.setflags(write=False)
        object.__setattr__(self, "vectors", v)

    # ------------------------------------------------------------------ constructors
    @classmethod
    def from_vectors(cls, a1, a2, label: str = "") -> Lattice2D:
        """Lattice from two Cartesian vectors (Angstrom), used as given."""
        return cls(np.array([a1, a2], dtype=float), label)

    @classmethod
    def oblique(cls, a: float, b: float, gamma: float) -> Lattice2D:
        """Oblique lattice, |a1| = a along +x, |a2| = b at ``gamma`` degrees from a1."""
        a, b, g = _positive("a", a), _positive("b", b), math.radians(_angle("gamma", gamma))
        return cls(np.array([[a, 0.0], [b * math.cos(g), b * math.sin(g)]]), "oblique")

    @classmethod
    def hexagonal(cls, a: float, gamma: float = 120.0) -> Lattice2D:
        """Hexagonal lattice with |a1| = |a2| = a at 120 degrees (or 60 if ``gamma=60``)."""
        if gamma not in (60, 120, 60.0, 120.0):
            raise LatticeError(f"a hexagonal basis has 60 or 120 degrees, got {gamma!r}.")
        lat = cls.oblique(a, a, gamma)
        return cls(lat.vectors, "hexagonal" if gamma == 120 else "hexagonal (60 degree basis)")

    @classmethod
    def square(cls, a: float) -> Lattice2D:
        """Square lattice of constant ``a``."""
        a = _positive("a", a)
        return cls(np.array([[a, 0.0], [0.0, a]]), "square")

    @classmethod
    def rectangular(cls, a: float, b: float) -> Lattice2D:
        """Rectangular lattice, a1 = (a, 0), a2 = (0, b), in the order given."""
        a, b = _positive("a", a), _positive("b", b)
        return cls(np.array([[a, 0.0], [0.0, b]]), "rectangular")

    @classmethod
    def rhombic(cls, a: float, gamma: float) -> Lattice2D:
        """Centred rectangular lattice given by its primitive rhombic cell (|a1| = |a2| = a)."""
        lat = cls.oblique(a, a, gamma)
        return cls(lat.vectors, "centred-rectangular")

    # ------------------------------------------------------------------ properties
    @property
    def a1(self) -> np.ndarray:
        return self.vectors[0]

    @property
    def a2(self) -> np.ndarray:
        return self.vectors[1]

    @property
    def lengths(self) -> tuple[float, float]:
        """|a1| and |a2| in Angstrom."""
        n = np.linalg.norm(self.vectors, axis=1)
        return float(n[0]), float(n[1])

    @property
    def gamma(self) -> float:
        """Angle between a1 and a2 in degrees."""
        a, b = self.lengths
        c = float(np.dot(self.a1, self.a2)) / (a * b)
        return math.degrees(math.acos(max(-1.0, min(1.0, c))))

    @property
    def area(self) -> float:
        """Cell area in Angstrom^2."""
        return abs(float(np.linalg.det(self.vectors)))

    @property
    def handedness(self) -> int:
        """+1 when a1 x a2 points along +z (the surfgeo convention), -1 otherwise."""
        return 1 if np.linalg.det(self.vectors) > 0 else -1

    @property
    def metric(self) -> np.ndarray:
        """Metric tensor G = A A^T (Angstrom^2)."""
        return self.vectors @ self.vectors.T

    @property
    def reciprocal(self) -> np.ndarray:
        """Reciprocal basis (rows b1, b2) in 1/Angstrom, with a_i . b_j = 2 pi delta_ij."""
        return 2.0 * math.pi * np.linalg.inv(self.vectors).T

    # ------------------------------------------------------------------ coordinates
    def cartesian(self, frac) -> np.ndarray:
        """Cartesian positions (Angstrom) of fractional coordinates (rows)."""
        return np.asarray(frac, dtype=float) @ self.vectors

    def fractional(self, cart) -> np.ndarray:
        """Fractional coordinates of Cartesian positions (rows, Angstrom)."""
        return np.asarray(cart, dtype=float) @ np.linalg.inv(self.vectors)

    # ------------------------------------------------------------------ reduction
    def reduced(self) -> tuple[Lattice2D, np.ndarray]:
        """Gauss-Lagrange reduced basis of the same lattice.

        Returns the reduced lattice and the unimodular integer matrix ``T`` with
        ``reduced.vectors = T @ self.vectors``. The reduced basis satisfies
        |a1| <= |a2|, |a1 . a2| <= |a1|^2 / 2, is right-handed (a1 x a2 along +z) and,
        where the lattice allows it, has a1 . a2 <= 0 (the 120 degree hexagonal basis).

        References
        ----------
        .. [1] P. Q. Nguyen and D. Stehle, "Low-dimensional lattice basis reduction
           revisited", ACM Trans. Algorithms 5, 46 (2009) (Lagrange-Gauss algorithm).
        """
        A = self.vectors.copy()
        T = np.eye(2, dtype=np.int64)
        for _ in range(200):
            if A[0] @ A[0] > (A[1] @ A[1]) * (1.0 + 1e-12):
                A = A[::-1].copy()
                T = T[::-1].copy()
            x = float(A[0] @ A[1]) / float(A[0] @ A[0])
            # round half towards zero (with a little slack) so that exact ties stay put
            mu = int(math.copysign(math.floor(abs(x) + 0.5 - 1e-9), x))
            if mu == 0:
                break
            A[1] = A[1] - mu * A[0]
            T[1] = T[1] - mu * T[0]
        else:  # pragma: no cover - the algorithm terminates in O(log) steps
            raise LatticeError("lattice reduction did not converge.")
        # right-handed
        if np.linalg.det(A) < 0:
            A[1], T[1] = -A[1], -T[1]
        # prefer an obtuse (or right) angle where a tie between equivalent bases allows it
        if A[0] @ A[1] > 1e-12 * (A[0] @ A[0]):
            cand = A[1] - A[0]
            if abs(cand @ cand - A[1] @ A[1]) <= 1e-9 * (A[1] @ A[1]):
                A[1], T[1] = cand, T[1] - T[0]
            elif abs(A[0] @ A[0] - A[1] @ A[1]) <= 1e-9 * (A[1] @ A[1]):
                # equal lengths, acute: (a2, -a1) is right-handed with the obtuse angle
                A = np.array([A[1], -A[0]])
                T = np.array([T[1], -T[0]])
        return Lattice2D(A, self.label), T.astype(np.int64)

    # ------------------------------------------------------------------ classification
    def kind(self, length_tol: float = LENGTH_TOL, angle_tol: float = ANGLE_TOL) -> str:
        """Bravais kind of the lattice: one of :data:`KINDS`.

        Parameters
        ----------
        length_tol : float
            Relative tolerance for equal lengths.
        angle_tol : float
            Tolerance for angles, degrees.
        """
        red, _ = self.reduced()
        l1, l2 = red.lengths
        g = red.gamma
        equal = abs(l1 - l2) <= length_tol * max(l1, l2)
        right = abs(g - 90.0) <= angle_tol
        if equal and right:
            return "square"
        if equal and (abs(g - 120.0) <= angle_tol or abs(g - 60.0) <= angle_tol):
            return "hexagonal"
        if right:
            return "rectangular"
        if equal:
            return "centred-rectangular"
        # |a2 - a1| == |a2| (or |a2 + a1| == |a2|) also means a centred rectangular lattice
        s = red.a1 + red.a2 if red.a1 @ red.a2 < 0 else red.a2 - red.a1
        if abs(float(np.linalg.norm(s)) - l2) <= length_tol * l2:
            return "centred-rectangular"
        return "oblique"

    def point_group(
        self, length_tol: float = LENGTH_TOL, angle_tol: float = ANGLE_TOL
    ) -> list[PointOperation]:
        """The holohedral point group of the lattice as explicit operations.

        Each operation is given as an integer matrix ``W`` in *this* basis (row convention:
        a_i -> sum_j W_ij a_j) and as a Cartesian orthogonal matrix ``R``; they are related
        by ``W A = A R^T``. The identity comes first, then rotations by increasing angle,
        then mirrors.
        """
        red, T = self.reduced()
        G = red.metric
        scale = float(np.max(np.abs(G)))
        tol = max(length_tol, math.radians(angle_tol)) * scale * 4
        Tinv = np.rint(np.linalg.inv(T)).astype(np.int64)
        Ainv = np.linalg.inv(self.vectors)
        ops = []
        for entries in itertools.product((-1, 0, 1), repeat=4):
            W = np.array(entries, dtype=np.int64).reshape(2, 2)
            if abs(round(np.linalg.det(W))) != 1:
                continue
            if np.max(np.abs(W @ G @ W.T - G)) > tol:
                continue
            Wself = Tinv @ W @ T
            Rt = Ainv @ Wself @ self.vectors  # = R^T
            R = Rt.T
            # symmetrise to an exact orthogonal matrix (polar decomposition)
            u, _, vt = np.linalg.svd(R)
            ops.append(PointOperation(Wself, u @ vt))

        def order(op: PointOperation) -> tuple[int, float]:
            return (0 if op.is_rotation else 1, round(op.angle_deg, 6))

        return sorted(ops, key=order)

    # ------------------------------------------------------------------ output
    def to_dict(self) -> dict:
        """Plain description for JSON: kind, a1, a2 (Angstrom), lengths, gamma, area."""
        return {
            "kind": self.kind(),
            "a1": self.a1.tolist(),
            "a2": self.a2.tolist(),
            "lengths": list(self.lengths),
            "gamma_deg": self.gamma,
            "area": self.area,
        }

    def __repr__(self) -> str:
        a, b = self.lengths
        return f"Lattice2D(|a1|={a:.6g}, |a2|={b:.6g}, gamma={self.gamma:.6g}, {self.kind()})"
