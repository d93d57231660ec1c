"""Superstructures: kinds, coverage, geometry, JSON record; Hermite normal forms and equivalence."""

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from surfgeo.errors import NotationError
from surfgeo.lattice import (
    Superstructure,
    canonical,
    equivalent,
    hermite_normal_form,
    hermite_normal_forms,
    parse_lattice,
)
from surfgeo.lattice.rational import as_matrix, parse_number

HEX = parse_lattice("hex:2.77")
SQUARE = parse_lattice("square:2.55")


def sigma(n: int) -> int:
    """Sum of the divisors of n, straight from the definition."""
    return sum(d for d in range(1, n + 1) if n % d == 0)


# --------------------------------------------------------------------------- kinds and coverage
@pytest.mark.parametrize(
    "matrix, kind",
    [
        # Common practice, no source: integer M is simple commensurate, rational M a coincidence
        # (higher-order commensurate) structure, irrational M incommensurate.
        ([[2, 1], [-1, 1]], "commensurate"),
        ([[Fraction(10, 9), 0], [0, Fraction(10, 9)]], "coincidence"),
        (["1/2", "0", "0", "1/2"], "coincidence"),
        ([[0.5, 0], [0, 0.5]], "coincidence"),
        (["0.333", "0", "0", "1"], "coincidence"),
        (["1.37", "0", "0", "1"], "incommensurate"),
        ([[math.sqrt(2), 0], [0, 1]], "incommensurate"),
        ([[1.1234567, 0.2], [0, 1]], "incommensurate"),
    ],
)
def test_kinds(matrix, kind):
    assert Superstructure(HEX, matrix).kind == kind


def test_decimals_stand_for_small_rationals_within_their_printed_precision():
    assert parse_number("0.333", "x") == (Fraction(1, 3), 3)
    assert parse_number("0.5", "x") == (Fraction(1, 2), 1)
    assert parse_number("-0.5", "x") == (Fraction(-1, 2), 1)
    assert parse_number("7/3", "x") == (Fraction(7, 3), None)
    # 1.375 = 11/8 is exactly half a unit of the last digit away: not taken
    assert parse_number("1.37", "x") == (1.37, 2)
    with pytest.raises(NotationError):
        parse_number("abc", "x")


def test_a_decimal_that_is_a_small_rational_is_taken_as_typed():
    # Regression: 0.1 used to become 1/8, 0.3 became 1/3 and 1.1 became 8/7 (the smallest
    # denominator within half a unit of the last digit won over the exact value typed).
    assert parse_number("0.1", "x") == (Fraction(1, 10), 1)
    assert parse_number("0.3", "x") == (Fraction(3, 10), 1)
    assert parse_number("1.1", "x") == (Fraction(11, 10), 1)
    assert parse_number("-0.7", "x") == (Fraction(-7, 10), 1)
    # rounded decimals still stand for the small rational they round
    assert parse_number("0.33", "x") == (Fraction(1, 3), 2)
    assert parse_number("0.667", "x") == (Fraction(2, 3), 3)
    sup = Superstructure(HEX, ["1.5", "0.3", "0", "1"])
    assert sup.matrix[0, 1] == Fraction(3, 10) and sup.kind == "coincidence"
    film = Superstructure.from_wood(HEX, "(1.1x1.1)")
    assert film.matrix.tolist() == [[Fraction(11, 10), 0], [0, Fraction(11, 10)]]
    assert film.determinant == Fraction(121, 100)


@pytest.mark.parametrize(
    "lattice, wood, n, coverage",
    [
        # Common practice, no source: coverage = adsorbates per substrate cell.
        (HEX, "(sqrt3xsqrt3)R30", 1, Fraction(1, 3)),
        (HEX, "p(2x2)", 1, Fraction(1, 4)),
        # From memory: CO/Pt(111) c(4x2)-2CO is the 0.5 ML phase.
        (HEX, "c(4x2)", 2, Fraction(1, 2)),
        # From memory: O/Ni(100) c(2x2) is 0.5 ML.
        (SQUARE, "c(2x2)", 1, Fraction(1, 2)),
    ],
)
def test_coverage(lattice, wood, n, coverage):
    assert Superstructure.from_wood(lattice, wood).coverage(n) == coverage


