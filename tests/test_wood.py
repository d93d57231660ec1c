"""Wood notation: published values, parsing, printing, snapping and round trips."""

import dataclasses
import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from surfgeo.errors import NotationError
from surfgeo.lattice import (
    Superstructure,
    Surd,
    equivalent,
    matrix_to_wood,
    parse_lattice,
    parse_wood,
    wood_to_matrix,
)
from surfgeo.lattice.rational import is_exact, to_float

HEX = parse_lattice("hex:2.77")
SQUARE = parse_lattice("square:2.55")
RECT = parse_lattice("rect:2.55,3.61")
RHOMBIC = parse_lattice("rhombic:2.74,109.47")


def _exact(rows):
    out = np.empty((2, 2), dtype=object)
    out[:] = [[Fraction(v) for v in row] for row in rows]
    return out


# --------------------------------------------------------------------------- published values
# Source: E. A. Wood, J. Appl. Phys. 35, 1306 (1964); R. L. Park and H. H. Madden, Surf. Sci.
# 11, 188 (1968); K. Hermann, Crystallography and Surface Structure (2011) -- the values as
# listed in shared/sources.md (hexagonal substrate with the 120 degree basis, and square).
PUBLISHED = [
    (HEX, [[2, 1], [-1, 1]], "(√3×√3)R30°", "(sqrt3xsqrt3)R30", 3),
    (HEX, [[3, 1], [-1, 2]], "(√7×√7)R19.1°", "(sqrt7xsqrt7)R19.1", 7),
    (HEX, [[4, 1], [-1, 3]], "(√13×√13)R13.9°", "(sqrt13xsqrt13)R13.9", 13),
    (HEX, [[4, 2], [-2, 2]], "(2√3×2√3)R30°", "(2sqrt3x2sqrt3)R30", 12),
    (SQUARE, [[1, 1], [-1, 1]], "c(2×2)", "c(2x2)", 2),
    (SQUARE, [[2, 1], [-1, 2]], "(√5×√5)R26.6°", "(sqrt5xsqrt5)R26.6", 5),
    (SQUARE, [[2, 2], [-1, 1]], "(2√2×√2)R45°", "(2sqrt2xsqrt2)R45", 4),
]


@pytest.mark.parametrize("lattice, matrix, uni, asc, det", PUBLISHED)
def test_published_matrix_to_wood(lattice, matrix, uni, asc, det):
    sup = Superstructure(lattice, matrix)
    assert sup.wood().unicode == uni  # Source: see PUBLISHED
    assert sup.wood().ascii == asc
    assert sup.determinant == det


@pytest.mark.parametrize("lattice, matrix, uni, asc, det", PUBLISHED)
def test_published_wood_to_matrix(lattice, matrix, uni, asc, det):
    for text in (uni, asc):
        M = wood_to_matrix(lattice, text)
        assert is_exact(M)
        # the primitive Wood basis itself, or c(2x2) = [[1, 1], [-1, 1]] for the centred form
        assert M.tolist() == _exact(matrix).tolist()  # Source: see PUBLISHED


def test_c2x2_is_also_sqrt2_r45_on_square():
    # Source: Wood 1964 / shared/sources.md: [[1,1],[-1,1]] = c(2x2) = (sqrt2 x sqrt2)R45.
    forms = [f.unicode for f in matrix_to_wood(SQUARE, [[1, 1], [-1, 1]])]
    assert forms[0] == "c(2×2)"
    assert "(√2×√2)R45°" in forms


@pytest.mark.parametrize(
    "lattice, matrix, tan",
    [
        # Source: shared/sources.md, trigonometry: tan R = sqrt3/5 for sqrt7 and sqrt3/7 for sqrt13
        # on the hexagonal lattice; tan R = 1/2 for (sqrt5 x sqrt5) on the square lattice.
        (HEX, [[3, 1], [-1, 2]], math.sqrt(3) / 5),
        (HEX, [[4, 1], [-1, 3]], math.sqrt(3) / 7),
        (SQUARE, [[2, 1], [-1, 2]], 0.5),
    ],
)
def test_rotation_angles_follow_from_trigonometry(lattice, matrix, tan):
    w = Superstructure(lattice, matrix).wood()
    assert w.angle == pytest.approx(math.degrees(math.atan(tan)), abs=1e-9)


