"""Adsorption sites found from the geometry (surfgeo.slab.sites)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase.build import add_adsorbate as ase_add_adsorbate
from ase.build import fcc100, fcc110, fcc111, fcc211, hcp0001
from hypothesis import given, settings
from hypothesis import strategies as st

from surfgeo.errors import StructureError
from surfgeo.slab.sites import find_sites
from surfgeo.slab.supercell import make_supercell

# ASE's own site names on its builders, translated to ours. The positions come from ASE's
# add_adsorbate, an implementation independent of ours.
ASE_NAMES = {
    "fcc111": {"ontop": "top", "bridge": "bridge", "fcc": "fcc-hollow", "hcp": "hcp-hollow"},
    "fcc100": {"ontop": "top", "bridge": "bridge", "hollow": "fourfold-hollow"},
    "fcc110": {"ontop": "top", "shortbridge": "short-bridge", "longbridge": "long-bridge",
               "hollow": "fourfold-hollow"},
}
BUILDERS = {"fcc111": fcc111, "fcc100": fcc100, "fcc110": fcc110}


def _lateral_distance_mod_cell(p, q, cell2):
    d = (np.asarray(p)[:2] - np.asarray(q)[:2]) @ np.linalg.inv(cell2)
    d -= np.rint(d)
    return float(np.linalg.norm(d @ cell2))


@pytest.mark.parametrize("face", sorted(ASE_NAMES))
@pytest.mark.parametrize("element", ["Pt", "Cu", "Al"])
def test_site_positions_match_ase_add_adsorbate(face, element):
    slab = BUILDERS[face](element, size=(1, 1, 4), vacuum=8.0)
    sites = find_sites(slab)
    cell2 = slab.cell[:2, :2]
    for ase_name, ours in ASE_NAMES[face].items():
        ref = slab.copy()
        ase_add_adsorbate(ref, "O", 1.5, ase_name)
        target = ref.positions[-1]
        cls = sites.get(ours)
        dist = min(_lateral_distance_mod_cell(p, target, cell2) for p in cls.positions)
        # Source: ASE ase.build.add_adsorbate site names on fcc111/fcc100/fcc110 (same lateral position)
        assert dist < 1e-8, (face, ase_name, dist)
    # no site classes beyond ASE's list on these flat faces
    assert sorted(sites.names) == sorted(ASE_NAMES[face].values())


@pytest.mark.parametrize("face", sorted(ASE_NAMES))
def test_ase_sites_in_a_supercell_all_found(face):
    slab = BUILDERS[face]("Pt", size=(1, 1, 4), vacuum=8.0)
    big = make_supercell(slab, [[2, 0], [0, 3]])
    sites = find_sites(big)
    small = find_sites(slab)
    for c in small:
        # Common practice, no source: a (2x3) cell holds 6 copies of every 1x1 site
        assert sites.get(c.name).multiplicity == 6 * c.multiplicity
    for ase_name, ours in ASE_NAMES[face].items():
        ref = slab.copy()
        ase_add_adsorbate(ref, "O", 1.5, ase_name)
        t = ref.positions[-1]
        for i in range(2):
            for j in range(3):
                target = t + i * slab.cell[0] + j * slab.cell[1]
                d = min(
                    _lateral_distance_mod_cell(p, target, big.cell[:2, :2]) for p in sites.get(ours).positions
                )
                # Source: ASE add_adsorbate positions repeated over the supercell
                assert d < 1e-8


def test_wyckoff_multiplicities_and_site_symmetry_on_low_index_faces():
    expect = {
        # From memory: International Tables Vol. A, plane group p3m1: 1a, 1b, 1c (3m), 3d (.m.)
        "fcc111": {"top": (1, "3m"), "bridge": (3, "m"), "fcc-hollow": (1, "3m"), "hcp-hollow": (1, "3m")},
        # From memory: International Tables Vol. A, p4mm: 1a, 1b (4mm), 2c (2mm)
        "fcc100": {"top": (1, "4mm"), "bridge": (2, "2mm"), "fourfold-hollow": (1, "4mm")},
        # From memory: International Tables Vol. A, p2mm: 1a-1d (2mm)
        "fcc110": {"top": (1, "2mm"), "short-bridge": (1, "2mm"), "long-bridge": (1, "2mm"),
                   "fourfold-hollow": (1, "2mm")},
    }
    for face, table in expect.items():
        sites = find_sites(BUILDERS[face]("Ni", size=(1, 1, 5), vacuum=8.0))
        got = {c.name: (c.multiplicity, c.symmetry) for c in sites}
        assert got == table, face


def _spglib_site_symmetry(slab, point):
    """Order of the site-symmetry group of a probe atom at ``point`` and whether it holds
    mirrors, from spglib's layer group (independent of surfgeo)."""
    import spglib

    s = slab.copy()
    s.append("Xe")
    s.positions[-1] = point
    cell = np.array(s.cell[:])
    cell[2] = [0, 0, s.positions[:, 2].max() - s.positions[:, 2].min() + 20.0]
    frac = np.linalg.solve(cell.T, (s.positions - [0, 0, s.positions[:, 2].min() - 10.0]).T).T
    frac[:, :2] -= np.floor(frac[:, :2])
    data = spglib.get_symmetry_layerdataset(
        (cell, frac, s.numbers), aperiodic_dir=2, symprec=1e-4, _throw=True
    )
    x = frac[-1]
    order, mirror = 0, False
    for W, t in zip(data.rotations, data.translations, strict=True):
        y = W @ x + t - x
        y[:2] -= np.rint(y[:2])
        if np.linalg.norm(y @ cell) < 1e-3:
            order += 1
            mirror |= round(np.linalg.det(W)) == -1
    return order, mirror


