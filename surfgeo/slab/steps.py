"""Stepped and kinked faces: step notation both ways, step geometry, stepped slabs.

Step notation (Lang, Joyner and Somorjai; Van Hove and Somorjai)
---------------------------------------------------------------
A vicinal face made of terraces n atom rows wide (counting the step-edge row) of the
low-index face t, separated by monatomic steps whose riser is the low-index microfacet s,
is written ``n(t)×(s)``. Its surface normal is the reciprocal lattice vector

    G = (n - 1) g_t + g_s,

with g the shortest reciprocal lattice vectors normal to the atomic planes of t and s
(conventional-cell units). For fcc: g(111) = (1,1,1), g(100) = (2,0,0), g(110) = (2,2,0);
bcc: g(110) = (1,1,0), g(100) = (2,0,0), g(211) = (2,1,1); hcp (three-index h k l with l
along c*): g(0001) = (0,0,2) (atomic layers c/2 apart), g(10-10) = (1,0,0),
g(10-11) = (1,0,1), g(11-20) = (1,1,0); simple cubic: (1,0,0), (1,1,0), (1,1,1). The microfacet members must
make acute angles with each other and with G.

Kinked faces, whose steps do not run along a close-packed row, need three microfacets;
surfgeo writes them as the sum ``c1(t)+c2(s)+c3(k)`` meaning G = c1 g_t + c2 g_s + c3 g_k
(the terrace being the microfacet closest to the surface) and reports the kink density
geometrically. No published table of such sums was in hand to check this form against;
the geometric description (terrace width, step height, miscut, kink spacing) does not
depend on it. Kinks are counted against the close-packed rows of the terrace (its shortest
lattice vectors): a step edge along any other lattice direction is made of close-packed
segments with one-row offsets, and ``kinks_per_edge_period`` counts those offsets per period
of the edge. By this count the <100> steps of fcc(100) and bcc(110) vicinals such as fcc(410)
= 4(100)×(110) carry one kink per edge period, even though their notation has two terms.

The step geometry (:func:`step_description`) is computed from the lattice, independently
of the notation: step height h = 1/|g_t|, miscut angle theta between G and g_t, terrace
width w = h / sin(theta) (step-to-step distance along the surface), step edge = the
shortest lattice vector along g_t x G, and the number of atom rows on a terrace
ceil(w cos(theta) / r) with r the row spacing of the terrace perpendicular to the edge.

References
----------
.. [1] B. Lang, R. W. Joyner and G. A. Somorjai, Surf. Sci. 30, 440 (1972).
.. [2] M. A. Van Hove and G. A. Somorjai, Surf. Sci. 92, 489 (1980).
"""

from __future__ import annotations

import functools
import itertools
import math
import re
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from surfgeo.errors import NotationError, StructureError
from surfgeo.lattice.rational import closest_denominators

#: Microfacet families (family Miller indices, shortest reciprocal vector) per structure, in
#: order of preference as terrace.
FAMILIES: dict[str, list[tuple[tuple[int, int, int], tuple[int, int, int]]]] = {
    "fcc": [((1, 1, 1), (1, 1, 1)), ((1, 0, 0), (2, 0, 0)), ((1, 1, 0), (2, 2, 0))],
    "bcc": [((1, 1, 0), (1, 1, 0)), ((1, 0, 0), (2, 0, 0)), ((2, 1, 1), (2, 1, 1))],
    "sc": [((1, 0, 0), (1, 0, 0)), ((1, 1, 0), (1, 1, 0)), ((1, 1, 1), (1, 1, 1))],
    "hcp": [((0, 0, 1), (0, 0, 2)), ((1, 0, 0), (1, 0, 0)), ((1, 0, 1), (1, 0, 1)), ((1, 1, 0), (1, 1, 0))],
}

#: Structures with a step notation.
STEP_STRUCTURES: tuple[str, ...] = tuple(FAMILIES)

_CUBIC = ("fcc", "bcc", "sc")


_SIGNS = tuple(itertools.product((1, -1), repeat=3))


def _cubic_members(g) -> list[tuple[int, int, int]]:
    """Every signed permutation of g (the members of a cubic family), largest first."""
    v = tuple(int(x) for x in g)
    return sorted({(a * p[0], b * p[1], c * p[2]) for p in set(itertools.permutations(v))
                   for a, b, c in _SIGNS}, reverse=True)


