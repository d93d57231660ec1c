"""Cutting faces into slabs (surfgeo.slab.cut) against ASE's builders and published formulas."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from ase.build import (
    bcc100,
    bcc110,
    bcc111,
    diamond111,
    fcc100,
    fcc110,
    fcc111,
    fcc211,
    hcp0001,
    hcp10m10,
)
from ase.data import atomic_numbers, reference_states
from ase.neighborlist import neighbor_list
from hypothesis import given, settings
from hypothesis import strategies as st

from surfgeo.errors import StructureError
from surfgeo.slab.bulk import bulk_crystal
from surfgeo.slab.cut import face_geometry, surface_slab, terminations
from surfgeo.slab.layers import group_layers
from surfgeo.slab.symmetry import layer_symmetry


# ---------------------------------------------------------------------------------- fingerprints
def _layers(atoms, tol=0.05):
    z = atoms.positions[:, 2]
    return group_layers(z, tol)


def _images(cell2d, n=3):
    r = range(-n, n + 1)
    return np.array([(i, j) for i in r for j in r], dtype=float) @ cell2d


def fingerprint(atoms, top: int = 4) -> dict:
    """Frame-independent description of the outer ``top`` layers of a slab."""
    cell2d = np.asarray(atoms.cell[:2, :2])
    area = abs(np.linalg.det(cell2d))
    layers = _layers(atoms)[::-1][:top]  # top first
    pos = atoms.positions
    heights = np.array([pos[idx, 2].mean() for idx in layers])
    imgs = _images(cell2d)
    shells = []
    for idx in layers:
        d = pos[idx, None, :2] - pos[idx[0], :2]  # from the layer's first atom
        dist = np.linalg.norm((d[:, None, :] + imgs[None, :, :]).reshape(-1, 2), axis=1)
        uniq = np.unique(np.round(dist[dist > 1e-6], 4))
        shells.append(uniq[:3].tolist())
    registry = []
    for i, j in itertools.combinations(range(len(layers)), 2):
        d = pos[layers[j], None, :2] - pos[layers[i], :2][None, :, :]
        dist = np.linalg.norm((d.reshape(-1, 1, 2) + imgs[None, :, :]).reshape(-1, 2), axis=1)
        registry.append(round(float(dist.min()), 4))
    return {
        "spacings": np.round(-np.diff(heights), 4).tolist(),
        "area_per_atom": [round(area / len(idx), 4) for idx in layers],
        "shells": shells,
        "registry": registry,
    }


def _match_any_termination(bulk, miller, nlayers, reference) -> dict:
    fp_ref = fingerprint(reference)
    n_terms = len(terminations(bulk, miller))
    found = []
    for t in range(n_terms):
        ours = surface_slab(bulk, miller, layers=nlayers, vacuum=8.0, termination=t, size=(2, 2))
        fp = fingerprint(ours)
        found.append(fp)
        keys = ("spacings", "area_per_atom", "registry")
        # the fingerprints are rounded to 1e-4 A, so two equal structures differ by at most 1e-4
        same = all(np.allclose(fp[k], fp_ref[k], atol=2e-4) for k in keys)
        same_shells = all(
            np.allclose(a, b, atol=2e-4) for a, b in zip(fp["shells"], fp_ref["shells"], strict=True)
        )
        if same and same_shells:
            return fp
    raise AssertionError(f"no termination matches ASE:\nASE {fp_ref}\nours {found}")


def _a(symbol):
    return reference_states[atomic_numbers[symbol]]["a"]


# Source: ASE's own builders (ase.build.fcc100 ... diamond111) as an independent reference for
# layer spacings, cell area per atom, in-plane neighbour distances and stacking registry.
ASE_CASES = [
    ("Pt", "fcc", (1, 0, 0), lambda: fcc100("Pt", (2, 2, 5), a=_a("Pt"), vacuum=6.0)),
    ("Pt", "fcc", (1, 1, 0), lambda: fcc110("Pt", (2, 2, 5), a=_a("Pt"), vacuum=6.0)),
    ("Pt", "fcc", (1, 1, 1), lambda: fcc111("Pt", (2, 2, 5), a=_a("Pt"), vacuum=6.0)),
    ("Pt", "fcc", (2, 1, 1), lambda: fcc211("Pt", (3, 1, 3), a=_a("Pt"), vacuum=6.0)),
    ("Fe", "bcc", (1, 0, 0), lambda: bcc100("Fe", (2, 2, 5), a=_a("Fe"), vacuum=6.0)),
    ("Fe", "bcc", (1, 1, 0), lambda: bcc110("Fe", (2, 2, 5), a=_a("Fe"), vacuum=6.0)),
    ("Fe", "bcc", (1, 1, 1), lambda: bcc111("Fe", (2, 2, 6), a=_a("Fe"), vacuum=6.0)),
    ("Ru", "hcp", (0, 0, 0, 1), lambda: hcp0001("Ru", (2, 2, 5), a=2.70, c=2.70 * 1.584, vacuum=6.0)),
    ("Ru", "hcp", (1, 0, -1, 0), lambda: hcp10m10("Ru", (2, 2, 6), a=2.70, c=2.70 * 1.584, vacuum=6.0)),
    ("Si", "diamond", (1, 1, 1), lambda: diamond111("Si", (2, 2, 6), a=_a("Si"), vacuum=6.0)),
]


@pytest.mark.parametrize("element,structure,miller,make", ASE_CASES, ids=lambda v: str(v))
def test_against_ase_builders(element, structure, miller, make):
    reference = make()
    nlayers = len(_layers(reference))
    bulk = bulk_crystal(element, structure, a=2.70 if element == "Ru" else None,
                        c=2.70 * 1.584 if element == "Ru" else None)
    fp = _match_any_termination(bulk, miller, nlayers, reference)
    assert len(fp["spacings"]) >= 3


def test_fcc111_abc_and_hcp0001_ab_registry():
    # Common practice, no source (sources.md): fcc(111) stacks ABC, hcp(0001) AB: the third layer
    # sits over the first on hcp, shifted by a/sqrt(3) on fcc.
    a = _a("Cu")
    fp = fingerprint(surface_slab("Cu", (1, 1, 1), layers=4))
    d_nn = a / math.sqrt(2)
    assert fp["registry"][1] == pytest.approx(d_nn / math.sqrt(3), abs=1e-4)  # layers 1-3
    assert fp["registry"][2] == pytest.approx(0.0, abs=1e-4)  # layers 1-4 (A over A)
    fp = fingerprint(surface_slab("Ru", (0, 0, 0, 1), layers=4))
    assert fp["registry"][1] == pytest.approx(0.0, abs=1e-4)


# ---------------------------------------------------------------------------------- formulas
def fcc_spacing(a, h, k, l):
    # Source: sources.md (J. F. Nicholas 1965; Oura et al. 2003), fcc interlayer spacing;
    # From memory: a/sqrt(N) if h, k, l all odd, else a/(2 sqrt(N)).
    n2 = h * h + k * k + l * l
    return a / math.sqrt(n2) if all(v % 2 for v in (h, k, l)) else a / (2 * math.sqrt(n2))


def bcc_spacing(a, h, k, l):
    # Source: sources.md, bcc interlayer spacing; From memory: a/(2 sqrt(N)) if h+k+l odd, else a/sqrt(N).
    n2 = h * h + k * k + l * l
    return a / (2 * math.sqrt(n2)) if (h + k + l) % 2 else a / math.sqrt(n2)


CU = bulk_crystal("Cu")
FE = bulk_crystal("Fe")
RU = bulk_crystal("Ru")
SI = bulk_crystal("Si")
NACL = bulk_crystal("NaCl", "rocksalt", a=5.64)


def _reduced(h, k, l):
    g = math.gcd(h, k, l)
    return h // g, k // g, l // g


@pytest.mark.parametrize("bulk,formula", [(CU, fcc_spacing), (FE, bcc_spacing)], ids=["fcc", "bcc"])
def test_spacing_formula_all_faces_up_to_9(bulk, formula):
    """Every face with |h|, |k|, |l| <= 9 (up to the cubic symmetry, which maps faces onto
    equivalent ones) against the fcc/bcc layer-spacing formula and area x d = V_prim."""
    a = bulk.info["surfgeo_bulk"]["a"]
    vprim = a**3 / len(bulk)
    seen = set()
    for h, k, l in itertools.product(range(10), repeat=3):
        if (h, k, l) == (0, 0, 0) or not h >= k >= l:
            continue
        hkl = _reduced(h, k, l)
        if hkl in seen:
            continue
        seen.add(hkl)
        f = face_geometry(bulk, hkl)
        assert f.layer_spacing == pytest.approx(formula(a, *hkl), rel=1e-9), hkl
        # Source: sources.md: area of the primitive surface cell = V_prim / d
        assert f.area * f.plane_spacing == pytest.approx(vprim, rel=1e-9), hkl
        assert f.layers_per_period == 1


@settings(max_examples=120, deadline=None)
@given(st.tuples(*[st.integers(-9, 9)] * 3).filter(lambda v: any(v)))
def test_spacing_formula_random_signs(hkl):
    # Source: sources.md fcc/bcc spacing formulas (see above); property test over signs and orders
    h, k, l = _reduced(*hkl)
    for bulk, formula in ((CU, fcc_spacing), (FE, bcc_spacing)):
        a = bulk.info["surfgeo_bulk"]["a"]
        f = face_geometry(bulk, (h, k, l))
        assert f.layer_spacing == pytest.approx(formula(a, abs(h), abs(k), abs(l)), rel=1e-9)
        # cell conventions: a1 along +x, right-handed, stacking vector points out of the surface
        A = f.cell2d
        assert A[0, 1] == 0.0 and A[0, 0] > 0
        assert np.linalg.det(A) > 0
        assert f.stacking[2] > 0
        # reduced basis: |a1| <= |a2| and |a1 . a2| <= |a1|^2 / 2 (Gauss-Lagrange)
        # Common practice, no source
        n1, n2 = np.linalg.norm(A, axis=1)
        assert n1 <= n2 * (1 + 1e-9)
        assert abs(A[0] @ A[1]) <= n1 * n1 / 2 * (1 + 1e-9)
        # the stacking vector has the smallest in-plane part the lattice allows
        for i, j in itertools.product((-1, 0, 1), repeat=2):
            alt = f.stacking[:2] + np.array([i, j]) @ A
            assert np.linalg.norm(alt) >= np.linalg.norm(f.stacking[:2]) - 1e-9


@pytest.mark.parametrize(
    "bulk,miller",
    [(RU, (1, 0, -1, 1)), (RU, (1, 1, -2, 3)), (SI, (3, 1, 1)), (NACL, (2, 1, 0)), (NACL, (1, 1, 1))],
)
def test_area_times_period_is_primitive_volume(bulk, miller):
    # Source: sources.md: area of the primitive surface cell x lattice-plane spacing = V_prim
    f = face_geometry(bulk, miller)
    vcell = abs(np.linalg.det(bulk.cell[:]))
    n_prim = len(f.basis_symbols)
    assert f.area * f.plane_spacing == pytest.approx(vcell * n_prim / len(bulk), rel=1e-9)


def test_four_index_equals_three_index():
    f4 = face_geometry(RU, (1, 0, -1, 0))
    f3 = face_geometry(RU, (1, 0, 0))
    assert np.allclose(f4.cell2d, f3.cell2d)
    assert f4.miller == (1, 0, -1, 0)
    # Common practice, no source: hcp(10-10) is rectangular a x c with alternating spacings
    # a/(2 sqrt 3) and a/sqrt 3
    a, c = RU.info["surfgeo_bulk"]["a"], RU.info["surfgeo_bulk"]["c"]
    assert sorted(f4.lattice.lengths) == pytest.approx([a, c])
    assert sorted(f4.layer_spacings) == pytest.approx([a / (2 * math.sqrt(3)), a / math.sqrt(3)])


# ---------------------------------------------------------------------------------- slabs
def test_cell_conventions_and_vacuum():
    s = surface_slab("Pt", (2, 1, 1), layers=9, vacuum=11.5, size=(2, 3))
    cell = s.cell[:]
    assert cell[0, 1] == 0 and cell[0, 2] == 0 and cell[1, 2] == 0
    assert np.cross(cell[0], cell[1])[2] > 0
    assert all(s.pbc)
    z = s.positions[:, 2]
    gap = cell[2, 2] - (z.max() - z.min())
    assert gap == pytest.approx(11.5)
    # c keeps the lattice stacking: its in-plane part is that of the stacking vector (reduced)
    assert np.linalg.norm(cell[2, :2]) < np.linalg.norm(cell[1, :2])
    assert len(s) == 9 * 6
    assert s.get_tags().max() == 9 and s.get_tags()[-1] == 1
    rec = s.info["surfgeo"]
    assert rec["supercell_matrix"] == [[2, 0], [0, 3]]
    assert np.allclose(np.array(rec["supercell_matrix"]) @ rec["surface_cell"], cell[:2, :2])


def test_orthogonal_cell():
    s = surface_slab("Pt", (5, 3, 3), layers=10, vacuum=10.0, orthogonal=True)
    assert np.allclose(s.cell[2, :2], 0.0)
    with pytest.raises(StructureError, match="orthogonal"):
        surface_slab("Pt", (5, 3, 3), layers=10, vacuum=0, orthogonal=True)


def test_bulk_periodic_cell_has_bulk_coordination():
    # Common practice, no source: every atom of fcc has 12 nearest neighbours at a/sqrt(2) and
    # bcc 8 at a sqrt(3)/2; a bulk-periodic slab cell (no vacuum) must reproduce the bulk.
    for bulk, hkl, nn, dist in ((CU, (5, 3, 3), 12, 3.61 / math.sqrt(2)),
                                (CU, (3, 3, 2), 12, 3.61 / math.sqrt(2)),
                                (FE, (3, 1, 0), 8, 2.87 * math.sqrt(3) / 2)):
        f = face_geometry(bulk, hkl)
        s = surface_slab(bulk, hkl, layers=6 * f.layers_per_period, vacuum=0)
        i, d = neighbor_list("id", s, dist * 1.05)
        counts = np.bincount(i, minlength=len(s))
        assert np.all(counts == nn), hkl
        assert np.allclose(d, dist, atol=1e-6)


def test_rectangular_cells():
    hexagonal = surface_slab("Pt", (1, 1, 1), layers=3, rectangular=True)
    a1, a2 = np.linalg.norm(hexagonal.cell[:2, :2], axis=1)
    # Common practice, no source: the rectangular cell of a hexagonal lattice is a x a sqrt(3)
    assert a2 / a1 == pytest.approx(math.sqrt(3))
    assert abs(hexagonal.cell[0, :2] @ hexagonal.cell[1, :2]) < 1e-9
    assert len(hexagonal) == 6
    # Regression: the rectangular cell used to be [[-1, -1], [1, -1]], which turned the recorded
    # 1x1 cell so that a1 no longer lay along +x. Derived by hand: b1 = a1 and b2 = a1 + 2 a2 is
    # the a x a sqrt(3) rectangle of the 120 degree basis.
    rec = hexagonal.info["surfgeo"]
    assert rec["supercell_matrix"] == [[1, 0], [1, 2]]
    assert rec["surface_cell"][0][1] == pytest.approx(0.0, abs=1e-12) and rec["surface_cell"][0][0] > 0
    M, A = np.array(rec["supercell_matrix"]), np.array(rec["surface_cell"])
    assert np.allclose(M @ A, hexagonal.cell[:2, :2])
    bcc = surface_slab("Fe", (1, 1, 0), layers=3, rectangular=True)
    assert abs(bcc.cell[0, :2] @ bcc.cell[1, :2]) < 1e-9
    # Common practice, no source: bcc(110) centred cell is a x a sqrt(2)
    assert sorted(np.linalg.norm(bcc.cell[:2, :2], axis=1)) == pytest.approx([2.87, 2.87 * math.sqrt(2)])
    with pytest.raises(StructureError, match="no rectangular cell"):
        surface_slab("Pt", (3, 2, 1), layers=3, rectangular=True)


def test_terminations_of_compounds():
    # Source: P. W. Tasker, J. Phys. C 12, 4977 (1979); From memory: rocksalt(100) type 1,
    # rocksalt(111) type 3 (polar), fluorite(111) type 2 with the F-Ca-F unit, perovskite
    # ABO3(100) type 1 (AO and BO2 neutral for A2+ B4+) and (110) type 3.
    t = terminations(NACL, (1, 0, 0))
    assert len(t) == 1 and t[0]["tasker_type"] == 1 and not t[0]["polar"]
    t = terminations(NACL, (1, 1, 1))
    assert len(t) == 2 and t[0]["tasker_type"] == 3 and all(x["polar"] for x in t)
    assert {tuple(x["top_layer"]) for x in t} == {("Na",), ("Cl",)}
    caf2 = bulk_crystal("CaF2", "fluorite", a=5.46)
    t = terminations(caf2, (1, 1, 1))
    assert len(t) == 3 and t[0]["tasker_type"] == 2
    nonpolar = [x for x in t if not x["polar"]]
    assert len(nonpolar) == 1 and nonpolar[0]["top_layer"] == {"F": 1}
    sto = bulk_crystal("SrTiO3", "perovskite", a=3.905)
    t = terminations(sto, (1, 0, 0))
    tops = {tuple(sorted(x["top_layer"].items())) for x in t}
    assert tops == {(("O", 1), ("Sr", 1)), (("O", 2), ("Ti", 1))}
    assert all(not x["polar"] for x in t)
    assert terminations(sto, (1, 1, 0))[0]["tasker_type"] == 3
    # elements: one termination, non-polar; hcp(10-10) two (short or long spacing below)
    assert len(terminations(CU, (1, 1, 1))) == 1
    assert len(terminations(RU, (1, 0, -1, 0))) == 2


def test_charges_that_leave_the_bulk_charged_are_refused():
    # Regression: --charges Pt=1 was accepted and Pt(111) reported as Tasker type 2 (every layer
    # charged); formal charges must make the bulk neutral (Tasker 1979).
    with pytest.raises(StructureError, match="leave the bulk unit charged"):
        terminations(CU, (1, 1, 1), charges={"Cu": 1})
    with pytest.raises(StructureError, match="add up to zero"):
        terminations(NACL, (1, 1, 1), charges={"Na": 1, "Cl": -2})
    assert terminations(NACL, (1, 1, 1), charges={"Na": 1, "Cl": -1})[0]["tasker_type"] == 3


def test_symmetric_slabs_are_symmetric_for_spglib():
    caf2 = bulk_crystal("CaF2", "fluorite", a=5.46)
    t = terminations(caf2, (1, 1, 1))
    f_top = next(x["index"] for x in t if not x["polar"])
    s = surface_slab(caf2, (1, 1, 1), layers=5, termination=f_top, symmetric=True, vacuum=8.0)
    assert s.info["surfgeo"]["layers"] == 6  # F-Ca-F units: 6 layers is the next symmetric count
    # Source: spglib layer-group finder: a symmetric slab has an operation turning it over
    assert layer_symmetry(s).flips_z
    s = surface_slab(NACL, (1, 1, 1), layers=4, symmetric=True, vacuum=8.0)
    comps = [s.get_chemical_symbols()[i] for i in (0, len(s) - 1)]
    assert comps[0] == comps[1]
    assert layer_symmetry(s).flips_z
    gaas = bulk_crystal("GaAs", "zincblende", a=5.65)
    with pytest.raises(StructureError, match="reads the same"):
        surface_slab(gaas, (1, 1, 1), layers=4, symmetric=True)


def test_record_of_a_slab():
    s = surface_slab("Ru", (1, 0, -1, 0), layers=6, termination=1)
    rec = s.info["surfgeo"]
    assert rec["miller"] == [1, 0, -1, 0]
    assert rec["bulk"]["formula"] == "Ru" and rec["bulk"]["structure"] == "hcp"
    # Source: ASE reference data (ase.data.reference_states) for Ru: hcp, a = 2.70, c/a = 1.584
    assert rec["bulk"]["a"] == 2.70 and rec["bulk"]["c"] == pytest.approx(2.70 * 1.584)
    assert rec["termination"]["index"] == 1
    assert rec["layer_spacing"] == pytest.approx(face_geometry(RU, (1, 0, 0)).layer_spacing)
    assert rec["step"] is None and rec["relaxations"] == []
    assert "surface_slab" in rec["provenance"][0]


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"miller": (0, 0, 0)}, r"\(0 0 0\)"),
        ({"miller": (1, 0, 1, 0), "bulk": "Ru"}, "i = -\\(h \\+ k\\)"),
        ({"miller": (1, 1, -2, 0)}, "hexagonal crystal"),
        ({"miller": (1, 1)}, "3 numbers"),
        ({"miller": (1.5, 1, 1)}, "integers"),
        ({"layers": 0}, "layers"),
        ({"layers": 2.5}, "layers"),
        ({"vacuum": -1}, "vacuum"),
        ({"termination": 3}, "termination 3 does not exist"),
        ({"size": (0, 1)}, "size"),
        ({"vacuum": 0, "layers": 3, "bulk": "Si"}, "multiple of 2 layers"),
    ],
)
def test_bad_input(kwargs, match):
    args = {"bulk": "Cu", "miller": (1, 1, 1), "layers": 4}
    args.update(kwargs)
    if args["bulk"] == "Si":
        args["miller"] = (1, 1, 1)
    with pytest.raises(StructureError, match=match):
        surface_slab(args.pop("bulk"), args.pop("miller"), **args)


# From memory: layer groups (International Tables Vol. E) of ideal symmetric slabs: fcc(100)
# and bcc(100) p4/mmm (61), fcc(110) pmmm (37), bcc(110) cmmm (47), fcc(111) p-3m1 (72),
# hcp(0001) with an odd number of layers (ABA: a mirror through the middle B layer, no
# inversion) p-6m2 (78) and with an even number p-3m1 (72). Plane groups at normal incidence:
# Common practice, no source (p4mm, p2mm, c2mm, p3m1; fcc(211) pm).
# Source: spglib's layer-group finder run on surfgeo's slabs.
OWN_SLABS = [
    ("Cu", (1, 0, 0), 5, 61, "p4mm"),
    ("Fe", (1, 0, 0), 5, 61, "p4mm"),
    ("Cu", (1, 1, 0), 5, 37, "p2mm"),
    ("Fe", (1, 1, 0), 5, 47, "c2mm"),
    ("Cu", (1, 1, 1), 3, 72, "p3m1"),
    ("Ru", (0, 0, 0, 1), 3, 78, "p3m1"),
    ("Ru", (0, 0, 0, 1), 4, 72, "p3m1"),
    ("Cu", (2, 1, 1), 6, None, "pm"),
]


@pytest.mark.parametrize("element,miller,layers,group,plane", OWN_SLABS, ids=lambda v: str(v))
def test_spglib_layer_groups_of_own_slabs(element, miller, layers, group, plane):
    sym = layer_symmetry(surface_slab(element, miller, layers=layers, size=(2, 2)))
    if group is not None:
        assert sym.layer_group == group
    assert sym.plane_group == plane


def test_thin_vacuum_that_overlaps_the_periodic_image_is_refused():
    # Derived by hand: with c along the normal (orthogonal), the bottom layer's image lies straight
    # above the bottom layer, so an ABC(A) stack of 4 layers puts the image of the bottom A layer
    # the vacuum gap above the top A layer. Minimum: half the sum of the covalent radii
    # (Source: ase.data.covalent_radii, Cordero et al. 2008: Pt 1.36 A).
    with pytest.raises(StructureError, match=r"a vacuum of 1 A puts two Pt atoms 1.00 A apart.*1.36 A"):
        surface_slab("Pt", (1, 1, 1), layers=4, vacuum=1.0, orthogonal=True)
    ok = surface_slab("Pt", (1, 1, 1), layers=4, vacuum=1.4, orthogonal=True)
    assert ok.cell[2, 2] - np.ptp(ok.positions[:, 2]) == pytest.approx(1.4)
    # with c along the lattice stacking the image continues the ABC sequence: no overlap
    tilted = surface_slab("Pt", (1, 1, 1), layers=4, vacuum=0.5)
    assert tilted.cell[2, 2] - np.ptp(tilted.positions[:, 2]) == pytest.approx(0.5)