def test_geometry_vectors_reciprocal_and_exact_beam_basis():
    sup = Superstructure(HEX, [[3, 1], [-1, 2]])
    assert np.allclose(sup.vectors, np.array([[3, 1], [-1, 2]]) @ HEX.vectors)
    # Common practice, no source: b_i . b*_j = 2 pi delta_ij; area = |det M| x substrate area.
    assert np.allclose(sup.vectors @ sup.reciprocal.T, 2 * math.pi * np.eye(2))
    assert sup.area == pytest.approx(7 * HEX.area)
    R = sup.reciprocal_matrix
    # Derived by hand: beams of B = M A in the substrate reciprocal basis are the rows of
    # (M^-1)^T = [[2, 1], [-1, 3]] / 7
    assert all(isinstance(v, Fraction) for v in R.flat)
    assert np.allclose(R.astype(float) @ HEX.reciprocal, sup.reciprocal)
    assert R[0, 0] == Fraction(2, 7)


def test_to_dict_has_exactly_the_command_keys():
    d = Superstructure(SQUARE, [[1, 1], [-1, 1]]).to_dict()
    assert list(d) == ["matrix", "wood", "wood_all", "determinant", "kind", "domains"]
    # Source: shared/sources.md (Wood 1964): [[1,1],[-1,1]] = c(2x2) = (sqrt2 x sqrt2)R45 on a
    # square lattice; R-45 and c(2x2)R90 describe the same lattice (the 4mm symmetry of the net).
    assert d == {
        "matrix": [[1, 1], [-1, 1]],
        "wood": "c(2×2)",
        "wood_all": ["c(2×2)", "(√2×√2)R45°", "(√2×√2)R-45°", "c(2×2)R90°"],
        "determinant": 2,
        "kind": "commensurate",
        "domains": 1,
    }
    none = Superstructure(SQUARE, [[2, 1], [-1, 3]]).to_dict()
    assert none["wood"] is None and none["wood_all"] == []


def test_hex60_basis_is_labelled():
    sup = Superstructure(parse_lattice("hex60:2.77"), [[2, 0], [0, 1]])
    assert "60 degree" in str(sup) and "60 degree" in repr(sup)
    assert "120 degree" in str(Superstructure(HEX, [[2, 0], [0, 1]]))
    assert Superstructure(SQUARE, [[2, 0], [0, 1]]).basis_note == ""


@pytest.mark.parametrize(
    "matrix",
    [[[1, 2], [2, 4]], [[0, 0], [0, 0]], [1, 2, 3], [[1, 2, 3], [4, 5, 6]], [["a", 1], [0, 1]],
     [[float("nan"), 0], [0, 1]], [[1e-14, 0], [0, 1e-14]], [["1/0", 1], [0, 1]]],
)
def test_bad_matrices_raise_notation_error(matrix):
    with pytest.raises(NotationError) as info:
        Superstructure(HEX, matrix)
    assert "\n" not in str(info.value) and str(info.value).endswith(".")


# --------------------------------------------------------------------------- HNF
def test_hnf_counts_are_sums_of_divisors():
    # Source: OEIS A000203 (sigma(n)), first twelve values from memory, and the published
    # identity that the number of index-n sublattices of Z^2 is sigma(n) (e.g. Hart and
    # Forcade, Phys. Rev. B 77, 224115 (2008)).
    assert [len(hermite_normal_forms(n)) for n in range(1, 13)] == [1, 3, 4, 7, 6, 12, 8, 15, 13, 18, 12, 28]
    for n in range(1, 61):
        assert len(hermite_normal_forms(n)) == sigma(n)


def test_hnfs_of_one_area_are_pairwise_different_superlattices():
    for n in range(1, 9):
        hs = hermite_normal_forms(n)
        for i, a in enumerate(hs):
            assert int(round(np.linalg.det(a))) == n
            for b in hs[i + 1:]:
                assert not equivalent(a, b)


