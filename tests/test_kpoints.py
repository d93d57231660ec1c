"""k-point meshes from a k-point spacing (surfgeo.slab.kpoints)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase import Atoms
from ase.build import fcc100, fcc110, fcc111
from ase.calculators.calculator import kptdensity2monkhorstpack
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from surfgeo.errors import InputError, StructureError
from surfgeo.slab.kpoints import DEFAULT_KSPACING, kpoint_mesh, surface_reciprocal


def _cell(a: float, b: float, gamma_deg: float, c: float = 25.0) -> np.ndarray:
    g = math.radians(gamma_deg)
    return np.array([[a, 0.0, 0.0], [b * math.cos(g), b * math.sin(g), 0.0], [0.0, 0.0, c]])


def _expected(length: float, spacing: float) -> int:
    return max(1, math.ceil(length / spacing))


def test_hexagonal_square_oblique_against_the_stated_formula():
    # Source: reciprocal lattice of a 2D oblique lattice (e.g. Kittel, Introduction to Solid State
    # Physics, ch. 2): |b1| = 2 pi / (a sin gamma), |b2| = 2 pi / (b sin gamma); hexagonal
    # |b| = 4 pi / (a sqrt 3); square |b| = 2 pi / a. Mesh rule N_i = max(1, ceil(|b_i| / spacing)).
    hexb = 4 * math.pi / (2.77 * math.sqrt(3))
    cases = [
        ("hexagonal", 2.77, 2.77, 120.0, hexb, hexb),
        ("square", 2.55, 2.55, 90.0, 2 * math.pi / 2.55, 2 * math.pi / 2.55),
        ("oblique", 3.1, 4.3, 103.0, 2 * math.pi / (3.1 * math.sin(math.radians(103.0))),
         2 * math.pi / (4.3 * math.sin(math.radians(103.0)))),
    ]
    for _, a, b, gamma, b1, b2 in cases:
        for spacing in (0.1, 0.17, 0.25, 0.4, 3.0):
            k = kpoint_mesh(_cell(a, b, gamma), spacing)
            assert k.mesh == (_expected(b1, spacing), _expected(b2, spacing), 1)
            assert k.reciprocal_lengths == pytest.approx((b1, b2), rel=1e-12)


def test_reciprocal_vectors_include_two_pi():
    cell = _cell(2.77, 2.77, 120.0)
    b = surface_reciprocal(cell)
    # Common practice, no source: a_i . b_j = 2 pi delta_ij, b in the surface plane.
    assert np.allclose(cell[:2] @ b.T, 2 * math.pi * np.eye(2), atol=1e-12)
    assert np.allclose(b[:, 2], 0.0)


def test_worked_example_pt111():
    # From memory: Pt a = 3.92 A, so a(1x1 on (111)) = 2.772 A; |b| = 4 pi/(a sqrt3) = 2.617 1/A;
    # at 0.25 1/A this needs ceil(10.47) = 11 points along each in-plane vector.
    slab = fcc111("Pt", (1, 1, 4), a=3.92, vacuum=8.0)
    k = kpoint_mesh(slab.cell, 0.25)
    assert k.mesh == (11, 11, 1)
    assert k.reciprocal_lengths[0] == pytest.approx(2.617, abs=1e-3)


@pytest.mark.parametrize("build", [fcc111, fcc100, fcc110])
@pytest.mark.parametrize("size", [(1, 1, 4), (2, 2, 4), (3, 2, 4)])
def test_agrees_with_ase_for_slabs_with_c_along_the_normal(build, size):
    slab = build("Cu", size, vacuum=7.0)
    slab.pbc = (True, True, False)
    for spacing in (0.13, 0.21, 0.33):
        # Source: ASE's kptdensity2monkhorstpack (reference implementation): ceil(2 pi |b_i| density)
        # on periodic axes, 1 on the others; density = 1 / spacing.
        ref = kptdensity2monkhorstpack(slab, kptdensity=1.0 / spacing, even=False)
        assert kpoint_mesh(slab.cell, spacing).mesh == tuple(int(n) for n in ref)


@settings(max_examples=60, deadline=None)
@given(
    a=st.floats(1.5, 12.0), b=st.floats(1.5, 12.0), gamma=st.floats(30.0, 150.0),
    spacing=st.floats(0.05, 2.0), theta=st.floats(0.0, 360.0),
)
def test_mesh_properties_and_ase_agreement(a, b, gamma, spacing, theta):
    cell = _cell(a, b, gamma)
    k = kpoint_mesh(cell, spacing)
    lengths = np.array(k.reciprocal_lengths)
    assume(np.all(np.abs(lengths / spacing - np.round(lengths / spacing)) > 1e-9))  # no ties at ceil
    n = np.array(k.mesh[:2])
    # Common practice, no source: the achieved spacing never exceeds the requested one, and one
    # point fewer would exceed it.
    assert np.all(lengths / n <= spacing * (1 + 1e-12))
    assert np.all((n == 1) | (lengths / np.maximum(n - 1, 1) > spacing))
    # Source: ASE's kptdensity2monkhorstpack with pbc (True, True, False).
    atoms = Atoms(cell=cell, pbc=(True, True, False))
    assert k.mesh == tuple(int(x) for x in kptdensity2monkhorstpack(atoms, 1.0 / spacing, even=False))
    # a rotation of the whole cell about the normal changes nothing
    t = math.radians(theta)
    rot = np.array([[math.cos(t), -math.sin(t), 0], [math.sin(t), math.cos(t), 0], [0, 0, 1]])
    assert kpoint_mesh(cell @ rot.T, spacing).mesh == k.mesh


def test_tilted_c_uses_the_surface_reciprocal_lattice():
    cell = _cell(2.77, 2.77, 120.0)
    tilted = cell.copy()
    tilted[2] = [1.3, 0.7, 25.0]
    # Common practice, no source: the in-plane mesh depends on a1, a2 only, not on the tilt of c.
    assert kpoint_mesh(tilted, 0.2).mesh == kpoint_mesh(cell, 0.2).mesh


def test_default_spacing_and_bad_input():
    assert kpoint_mesh(_cell(3.0, 3.0, 90.0)).spacing == DEFAULT_KSPACING
    for bad in (0.0, -0.1, float("nan"), "x"):
        with pytest.raises(InputError, match="spacing"):
            kpoint_mesh(_cell(3.0, 3.0, 90.0), bad)
    with pytest.raises(StructureError, match="parallel"):
        kpoint_mesh(np.array([[1.0, 0, 0], [2.0, 0, 0], [0, 0, 10]]), 0.2)


def test_absurdly_dense_meshes_are_refused():
    # Regression: a spacing of 1e-6 1/A gave a 1308725 x 1308725 x 1 mesh without a word.
    cell = _cell(3.0, 3.0, 90.0)  # |b| = 2 pi / 3 = 2.09 1/A
    with pytest.raises(InputError, match="more than 1000 points"):
        kpoint_mesh(cell, 1e-6)
    assert kpoint_mesh(cell, 2.0 * math.pi / 3.0 / 999.5).mesh == (1000, 1000, 1)