def _hex_members(g) -> list[tuple[int, int, int]]:
    """The members of a hexagonal family (h k l), three-index, largest first: cyclic
    permutations of (h, k, i), swaps of the first two, and the signs of (h, k) and of l."""
    h, k, l = (int(x) for x in g)
    i = -(h + k)
    pairs = [(h, k), (k, i), (i, h)]
    pairs += [(y, x) for x, y in pairs]
    return sorted({(sg * x, sg * y, ls * l) for x, y in pairs for sg in (1, -1) for ls in (1, -1)},
                  reverse=True)


@functools.lru_cache(maxsize=64)
def _members_cached(structure: str, g: tuple[int, int, int]) -> tuple[tuple[int, int, int], ...]:
    return tuple(_hex_members(g) if structure == "hcp" else _cubic_members(g))


def _members(structure: str, g) -> list[tuple[int, int, int]]:
    return list(_members_cached(structure, tuple(int(v) for v in g)))


def _metric(structure: str, c_over_a: float | None) -> np.ndarray:
    """Reciprocal metric (conventional units, a = 1) to measure angles between g vectors."""
    if structure != "hcp":
        return np.eye(3)
    ca = c_over_a or math.sqrt(8.0 / 3.0)
    C = np.array([[1.0, 0, 0], [-0.5, math.sqrt(3) / 2, 0], [0, 0, ca]])
    Bi = np.linalg.inv(C).T
    return Bi @ Bi.T


def _metric_dot(Gm: np.ndarray):
    """u . v in the metric ``Gm`` for short integer 3-vectors, in plain Python (no numpy call
    per product: these are evaluated thousands of times on 3-vectors)."""
    (g00, g01, g02), (g10, g11, g12), (g20, g21, g22) = np.asarray(Gm, dtype=float).tolist()

    def dot(u, v) -> float:
        u0, u1, u2 = (float(x) for x in u)
        v0, v1, v2 = (float(x) for x in v)
        return (u0 * (g00 * v0 + g01 * v1 + g02 * v2) + u1 * (g10 * v0 + g11 * v1 + g12 * v2)
                + u2 * (g20 * v0 + g21 * v1 + g22 * v2))

    return dot


@functools.lru_cache(maxsize=8)
def _ideal_metric_dot(structure: str):
    """:func:`_metric_dot` of the structure's metric with the ideal c/a (hcp)."""
    return _metric_dot(_metric(structure, None))


def _structure_key(structure: str) -> str:
    key = str(structure).strip().lower()
    if key not in FAMILIES:
        raise StructureError(
            f"step notation is defined here for {', '.join(STEP_STRUCTURES)} crystals, not {structure!r}."
        )
    return key


