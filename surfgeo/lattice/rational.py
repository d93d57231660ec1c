"""Exact numbers for superstructure notation: rational 2x2 matrices, decimals and surds.

A superstructure matrix is held exactly, as a 2x2 numpy ``object`` array of
:class:`fractions.Fraction`, whenever its entries are rational; otherwise as a float array.
Decimals typed by a person stand for themselves when they are small rationals (``0.5``,
``0.3`` = 3/10, ``1.1`` = 11/10); otherwise (``0.333``) for the simplest rational within half a
unit of their last digit, if one with a small denominator (at most :data:`SMALL_DENOMINATOR`)
exists. Wood scale factors such as ``2√3`` are :class:`Surd`
values ``c √m`` with rational ``c`` and square-free ``m``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

import numpy as np

from surfgeo.errors import NotationError

#: Largest denominator of a "small rational" that a decimal or a float is snapped to.
SMALL_DENOMINATOR = 12

#: Relative tolerance with which a computed float is taken to be a small rational.
FLOAT_RTOL = 1e-9

#: Largest magnitude of a superstructure matrix entry (in substrate vectors): far beyond any
#: superstructure seen by diffraction, and small enough for exact and float arithmetic alike.
MAX_ENTRY = 1000

_DECIMAL = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_FRACTION = re.compile(r"^[+-]?\d+\s*/\s*[+-]?\d+$")


# --------------------------------------------------------------------------- scalars
def snap_rational(x: float, tol: float, max_den: int = SMALL_DENOMINATOR) -> Fraction | None:
    """The rational with the smallest denominator (at most ``max_den``) within ``tol`` of ``x``.

    Returns ``None`` when there is none. The comparison is strict (``|x - r| < tol``) so that
    a value exactly half a unit away from a decimal is not taken.
    """
    if not math.isfinite(x):
        return None
    for d in range(1, max_den + 1):
        r = Fraction(round(x * d), d)
        if abs(x - float(r)) < tol:
            return r
    return None


def closest_denominators(values, max_den: int) -> np.ndarray:
    """Denominator of the fraction closest to each value among those with denominators up to
    ``max_den`` (what ``Fraction(v).limit_denominator(max_den).denominator`` gives), for many
    values in one numpy pass.

    Among fractions equally close within 1e-12 the smallest denominator wins, so a value that
    is a small rational up to rounding noise gets that rational's denominator.

    Examples
    --------
    >>> closest_denominators([0.5, 0.33333333, 2.0, 0.2499999999], 48).tolist()
    [2, 3, 1, 4]
    """
    v = np.asarray(values, dtype=float).ravel()
    if v.size == 0:
        return np.zeros(0, dtype=np.int64)
    max_den = int(max_den)
    small = min(max_den, 64)
    out = _closest_denominators(v, small)
    if small < max_den:
        # a fraction p/q (q <= small) within 1 / (4 small max_den) of v is the closest with any
        # denominator up to max_den: two different such fractions differ by >= 1 / (small max_den)
        err = np.abs(v - np.rint(v * out) / out)
        far = err >= 0.25 / (small * max_den)
        if np.any(far):
            out[far] = _closest_denominators(v[far], max_den)
    return out


def _closest_denominators(v: np.ndarray, max_den: int) -> np.ndarray:
    q = np.arange(1, max_den + 1, dtype=float)
    x = v[:, None] * q[None, :]
    err = np.abs(x - np.rint(x)) / q[None, :]
    best = err.min(axis=1, keepdims=True)
    return np.argmax(err <= best + 1e-12, axis=1).astype(np.int64) + 1


def parse_number(text: str, field: str) -> tuple[Fraction | float, int | None]:
    """Read an integer, a fraction ``a/b`` or a decimal typed by a person.

    Returns
    -------
    value : Fraction or float
        Exact for integers and fractions, and for decimals whose exact value has a denominator
        of at most :data:`SMALL_DENOMINATOR` (``0.3`` is 3/10, never 1/3). Other decimals stand
        for the simplest rational within half a unit of the last digit (denominator at most
        :data:`SMALL_DENOMINATOR`: ``0.333`` is 1/3), otherwise for the decimal itself as a float.
    decimals : int or None
        Number of digits after the decimal point for decimals, ``None`` for exact input.

    Raises
    ------
    NotationError
        If ``text`` is not a number; the message names ``field``.
    """
    s = str(text).strip().replace("\u2212", "-")
    if _FRACTION.match(s):
        num, den = (int(t) for t in s.split("/"))
        if den == 0:
            raise NotationError(f"{field} {text!r} divides by zero; give a number such as 1/2 or 0.5.")
        return Fraction(num, den), None
    if not _DECIMAL.match(s):
        raise NotationError(f"{field} {text!r} is not a number; give an integer, a fraction such as "
                            "1/2, or a decimal such as 0.5.")
    if re.fullmatch(r"[+-]?\d+", s):
        return Fraction(int(s)), None
    exact = Fraction(s)
    mantissa = s.lower().split("e")[0]
    decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
    if "e" in s.lower():
        decimals -= int(s.lower().split("e")[1])
    decimals = max(decimals, 0)
    if exact.denominator <= SMALL_DENOMINATOR:
        # the decimal is itself a small rational (0.1 = 1/10, 1.1 = 11/10, 0.3 = 3/10): take it as
        # typed, even when a rational with a smaller denominator lies within half a unit
        return exact, decimals
    half_unit = Fraction(1, 2 * 10**decimals)
    for d in range(1, SMALL_DENOMINATOR + 1):
        r = Fraction(round(exact * d), d)
        if abs(exact - r) < half_unit:
            return r, decimals
    return float(exact), decimals


def rationalise(x, rtol: float = FLOAT_RTOL) -> Fraction | None:
    """``x`` as an exact Fraction: ints and Fractions as they are, floats when within
    ``rtol`` of a small rational (denominator at most :data:`SMALL_DENOMINATOR`)."""
    if isinstance(x, Fraction):
        return x
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return Fraction(int(x))
    xf = float(x)
    return snap_rational(xf, rtol * max(1.0, abs(xf)))


# --------------------------------------------------------------------------- matrices
def as_matrix(M, field: str = "matrix") -> np.ndarray:
    """A validated 2x2 superstructure matrix, exact where possible.

    Parameters
    ----------
    M : array_like, shape (2, 2) or (4,)
        Entries as ints, Fractions, floats or strings (``"1/2"``, ``"0.5"``).

    Returns
    -------
    ndarray
        ``object`` array of Fractions when every entry is rational (see :func:`rationalise`
        and :func:`parse_number`), else a float64 array.

    Raises
    ------
    NotationError
        If there are not four finite numbers, an entry exceeds :data:`MAX_ENTRY` in magnitude,
        or the matrix is singular.
    """
    if isinstance(M, np.ndarray) and M.dtype == object and M.shape == (2, 2) and all(
        isinstance(v, Fraction) for v in M.flat
    ):
        out = M
    elif isinstance(M, np.ndarray) and M.dtype.kind in "iu" and M.shape in ((2, 2), (4,)):
        out = np.empty((2, 2), dtype=object)
        a, b, c, d = (Fraction(int(v)) for v in M.ravel())
        out[0, 0], out[0, 1], out[1, 0], out[1, 1] = a, b, c, d
    else:
        try:
            arr = np.array(M, dtype=object)
        except (TypeError, ValueError):  # pragma: no cover - ragged input
            raise NotationError(f"{field} must be four numbers M11 M12 M21 M22.") from None
        if arr.size != 4 or arr.shape not in ((2, 2), (4,)):
            raise NotationError(
                f"{field} must be a 2x2 matrix (four numbers M11 M12 M21 M22), got shape {arr.shape}."
            )
        values = []
        for v in arr.ravel():
            if isinstance(v, str):
                values.append(parse_number(v, f"{field} entry")[0])
            elif isinstance(v, (Fraction, int, float, np.integer, np.floating)) and not isinstance(v, bool):
                values.append(v)
            else:
                raise NotationError(f"{field} entries must be numbers, got {v!r}.")
        if not all(math.isfinite(float(v)) for v in values):
            raise NotationError(f"{field} entries must be finite numbers.")
        if any(abs(v) > MAX_ENTRY for v in values):
            raise NotationError(
                f"{field} entries must lie between -{MAX_ENTRY} and {MAX_ENTRY} substrate vectors, got "
                f"{', '.join(str(v) for v in arr.ravel())}."
            )
        exact = [rationalise(v) for v in values]
        if all(e is not None for e in exact):
            out = np.empty((2, 2), dtype=object)
            out[:] = [[exact[0], exact[1]], [exact[2], exact[3]]]
        else:
            out = np.array([float(v) for v in values], dtype=float).reshape(2, 2)
    if any(abs(v) > MAX_ENTRY for v in out.flat):
        raise NotationError(
            f"{field} entries must lie between -{MAX_ENTRY} and {MAX_ENTRY} substrate vectors, got "
            f"{format_matrix(out)}."
        )
    d = det2(out)
    if is_exact(out):
        singular = d == 0
    else:  # |det| against the product of the row lengths: the sine of the angle between the rows
        rows = np.abs(out.astype(float))
        singular = abs(float(d)) <= 1e-9 * float(np.hypot(*rows[0]) * np.hypot(*rows[1]))
    if singular:
        raise NotationError(
            f"{field} {to_plain(out)} is singular (determinant 0); its rows must be two "
            "non-parallel superlattice vectors."
        )
    return out


def is_exact(M: np.ndarray) -> bool:
    """True for an ``object`` matrix of Fractions (see :func:`as_matrix`)."""
    return M.dtype == object


def is_integer(M: np.ndarray) -> bool:
    """True for an exact matrix whose entries are all integers."""
    return M.dtype == object and all(v.denominator == 1 for v in M.flat)


def det2(M):
    """Determinant of a 2x2 matrix, exact for Fraction matrices."""
    return M[0, 0] * M[1, 1] - M[0, 1] * M[1, 0]


def inv2(M) -> np.ndarray:
    """Inverse of a 2x2 matrix, exact for Fraction matrices."""
    d = det2(M)
    out = np.empty((2, 2), dtype=M.dtype)
    out[0, 0], out[0, 1] = M[1, 1] / d, -M[0, 1] / d
    out[1, 0], out[1, 1] = -M[1, 0] / d, M[0, 0] / d
    return out


def to_float(M) -> np.ndarray:
    """A float64 copy of a (possibly exact) matrix."""
    return np.asarray(M, dtype=object).astype(float) if np.asarray(M).dtype == object else np.asarray(
        M, dtype=float
    )


def common_denominator(M: np.ndarray) -> int:
    """Least common multiple of the denominators of an exact matrix."""
    return math.lcm(*(v.denominator for v in M.flat))


def number_to_plain(v) -> int | float:
    """An int for integral values, else a float: what JSON and printing need."""
    if isinstance(v, Fraction):
        return int(v) if v.denominator == 1 else float(v)
    f = float(v)
    return int(f) if f.is_integer() and abs(f) < 2**53 else f


def to_plain(M) -> list[list[int | float]]:
    """The matrix as nested lists of ints and floats (for JSON)."""
    return [[number_to_plain(v) for v in row] for row in np.asarray(M)]


def format_number(v, digits: int = 6) -> str:
    """``3``, ``-1/2`` for exact values; up to ``digits`` significant digits for floats."""
    if isinstance(v, Fraction):
        return str(v)
    return f"{float(v):.{digits}g}"


def format_matrix(M) -> str:
    """``[[2, 1], [-1, 1]]`` with exact fractions, or floats with six significant digits."""
    rows = ("[" + ", ".join(format_number(v) for v in row) + "]" for row in np.asarray(M))
    return "[" + ", ".join(rows) + "]"


# --------------------------------------------------------------------------- surds
@lru_cache(maxsize=4096)
def _square_free(n: int) -> tuple[int, int]:
    """Write ``n = s**2 * m`` with ``m`` square-free (for the factors found); return (s, m)."""
    s, m = 1, n
    i = 2
    while i * i <= m and i <= 2000:
        while m % (i * i) == 0:
            m //= i * i
            s *= i
        i += 1
    r = math.isqrt(m)
    if r > 1 and r * r == m:
        s, m = s * r, 1
    return s, m


@dataclass(frozen=True)
class Surd:
    """A positive exact number ``coefficient * sqrt(radicand)``, radicand square-free.

    Examples
    --------
    >>> Surd.from_square(Fraction(12)).unicode
    '2√3'
    >>> Surd.from_square(Fraction(9, 4)).ascii
    '1.5'
    >>> Surd.from_square(Fraction(7, 9)).ascii
    'sqrt7/3'
    """

    coefficient: Fraction
    radicand: int = 1

    @classmethod
    def from_square(cls, square: Fraction) -> Surd:
        """The positive square root of a positive rational, simplified."""
        square = Fraction(square)
        if square <= 0:
            raise ValueError("a scale factor must be positive")
        n, d = square.numerator, square.denominator
        s, m = _square_free(n * d)
        return cls(Fraction(s, d), m)

    @classmethod
    def recognise(cls, square: float, rtol: float = 1e-11, max_den: int = 10**4) -> Surd | None:
        """The surd whose square is the float ``square``, if that square is a rational with a
        denominator of at most ``max_den`` within ``rtol``; else None."""
        return _recognise(cls, float(square), rtol, max_den)

    @property
    def square(self) -> Fraction:
        """The exact square, a rational."""
        return self.coefficient**2 * self.radicand

    @property
    def is_rational(self) -> bool:
        return self.radicand == 1

    def __float__(self) -> float:
        return float(self.coefficient) * math.sqrt(self.radicand)

    def _text(self, root: str) -> str:
        c = self.coefficient
        if self.radicand == 1:
            if c.denominator == 1:
                return str(c.numerator)
            d = c.denominator
            while d % 2 == 0:
                d //= 2
            while d % 5 == 0:
                d //= 5
            if d == 1:
                text = f"{float(c):.4f}".rstrip("0")
                if Fraction(text) == c:
                    return text
            return f"{c.numerator}/{c.denominator}"
        num = "" if c.numerator == 1 else str(c.numerator)
        den = "" if c.denominator == 1 else f"/{c.denominator}"
        return f"{num}{root}{self.radicand}{den}"

    @property
    def unicode(self) -> str:
        """``2√3``, ``√3/2``, ``3``, ``1.5``, ``4/3``."""
        return self._text("\u221a")

    @property
    def ascii(self) -> str:
        """``2sqrt3``, ``sqrt3/2``, ``3``, ``1.5``, ``4/3``."""
        return self._text("sqrt")

    def __str__(self) -> str:
        return self.unicode


@lru_cache(maxsize=8192)
def _recognise(cls, square: float, rtol: float, max_den: int) -> Surd | None:
    if not (math.isfinite(square) and square > 0):
        return None
    f = Fraction(square).limit_denominator(max_den)
    if f <= 0 or abs(float(f) - square) > rtol * square:
        return None
    return cls.from_square(f)
