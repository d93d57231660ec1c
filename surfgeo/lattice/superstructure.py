"""Superstructures: a substrate lattice plus a 2x2 matrix in Park-Madden notation.

The superlattice vectors are ``b_i = sum_j M_ij a_j``, i.e. ``B = M @ A`` with row vectors.
M is held exactly (Fractions) when rational:

* integer M: a simple commensurate superstructure;
* rational, non-integer M: a coincidence (higher-order commensurate) superstructure;
* irrational M (or decimals with no small rational within their printed precision):
  incommensurate.

References
----------
.. [1] R. L. Park and H. H. Madden, Surf. Sci. 11, 188 (1968) (matrix notation).
.. [2] E. A. Wood, J. Appl. Phys. 35, 1306 (1964) (Wood notation).
.. [3] K. Hermann, *Crystallography and Surface Structure*, Wiley-VCH (2011), ch. 6.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from surfgeo.errors import NotationError
from surfgeo.lattice.domains import Domain, point_group_of, symmetry_domains
from surfgeo.lattice.hnf import canonical, equivalent
from surfgeo.lattice.lattice2d import HOLOHEDRY, Lattice2D
from surfgeo.lattice.rational import (
    as_matrix,
    det2,
    format_matrix,
    inv2,
    is_exact,
    is_integer,
    number_to_plain,
    to_float,
    to_plain,
)
from surfgeo.lattice.wood import WoodNotation, matrix_to_wood, parse_wood, wood_to_matrix

#: The three kinds of superstructure.
SUPERSTRUCTURE_KINDS = ("commensurate", "coincidence", "incommensurate")


def basis_note(lattice: Lattice2D) -> str:
    """A label for substrate bases that must be stated next to a printed matrix.

    Returns ``"60 degree hexagonal basis"`` for a hexagonal lattice given with 60 degrees
    between a1 and a2, ``"120 degree hexagonal basis"`` for the default hexagonal basis, and
    ``""`` otherwise.
    """
    if lattice.kind() != "hexagonal":
        return ""
    if abs(lattice.gamma - 60.0) < 0.5:
        return "60 degree hexagonal basis"
    if abs(lattice.gamma - 120.0) < 0.5:
        return "120 degree hexagonal basis"
    return "non-standard hexagonal basis"


@dataclass(frozen=True, eq=False)
class Superstructure:
    """A superstructure: substrate lattice and matrix M with B = M @ A.

    Parameters
    ----------
    lattice : Lattice2D
        The substrate (1x1) surface lattice.
    matrix : array_like, shape (2, 2) or (4,)
        M as ints, Fractions, floats or strings such as ``"1/2"``. Converted to an exact
        ``object`` array of Fractions when every entry is rational (floats within 1e-9 of a
        fraction with denominator at most 12 count as rational), else to float64.

    Examples
    --------
    >>> from surfgeo.lattice import parse_lattice
    >>> s = Superstructure.from_wood(parse_lattice("hex:2.77"), "(sqrt3 x sqrt3)R30")
    >>> s.matrix.tolist()
    [[Fraction(2, 1), Fraction(1, 1)], [Fraction(-1, 1), Fraction(1, 1)]]
    >>> s.kind, s.determinant, str(s.wood()), len(s.domains())
    ('commensurate', Fraction(3, 1), '(√3×√3)R30°', 1)
    """

    lattice: Lattice2D
    matrix: np.ndarray

    def __post_init__(self) -> None:
        if not isinstance(self.lattice, Lattice2D):
            raise NotationError("a superstructure needs a Lattice2D substrate (see surfgeo.lattice).")
        M = as_matrix(self.matrix)
        M.setflags(write=False)
        object.__setattr__(self, "matrix", M)
        object.__setattr__(self, "_cache", {})

    # ---------------------------------------------------------------- constructors
    @classmethod
    def from_wood(cls, lattice: Lattice2D, text: str | WoodNotation) -> Superstructure:
        """Superstructure from Wood notation (see :func:`surfgeo.lattice.wood.wood_to_matrix`)."""
        wood = parse_wood(text) if isinstance(text, str) else text
        return cls(lattice, wood_to_matrix(lattice, wood))

    # ---------------------------------------------------------------- matrix facts
    @property
    def exact(self) -> bool:
        """True when M is rational (held as Fractions)."""
        return is_exact(self.matrix)

    @property
    def matrix_float(self) -> np.ndarray:
        """M as a float64 array."""
        return to_float(self.matrix)

    @property
    def integer_matrix(self) -> np.ndarray | None:
        """M as an int64 array when it is integer, else None."""
        if not is_integer(self.matrix):
            return None
        return np.array([[int(v) for v in row] for row in self.matrix], dtype=np.int64)

    @property
    def determinant(self) -> Fraction | float:
        """det M: the superlattice cell area in substrate cells (negative for a left-handed
        basis). Exact for rational M."""
        return det2(self.matrix)

    @property
    def kind(self) -> str:
        """``"commensurate"`` (integer M), ``"coincidence"`` (rational M) or
        ``"incommensurate"`` (irrational M)."""
        if not self.exact:
            return "incommensurate"
        return "commensurate" if is_integer(self.matrix) else "coincidence"

    def coverage(self, n_per_cell: int | float | Fraction = 1) -> Fraction | float:
        """Coverage in monolayers (adsorbates per substrate surface cell) for
        ``n_per_cell`` adsorbates per superlattice cell: ``n / |det M|``.

        Exact (a Fraction) when M is rational and ``n_per_cell`` is an integer or Fraction.
        """
        d = self.determinant
        if isinstance(d, Fraction) and isinstance(n_per_cell, (int, Fraction)):
            return Fraction(n_per_cell) / abs(d)
        return float(n_per_cell) / abs(float(d))

    # ---------------------------------------------------------------- geometry
    @property
    def vectors(self) -> np.ndarray:
        """Superlattice basis B = M A (rows b1, b2), Angstrom."""
        return self.matrix_float @ self.lattice.vectors

    @property
    def area(self) -> float:
        """Superlattice cell area, Angstrom^2."""
        return abs(float(np.linalg.det(self.vectors)))

    @property
    def reciprocal(self) -> np.ndarray:
        """Superlattice reciprocal basis (rows), 1/Angstrom, with b_i . b*_j = 2 pi delta_ij."""
        return 2.0 * math.pi * np.linalg.inv(self.vectors).T

    @property
    def reciprocal_matrix(self) -> np.ndarray:
        """(M^-1)^T: the superlattice reciprocal basis in the substrate reciprocal basis.

        Superlattice beam (m, n) has the substrate label (h, k) = (m, n) @ M^-T. Exact
        Fractions for rational M (so fractional-order labels are exact).
        """
        if self.exact:
            return inv2(self.matrix).T.copy()
        return np.linalg.inv(self.matrix_float).T

    def superlattice(self) -> Lattice2D:
        """The superlattice as a :class:`Lattice2D` (basis B as given)."""
        return Lattice2D(self.vectors, "superlattice")

    @property
    def basis_note(self) -> str:
        """``"60 degree hexagonal basis"`` etc.: say it wherever the matrix is printed."""
        return basis_note(self.lattice)

    # ---------------------------------------------------------------- notation and symmetry
    def wood_forms(self) -> list[WoodNotation]:
        """All Wood forms, preferred first (see :func:`surfgeo.lattice.wood.matrix_to_wood`)."""
        if "wood" not in self._cache:
            self._cache["wood"] = matrix_to_wood(self.lattice, self.matrix)
        return list(self._cache["wood"])

    def wood(self) -> WoodNotation | None:
        """The preferred Wood form, or None when the superlattice has no Wood form."""
        forms = self.wood_forms()
        return forms[0] if forms else None

    def domains(self) -> list[Domain]:
        """Symmetry domains under the substrate point group (first: M itself)."""
        if "domains" not in self._cache:
            self._cache["domains"] = symmetry_domains(self.lattice, self.matrix)
        return list(self._cache["domains"])

    @property
    def point_group_symbol(self) -> str:
        """Hermann-Mauguin symbol of the substrate holohedry used for the domains."""
        return HOLOHEDRY[self.lattice.kind()]

    def canonical(self) -> np.ndarray:
        """Canonical (Hermite normal form) matrix of the same superlattice; rational M only."""
        return canonical(self.matrix)

    def same_superlattice(self, other: Superstructure | np.ndarray) -> bool:
        """True when ``other`` (a Superstructure on the same substrate, or a matrix) has the
        same superlattice."""
        M2 = other.matrix if isinstance(other, Superstructure) else other
        return equivalent(self.matrix, M2)

    # ---------------------------------------------------------------- output
    def to_dict(self) -> dict:
        """The JSON record of the ``notation`` command.

        Keys: ``matrix`` (2x2 numbers), ``wood`` (preferred form in Unicode or None),
        ``wood_all`` (every form in Unicode, preferred first), ``determinant``, ``kind``,
        ``domains`` (their number).
        """
        forms = self.wood_forms()
        return {
            "matrix": to_plain(self.matrix),
            "wood": forms[0].unicode if forms else None,
            "wood_all": [f.unicode for f in forms],
            "determinant": number_to_plain(self.determinant),
            "kind": self.kind,
            "domains": len(self.domains()),
        }

    def __str__(self) -> str:
        note = f" ({self.basis_note})" if self.basis_note else ""
        w = self.wood()
        return f"{format_matrix(self.matrix)}{note} = {w.unicode if w else 'no Wood form'}"

    def __repr__(self) -> str:
        note = f", {self.basis_note}" if self.basis_note else ""
        return f"Superstructure({format_matrix(self.matrix)}, {self.lattice!r}{note})"


__all__ = ["SUPERSTRUCTURE_KINDS", "Superstructure", "basis_note", "point_group_of"]
