"""Relaxation analysis of relaxed slabs against their reference (surfgeo.slab.relaxations)."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from ase.build import add_adsorbate, fcc100, fcc111
from ase.constraints import FixAtoms
from hypothesis import given, settings
from hypothesis import strategies as st

import surfgeo.slab.relaxations as relaxations
from surfgeo.errors import InputError, StructureError
from surfgeo.slab.relaxations import analyse_relaxation, find_adsorbates, match_atoms

A_PT = 3.92


def pt111(size=(3, 3, 5), vacuum=7.0):
    """Pt(111) in the surfgeo frame (a1 along x, 120 degrees between a1 and a2)."""
    slab = fcc111("Pt", size, a=A_PT, vacuum=vacuum)
    cell = np.array(slab.cell)
    cell[1] -= cell[0]
    slab.set_cell(cell, scale_atoms=False)
    slab.wrap()
    return slab


def synthetic_displacements(slab, rng, layer_dz, layer_shift, noise=0.01):
    """Known displacements: a rigid shift per layer (ASE tags: 1 = top) plus small per-atom noise."""
    tags = slab.get_tags()
    d = rng.normal(0.0, noise, (len(slab), 3))
    for t, dz in layer_dz.items():
        d[tags == t, 2] += dz
    for t, (dx, dy) in layer_shift.items():
        d[tags == t, :2] += (dx, dy)
    return d


def relaxed_copy(slab, d, perm=None, wrap=True):
    out = slab.copy()
    out.positions += d
    if perm is not None:
        out = out[perm]
    if wrap:
        out.wrap(pbc=True)  # as DFT codes do: into the cell along a1, a2 and c
    return out


LAYER_DZ = {1: -0.045, 2: 0.012, 3: -0.004}
LAYER_SHIFT = {1: (0.02, -0.01)}


@pytest.mark.parametrize("case", ["same order", "shuffled", "wrapped in-plane", "across c", "rotated frame"])
def test_known_displacements_are_recovered(case):
    rng = np.random.default_rng(7)
    ref = pt111()
    if case == "across c":
        # the reference straddles the cell boundary along c; the relaxed file wraps it back
        ref.positions[:, 2] -= ref.positions[:, 2].mean()
    d = synthetic_displacements(ref, rng, LAYER_DZ, LAYER_SHIFT)
    if case == "wrapped in-plane":
        d[:, :2] -= 0.03  # atoms at x = 0 cross the boundary and are wrapped to the far side
    perm = None if case == "same order" else rng.permutation(len(ref))
    rel = relaxed_copy(ref, d, perm)
    if case == "wrapped in-plane":
        assert np.any(np.abs(rel.positions - (ref.positions + d)[perm]) > 1.0)  # some atoms really wrapped
    if case == "across c":
        assert np.any(rel.positions[:, 2] > ref.cell[2, 2] / 2) and np.any(rel.positions[:, 2] < 1.0)
    if case == "rotated frame":
        t = math.radians(37.0)
        rot = np.array([[math.cos(t), -math.sin(t), 0], [math.sin(t), math.cos(t), 0], [0, 0, 1]])
        rel.set_cell(np.array(rel.cell) @ rot.T, scale_atoms=False)
        rel.positions = rel.positions @ rot.T
    report = analyse_relaxation(ref, rel)
    # Source: the displacements applied above (synthetic relaxation with known answer).
    assert np.abs(report.displacements - d).max() < 1e-6
    assert report.method == ("index" if case == "same order" else "distance")
    if perm is not None:
        assert np.array_equal(report.order, np.argsort(perm))


def test_layer_spacings_buckling_and_shifts():
    rng = np.random.default_rng(11)
    ref = pt111()
    d = synthetic_displacements(ref, rng, LAYER_DZ, LAYER_SHIFT, noise=0.005)
    report = analyse_relaxation(ref, relaxed_copy(ref, d, rng.permutation(len(ref))))
    tags = ref.get_tags()
    z = ref.positions[:, 2]
    assert [x.number for x in report.layers] == [1, 2, 3, 4, 5]
    d0 = A_PT / math.sqrt(3)  # From memory: fcc(111) layer spacing a/sqrt(3) (sources.md; ASE's fcc111)
    for s in report.spacings:
        up, lo = tags == s.upper, tags == s.lower
        expected = d[up, 2].mean() - d[lo, 2].mean()
        # Source: the applied displacements; d_ij(ideal) from ASE's fcc111 builder.
        assert s.ideal == pytest.approx(d0, abs=1e-9)
        assert s.delta == pytest.approx(expected, abs=1e-9)
        assert s.percent == pytest.approx(100 * expected / d0, abs=1e-7)
    assert report.spacings[0].label == "d12"
    for layer in report.layers:
        sel = tags == layer.number
        assert layer.atoms == 9
        assert layer.buckling_ideal == pytest.approx(0.0, abs=1e-9)
        assert layer.buckling == pytest.approx(np.ptp(z[sel] + d[sel, 2]), abs=1e-9)
        assert layer.lateral_shift == pytest.approx(tuple(d[sel, :2].mean(axis=0)), abs=1e-9)
        assert layer.dz == pytest.approx(d[sel, 2].mean(), abs=1e-9)
    # the norm of the top layer's mean applied shift (the noise included), not the nominal
    # (0.02, -0.01) within 0.01 A as before
    shift = d[tags == 1, :2].mean(axis=0)
    assert report.layers[0].lateral_shift_norm == pytest.approx(math.hypot(*shift), abs=1e-9)


def test_a_buckled_alloy_layer():
    ref = pt111((2, 2, 4))
    top = np.nonzero(ref.get_tags() == 1)[0]
    ref.symbols[top[:2]] = "Ni"  # a surface alloy: not adsorbates
    d = np.zeros((len(ref), 3))
    d[top[:2], 2] = -0.10
    d[top[2:], 2] = 0.05
    report = analyse_relaxation(ref, relaxed_copy(ref, d))
    assert not report.adsorbates
    top_layer = report.layers[0]
    assert top_layer.composition == {"Ni": 2, "Pt": 2}
    assert top_layer.buckling == pytest.approx(0.15, abs=1e-9)  # Source: the applied displacements
    assert top_layer.species_dz == pytest.approx({"Ni": -0.10, "Pt": 0.05}, abs=1e-9)


def test_fixed_atoms_are_reported():
    ref = pt111((2, 2, 4))
    ref.set_constraint(FixAtoms(mask=ref.get_tags() >= 3))
    d = np.zeros((len(ref), 3))
    d[ref.get_tags() == 1, 2] = -0.02
    report = analyse_relaxation(ref, relaxed_copy(ref, d))
    assert report.fixed_atoms == 8
    assert report.fixed_max_displacement == pytest.approx(0.0, abs=1e-9)


# ----------------------------------------------------------------------------- adsorbates
@pytest.mark.parametrize(("site", "label", "rho"), [
    ("ontop", "top", 0.0),
    ("bridge", "bridge", 0.5),
    ("fcc", "fcc hollow", 1 / math.sqrt(3)),
    ("hcp", "hcp hollow", 1 / math.sqrt(3)),
])
@pytest.mark.parametrize("size", [(1, 1, 4), (2, 2, 4), (3, 3, 4)])
def test_adsorbate_sites_on_fcc111(site, label, rho, size):
    h = 1.3
    slab = fcc111("Pt", size, a=A_PT, vacuum=7.0)
    add_adsorbate(slab, "O", h, site)
    slab.info.pop("adsorbate_info", None)
    rel = slab.copy()
    rel.positions[-1, 2] -= 0.1
    report = analyse_relaxation(slab, rel)
    (ads,) = report.adsorbates
    # Source: ASE's add_adsorbate site names on fcc111 and its height above the top layer.
    assert ads.site_ideal == label and ads.site == label
    assert ads.height_ideal == pytest.approx(h, abs=1e-9)
    assert ads.height == pytest.approx(h - 0.1, abs=1e-9)
    # Source: elementary geometry, bond b = sqrt(h^2 + rho^2) with rho the lateral distance
    # (rho = a_nn / 2 for bridge, a_nn / sqrt3 for the threefold hollows).
    a_nn = A_PT / math.sqrt(2)
    bond = math.sqrt((h - 0.1) ** 2 + (rho * a_nn) ** 2)
    n_bonds = {"top": 1, "bridge": 2, "fcc hollow": 3, "hcp hollow": 3}[label]
    assert len(ads.bonds) == n_bonds
    assert [b["length"] for b in ads.bonds] == pytest.approx([bond] * n_bonds, abs=1e-9)
    assert all(b["symbol"] == "Pt" for b in ads.bonds)
    assert not report.adsorbate_mask[:-1].any() and report.adsorbate_mask[-1]


def test_fourfold_hollow_on_fcc100_and_explicit_choice():
    slab = fcc100("Cu", (2, 2, 4), vacuum=7.0)
    add_adsorbate(slab, "O", 0.8, "hollow")
    slab.info.pop("adsorbate_info", None)
    report = analyse_relaxation(slab, slab.copy())
    # Source: ASE's add_adsorbate "hollow" site on fcc100.
    assert report.adsorbates[0].site == "fourfold hollow"
    assert len(report.adsorbates[0].bonds) == 4
    none = analyse_relaxation(slab, slab.copy(), adsorbates="none")
    assert not none.adsorbates and len(none.layers) == 5
    by_index = analyse_relaxation(slab, slab.copy(), adsorbates=[len(slab) - 1])
    assert by_index.adsorbates[0].index == len(slab) - 1
    with pytest.raises(InputError, match="do not occur"):
        find_adsorbates(slab, select=["C"])
    with pytest.raises(InputError, match="between 0 and"):
        find_adsorbates(slab, select=[99])


def test_adsorbate_detection_uses_the_bulk_species_of_the_metadata():
    slab = fcc100("Cu", (1, 1, 4), vacuum=7.0)
    add_adsorbate(slab, "O", 0.8, "hollow")
    slab.info.pop("adsorbate_info", None)
    slab.info["surfgeo"] = {"bulk": {"formula": "Cu"}}
    assert find_adsorbates(slab).tolist() == [False] * 4 + [True]
    slab.info["surfgeo"] = {"bulk": {"formula": "CuO"}}  # then O counts as substrate
    assert not find_adsorbates(slab).any()


# ----------------------------------------------------------------------------- refusing
def test_not_the_same_system():
    ref = pt111((2, 2, 3))
    with pytest.raises(StructureError, match="11 atoms but the reference has 12"):
        analyse_relaxation(ref, ref[:-1])
    other = ref.copy()
    other.symbols[0] = "Au"
    with pytest.raises(StructureError, match="Au1 Pt11 but the reference Pt12"):
        analyse_relaxation(ref, other)
    strained = ref.copy()
    strained.set_cell(np.array(ref.cell) * [1.02, 1.02, 1.0], scale_atoms=True)
    with pytest.raises(StructureError, match="surface cells differ"):
        analyse_relaxation(ref, strained)
    moved = ref.copy()
    moved.positions[0, 2] += 2.5
    with pytest.raises(StructureError, match="atom 0 .Pt. moved 2.50 A"):
        analyse_relaxation(ref, moved)
    assert analyse_relaxation(ref, moved, max_displacement=3.0).max_displacement == pytest.approx(2.5)


def test_index_matching_needs_the_same_order():
    ref = pt111((2, 2, 3))
    ref.symbols[0] = "Au"
    rel = ref[::-1]
    with pytest.raises(StructureError, match="order differs"):
        match_atoms(ref, rel, method="index")
    with pytest.raises(InputError, match="auto, index or distance"):
        match_atoms(ref, rel, method="nearest")
    assert match_atoms(ref, rel).method == "distance"


def test_order_note_only_when_the_file_keeps_the_reference_order():
    # Regression: a shuffled single-element file was told "the file keeps the species order ...
    # use the index method", which is true of the species only and would be wrong advice.
    rng = np.random.default_rng(4)
    ref = pt111((3, 3, 4))
    shuffled = ref[rng.permutation(len(ref))]
    match = match_atoms(ref, shuffled)
    assert match.method == "distance" and match.note == ""
    assert analyse_relaxation(ref, shuffled).notes == []
    # species grouped as a VASP file groups them: same species sequence, atoms reordered
    alloy = ref.copy()
    alloy.symbols[:9] = "Ni"  # the bottom layer (ASE's fcc111 lists layers bottom first)
    grouped = alloy[np.concatenate([rng.permutation(9), 9 + rng.permutation(len(ref) - 9)])]
    assert grouped.get_chemical_symbols() == alloy.get_chemical_symbols()
    assert match_atoms(alloy, grouped).note == ""
    # the reference order kept, but two neighbouring atoms each moved past the midpoint towards
    # the other's site: only then is "matched by distance instead of by index" worth a note
    top = np.nonzero(ref.get_tags() == 1)[0]
    i = int(top[0])
    j = int(top[np.argmin(np.linalg.norm(ref.positions[top[1:]] - ref.positions[i], axis=1)) + 1])
    swapped = ref.copy()
    swapped.positions[i] = ref.positions[j] + 0.05 * (ref.positions[i] - ref.positions[j])
    swapped.positions[j] = ref.positions[i] + 0.05 * (ref.positions[j] - ref.positions[i])
    match = match_atoms(ref, swapped)
    # Source: the construction above (each of the two atoms ends 0.05 of a bond from the other's site)
    assert match.order[i] == j and match.order[j] == i
    assert "lists the atoms in the reference order, but 2 of them" in match.note
    assert "use the index method" in match.note


# ----------------------------------------------------------------------------- the assignment
def _spy(monkeypatch, module, name):
    calls = []
    real = getattr(module, name)

    def spy(*args, **kwargs):
        calls.append(name)
        return real(*args, **kwargs)

    monkeypatch.setattr(module, name, spy)
    return calls


def test_assignment_is_optimal_against_exhaustive_search(monkeypatch):
    import scipy.optimize

    calls = _spy(monkeypatch, scipy.optimize, "linear_sum_assignment")
    rng = np.random.default_rng(5)
    ref = fcc100("Cu", (4, 1, 2), vacuum=6.0)  # 8 atoms: 8! = 40320 permutations
    rel = ref.copy()
    rel.positions += rng.uniform(-0.3, 0.3, rel.positions.shape)
    # atoms 0 and 1 both move towards +x, so that 1's nearest relaxed atom is 0's: the nearest
    # neighbours do not form a one-to-one map and the assignment problem must be solved
    a1 = np.array(ref.cell[0]) / 4  # the nearest-neighbour vector along x in this 4x1 cell
    i, j = 0, int(np.argmin(np.linalg.norm(ref.positions - ref.positions[0] - a1, axis=1)))
    rel.positions[i] = ref.positions[i] + 0.6 * a1
    rel.positions[j] = ref.positions[j] + 0.45 * a1
    rel.wrap()
    match = match_atoms(ref, rel, method="distance")
    assert calls  # the solver really ran
    got = float((match.displacements ** 2).sum())
    cell = np.array(ref.cell)
    f = (rel.positions[None, :, :] - ref.positions[:, None, :]) @ np.linalg.inv(cell)
    f[..., :2] -= np.round(f[..., :2])
    images = []
    for off in itertools.product((-1, 0, 1), repeat=2):
        g = f.copy()
        g[..., :2] += off
        images.append(((g @ cell) ** 2).sum(-1))
    cost = np.min(images, axis=0)
    assert len(set(np.argmin(cost, axis=1).tolist())) < 8
    # Source: the definition of the assignment problem, solved here by exhaustive search.
    brute = min(cost[np.arange(8), list(p)].sum() for p in itertools.permutations(range(8)))
    assert got == pytest.approx(brute, abs=1e-9)
    assert match.order[i] == i and match.order[j] == j


def test_sparse_and_dense_assignments_agree(monkeypatch):
    import scipy.optimize
    import scipy.sparse.csgraph

    dense_calls = _spy(monkeypatch, scipy.optimize, "linear_sum_assignment")
    sparse_calls = _spy(monkeypatch, scipy.sparse.csgraph, "min_weight_full_bipartite_matching")
    rng = np.random.default_rng(9)
    ref = pt111((4, 4, 4))
    rel = ref.copy()
    rel.positions += rng.uniform(-1.3, 1.3, rel.positions.shape)
    rel = rel[rng.permutation(len(rel))]
    rel.wrap()
    dense = match_atoms(ref, rel, method="distance")
    monkeypatch.setattr(relaxations, "DENSE_LIMIT", 0)
    sparse = match_atoms(ref, rel, method="distance")
    assert dense_calls and sparse_calls
    # Source: both solve the same minimum-weight perfect matching (scipy's two solvers).
    assert float((sparse.displacements ** 2).sum()) == pytest.approx(float((dense.displacements ** 2).sum()),
                                                                       abs=1e-9)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), radius=st.floats(0.0, 0.6))
def test_random_relaxations_shuffled_and_wrapped(seed, radius):
    rng = np.random.default_rng(seed)
    ref = pt111((2, 3, 4))
    v = rng.normal(size=(len(ref), 3))
    d = v / np.linalg.norm(v, axis=1)[:, None] * rng.uniform(0, radius, (len(ref), 1))
    rel = relaxed_copy(ref, d, rng.permutation(len(ref)))
    rel.positions += rng.integers(-2, 3, (len(ref), 2)) @ np.array(ref.cell)[:2]  # arbitrary images
    report = analyse_relaxation(ref, rel)
    # Source: the applied displacements (smaller than half the nearest-neighbour distance, so the
    # minimum-distance assignment is the true one).
    assert np.abs(report.displacements - d).max() < 1e-6


def test_report_table_and_dict():
    ref = pt111((2, 2, 3))
    add_adsorbate(ref, "O", 1.2, "fcc")
    report = analyse_relaxation(ref, ref.copy())
    text = report.table()
    assert "d12" in text and "fcc hollow" in text
    d = report.to_dict()
    assert d["spacings"][0]["label"] == "d12" and d["adsorbates"][0]["symbol"] == "O"
    assert len(d["displacements"]) == len(ref)


def test_adatoms_marked_by_the_model_builder(tmp_path):
    import ase.io

    slab = fcc111("Pt", (2, 2, 4), a=A_PT, vacuum=7.0)
    add_adsorbate(slab, "Pt", 2.2, "hcp")  # a Pt adatom: same species as the substrate
    slab.info.pop("adsorbate_info", None)
    assert not find_adsorbates(slab).any()  # species alone cannot tell
    mark = np.zeros(len(slab), dtype=int)
    mark[-1] = 1
    slab.arrays["surfgeo_adsorbate"] = mark  # as surfgeo.slab.adsorbates records molecules
    ase.io.write(tmp_path / "m.extxyz", slab)
    back = ase.io.read(tmp_path / "m.extxyz")  # the mark survives extended XYZ
    report = analyse_relaxation(back, slab.copy())
    (ads,) = report.adsorbates
    # Source: ASE's add_adsorbate "hcp" site and height.
    assert ads.site == "hcp hollow" and ads.height == pytest.approx(2.2, abs=1e-6)
    assert len(report.layers) == 4


def test_adsorbates_on_both_faces():
    slab = fcc100("Cu", (2, 2, 5), vacuum=7.0)
    add_adsorbate(slab, "O", 0.9, "hollow")
    slab.info.pop("adsorbate_info", None)
    z = slab.positions[:, 2]
    bottom_hollow = slab.positions[(slab.get_tags() == 4)][0].copy()  # over a 4th-layer atom
    bottom_hollow[2] = z[slab.get_tags() == 5].min() - 0.9
    slab.append("O")
    slab.positions[-1] = bottom_hollow
    rel = slab.copy()
    rel.positions[-1, 2] += 0.05  # the bottom O moves towards the slab: 0.05 A lower height
    report = analyse_relaxation(slab, rel)
    sides = {a.side: a for a in report.adsorbates}
    assert set(sides) == {"top", "bottom"}
    # Source: the construction above (heights measured outwards from each face).
    assert sides["top"].height == pytest.approx(0.9, abs=1e-9)
    assert sides["bottom"].height_ideal == pytest.approx(0.9, abs=1e-9)
    assert sides["bottom"].height == pytest.approx(0.85, abs=1e-9)
    assert sides["bottom"].site == "fourfold hollow" == sides["top"].site


def test_mark_arrays_are_those_of_the_model_builder():
    from surfgeo.slab.supercell import ADSORBATE_KEY, SUBLATTICE_KEY

    assert set(relaxations.MARK_ARRAYS) == {ADSORBATE_KEY, SUBLATTICE_KEY}