def test_rectangular_substrate_values():
    # Source: Wood 1964, definitions of (n x m) and c(n x m) (from memory of the definitions):
    # the (1x2) missing-row cell of fcc(110) doubles a2; c(2x2) centres the 2a1 x 2a2 cell.
    assert Superstructure(RECT, [[1, 0], [0, 2]]).wood().unicode == "(1×2)"
    assert Superstructure(RECT, [[1, 1], [-1, 1]]).wood().unicode == "c(2×2)"
    assert wood_to_matrix(RECT, "c(2x2)").tolist() == _exact([[1, 1], [-1, 1]]).tolist()
    assert wood_to_matrix(RECT, "(2x3)").tolist() == _exact([[2, 0], [0, 3]]).tolist()
    # a1 + a2 and -a1 + a2 are not perpendicular on a rectangle, but they span c(2x2)
    assert not any(f.rotated and not f.centred for f in matrix_to_wood(RECT, [[1, 1], [-1, 1]]))


def test_centred_rectangular_substrate_values():
    # Source: Wood 1964, definitions (from memory), applied to the primitive rhombic cell of a
    # centred rectangular substrate such as bcc(110): p(2x1) and c(2x2).
    assert Superstructure(RHOMBIC, [[2, 0], [0, 1]]).wood().unicode == "(2×1)"
    assert Superstructure(RHOMBIC, [[1, 1], [-1, 1]]).wood().unicode == "c(2×2)"
    assert wood_to_matrix(RHOMBIC, "p(2x1)").tolist() == _exact([[2, 0], [0, 1]]).tolist()


def test_c4x2_on_hexagonal_is_sqrt3_x_2_rectangular():
    # From memory: c(4x2) on fcc(111) (e.g. CO/Pt(111) c(4x2)-2CO at 0.5 ML) is the same cell as
    # (sqrt3 x 2)rect: a rectangle of sides sqrt3 a and 2 a holding one lattice point.
    sup = Superstructure.from_wood(HEX, "c(4x2)")
    assert sup.matrix.tolist() == _exact([[2, 1], [0, 2]]).tolist()
    b1, b2 = sup.vectors
    assert b1 @ b2 == pytest.approx(0, abs=1e-9)
    assert sorted(np.linalg.norm(sup.vectors, axis=1) / 2.77) == pytest.approx([math.sqrt(3), 2])
    assert sup.coverage(2) == Fraction(1, 2)


def test_2x1_on_hexagonal_prefers_the_unrotated_form():
    # Common practice, no source: (2x1) is written unrotated even though (1x2)R-60 is the same.
    forms = matrix_to_wood(HEX, [[2, 0], [0, 1]])
    assert forms[0].unicode == "(2×1)"
    assert all(equivalent(wood_to_matrix(HEX, f), [[2, 0], [0, 1]]) for f in forms)


def test_no_wood_form_on_square():
    # Derived by hand (no published source): the index-7 lattice of [[2,1],[-1,3]] contains
    # neither (1,0) nor (0,1), and 7 is not a sum of two squares, so no basis (or centred cell)
    # of it is a rotated, scaled copy of the square basis.
    assert matrix_to_wood(SQUARE, [[2, 1], [-1, 3]]) == []
    assert Superstructure(SQUARE, [[2, 1], [-1, 3]]).wood() is None


