"""Symmetry domains: published counts, spglib cross-check, group-theory properties, spots."""

import itertools
from fractions import Fraction

import numpy as np
import pytest
import spglib
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from surfgeo.lattice import (
    Superstructure,
    distinct_superlattices,
    equivalent,
    hermite_normal_forms,
    parse_lattice,
    stabiliser,
    symmetry_domains,
)

HEX = parse_lattice("hex:2.77")
SQUARE = parse_lattice("square:2.55")
LATTICES = {
    "hex": HEX,
    "hex60": parse_lattice("hex60:2.77"),
    "square": SQUARE,
    "rect": parse_lattice("rect:2.55,3.61"),
    "rhombic": parse_lattice("rhombic:2.74,109.47"),
    "oblique": parse_lattice("oblique:2.1,3.3,71"),
}


# --------------------------------------------------------------------------- published counts
@pytest.mark.parametrize(
    "lattice, matrix, count",
    [
        # Source: shared/sources.md (group theory, |G| / |stabiliser|; common practice):
        # (sqrt7 x sqrt7)R19.1 on 6mm: 2; (2x1) on hexagonal: 3; (2x1) on square: 2.
        (HEX, [[3, 1], [-1, 2]], 2),
        (HEX, [[2, 0], [0, 1]], 3),
        (SQUARE, [[2, 0], [0, 1]], 2),
        # Common practice, no source: (sqrt3 x sqrt3)R30, p(2x2) and c(2x2) keep the full
        # substrate symmetry; (sqrt5 x sqrt5)R26.6 on 4mm has two mirror domains.
        (HEX, [[2, 1], [-1, 1]], 1),
        (HEX, [[2, 0], [0, 2]], 1),
        (SQUARE, [[1, 1], [-1, 1]], 1),
        (SQUARE, [[2, 1], [-1, 2]], 2),
    ],
)
def test_published_domain_counts(lattice, matrix, count):
    doms = symmetry_domains(lattice, matrix)
    assert len(doms) == count
    assert doms[0].matrix.tolist() == [[Fraction(v) for v in row] for row in matrix]
    assert doms[0].operations[0].symbol == "1"


pytestmark = pytest.mark.filterwarnings("ignore:Set OLD_ERROR_HANDLING:DeprecationWarning")


def _spglib_group_order(vectors2d: np.ndarray, frac_by_type: dict[int, np.ndarray]) -> int:
    """Number of distinct in-plane point operations spglib finds for a flat decorated cell."""
    cell = np.zeros((3, 3))
    cell[:2, :2] = vectors2d
    cell[2, 2] = 20.0
    pos, num = [], []
    for t, frac in frac_by_type.items():
        for f in frac:
            pos.append([f[0], f[1], 0.0])
            num.append(t)
    sym = spglib.get_symmetry((cell, np.array(pos), np.array(num)), symprec=1e-5)
    return len({tuple(r[:2, :2].ravel()) for r in sym["rotations"]})


def _spglib_stabiliser_order(lattice, M) -> int:
    """|stabiliser| from spglib: substrate atoms on every substrate lattice point, a second atom
    type on the superlattice points; the symmetry of that pattern is the stabiliser."""
    M = np.asarray(M, dtype=float)
    B = M @ lattice.vectors
    n = int(round(abs(np.linalg.det(M))))
    r = int(np.max(np.abs(M))) * 2 + 2
    pts = np.array(list(itertools.product(range(-r, r + 1), repeat=2)), dtype=float) @ lattice.vectors
    frac = np.round(pts @ np.linalg.inv(B), 9) % 1.0
    frac = np.unique(np.round(frac, 6) % 1.0, axis=0)
    assert len(frac) == n
    marker = np.all(np.isclose(frac, 0), axis=1)
    return _spglib_group_order(B, {1: frac[~marker], 2: frac[marker]})


@pytest.mark.parametrize("name", sorted(LATTICES))
def test_substrate_group_order_agrees_with_spglib(name):
    lat = LATTICES[name]
    # Source: spglib symmetry finder (independent of surfgeo's point_group)
    assert _spglib_group_order(lat.vectors, {1: np.zeros((1, 2))}) == len(lat.point_group())


@pytest.mark.parametrize(
    "name, matrix",
    [("hex", [[3, 1], [-1, 2]]), ("hex", [[2, 0], [0, 1]]), ("hex", [[2, 1], [-1, 1]]),
     ("hex", [[4, 1], [-1, 3]]), ("hex", [[3, 0], [1, 2]]), ("hex60", [[2, 0], [0, 1]]),
     ("square", [[2, 0], [0, 1]]), ("square", [[2, 1], [-1, 2]]), ("square", [[3, 1], [0, 2]]),
     ("rect", [[1, 1], [-1, 1]]), ("rect", [[2, 1], [0, 1]]), ("rhombic", [[2, 0], [0, 1]]),
     ("rhombic", [[1, 1], [-1, 1]]), ("oblique", [[2, 1], [0, 3]])],
)
def test_domain_count_agrees_with_spglib(name, matrix):
    lat = LATTICES[name]
    # Source: spglib symmetry finder on a decorated supercell; |G| / |stabiliser| (group theory)
    stab = _spglib_stabiliser_order(lat, matrix)
    assert len(stabiliser(lat, matrix)) == stab
    assert len(symmetry_domains(lat, matrix)) == len(lat.point_group()) // stab


