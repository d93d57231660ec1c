"""Adsorbate placement, coverage and overlayer films (surfgeo.slab.adsorbates, overlayer)."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from ase.build import add_adsorbate as ase_add_adsorbate
from ase.build import fcc100, fcc110, fcc111, molecule
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from surfgeo.errors import StructureError
from surfgeo.slab.adsorbates import add_adsorbate, close_contacts, coverage, make_adsorbate, oriented
from surfgeo.slab.overlayer import Film, add_overlayer, find_coincidence
from surfgeo.slab.supercell import ADSORBATE_KEY, SUBLATTICE_KEY, make_supercell, origin_map

ASE = {
    "fcc111": (fcc111, {"ontop": "top", "bridge": "bridge", "fcc": "fcc-hollow", "hcp": "hcp-hollow"}),
    "fcc100": (fcc100, {"ontop": "top", "bridge": "bridge", "hollow": "fourfold-hollow"}),
    "fcc110": (fcc110, {"ontop": "top", "shortbridge": "short-bridge", "longbridge": "long-bridge",
                        "hollow": "fourfold-hollow"}),
}


@pytest.mark.parametrize("face", sorted(ASE))
def test_height_placement_matches_ase(face):
    maker, names = ASE[face]
    slab = maker("Rh", (1, 1, 4), vacuum=8.0)
    for ase_name, ours in names.items():
        ref = slab.copy()
        ase_add_adsorbate(ref, "N", 1.3, ase_name)
        got = add_adsorbate(slab, "N", ours, height=1.3, which="all", contact_factor=0.0)
        placed = got.positions[len(slab):]
        d = (placed - ref.positions[-1])[:, :2] @ np.linalg.inv(slab.cell[:2, :2])
        d -= np.rint(d)
        k = int(np.argmin(np.linalg.norm(d @ slab.cell[:2, :2], axis=1)))
        # Source: ASE add_adsorbate (height above the top layer at the named site), same 3D position
        assert np.linalg.norm(d[k] @ slab.cell[:2, :2]) < 1e-9
        assert placed[k, 2] == pytest.approx(ref.positions[-1, 2], abs=1e-9)


@pytest.mark.parametrize("element", ["Cu", "Pt"])
def test_bond_length_gives_elementary_height(element):
    b = 2.1
    a = {"Cu": 3.61, "Pt": 3.92}[element]  # Source: ASE reference states (Kittel)
    d = a / math.sqrt(2)
    cases = [
        (fcc111, "top", 0.0), (fcc111, "bridge", d / 2), (fcc111, "fcc-hollow", d / math.sqrt(3)),
        (fcc111, "hcp-hollow", d / math.sqrt(3)), (fcc100, "top", 0.0), (fcc100, "bridge", d / 2),
        (fcc100, "fourfold-hollow", d / math.sqrt(2)), (fcc110, "short-bridge", d / 2),
    ]
    for maker, site, rho in cases:
        slab = maker(element, (1, 1, 4), vacuum=8.0)
        s = add_adsorbate(slab, "O", site, bond_length=b)
        h = s.positions[-1, 2] - slab.positions[:, 2].max()
        # Source: elementary geometry, h = sqrt(b^2 - rho^2) (shared/sources.md)
        assert h == pytest.approx(math.sqrt(b * b - rho * rho), abs=1e-9), (maker.__name__, site)
        # and the nearest substrate atom is exactly at the bond length
        dist = s.get_distances(len(s) - 1, range(len(slab)), mic=True)
        assert dist.min() == pytest.approx(b, abs=1e-9)


def test_bond_length_in_the_fcc110_trough_touches_the_second_layer():
    slab = fcc110("Pt", (1, 1, 4), vacuum=8.0)
    s = add_adsorbate(slab, "H", "fourfold-hollow", bond_length=1.8)
    dist = s.get_distances(len(s) - 1, range(len(slab)), mic=True)
    second = np.nonzero(slab.get_tags() == 2)[0]
    # Common practice, no source: the fcc(110) hollow lies directly above a second-layer atom
    assert dist[second].min() == pytest.approx(1.8, abs=1e-9)
    assert dist.min() == pytest.approx(1.8, abs=1e-9)


def test_bond_length_too_short_is_refused():
    slab = fcc111("Pt", (1, 1, 3), vacuum=6.0)
    # under a bridge of fcc(111) the nearest atom (second layer) is d / (2 sqrt3) = 0.8 A away laterally
    with pytest.raises(StructureError, match="shorter than the lateral distance"):
        add_adsorbate(slab, "O", "bridge", bond_length=0.7)
    # in the fcc hollow a short bond would slip between the top-layer atoms
    with pytest.raises(StructureError, match="below the surface atoms"):
        add_adsorbate(slab, "O", "fcc-hollow", bond_length=1.0)


def test_co_upright_and_tilted():
    slab = fcc111("Pt", (1, 1, 3), vacuum=6.0)
    s = add_adsorbate(slab, "CO", "top", height=1.85)
    c, o = s.positions[-2:] if s[-2].symbol == "C" else s.positions[-2:][::-1]
    assert s.get_chemical_symbols()[-2:].count("C") == 1
    axis = o - c
    # Source: ASE molecule('CO') bond length, kept when reoriented; upright: O above C
    ref = molecule("CO")
    assert np.linalg.norm(axis) == pytest.approx(ref.get_distance(0, 1), abs=1e-12)
    assert axis[:2] == pytest.approx([0, 0], abs=1e-12) and axis[2] > 0
    assert c[2] - slab.positions[:, 2].max() == pytest.approx(1.85)
    rel, _ = oriented(make_adsorbate("CO")[0], tilt=30, azimuth=90)
    o_rel = rel[[a.symbol for a in ref].index("O")]
    u = o_rel / np.linalg.norm(o_rel)
    # Common practice, no source: tilt from the normal towards the azimuth direction (here +y)
    assert u == pytest.approx([0, math.sin(math.radians(30)), math.cos(math.radians(30))], abs=1e-12)


def test_no_upright_and_o2_lying_flat():
    slab = make_supercell(fcc111("Pt", (1, 1, 3), vacuum=8.0), "p(2x2)")
    top = slab.positions[:, 2].max()
    s = add_adsorbate(slab, "NO", "fcc-hollow", height=1.5)
    n, o = s.positions[len(slab):]
    assert s.get_chemical_symbols()[len(slab):] == ["N", "O"]
    # Source: ASE molecule('NO') bond length, kept; upright through N (the first atom, the anchor)
    assert np.linalg.norm(o - n) == pytest.approx(molecule("NO").get_distance(0, 1), abs=1e-12)
    assert n[2] - top == pytest.approx(1.5) and o[:2] == pytest.approx(n[:2], abs=1e-12) and o[2] > n[2]
    flat = add_adsorbate(slab, "O2", "fcc-hollow", height=1.5, tilt=90, azimuth=30)
    a, b = flat.positions[len(slab):]
    # Source: ASE molecule('O2') bond length; tilted by 90 degrees the axis lies in the surface
    # plane along the azimuth (Common practice, no source: tilt from the normal, azimuth from a1)
    assert np.linalg.norm(b - a) == pytest.approx(molecule("O2").get_distance(0, 1), abs=1e-12)
    assert a[2] == pytest.approx(b[2]) == pytest.approx(top + 1.5)
    u = (b - a)[:2] / np.linalg.norm((b - a)[:2])
    assert u == pytest.approx([math.cos(math.radians(30)), math.sin(math.radians(30))], abs=1e-12)


def test_coverage_of_common_superstructures():
    slab = fcc111("Pt", (1, 1, 4), vacuum=8.0)
    p22 = add_adsorbate(make_supercell(slab, [[2, 0], [0, 2]]), "O", "fcc-hollow", bond_length=2.05)
    r3 = add_adsorbate(make_supercell(slab, "(sqrt3 x sqrt3)R30"), "CO", "top", height=1.85)
    c22 = add_adsorbate(make_supercell(fcc100("Cu", (1, 1, 4), vacuum=8.0), "c(2x2)"), "O",
                        "fourfold-hollow", height=0.8)
    # Common practice, no source: coverage = adsorbates per cell / cell area in 1x1 cells
    assert coverage(p22) == {"O": Fraction(1, 4)}
    assert coverage(r3) == {"CO": Fraction(1, 3)}
    assert coverage(c22) == {"O": Fraction(1, 2)}
    full = add_adsorbate(make_supercell(slab, [[2, 0], [0, 2]]), "H", "fcc-hollow", height=0.9, which="all")
    assert coverage(full) == {"H": Fraction(1)}
    # coverage survives a later supercell; molecules stay distinct
    big = make_supercell(r3, [[3, 0], [0, 3]])
    assert coverage(big) == {"CO": Fraction(1, 3)}
    ids = big.arrays[ADSORBATE_KEY]
    assert len(np.unique(ids[ids > 0])) == 3


def test_supercell_origin_map():
    slab = fcc111("Ag", (1, 1, 3), vacuum=6.0)
    big = make_supercell(slab, [[2, 1], [-1, 3]])
    origin, shift = origin_map(big)
    assert len(big) == 7 * len(slab)
    A = slab.cell[:2, :2]
    # Common practice, no source: every atom = its 1x1 origin + a 1x1 lattice translation
    expect = slab.positions[origin, :2] + shift @ A
    assert np.allclose(big.positions[:, :2], expect, atol=1e-9)
    assert np.allclose(big.positions[:, 2], slab.positions[origin, 2])
    assert big.info["surfgeo"]["supercell_matrix"] == [[2, 1], [-1, 3]]
    # same cell from ASE's make_supercell (3D matrix) holds the same atoms
    from ase.build import make_supercell as ase_make_supercell

    ref = ase_make_supercell(slab, [[2, 1, 0], [-1, 3, 0], [0, 0, 1]])
    ref.wrap()
    ours = big.copy()
    ours.wrap()
    key = lambda p: np.round(p, 6).tolist()  # noqa: E731
    # Source: ase.build.make_supercell gives the same set of positions
    assert sorted(map(key, ours.positions)) == sorted(map(key, ref.positions))


def test_bad_requests():
    slab = fcc100("Cu", (1, 1, 3), vacuum=6.0)
    with pytest.raises(StructureError, match="fcc-hollow"):
        add_adsorbate(slab, "O", "fcc-hollow", height=1.0)
    with pytest.raises(StructureError, match="exactly one of height and bond_length"):
        add_adsorbate(slab, "O", "top")
    with pytest.raises(StructureError, match="unknown adsorbate"):
        add_adsorbate(slab, "Xyz", "top", height=1.0)
    with pytest.raises(StructureError, match="out of range"):
        add_adsorbate(slab, "O", "top", height=1.0, which=3)
    with pytest.raises(StructureError, match="closer than the minimum"):
        add_adsorbate(slab, "O", "top", height=0.3)
    with pytest.raises(StructureError, match="anchor"):
        add_adsorbate(slab, "CO", "top", height=1.0, anchor="N")


def test_fractional_position_and_occupied_sites():
    slab = make_supercell(fcc111("Pt", (1, 1, 4), vacuum=8.0), [[2, 0], [0, 2]])
    s = add_adsorbate(slab, "O", position=[1 / 6, 1 / 6], height=1.2)
    a = add_adsorbate(slab, "O", "fcc-hollow", height=1.2)
    assert np.allclose(s.positions[-1], a.positions[-1])
    from surfgeo.slab.sites import find_sites

    # the taken fcc hollow is no longer offered; three remain in the (2x2) cell
    assert find_sites(a).get("fcc-hollow").multiplicity == 3
    assert close_contacts(a) == []


def test_coincidence_cell_of_hexagonal_lattices():
    a_s, a_f = 2.5, 2.0
    S = np.array([[a_s, 0], [-a_s / 2, a_s * math.sqrt(3) / 2]])
    F = np.array([[a_f, 0], [-a_f / 2, a_f * math.sqrt(3) / 2]])
    c = find_coincidence(S, F, 1e-6, 30)
    # Common practice, no source: 4 a_s = 5 a_f gives a (4x4) substrate / (5x5) film cell
    assert (c.substrate_cells, c.film_cells) == (16, 25)
    assert np.allclose(c.substrate_matrix @ S, c.film_matrix @ F, atol=1e-9)


def test_graphene_sqrt7_coincidence_and_incommensurate_record():
    slab = fcc111("Pt", (1, 1, 4), vacuum=10.0)
    g = Film.honeycomb("C", 2.46)
    s, rep = add_overlayer(slab, g, rotation=19.1066, height=3.3, max_strain=0.01)
    # Common practice, no source: (sqrt7 x sqrt7)R19.1 of the substrate holds (3x3) graphene cells
    assert rep.outcome == "coincidence"
    assert rep.coincidence["substrate_cells"] == 7 and rep.coincidence["film_cells"] == 9
    film = s.arrays[SUBLATTICE_KEY] > 0
    assert film.sum() == 18
    assert np.allclose(s.positions[film, 2], slab.positions[:, 2].max() + 3.3)
    assert close_contacts(s) == []
    t, rep2 = add_overlayer(slab, g, rotation=30.0, height=3.3, max_strain=0.005, max_cells=30)
    assert rep2.outcome == "incommensurate" and len(t) == len(slab)
    rec = t.info["surfgeo"]["overlayers"][-1]
    assert rec["outcome"] == "incommensurate"
    Fr = np.array(rec["rotated_vectors"])
    assert np.degrees(math.atan2(Fr[0, 1], Fr[0, 0])) == pytest.approx(30.0)


def test_coincidence_cell_too_large_to_build_is_reported_with_its_size():
    slab = fcc111("Pt", (1, 1, 4), vacuum=10.0)
    g = Film.honeycomb("C", 2.46)
    for kwargs in ({"max_cells": 5}, {"build": False}):
        s, rep = add_overlayer(slab, g, rotation=19.1066, height=3.3, max_strain=0.01, **kwargs)
        # not built: the slab keeps its atoms and the film stays a separate record ...
        assert rep.outcome == "incommensurate" and rep.atoms_added == 0 and len(s) == len(slab)
        # ... but the coincidence cell it would need is reported with its size
        # Common practice, no source: (sqrt7 x sqrt7)R19.1 of Pt(111) holds (3x3) graphene cells
        assert rep.coincidence["substrate_cells"] == 7 and rep.coincidence["film_cells"] == 9
        rec = s.info["surfgeo"]["overlayers"][-1]
        assert rec["outcome"] == "incommensurate" and rec["coincidence"]["substrate_cells"] == 7


def test_film_validation():
    with pytest.raises(StructureError, match="chemical symbol"):
        Film([[2, 0], [0, 2]], (("Qq", 0, 0),))
    with pytest.raises(StructureError, match="right-handed"):
        Film([[0, 2], [2, 0]], (("O", 0, 0),))


@settings(max_examples=10, deadline=None)
@given(st.integers(-2, 2), st.integers(-2, 2), st.integers(1, 3), st.integers(1, 3))
def test_supercell_origin_map_property(m12, m21, m11, m22):
    """Property: every atom of any supercell is its 1x1 origin plus a 1x1 lattice vector."""
    M = np.array([[m11, m12], [m21, m22]])
    assume(round(np.linalg.det(M)) > 0)
    slab = fcc100("Cu", (1, 1, 3), vacuum=6.0)
    big = make_supercell(slab, M)
    origin, shift = origin_map(big)
    assert len(big) == round(np.linalg.det(M)) * len(slab)
    expect = slab.positions[origin, :2] + shift @ slab.cell[:2, :2]
    assert np.allclose(big.positions[:, :2], expect, atol=1e-9)
    f = big.positions[:, :2] @ np.linalg.inv(big.cell[:2, :2])
    assert np.all((f > -1e-9) & (f < 1 - 1e-9))
    # no two atoms coincide (each lattice point of the cell taken once)
    assert close_contacts(big) == []