ORDER = {"1": 1, "m": 2, "2": 2, "2mm": 4, "3": 3, "3m": 6, "4": 4, "4mm": 8, "6": 6, "6mm": 12}


@pytest.mark.parametrize("maker", [
    lambda: fcc111("Pt", (1, 1, 4), vacuum=8.0),
    lambda: fcc100("Pt", (1, 1, 4), vacuum=8.0),
    lambda: fcc110("Pt", (1, 1, 4), vacuum=8.0),
    lambda: fcc211("Pt", (3, 1, 4), vacuum=8.0),
    lambda: hcp0001("Ru", (1, 1, 4), vacuum=8.0),
])
def test_site_symmetry_agrees_with_spglib(maker):
    slab = maker()
    for c in find_sites(slab):
        p = c.positions[0] + [0, 0, 1.3]
        order, mirror = _spglib_site_symmetry(slab, p)
        # Source: spglib layer-group operations fixing a probe atom at the site
        assert ORDER[c.symmetry] == order, (c.name, c.symmetry, order)
        assert ("m" in c.symmetry) == mirror, c.name


def test_fcc_and_hcp_hollows_follow_the_abc_stacking_rule():
    for element, maker in (("Pt", fcc111), ("Ru", hcp0001)):
        slab = maker(element, (1, 1, 6), vacuum=8.0)
        tags = slab.get_tags()  # ASE: layer number from the top
        cell2 = slab.cell[:2, :2]
        sites = find_sites(slab)

        def layers_below(p, slab=slab, tags=tags, cell2=cell2):
            return sorted(
                int(tags[i]) for i in range(len(slab))
                if _lateral_distance_mod_cell(slab.positions[i], p, cell2) < 0.05
            )

        hcp = layers_below(sites.get("hcp-hollow").positions[0])
        fcc = layers_below(sites.get("fcc-hollow").positions[0])
        # Common practice, no source: the hcp hollow lies above a second-layer atom, the fcc
        # hollow above a third-layer atom (ABC stacking) and above no atom at all on hcp(0001) (AB)
        assert hcp[0] == 2
        if maker is fcc111:
            assert fcc[0] == 3
        else:
            assert fcc == []


