"""Beam enumeration and exact labels; spot positions of the notation cases of sources.md."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from surfgeo.diffraction.beams import (
    format_index,
    is_integer_index,
    label_numerators,
    parse_index,
    rational_matrix,
    reciprocal_points_in_disc,
)
from surfgeo.diffraction.electron import incident_k_parallel, wavenumber
from surfgeo.diffraction.pattern import superstructure_pattern
from surfgeo.errors import InputError
from surfgeo.lattice import Lattice2D


@settings(max_examples=40, deadline=None)
@given(
    st.floats(1.5, 6.0),
    st.floats(1.5, 6.0),
    st.floats(40.0, 140.0),
    st.floats(-2.0, 2.0),
    st.floats(-2.0, 2.0),
    st.floats(0.5, 6.0),
)
def test_disc_enumeration_matches_brute_force(a, b, gamma, cx, cy, radius):
    # Common practice, no source: exhaustive search over a generous index box
    lat = Lattice2D.oblique(a, b, gamma)
    rec = lat.reciprocal
    got = reciprocal_points_in_disc(rec, [cx, cy], radius)
    m, n = np.meshgrid(np.arange(-40, 41), np.arange(-40, 41), indexing="ij")
    mn = np.stack([m.ravel(), n.ravel()], axis=1)
    d = np.array([cx, cy]) + mn @ rec
    ref = mn[np.einsum("ij,ij->i", d, d) < radius**2]
    assert {tuple(x) for x in got.tolist()} == {tuple(x) for x in ref.tolist()}
    assert len(got) == len(ref)


def test_labels_are_exact_m_inverse_transpose():
    # Source: Park and Madden, Surf. Sci. 11, 188 (1968): B = M A, so B* = M^-T A* and (h, k) = (m, n) M^-T
    M = rational_matrix([[3, 1], [-1, 2]])
    mn = np.array([[1, 0], [0, 1], [2, -3], [-5, 4]])
    num, den = label_numerators(mn, M)
    Minv_T = [[Fraction(2, 7), Fraction(1, 7)], [Fraction(-1, 7), Fraction(3, 7)]]  # (M^-1)^T by hand, det 7
    for (m, n), (h, k) in zip(mn.tolist(), num.tolist(), strict=True):
        ref_h = m * Minv_T[0][0] + n * Minv_T[1][0]
        ref_k = m * Minv_T[0][1] + n * Minv_T[1][1]
        assert (Fraction(h, den), Fraction(k, den)) == (ref_h, ref_k)
    # a rational (coincidence) matrix
    num, den = label_numerators(np.array([[1, 0]]), rational_matrix([[1.5, 0], [0, 1.5]]))
    assert (Fraction(int(num[0, 0]), den), Fraction(int(num[0, 1]), den)) == (Fraction(2, 3), 0)


def test_rational_matrix_and_index_text():
    assert rational_matrix([[0.5, 0], [0, 2]])[0, 0] == Fraction(1, 2)
    assert rational_matrix([[2 / math.sqrt(3), 0], [0, 1]]) is None
    assert format_index(Fraction(-3, 2)) == "-3/2" and format_index(Fraction(2)) == "2"
    assert format_index(0.42264973) == "0.4226"
    assert parse_index(" -1/3 ") == Fraction(-1, 3)
    with pytest.raises(InputError, match="fraction"):
        parse_index("half")
    assert is_integer_index(Fraction(4, 2)) and not is_integer_index(Fraction(1, 2))
    assert not is_integer_index(1.0)  # floats are never exactly integer labels


def _wood_reciprocal(lattice, p, q, angle_deg):
    # Source: E. A. Wood, J. Appl. Phys. 35, 1306 (1964): b1 = p R(angle) a1, b2 = q R(angle) a2
    c, s = math.cos(math.radians(angle_deg)), math.sin(math.radians(angle_deg))
    R = np.array([[c, -s], [s, c]])
    B = np.array([p * R @ lattice.a1, q * R @ lattice.a2])
    return 2 * math.pi * np.linalg.inv(B).T


def _wood_positions(lattice, p, q, angles, energy):
    k = wavenumber(energy)
    out = []
    for ang in angles:
        rec = _wood_reciprocal(lattice, p, q, ang)
        mn = reciprocal_points_in_disc(rec, [0, 0], k)
        out.append(mn @ rec)
    return np.unique(np.round(np.concatenate(out), 8), axis=0)


# Source: sources.md (Wood 1964; Park and Madden 1968; K. Hermann 2011), matrices with the 120 degree
# hexagonal basis and the square basis; rotation angles tan(R) = sqrt3/5 (sqrt7), sqrt3/7 (sqrt13)
NOTATION_CASES = [
    ("hex", [[2, 1], [-1, 1]], math.sqrt(3), math.sqrt(3), 30.0, 1),
    ("hex", [[3, 1], [-1, 2]], math.sqrt(7), math.sqrt(7), math.degrees(math.atan(math.sqrt(3) / 5)), 2),
    ("hex", [[4, 1], [-1, 3]], math.sqrt(13), math.sqrt(13), math.degrees(math.atan(math.sqrt(3) / 7)), 2),
    ("hex", [[4, 2], [-2, 2]], 2 * math.sqrt(3), 2 * math.sqrt(3), 30.0, 1),
    ("square", [[1, 1], [-1, 1]], math.sqrt(2), math.sqrt(2), 45.0, 1),
    ("square", [[2, 1], [-1, 2]], math.sqrt(5), math.sqrt(5), math.degrees(math.atan(0.5)), 2),
    ("square", [[2, 2], [-1, 1]], 2 * math.sqrt(2), math.sqrt(2), 45.0, 2),
]


@pytest.mark.parametrize("kind, M, p, q, angle, ndom", NOTATION_CASES)
def test_spot_positions_of_the_notation_cases(kind, M, p, q, angle, ndom):
    lat = Lattice2D.hexagonal(2.77) if kind == "hex" else Lattice2D.square(2.55)
    energy = 150.0
    pat = superstructure_pattern(lat, M, energy, domains=True)
    got = np.unique(np.round(pat.g, 8), axis=0)
    # the Wood form and its mirror image (R+angle and R-angle) are the domains of the superstructure
    ref = _wood_positions(lat, p, q, [angle, -angle], energy)
    assert got.shape == ref.shape
    assert np.allclose(got, ref, atol=1e-7)
    # the shortest fractional-order beams lie at |b| / p (|b| = |a*|) for the equal-length cases
    frac = ~pat.integer
    gmin = np.min(np.linalg.norm(pat.g[frac], axis=1))
    b = np.linalg.norm(lat.reciprocal[0])
    assert gmin == pytest.approx(b / max(p, q), rel=1e-12)
    # Source: sources.md domain counts (sqrt7 on 6mm: 2); the others: Common practice, no source
    assert len(pat.domain_records) == ndom


def test_every_emerging_beam_is_listed_at_oblique_incidence():
    # Common practice, no source: emergence condition |k_par_in + g| < k
    lat = Lattice2D.hexagonal(2.5)
    inc = (25.0, 40.0)
    pat = superstructure_pattern(lat, [[3, 1], [-1, 2]], 60.0, inc, domains=False)
    k = wavenumber(60.0)
    kin = incident_k_parallel(60.0, inc)
    assert np.all(np.linalg.norm(pat.k_parallel, axis=1) < k)
    assert np.allclose(pat.k_parallel - pat.g, kin)
    rec = np.linalg.inv(np.array([[3.0, 1.0], [-1.0, 2.0]])).T @ lat.reciprocal
    assert len(pat) == len(reciprocal_points_in_disc(rec, kin, k))