@pytest.mark.parametrize("n", [300, 1000])
def test_long_cells_have_no_spurious_slightly_rotated_forms(n):
    # Regression: the membership test used a tolerance in superlattice coordinates, which grows
    # with the cell, so (1000x1) also reported c(sqrt3998001x1)R0.0 (a cell rotated by 0.02 deg).
    # Derived by hand: on the hexagonal lattice (n x 1) = (1 x n)R-60 (R(-60) a1 = -a2 and
    # R(-60) a2 = a1 + a2), and every Wood basis must be a basis of the same superlattice.
    M = [[n, 0], [0, 1]]
    forms = matrix_to_wood(HEX, M)
    assert [f.ascii for f in forms] == [f"({n}x1)", f"(1x{n})R-60"]
    assert all(equivalent(wood_to_matrix(HEX, f), M) for f in forms)


def test_matrix_entries_are_bounded_and_singularity_is_relative():
    # Regression: [[1e300, 0], [0, 1e300]] crashed with OverflowError, and the non-singular
    # [[1e9, 0], [0, 1]] was called singular (an absolute tolerance on the determinant).
    for m in ([[1e300, 0], [0, 1e300]], [["1e9", "0"], ["0", "1"]], [[1001, 0], [0, 1]]):
        with pytest.raises(NotationError, match="between -1000 and 1000"):
            Superstructure(HEX, m)
    with pytest.raises(NotationError, match="singular"):
        Superstructure(HEX, [[1, 2], [2, 4.0000000001]])
    assert Superstructure(HEX, [[1000, 0], [0, 1]]).determinant == 1000


# --------------------------------------------------------------------------- parsing
@pytest.mark.parametrize(
    "text, expected",
    [
        ("(√3×√3)R30°", "(sqrt3xsqrt3)R30"),
        ("(sqrt3xsqrt3)R30", "(sqrt3xsqrt3)R30"),
        ("(sqrt3 x sqrt3)R30", "(sqrt3xsqrt3)R30"),
        ("  ( sqrt(3) X sqrt(3) ) r 30 deg ", "(sqrt3xsqrt3)R30"),
        ("(1√3×1√3)R30", "(sqrt3xsqrt3)R30"),
        ("c(2×2)", "c(2x2)"),
        ("C(4x2)", "c(4x2)"),
        ("p(2×2)", "(2x2)"),
        ("(2√3×2√3)R30°", "(2sqrt3x2sqrt3)R30"),
        ("(2*sqrt3x2sqrt3)R30", "(2sqrt3x2sqrt3)R30"),
        ("(1.5x1.5)R15", "(1.5x1.5)R15"),
        ("(3/2x3/2)R15", "(1.5x1.5)R15"),
        ("(sqrt12 x sqrt12)R30", "(2sqrt3x2sqrt3)R30"),
        ("(√7×√7)R−19.1°", "(sqrt7xsqrt7)R-19.1"),
        ("(2x1)R0", "(2x1)"),
        ("(√3/2 × 1)", "(sqrt3/2x1)"),
        ("(1.37x2)", "(1.37x2)"),
        ("(0.333x1)", "(1/3x1)"),
    ],
)
def test_parse_spellings(text, expected):
    # Common practice, no source: Unicode and ASCII spellings of Wood notation.
    assert parse_wood(text).ascii == expected


@pytest.mark.parametrize(
    "text",
    ["", "2x1", "(2x)", "(x1)", "(2x1x3)", "(axb)", "(2x1)R", "(2x1)Rabc", "(0x1)", "(2x1)-O",
     "c(2x2", "(2;1)", "q(2x1)", "(sqrtx2)", "(1/0x1)", "(2x1)R30R30"],
)
def test_malformed_wood_is_one_clear_sentence(text):
    with pytest.raises(NotationError) as info:
        parse_wood(text)
    msg = str(info.value)
    assert "\n" not in msg and msg.endswith(".")
    assert "Wood" in msg or "scale factor" in msg


@pytest.mark.parametrize("text", ["(-2x1)", "(2x-sqrt3)", "(−2x1)"])
def test_negative_scale_factor_is_called_negative(text):
    # Regression: "(-2x1)" was reported as "'-2' ... is not a number".
    with pytest.raises(NotationError, match="must be positive"):
        parse_wood(text)