def test_stepped_face_sites_and_regions():
    slab = fcc211("Pt", (3, 1, 4), vacuum=8.0)
    sites = find_sites(slab)
    assert sites.mode == "open"
    edge = sites.atom_regions["step-edge"]
    bottom = sites.atom_regions["step-bottom"]
    z = slab.positions[:, 2]
    # Common practice, no source: the step-edge row is the outermost row, the step bottom the
    # lowest exposed row (fcc(211) = 3(111)x(100), three rows per terrace)
    assert z[edge].max() == pytest.approx(z.max())
    assert len(edge) == len(bottom) == len(sites.atom_regions["terrace"]) == 1
    assert z[bottom][0] < z[sites.atom_regions["terrace"]][0] < z[edge][0]
    for name in ("step-edge-top", "step-edge-bridge", "terrace-top", "step-bottom-top",
                 "step-fourfold-hollow", "step-edge-fcc-hollow", "step-edge-hcp-hollow"):
        assert sites.get(name).multiplicity >= 1
    # the bridge along the edge joins two step-edge atoms one lattice vector apart
    br = sites.get("step-edge-bridge")
    assert set(br.members.ravel()) == set(edge)
    assert br.bond == pytest.approx(np.linalg.norm(slab.cell[1]))


def test_unknown_site_lists_valid_names():
    sites = find_sites(fcc100("Cu", (1, 1, 3), vacuum=6.0))
    with pytest.raises(StructureError, match="fourfold-hollow"):
        sites.get("fcc-hollow")


def test_bad_mode_and_empty_substrate():
    slab = fcc100("Cu", (1, 1, 3), vacuum=6.0)
    with pytest.raises(StructureError, match="mode"):
        find_sites(slab, mode="sparse")
    with pytest.raises(StructureError, match="substrate"):
        find_sites(slab, substrate=np.zeros(len(slab), bool))


@settings(max_examples=8, deadline=None)
@given(st.integers(1, 3), st.integers(0, 2), st.integers(1, 3))
def test_multiplicities_scale_with_the_cell(m11, m12, m22):
    """Property: in a supercell of index n every site class appears n times as often."""
    slab = fcc111("Cu", (1, 1, 4), vacuum=6.0)
    M = [[m11, m12], [0, m22]]
    n = m11 * m22
    base = {c.name: c.multiplicity for c in find_sites(slab)}
    big = {c.name: c.multiplicity for c in find_sites(make_supercell(slab, M))}
    assert big == {k: v * n for k, v in base.items()}


def test_site_to_dict_and_table():
    sites = find_sites(fcc111("Cu", (1, 1, 3), vacuum=6.0))
    d = sites.to_dict()
    assert d["mode"] == "dense" and len(d["sites"]) == 4
    assert "fcc-hollow" in sites.table()
    # Source: ASE reference state, Cu fcc a = 3.61 A; nearest neighbours a / sqrt(2)
    assert sites.nn_distance == pytest.approx(3.61 / math.sqrt(2), rel=1e-9)


def test_sites_of_a_surfgeo_stepped_slab():
    from surfgeo.slab.steps import stepped_slab

    s = stepped_slab("Pt", "4(111)x(100)", layers=12)
    sites = find_sites(s)
    # Source: step notation (Lang, Joyner and Somorjai 1972): a 4-row terrace, one step-edge row,
    # one step-bottom row, two terrace rows per cell
    assert [len(sites.atom_regions[k]) for k in ("step-edge", "terrace", "step-bottom")] == [1, 2, 1]
    # a (100) step: the riser holds a fourfold hollow
    assert sites.get("step-fourfold-hollow").multiplicity == 1
    s2 = stepped_slab("Pt", "4(111)x(111)", layers=12)
    names = find_sites(s2).names
    # a (111) step: the riser holds threefold hollows instead
    assert "step-fourfold-hollow" not in names
    assert {"step-fcc-hollow", "step-hcp-hollow"} <= set(names)