# --------------------------------------------------------------------------- properties
small_matrix = st.lists(st.integers(-4, 4), min_size=4, max_size=4).map(lambda v: [v[:2], v[2:]])


def _same_lattice_float(M1, M2) -> bool:
    """Independent float test: the rows of M2 are integer combinations of the rows of M1 and
    the areas agree."""
    a, b = np.asarray(M1, dtype=float), np.asarray(M2, dtype=float)
    U = b @ np.linalg.inv(a)
    return bool(np.allclose(U, np.rint(U), atol=1e-9) and np.isclose(abs(np.linalg.det(U)), 1))


@settings(max_examples=150, deadline=None)
@given(name=st.sampled_from(sorted(LATTICES)), m=small_matrix, den=st.sampled_from([1, 1, 1, 2, 3]))
def test_domains_are_the_cosets_of_the_stabiliser(name, m, den):
    assume(m[0][0] * m[1][1] - m[0][1] * m[1][0] != 0)
    lat = LATTICES[name]
    M = [[Fraction(v, den) for v in row] for row in m]
    G = lat.point_group()
    # stabiliser by brute force in floats: W with M W the same lattice as M
    Mf = np.array(M, dtype=float)
    stab = [W for W in G if _same_lattice_float(Mf, Mf @ W.integer)]
    doms = symmetry_domains(lat, M)
    # Source: orbit-stabiliser theorem (group theory): |orbit| = |G| / |stabiliser|
    assert len(doms) * len(stab) == len(G)
    assert len(doms) == len(Superstructure(lat, M).domains())
    # every operation appears once, each domain's operations all give that domain, and the
    # domains are different superlattices
    seen = [tuple(op.integer.ravel()) for d in doms for op in d.operations]
    assert sorted(seen) == sorted(tuple(op.integer.ravel()) for op in G)
    for d in doms:
        assert len(d.operations) == len(stab)
        for op in d.operations:
            assert _same_lattice_float(Mf @ op.integer, np.array(d.matrix, dtype=float))
    for i, a in enumerate(doms):
        for b in doms[i + 1:]:
            assert not equivalent(a.matrix, b.matrix)


def test_incommensurate_domains_use_the_float_path():
    sup = Superstructure.from_wood(HEX, "(1.5x1.5)R15")
    assert sup.kind == "incommensurate"
    # Common practice, no source: a rotated overlayer on 6mm has a mirror twin (two domains).
    assert len(sup.domains()) == 2
    # a float copy of an integer matrix gives the same count as the exact path
    assert len(symmetry_domains(HEX, np.array([[3, 1], [-1, 2]]) + 1e-13)) == 2


def _spot_positions(lattice, matrices) -> set:
    """Fractional-order beam labels modulo the integer beams, for all domains given."""
    out = set()
    for M in matrices:
        Rm = Superstructure(lattice, M).reciprocal_matrix
        for m, n in itertools.product(range(-6, 7), repeat=2):
            h = m * Rm[0, 0] + n * Rm[1, 0]
            k = m * Rm[0, 1] + n * Rm[1, 1]
            out.add((h % 1, k % 1))
    return out


def test_domain_superposition_spot_positions():
    p2x2 = _spot_positions(HEX, [[[2, 0], [0, 2]]])
    # Source: shared/sources.md (common practice): three-domain (2x1) on a hexagonal lattice gives
    # the p(2x2) spot positions; two-domain (2x1) on a square lattice gives those of p(2x2)
    # without the (1/2, 1/2) spots.
    hex_doms = [d.matrix for d in symmetry_domains(HEX, [[2, 0], [0, 1]])]
    assert _spot_positions(HEX, hex_doms) == p2x2
    sq_doms = [d.matrix for d in symmetry_domains(SQUARE, [[2, 0], [0, 1]])]
    sq = _spot_positions(SQUARE, sq_doms)
    assert sq == _spot_positions(SQUARE, [[[2, 0], [0, 2]]]) - {(Fraction(1, 2), Fraction(1, 2))}


@pytest.mark.parametrize("name", ["hex", "square", "rect", "oblique"])
def test_distinct_superlattices_partition_all_hnfs(name):
    lat = LATTICES[name]
    for n in range(1, 13):
        reps = distinct_superlattices(lat, n)
        # orbit sizes add up to the number of HNFs, sigma(n)
        assert sum(k for _, k in reps) == len(hermite_normal_forms(n))
        for H, k in reps:
            assert len(symmetry_domains(lat, H)) == k
        for (a, _), (b, _) in itertools.combinations(reps, 2):
            doms = symmetry_domains(lat, a)
            assert not any(equivalent(d.matrix, b) for d in doms)
    # Common practice, no source: on a square lattice the area-2 superlattices are (2x1) with its
    # rotated twin, and c(2x2).
    if name == "square":
        assert sorted(k for _, k in distinct_superlattices(lat, 2)) == [1, 2]