def test_surd_printing():
    # Common practice, no source: sqrt12 = 2 sqrt3, sqrt(9/4) = 3/2, sqrt(7/9) = sqrt7/3.
    assert Surd.from_square(Fraction(12)).unicode == "2√3"
    assert Surd.from_square(Fraction(12)).ascii == "2sqrt3"
    assert Surd.from_square(Fraction(9, 4)).unicode == "1.5"
    assert Surd.from_square(Fraction(16, 9)).unicode == "4/3"
    assert Surd.from_square(Fraction(7, 9)).unicode == "√7/3"
    assert Surd.from_square(Fraction(63, 4)).unicode == "3√7/2"
    assert float(Surd.from_square(Fraction(3))) == pytest.approx(math.sqrt(3))


# --------------------------------------------------------------------------- snapping
def test_rounded_angle_snaps_to_the_exact_matrix():
    # R19.1 is 19.1066 degrees rounded; the derived float matrix lies within that precision of
    # [[3, 1], [-1, 2]] (Source: shared/sources.md for the matrix).
    assert wood_to_matrix(HEX, "(sqrt7xsqrt7)R19.1").tolist() == _exact([[3, 1], [-1, 2]]).tolist()
    assert wood_to_matrix(HEX, "(sqrt7xsqrt7)R19").tolist() == _exact([[3, 1], [-1, 2]]).tolist()
    # 0.4 degree off with one printed decimal is outside the precision: stays irrational
    off = wood_to_matrix(HEX, "(sqrt7xsqrt7)R19.5")
    assert not is_exact(off)
    assert Superstructure(HEX, off).kind == "incommensurate"


def test_non_integer_scale_and_rotation_is_incommensurate():
    sup = Superstructure.from_wood(HEX, "(1.5x1.5)R15")
    # Common practice, no source (Park and Madden's classification): an irrational matrix is
    # incommensurate, a rational non-integer one a coincidence structure; det = p q = 2.25
    assert sup.kind == "incommensurate"
    assert sup.wood().unicode == "(1.5×1.5)R15°"
    assert sup.determinant == pytest.approx(2.25)
    unrotated = Superstructure.from_wood(HEX, "(1.5x1.5)")
    assert unrotated.kind == "coincidence"
    assert unrotated.matrix.tolist() == _exact([[Fraction(3, 2), 0], [0, Fraction(3, 2)]]).tolist()


def test_wood_of_a_form_object_at_full_precision_snaps_large_denominators():
    M = _exact([[Fraction(17, 13), Fraction(4, 13)], [Fraction(-4, 13), Fraction(13, 13)]])
    for form in matrix_to_wood(HEX, M):
        back = wood_to_matrix(HEX, form)
        assert is_exact(back) and equivalent(back, M)


# --------------------------------------------------------------------------- brute-force check
def _brute_force_forms(lattice, M, reach=4):
    """Wood forms found by trying every basis K M with |K_ij| <= reach (independent of the
    search in surfgeo.lattice.wood): primitive for det K = 1, centred for det K = 2 with the
    centre (k1 + k2) / 2 integral."""
    A = lattice.vectors
    Mf = to_float(np.asarray(M))
    rng = range(-reach, reach + 1)
    K = np.array(list(itertools.product(rng, repeat=4)), dtype=float).reshape(-1, 2, 2)
    det = np.rint(np.linalg.det(K)).astype(int)
    out = set()
    for centred, want in ((False, 1), (True, 2)):
        sel = K[det == want]
        if centred:
            par = (sel[:, 0, :] + sel[:, 1, :]) % 2 == 0
            sel = sel[np.all(par, axis=1)]
        Bp = sel @ Mf @ A
        ang = lambda v: np.arctan2(v[..., 1], v[..., 0])  # noqa: E731
        phi1 = ang(Bp[:, 0]) - math.atan2(A[0, 1], A[0, 0])
        phi2 = ang(Bp[:, 1]) - math.atan2(A[1, 1], A[1, 0])
        d = (phi1 - phi2 + math.pi) % (2 * math.pi) - math.pi
        for i in np.nonzero(np.abs(d) < 1e-9)[0]:
            p = np.linalg.norm(Bp[i, 0]) / np.linalg.norm(A[0])
            q = np.linalg.norm(Bp[i, 1]) / np.linalg.norm(A[1])
            deg = (math.degrees(phi1[i]) + 90) % 180 - 90
            if deg <= -90 + 1e-9:
                deg += 180
            out.add((centred, round(p, 6), round(q, 6), round(deg, 5) + 0.0))
    return out