def _to_three(miller, structure: str) -> tuple[int, int, int]:
    vals = [int(v) for v in miller]
    if len(vals) == 4:
        if structure != "hcp":
            raise StructureError("four-index Miller-Bravais indices need a hexagonal (hcp) crystal.")
        h, k, i, l = vals
        if i != -(h + k):
            raise StructureError(f"Miller-Bravais indices ({h} {k} {i} {l}) need i = -(h + k) = {-(h + k)}.")
        vals = [h, k, l]
    if len(vals) != 3 or all(v == 0 for v in vals):
        raise StructureError(
            f"Miller indices must be three (or four for hcp) integers, not all zero: {miller!r}."
        )
    g = math.gcd(*vals)
    return tuple(v // g for v in vals)  # type: ignore[return-value]


def _shortest_g(hkl, structure: str) -> np.ndarray:
    """The shortest reciprocal vector of the structure's atomic planes along hkl (integers)."""
    h0, h1, h2 = (int(v) for v in hkl)
    double = False
    if structure == "fcc":
        double = not (h0 % 2 == 1 and h1 % 2 == 1 and h2 % 2 == 1)
    elif structure == "bcc":
        double = (h0 + h1 + h2) % 2 != 0
    elif structure == "hcp":
        double = (h0 - h1) % 3 == 0 and h2 % 2 == 1  # hcp structure factor: h - k = 3n with l odd vanishes
    k = 2 if double else 1
    return np.array([k * h0, k * h1, k * h2], dtype=int)


def _is_multiple(r: np.ndarray, g: np.ndarray) -> int | None:
    """c with r = c g for an integer c >= 1, else None."""
    nz = np.nonzero(g)[0]
    c = Fraction(int(r[nz[0]]), int(g[nz[0]]))
    if c.denominator != 1 or c < 1:
        return None
    if np.array_equal(r, int(c) * g):
        return int(c)
    return None


@dataclass(frozen=True)
class StepDecomposition:
    """Microfacet decomposition G = sum c_i g_i of a face.

    ``kind`` is ``"flat"`` (a low-index face itself), ``"stepped"`` (terrace and step),
    ``"kinked"`` (three microfacets) or ``"none"`` (no decomposition with small indices).
    ``terms`` are (coefficient, family Miller indices, member g vector) from the terrace on.
    """

    kind: str
    structure: str
    terms: tuple[tuple[int, tuple[int, ...], tuple[int, int, int]], ...]

    @property
    def rows(self) -> int | None:
        """n, the number of atom rows per terrace (stepped faces)."""
        return self.terms[0][0] + 1 if self.kind == "stepped" else None

    def _fam(self, member) -> str:
        return _family_label(self.structure, member)

    @functools.cached_property
    def notation(self) -> str | None:
        """``"4(111)×(100)"`` for a stepped face, ``"15(111)+2(100)+(11-1)"`` for a kinked one.

        Microfacets are written by family, e.g. (111) for (11-1), unless that would be
        ambiguous (the family form read back would give a different face); then the members
        are written out as in :attr:`explicit`.
        """
        if self.kind == "stepped":
            (c, _, gt), (_, _, gs) = self.terms
            fam = f"{c + 1}({self._fam(gt)})×({self._fam(gs)})"
        elif self.kind == "kinked":
            fam = "+".join(f"{c if c != 1 else ''}({self._fam(g)})" for c, _, g in self.terms)
        else:
            return None
        G = sum(c * np.array(g) for c, _, g in self.terms)
        k = math.gcd(*[int(v) for v in G])
        own = _canonical(tuple(int(v) // k for v in G), self.structure)
        # read the family form back (as miller_from_notation would, without the text round trip)
        if self.kind == "stepped":
            fam_terms = [(self.terms[0][0] + 1, self.terms[0][1]), (1, self.terms[1][1])]
        else:
            fam_terms = [(c, f) for c, f, _ in self.terms]
        try:
            back = _miller_from_terms(fam_terms, self.kind == "stepped", self.structure, fam)
        except NotationError:
            back = None
        return fam if back == own else self.explicit

    @property
    def explicit(self) -> str | None:
        """The notation with the microfacet members written out, e.g. ``"3(111)×(11-1)"``."""
        if self.kind == "stepped":
            (c, _, gt), (_, _, gs) = self.terms
            return f"{c + 1}({self._member(gt)})×({self._member(gs)})"
        if self.kind == "kinked":
            return "+".join(f"{c if c != 1 else ''}({self._member(g)})" for c, _, g in self.terms)
        return None

    def _member(self, g) -> str:
        v = [int(x) for x in g]
        k = math.gcd(*v)
        v = [x // k for x in v]
        if self.structure == "hcp":
            v = [v[0], v[1], -(v[0] + v[1]), v[2]]
        return _indices(v)


def _indices(v) -> str:
    if all(abs(x) < 10 for x in v):
        return "".join(str(x) for x in v)
    return " ".join(str(x) for x in v)


def _family_label(structure: str, g) -> str:
    for fam, gg in FAMILIES[structure]:
        if tuple(g) in _members(structure, gg):
            if structure == "hcp":
                h, k, l = fam
                return _indices([h, k, -(h + k), l])
            return _indices(fam)
    return _indices(g)  # pragma: no cover


@functools.lru_cache(maxsize=16)
def _all_members_cached(structure: str) -> tuple:
    out = []
    for rank, (fam, g) in enumerate(FAMILIES[structure]):
        for m in _members(structure, g):
            v = np.array(m)
            v.flags.writeable = False
            out.append((rank, fam, v))
    return tuple(out)


def _all_members(structure: str) -> list:
    return list(_all_members_cached(structure))


def decompose(miller, structure: str, c_over_a: float | None = None) -> StepDecomposition:
    """Decompose a face into microfacets (see the module docstring).

    Parameters
    ----------
    miller : sequence of int
        (h k l), or (h k i l) for hcp.
    structure : str
        ``fcc``, ``bcc``, ``sc`` or ``hcp``.
    c_over_a : float, optional
        For hcp: only used to order candidate terraces by angle (ideal 1.633 by default).
    """
    structure = _structure_key(structure)
    hkl = _to_three(miller, structure)
    return _decompose(hkl, structure, None if c_over_a is None else round(float(c_over_a), 9))


@functools.lru_cache(maxsize=512)
def _decompose(hkl: tuple[int, int, int], structure: str, c_over_a: float | None) -> StepDecomposition:
    G = _shortest_g(hkl, structure)
    Gm = _metric(structure, c_over_a)
    members = _all_members(structure)
    Mx = np.array([m[2] for m in members], dtype=float)
    ranks = np.array([m[0] for m in members])
    D = Mx @ Gm @ Mx.T
    dG = Mx @ Gm @ G.astype(float)
    GG = float(G @ Gm @ G)
    norm2 = np.diag(D)

    def dot(u, v):  # numpy's rounding: the kinked search below breaks exact ties by it
        return float(np.asarray(u, float) @ Gm @ np.asarray(v, float))

    par_G = np.abs(dG**2 - norm2 * GG) < 1e-9 * norm2 * GG
    flat = np.nonzero(par_G & (dG > 0))[0]
    if flat.size:
        _r, _fam, g = members[int(flat[0])]
        return StepDecomposition("flat", structure, ((1, _fam, tuple(int(x) for x in g)),))
    posi = np.nonzero(dG > 1e-9)[0]
    pos = [members[i] for i in posi]
    # stepped: G - g_s = c g_t with an integer c >= 1, over all pairs (t, s) at once
    gt_all = Mx[posi][:, None, :]  # (P, 1, 3)
    gs_all = Mx[posi][None, :, :]  # (1, P, 3)
    Dp = D[np.ix_(posi, posi)]
    n2 = norm2[posi]
    ok = (Dp > 1e-9) & (np.abs(Dp**2 - n2[:, None] * n2[None, :]) > 1e-9 * n2[:, None] * n2[None, :])
    R = G[None, None, :] - gs_all  # (1, P, 3)
    gt_sq = np.sum(gt_all**2, axis=2)  # plain integer dot: exact multiples do not need the metric
    c = np.sum(R * gt_all, axis=2) / gt_sq
    ci = np.rint(c)
    exact = np.all(np.abs(R - ci[:, :, None] * gt_all) < 1e-9, axis=2)
    ok &= exact & (ci >= 1)
    best = None
    for ti, si in zip(*np.nonzero(ok), strict=True):
        rt, ft, gt = pos[ti]
        rs, fs, gs = pos[si]
        key = (int(ci[ti, si]), -rt, -rs, tuple(gt), tuple(gs))
        if best is None or key > best[0]:
            terms = ((int(ci[ti, si]), ft, tuple(int(x) for x in gt)), (1, fs, tuple(int(x) for x in gs)))
            best = (key, terms)
    if best is not None:
        return StepDecomposition("stepped", structure, best[1])
    del ranks
    # kinked: terrace = the member closest in angle to G, then two more microfacets
    Gn = math.sqrt(dot(G, G))
    angle = sorted(pos, key=lambda m: (-dot(m[2], G) / math.sqrt(dot(m[2], m[2])) / Gn, m[0]))
    rt, ft, gt = angle[0]
    kbest = None
    for (rs, fs, gs), (rk, fk, gk) in itertools.combinations(pos, 2):
        mat = np.array([gt, gs, gk], dtype=float).T
        if abs(np.linalg.det(mat)) < 1e-9:
            continue
        if dot(gt, gs) <= 1e-9 or dot(gt, gk) <= 1e-9 or dot(gs, gk) <= 1e-9:
            continue
        coef = np.linalg.solve(mat, G.astype(float))
        ci = np.rint(coef)
        if np.any(np.abs(coef - ci) > 1e-9) or np.any(ci < 1):
            continue
        ci = ci.astype(int)
        terms = [(int(ci[1]), fs, gs, rs), (int(ci[2]), fk, gk, rk)]
        terms.sort(key=lambda t: (-t[0], t[3], tuple(-x for x in t[2])))
        key = (int(ci[0]), -terms[0][3] - terms[1][3], terms[0][0], tuple(terms[0][2]), tuple(terms[1][2]))
        if kbest is None or key > kbest[0]:
            kbest = (key, ((int(ci[0]), ft, tuple(int(x) for x in gt)),)
                     + tuple((t[0], t[1], tuple(int(x) for x in t[2])) for t in terms))
    if kbest is not None:
        return StepDecomposition("kinked", structure, kbest[1])
    return StepDecomposition("none", structure, ())


def step_notation(miller, structure: str = "fcc") -> str | None:
    """Step notation of a face: ``"4(111)×(100)"`` for fcc (533); ``None`` for a flat face.

    Kinked faces get the microfacet sum (see the module docstring).

    Examples
    --------
    >>> step_notation((5, 3, 3), "fcc")
    '4(111)×(100)'
    >>> step_notation((1, 1, 1), "fcc") is None
    True
    """
    return decompose(miller, structure).notation


_TERM = re.compile(r"^\s*(\d*)\s*\(\s*([-\d\s,]+?)\s*\)\s*$")


def _parse_indices(text: str) -> list[int]:
    t = text.strip()
    if "," in t or re.search(r"\d\s+-?\d", t):
        parts = [p for p in re.split(r"[\s,]+", t) if p]
        return [int(p) for p in parts]
    return [int(m) for m in re.findall(r"-?\d", t)]


def _canonical(hkl, structure: str) -> tuple[int, ...]:
    if structure == "hcp":
        best = max(_hex_members(hkl))
        h, k, l = best
        return (h, k, -(h + k), l)
    return tuple(sorted((abs(v) for v in hkl), reverse=True))


def miller_from_notation(notation: str, structure: str = "fcc", canonical: bool = True) -> tuple[int, ...]:
    """Miller indices of a face given in step notation.

    Parameters
    ----------
    notation : str
        ``"n(hkl)×(h'k'l')"`` (``x``, ``X`` or ``*`` also accepted for ``×``), or a
        microfacet sum ``"c1(hkl)+c2(h'k'l')+c3(...)"``. Indices may be written compactly
        (``111``, ``11-1``, ``10-11``) or separated by spaces or commas. Family members are
        chosen as needed so that the microfacets make acute angles with each other.
    structure : str
        ``fcc``, ``bcc``, ``sc`` or ``hcp`` (four-index Miller-Bravais indices in and out).
    canonical : bool
        Return the symmetry-equivalent indices in a standard order (cubic: |h| >= |k| >= |l|
        >= 0; hcp: the largest equivalent four-index form); otherwise as composed.

    Examples
    --------
    >>> miller_from_notation("4(111)x(100)")
    (5, 3, 3)
    >>> miller_from_notation("9(111)×(111)")
    (9, 9, 7)
    """
    structure = _structure_key(structure)
    if not isinstance(notation, str) or not notation.strip():
        raise NotationError("step notation must be text such as '4(111)×(100)'.")
    text = notation.strip().replace("×", "x").replace("X", "x").replace("*", "x")
    stepped = "x" in text
    parts = text.split("x") if stepped else text.split("+")
    want = 2 if stepped else None
    if (stepped and len(parts) != want) or (not stepped and len(parts) not in (2, 3)):
        raise NotationError(
            f"cannot read the step notation {notation!r}; write n(hkl)×(h'k'l') such as '4(111)×(100)', "
            "or a microfacet sum such as '15(111)+2(100)+(11-1)'."
        )
    terms = []
    for p in parts:
        m = _TERM.match(p)
        if not m:
            raise NotationError(
                f"cannot read {p.strip()!r} in the step notation {notation!r}; each part is n(hkl) or (hkl)."
            )
        coef = int(m.group(1)) if m.group(1) else 1
        try:
            idx = _parse_indices(m.group(2))
        except ValueError:
            raise NotationError(f"bad Miller indices {m.group(2)!r} in {notation!r}.") from None
        try:
            hkl = _to_three(idx, structure)
        except StructureError as exc:
            raise NotationError(f"in the step notation {notation!r}: {exc}") from None
        terms.append((coef, hkl))
    return _miller_from_terms(terms, stepped, structure, notation, canonical)


def _miller_from_terms(terms: list[tuple[int, tuple[int, int, int]]], stepped: bool, structure: str,
                       notation: str, canonical: bool = True) -> tuple[int, ...]:
    """:func:`miller_from_notation` after parsing: (count, three-index microfacet) terms."""
    if stepped:
        if terms[1][0] != 1:
            raise NotationError(f"the step in {notation!r} takes no count; write n(hkl)×(h'k'l').")
        if terms[0][0] < 2:
            raise NotationError(
                f"a terrace needs at least 2 atom rows, got n = {terms[0][0]} in {notation!r}."
            )
        coefs = [terms[0][0] - 1, 1]
    else:
        coefs = [c for c, _ in terms]
    dot = _ideal_metric_dot(structure)

    gs = []
    for _, hkl in terms:
        g = tuple(int(x) for x in _shortest_g(hkl, structure))
        fam_g = None
        for _fam, gg in FAMILIES[structure]:
            if g in _members_cached(structure, gg):
                fam_g = gg
        if fam_g is None:
            raise NotationError(
                f"({_indices(hkl)}) is not a low-index microfacet of {structure}; use "
                + ", ".join(f"({_indices(f)})" for f, _ in FAMILIES[structure]) + "."
            )
        gs.append((g, fam_g))
    # choose family members: keep the first as written, then the first member (as written if
    # possible) with acute angles to all chosen ones (integer 3-tuples throughout)
    chosen = [gs[0][0]]
    for g, fam_g in gs[1:]:
        options = (g,) + _members_cached(structure, fam_g)
        pick = None
        for opt in options:
            if all(dot(opt, c) > 1e-9 and abs(dot(opt, c) ** 2 - dot(opt, opt) * dot(c, c)) > 1e-9
                   for c in chosen):
                pick = opt
                break
        if pick is None:
            raise NotationError(f"the microfacets in {notation!r} cannot form a stepped surface.")
        chosen.append(pick)
    G = [sum(c * g[i] for c, g in zip(coefs, chosen, strict=True)) for i in range(3)]
    k = math.gcd(*G)
    hkl = tuple(v // k for v in G)
    if canonical:
        return _canonical(hkl, structure)
    if structure == "hcp":
        return (hkl[0], hkl[1], -(hkl[0] + hkl[1]), hkl[2])
    return hkl


# ---------------------------------------------------------------------------------- geometry
def _structure_of(face) -> str | None:
    s = str(face.bulk.get("structure", "")).lower()
    if s in FAMILIES and len(set(face.basis_symbols)) == 1:
        return s
    return None


def _shortest_along(A: np.ndarray, d2: np.ndarray) -> np.ndarray:
    """Shortest lattice vector (rows A, 2D) parallel to the direction d2."""
    f = d2 @ np.linalg.inv(A)
    f = f / np.max(np.abs(f))
    # the closest fractions with denominators up to 2000, on a common denominator
    den = math.lcm(*(int(q) for q in closest_denominators(f, 2000)))
    ints = [int(v) for v in np.rint(f * den)]
    g = math.gcd(*ints)
    return np.array([v // g for v in ints], dtype=float) @ A


def step_description(face, bulk=None) -> dict | None:
    """Geometry of the steps of a vicinal face, or ``None`` for a flat or unsupported face.

    Parameters
    ----------
    face : surfgeo.slab.cut.Face
        The face (from :func:`surfgeo.slab.cut.face_geometry`).
    bulk : ase.Atoms, optional
        The bulk crystal (needed for the terrace's own lattice); elements of fcc, bcc, sc or
        hcp structure only.

    Returns
    -------
    dict or None
        ``step_notation`` (str), ``notation_explicit``, ``kind`` (stepped/kinked),
        ``terrace`` and ``step`` (Miller indices of the microfacets), ``terrace_rows``
        (n of the notation; None for kinked faces), ``terrace_rows_geometric``,
        ``terrace_width`` (Angstrom, step to step along the surface), ``step_height``
        (Angstrom), ``miscut_deg``, ``step_edge`` (2D vector in the slab frame, Angstrom),
        ``step_down`` (unit 2D vector pointing down the staircase), ``steps_per_cell``,
        ``kinks_per_edge_period``, ``kink_spacing`` (Angstrom or None), ``kink_density``
        (kinks per Angstrom of step edge).
    """
    structure = _structure_of(face)
    if structure is None:
        return None
    c_over_a = None
    if structure == "hcp" and face.bulk.get("c") and face.bulk.get("a"):
        c_over_a = face.bulk["c"] / face.bulk["a"]
    dec = decompose(face.hkl, structure, c_over_a)
    if dec.kind in ("flat", "none"):
        return None
    if bulk is None:
        from surfgeo.slab.bulk import bulk_crystal

        bulk = bulk_crystal(face.bulk["formula"], structure, a=face.bulk["a"],
                            c=face.bulk.get("c") if structure == "hcp" else None)
    Cinv = np.linalg.inv(np.asarray(bulk.cell[:], dtype=float))
    gt = np.array(dec.terms[0][2], dtype=float) @ Cinv.T  # bulk Cartesian, 1/Angstrom
    h = 1.0 / float(np.linalg.norm(gt))
    n = face.normal
    cos_t = float(gt @ n) / float(np.linalg.norm(gt))
    theta = math.acos(max(-1.0, min(1.0, cos_t)))
    R = face.rotation
    edge3 = _cross3(gt, n)
    edge2 = (R @ edge3)[:2]
    A = face.cell2d
    s_edge = _shortest_along(A, edge2 / np.linalg.norm(edge2))
    if s_edge @ np.array([1.0, 0.0]) < -1e-9 or (abs(s_edge[0]) < 1e-9 and s_edge[1] < 0):
        s_edge = -s_edge
    w = h / math.sin(theta)
    gt2 = (R @ gt)[:2]
    down = -gt2 / np.linalg.norm(gt2)
    # levels of the surface lattice vectors: g_t . a_i = number of terrace planes crossed
    lev = np.rint(A @ (R[:2] @ gt)).astype(int)
    steps_per_cell = math.gcd(*[abs(int(v)) for v in lev]) or 1

    # terrace lattice: shortest vectors of the terrace plane and row spacing across the edge
    from surfgeo.slab.cut import plane_lattice

    tmill = dec.terms[0][1]
    tvecs = plane_lattice(bulk, dec.terms[0][2])  # terrace lattice, bulk Cartesian
    n_atoms_prim = len(face.basis_symbols)
    area_atom_t = face.primitive_volume / n_atoms_prim / h
    edge_len = float(np.linalg.norm(s_edge))
    r = area_atom_t / edge_len
    rows_geo = math.ceil(w * math.cos(theta) / r - 1e-6)
    # kinks: write the edge in a basis of close-packed terrace rows
    edge_bulk = s_edge @ R[:2]
    t_all = _UNIT_COMBOS @ tvecs  # the 8 vectors c1 t1 + c2 t2, |c_i| <= 1, of the reduced basis
    t_len = np.linalg.norm(t_all, axis=1)
    by_len = np.argsort(np.round(t_len, 6), kind="stable")
    t_short, t_len = t_all[by_len], t_len[by_len]
    lmin = float(t_len[0])
    rows_dirs = t_short[t_len <= lmin * (1 + 1e-6)]
    along = rows_dirs @ edge_bulk
    straight = bool(np.any(np.abs(np.abs(along) - lmin * edge_len) < 1e-6 * lmin * edge_len))
    if straight:
        q = 0
    else:
        t1 = rows_dirs[int(np.argmax(along))]
        off_axis = np.linalg.norm(np.cross(t_short, t1), axis=1) > 1e-6 * lmin ** 2
        t2 = t_short[off_axis][int(np.argmin(t_len[off_axis]))]
        coef = np.linalg.lstsq(np.array([t1, t2]).T, edge_bulk, rcond=None)[0]
        q = abs(int(round(float(coef[1]))))
    return {
        "kind": dec.kind,
        "step_notation": dec.notation,
        "notation_explicit": dec.explicit,
        "terrace": list(_member_miller(dec.terms[0][2], structure)),
        "terrace_family": list(_family_miller(tmill, structure)),
        "step": list(_member_miller(dec.terms[1][2], structure)),
        "terrace_rows": dec.rows,
        "terrace_rows_geometric": rows_geo if dec.kind == "stepped" else None,
        "terrace_width": w,
        "step_height": h,
        "miscut_deg": math.degrees(theta),
        "step_edge": [float(v) for v in s_edge],
        "step_edge_length": edge_len,
        "step_down": [float(v) for v in down],
        "steps_per_cell": steps_per_cell,
        "kinks_per_edge_period": q,
        "kink_spacing": (edge_len / q) if q else None,
        "kink_density": q / edge_len,
    }


#: Coefficients (c1, c2) with |c_i| <= 1, not both 0: candidates for the shortest vectors of a
#: Gauss-reduced 2D lattice basis.
_UNIT_COMBOS = np.array(
    [(c1, c2) for c1, c2 in itertools.product((-1, 0, 1), repeat=2) if (c1, c2) != (0, 0)], dtype=float
)


def _cross3(u, v) -> np.ndarray:
    return np.array([u[1] * v[2] - u[2] * v[1], u[2] * v[0] - u[0] * v[2], u[0] * v[1] - u[1] * v[0]])


def _member_miller(g, structure: str) -> tuple[int, ...]:
    v = [int(x) for x in g]
    k = math.gcd(*v)
    v = [x // k for x in v]
    if structure == "hcp":
        return (v[0], v[1], -(v[0] + v[1]), v[2])
    return tuple(v)


def _family_miller(fam, structure: str) -> tuple[int, ...]:
    if structure == "hcp":
        h, k, l = fam
        return (h, k, -(h + k), l)
    return tuple(fam)


def stepped_slab(
    bulk,
    face,
    layers: int = 12,
    vacuum: float | None = 10.0,
    size=(1, 1),
    orthogonal: bool = False,
    layer_tol: float | None = None,
):
    """A slab of a stepped or kinked face with the terrace period visible in the cell.

    The in-plane cell has a1 along the step edge (+x, the shortest lattice vector along the
    edge) and a2 the shortest lattice vector that crosses one terrace period (from a site
    on one terrace to the same site on the next one, down the staircase or up, whichever
    keeps a1 x a2 along +z).

    Parameters
    ----------
    bulk : ase.Atoms or str
        Bulk crystal or element symbol of an fcc, bcc, sc or hcp element.
    face : str or sequence of int
        Step notation (``"4(111)×(100)"``) or Miller indices.
    layers, vacuum, size, orthogonal
        As for :func:`surfgeo.slab.cut.surface_slab`. ``layers`` counts lattice planes of
        the vicinal face (which are closely spaced: a terrace of n rows spans n of them).
    layer_tol : float, optional
        Grouping tolerance; by default small enough that every lattice plane is a layer.

    Returns
    -------
    ase.Atoms
        With the step description in ``info["surfgeo"]["step"]``.
    """
    from surfgeo.slab.cut import _as_bulk, face_geometry, rebase_face, slab_from_face

    b = _as_bulk(bulk)
    structure = str(b.info.get("surfgeo_bulk", {}).get("structure", "")).lower()
    if isinstance(face, str):
        miller = miller_from_notation(face, structure if structure in FAMILIES else "fcc", canonical=True)
    else:
        miller = tuple(int(v) for v in face)
    tol = 0.05 if layer_tol is None else layer_tol
    f = face_geometry(b, miller, tol)
    desc = step_description(f, b)
    if desc is None:
        raise StructureError(
            f"the face ({_indices(f.miller)}) is not a stepped or kinked face of this crystal; "
            "use surface_slab."
        )
    A = f.cell2d
    edge = np.array(desc["step_edge"])
    # a2: shortest lattice vector with a1 x a2 = +area (a basis with a1 = edge)
    area = abs(float(np.linalg.det(A)))
    best = None
    for i, j in itertools.product(range(-12, 13), repeat=2):
        v = np.array([i, j], dtype=float) @ A
        cr = edge[0] * v[1] - edge[1] * v[0]
        if abs(cr - area) > 1e-6 * area:
            continue
        key = (round(float(np.linalg.norm(v)), 6), round(float(v @ edge), 6))
        if best is None or key < best[0]:
            best = (key, v)
    if best is None:  # pragma: no cover - the edge vector is primitive, so a partner exists
        raise StructureError("internal error: no cell vector completes the step edge to a basis.")
    g = rebase_face(f, edge, best[1])
    return slab_from_face(g, b, layers=layers, vacuum=vacuum, size=size, orthogonal=orthogonal)


__all__ = [
    "FAMILIES",
    "STEP_STRUCTURES",
    "StepDecomposition",
    "decompose",
    "step_notation",
    "miller_from_notation",
    "step_description",
    "stepped_slab",
]