def _unimodular(steps):
    U = np.eye(2, dtype=int)
    for k, flip, neg in steps:
        U = np.array([[1, k], [0, 1]]) @ U
        if flip:
            U = np.array([[0, 1], [1, 0]]) @ U
        if neg:
            U = np.array([[1, 0], [0, -1]]) @ U
    return U


steps = st.tuples(st.integers(-3, 3), st.booleans(), st.booleans())
unimodular = st.lists(steps, max_size=5).map(_unimodular)
int_matrix = st.lists(st.integers(-6, 6), min_size=4, max_size=4).map(lambda v: np.array(v).reshape(2, 2))


@settings(max_examples=200, deadline=None)
@given(m=int_matrix, u=unimodular)
def test_canonical_form_is_the_unique_hnf(m, u):
    det = int(round(np.linalg.det(m)))
    assume(det != 0)
    H, U = hermite_normal_form(m)
    assert np.array_equal(U @ m, H)
    assert abs(int(round(np.linalg.det(U)))) == 1
    assert H[1, 0] == 0 and H[0, 0] > 0 and H[1, 1] > 0 and 0 <= H[0, 1] < H[1, 1]
    assert any(np.array_equal(H, h) for h in hermite_normal_forms(abs(det)))
    # a change of superlattice basis changes neither the canonical form nor equivalence
    assert np.array_equal(canonical(u @ m), canonical(m))
    assert equivalent(m, u @ m)
    # doubling one row makes a different superlattice
    assert not equivalent(m, np.array([[2, 0], [0, 1]]) @ m)


@settings(max_examples=100, deadline=None)
@given(m=int_matrix, u=unimodular, den=st.integers(1, 12))
def test_rational_and_float_equivalence(m, u, den):
    assume(int(round(np.linalg.det(m))) != 0)
    M = as_matrix([[Fraction(int(v), den) for v in row] for row in m])
    UM = u.astype(object) @ M
    assert equivalent(M, UM)
    assert canonical(M).tolist() == canonical(UM).tolist()
    # the same test on floats (tolerance path)
    assert equivalent(M.astype(float) * (1 + 1e-13), UM.astype(float))


def test_canonical_of_incommensurate_matrix_is_an_error():
    with pytest.raises(NotationError):
        canonical([[math.sqrt(2), 0], [0, 1]])


def test_same_superlattice_method():
    a = Superstructure(HEX, [[2, 1], [-1, 1]])
    assert a.same_superlattice(Superstructure(HEX, [[1, 2], [-2, -1]]))  # rows recombined
    assert not a.same_superlattice([[2, 0], [0, 2]])
    # by hand: (2,1) + (-1,1) = (1,2) and (2,1) + 2(-1,1) = (0,3) span the same lattice
    assert a.canonical().tolist() == [[1, 2], [0, 3]]


@settings(max_examples=300, deadline=None)
@given(
    v=st.one_of(
        st.floats(-20, 20, allow_nan=False),
        st.builds(lambda p, q, e: p / q + e, st.integers(-500, 500), st.integers(1, 2000),
                  st.floats(-1e-12, 1e-12)),
    ),
    max_den=st.sampled_from([2, 7, 12, 48, 64, 65, 100, 2000]),
)
def test_closest_denominators_agree_with_fraction_limit_denominator(v, max_den):
    from surfgeo.lattice.rational import closest_denominators

    (q,) = closest_denominators([v], max_den).tolist()
    # Source: Python's fractions.Fraction.limit_denominator (the closest fraction with a bounded
    # denominator) as the reference implementation.
    ref = Fraction(v).limit_denominator(max_den)
    err = abs(v - round(v * q) / q)
    ref_err = abs(v - float(ref))
    assert 1 <= q <= max_den and err <= ref_err + 1e-12
    if q != ref.denominator:  # only for two equally close fractions, and then the smaller denominator
        assert abs(err - ref_err) <= 1e-12 and q < ref.denominator