LATTICES = {
    "hex": HEX,
    "hex60": parse_lattice("hex60:2.77"),
    "square": SQUARE,
    "rect": RECT,
    "rect23": parse_lattice("rect:2,3"),
    "rhombic": RHOMBIC,
    "oblique": parse_lattice("oblique:2.1,3.3,71"),
}

small_matrix = st.lists(st.integers(-3, 3), min_size=4, max_size=4).map(lambda v: [v[:2], v[2:]])


@settings(max_examples=60, deadline=None)
@given(name=st.sampled_from(sorted(LATTICES)), m=small_matrix)
def test_search_finds_every_form_a_brute_force_finds(name, m):
    assume(m[0][0] * m[1][1] - m[0][1] * m[1][0] != 0)
    lattice = LATTICES[name]
    ours = {
        (f.centred, round(float(f.p), 6), round(float(f.q), 6), round(f.angle, 5) + 0.0)
        for f in matrix_to_wood(lattice, m)
    }
    brute = _brute_force_forms(lattice, m)
    assert brute <= ours


# --------------------------------------------------------------------------- round trips
@settings(max_examples=120, deadline=None)
@given(name=st.sampled_from(sorted(LATTICES)), m=small_matrix)
def test_every_reported_form_is_the_same_superlattice_and_round_trips(name, m):
    assume(m[0][0] * m[1][1] - m[0][1] * m[1][0] != 0)
    lattice = LATTICES[name]
    forms = matrix_to_wood(lattice, m)
    for f in forms:
        # the form object itself (full precision)
        assert equivalent(wood_to_matrix(lattice, f), m)
        # and its printed spellings: text -> matrix -> Wood gives the text back
        for text in (f.unicode, f.ascii):
            back = wood_to_matrix(lattice, text)
            assert is_exact(back), text
            assert equivalent(back, m), text
            again = matrix_to_wood(lattice, back)
            assert text in [g.unicode for g in again] + [g.ascii for g in again]


SCALES = ["1", "2", "3", "sqrt2", "sqrt3", "2sqrt3", "sqrt7", "3/2", "1.5", "sqrt13", "4/3", "2.5"]


@settings(max_examples=120, deadline=None)
@given(
    name=st.sampled_from(["hex", "square", "rect23", "rhombic"]),
    p=st.sampled_from(SCALES),
    q=st.sampled_from(SCALES),
    tenths=st.integers(-899, 900),
    centred=st.booleans(),
)
def test_wood_text_to_matrix_to_wood_round_trips(name, p, q, tenths, centred):
    lattice = LATTICES[name]
    angle = f"{tenths / 10:.1f}"
    text = f"{'c' if centred else ''}({p}x{q})" + (f"R{angle}" if tenths else "")
    w = parse_wood(text)
    M = wood_to_matrix(lattice, text)
    forms = matrix_to_wood(lattice, M)

    def same(f):
        d = (f.angle - w.angle + 90) % 180 - 90
        return (f.centred == w.centred and abs(float(f.p) - float(w.p)) < 1e-9
                and abs(float(f.q) - float(w.q)) < 1e-9 and abs(d) <= 0.05 + 1e-9)

    assert any(same(f) for f in forms), (text, [f.ascii for f in forms])
    # the same spelling comes back (an angle typed as R9.0 is printed R9)
    expected = dataclasses.replace(w, angle_decimals=None).ascii
    assert expected in [f.ascii for f in forms], (text, [f.ascii for f in forms])
