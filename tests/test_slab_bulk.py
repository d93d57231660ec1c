"""Bulk crystals (surfgeo.slab.bulk) against ASE's bulk builder, its reference data and spglib."""

from __future__ import annotations

import math

import ase.io
import numpy as np
import pytest
from ase import Atoms
from ase.build import bulk as ase_bulk
from ase.data import atomic_numbers, reference_states

from surfgeo.errors import FileFormatError, StructureError
from surfgeo.slab.bulk import bulk_crystal, parse_formula, read_bulk, translation_lattice


@pytest.mark.parametrize("symbol", ["Cu", "Pt", "Au", "Fe", "W", "Mo", "Ru", "Mg", "Si", "C", "Po"])
def test_element_defaults_are_ase_reference_data(symbol):
    # Source: ASE reference data, ase.data.reference_states (structure, a, c/a)
    ref = reference_states[atomic_numbers[symbol]]
    b = bulk_crystal(symbol)
    rec = b.info["surfgeo_bulk"]
    assert rec["structure"] == ref["symmetry"]
    assert rec["a"] == ref["a"]
    if ref["symmetry"] == "hcp":
        assert rec["c"] == pytest.approx(ref["a"] * ref["c/a"])
    assert rec["source"] == "ASE reference_states"


# Source: ase.build.bulk (cubic=True / hexagonal cells) as an independent builder: same number
# of atoms per conventional cell, volume and nearest-neighbour distance. Space group numbers:
# Source: International Tables Vol. A (From memory: fcc 225, bcc 229, hcp 194, diamond 227,
# zincblende 216, rocksalt 225, CsCl 221, fluorite 225, wurtzite 186), confirmed by spglib.
PROTOS = [
    ("Cu", "fcc", 3.61, None, dict(crystalstructure="fcc", a=3.61, cubic=True), 225),
    ("Fe", "bcc", 2.87, None, dict(crystalstructure="bcc", a=2.87, cubic=True), 229),
    ("Ru", "hcp", 2.70, 4.28, dict(crystalstructure="hcp", a=2.70, c=4.28), 194),
    ("Si", "diamond", 5.43, None, dict(crystalstructure="diamond", a=5.43, cubic=True), 227),
    ("GaAs", "zincblende", 5.65, None, dict(crystalstructure="zincblende", a=5.65, cubic=True), 216),
    ("NaCl", "rocksalt", 5.64, None, dict(crystalstructure="rocksalt", a=5.64, cubic=True), 225),
    ("CsCl", "cesiumchloride", 4.12, None, dict(crystalstructure="cesiumchloride", a=4.12), 221),
    ("CaF2", "fluorite", 5.46, None, dict(crystalstructure="fluorite", a=5.46, cubic=True), 225),
    ("ZnO", "wurtzite", 3.25, 5.21, dict(crystalstructure="wurtzite", a=3.25, c=5.21, u=0.375), 186),
]


def _nn(atoms):
    from ase.neighborlist import neighbor_list

    d = neighbor_list("d", atoms, 4.0)
    return float(d.min())


@pytest.mark.parametrize("formula,structure,a,c,ase_kw,sg", PROTOS, ids=[p[1] for p in PROTOS])
def test_prototypes_against_ase(formula, structure, a, c, ase_kw, sg):
    ours = bulk_crystal(formula, structure, a=a, c=c)
    ref = ase_bulk(formula, **ase_kw)
    assert ours.get_volume() / len(ours) == pytest.approx(ref.get_volume() / len(ref))
    assert sorted(ours.get_chemical_symbols()) == sorted(ref.get_chemical_symbols() * (len(ours) // len(ref)))
    assert _nn(ours) == pytest.approx(_nn(ref))
    assert ours.info["surfgeo_bulk"]["spacegroup"] == sg


@pytest.mark.parametrize("formula,structure,a,c,ase_kw,sg", PROTOS, ids=[p[1] for p in PROTOS])
def test_recorded_formula_is_the_formula_unit(formula, structure, a, c, ase_kw, sg):
    # Regression: the record (and the build header) said Na4Cl4 and Ca4F8, the contents of the
    # conventional cell, instead of the formula unit typed by the user.
    assert bulk_crystal(formula, structure, a=a, c=c).info["surfgeo_bulk"]["formula"] == formula


def test_formula_unit_of_a_structure_file(tmp_path):
    path = tmp_path / "nacl.cif"
    ase.io.write(path, ase_bulk("NaCl", "rocksalt", a=5.64, cubic=True))
    assert read_bulk(path).info["surfgeo_bulk"]["formula"] == "NaCl"


def test_perovskite():
    sto = bulk_crystal("SrTiO3", "perovskite", a=3.905)
    # Source: International Tables Vol. A; From memory: cubic perovskite Pm-3m, no. 221
    assert sto.info["surfgeo_bulk"]["spacegroup"] == 221
    assert sorted(sto.get_chemical_symbols()) == ["O", "O", "O", "Sr", "Ti"]
    # Common practice, no source: Ti-O distance a/2
    d = sto.get_distances(1, [2, 3, 4], mic=True)
    assert np.allclose(d, 3.905 / 2)


def test_translation_lattice_is_primitive():
    # Common practice, no source: fcc primitive volume a^3/4, bcc a^3/2, diamond a^3/4 (2 atoms)
    for sym, frac in (("Cu", 0.25), ("Fe", 0.5), ("Si", 0.25), ("Ru", 1.0)):
        b = bulk_crystal(sym)
        P = translation_lattice(b)
        assert abs(np.linalg.det(P)) == pytest.approx(b.get_volume() * frac)


def test_read_bulk_standardises_to_the_conventional_cell(tmp_path):
    prim = ase_bulk("Cu", "fcc", a=3.61)  # primitive rhombohedral cell
    path = tmp_path / "cu.cif"
    ase.io.write(path, prim)
    b = bulk_crystal(str(path))
    assert len(b) == 4
    assert np.allclose(b.cell.lengths(), 3.61, atol=1e-6)
    assert b.info["surfgeo_bulk"]["spacegroup"] == 225
    poscar = tmp_path / "POSCAR"
    ase.io.write(poscar, ase_bulk("Ru", "hcp", a=2.7, c=4.28), format="vasp")
    r = read_bulk(poscar)
    assert r.info["surfgeo_bulk"]["hexagonal"]
    assert r.cell.angles()[2] == pytest.approx(120.0)


def test_parse_formula():
    assert parse_formula("CaF2") == [("Ca", 1), ("F", 2)]
    with pytest.raises(StructureError, match="unknown chemical element 'Xx'"):
        parse_formula("Xx")


@pytest.mark.parametrize(
    "args,kwargs,match",
    [
        (("Xx",), {}, "unknown chemical element"),
        (("pt",), {}, "not a chemical symbol"),
        (("NaCl",), {}, "is a compound"),
        (("NaCl", "rocksalt"), {}, "give the lattice constant a"),
        (("NaCl2", "rocksalt"), {"a": 5.0}, "stoichiometry"),
        (("Ga",), {}, "orthorhombic"),
        (("Cu", "diamond"), {}, "no reference lattice constant"),
        (("Cu", "fcc"), {"a": -1}, "positive"),
        (("Cu", "fcc"), {"a": 3.6, "c": 5.0}, "only a"),
        (("Cu", "kagome"), {}, "unknown structure"),
        (("Ru", "hcp"), {"a": 2.7}, None),
    ],
)
def test_bad_crystals(args, kwargs, match):
    if match is None:  # c/a from the reference data when only a is given
        b = bulk_crystal(*args, **kwargs)
        assert b.info["surfgeo_bulk"]["c"] == pytest.approx(2.7 * 1.584)
        return
    with pytest.raises(StructureError, match=match):
        bulk_crystal(*args, **kwargs)


def test_bad_files(tmp_path):
    with pytest.raises(FileFormatError, match="does not exist"):
        bulk_crystal(str(tmp_path / "missing.cif"))
    bad = tmp_path / "broken.cif"
    bad.write_text("this is not a crystal\n")
    with pytest.raises(FileFormatError, match="cannot read"):
        bulk_crystal(str(bad))
    mol = tmp_path / "mol.xyz"
    mol.write_text("2\n\nH 0 0 0\nH 0 0 0.74\n")
    with pytest.raises(StructureError, match="periodic 3D crystal"):
        bulk_crystal(str(mol))


def test_hexagonal_cell_angle():
    # Common practice, no source: hexagonal conventional cells at 120 degrees (design.md)
    b = bulk_crystal("Mg")
    assert b.cell.angles()[2] == pytest.approx(120.0)
    assert math.isclose(b.cell.lengths()[0], b.cell.lengths()[1])


@pytest.mark.parametrize("formula,structure,a,c,ase_kw,sg", PROTOS, ids=[p[1] for p in PROTOS])
def test_translation_lattice_agrees_with_spglib(formula, structure, a, c, ase_kw, sg):
    # Source: spglib (get_symmetry): the pure translations of the conventional cell give the
    # primitive volume V_conv / (1 + number of centring translations)
    from surfgeo.slab.bulk import spglib_call

    b = bulk_crystal(formula, structure, a=a, c=c)
    sym = spglib_call("get_symmetry", (b.cell[:], b.get_scaled_positions(), b.numbers), symprec=1e-3)
    n_pure = sum(1 for W in sym["rotations"] if np.array_equal(W, np.eye(3, dtype=int)))
    assert abs(np.linalg.det(translation_lattice(b))) == pytest.approx(b.get_volume() / n_pure)


@pytest.mark.parametrize(
    "args,kwargs,distance,minimum",
    [
        # Common practice, no source: nearest neighbours at a/sqrt2 in fcc, c along the hcp axis
        # when c is shorter than a, a/2 between the two species of rocksalt.
        # Source: covalent radii of ase.data.covalent_radii (Cordero et al. 2008): Pt 1.36 A,
        # Ru 1.46 A, Na 1.66 A, Cl 1.02 A; the minimum is half the sum of the two radii.
        (("Pt",), {"a": 0.5}, 0.5 / math.sqrt(2), 1.36),
        (("Ru", "hcp"), {"a": 2.7, "c": 1.0}, 1.0, 1.46),
        (("NaCl", "rocksalt"), {"a": 2.0}, 1.0, (1.66 + 1.02) / 2),
    ],
)
def test_crystals_with_overlapping_atoms_are_refused(args, kwargs, distance, minimum):
    # Regression: --a 0.5 for Pt built a slab with atoms 0.35 A apart.
    with pytest.raises(StructureError) as info:
        bulk_crystal(*args, **kwargs)
    msg = str(info.value)
    assert f"{distance:.2f} A apart" in msg and f"minimum of {minimum:.2f} A" in msg
    assert "lattice constants" in msg and "\n" not in msg


def test_overlap_limit_sits_at_half_the_covalent_radii():
    from ase.data import covalent_radii

    from surfgeo.slab.bulk import CONTACT_FACTOR, closest_contact

    r = covalent_radii[atomic_numbers["Pt"]]
    a_limit = CONTACT_FACTOR * 2 * r * math.sqrt(2)  # nearest neighbours a/sqrt2 at the limit
    assert closest_contact(ase_bulk("Pt", "fcc", a=a_limit * 1.001, cubic=True)) is None
    i, j, d, need = closest_contact(ase_bulk("Pt", "fcc", a=a_limit * 0.999, cubic=True))
    assert need == pytest.approx(2 * CONTACT_FACTOR * r)
    assert d == pytest.approx(0.999 * a_limit / math.sqrt(2))
    # an atom overlapping its own periodic image (a cell that is too short) counts as well
    assert closest_contact(Atoms("Pt", cell=[0.5, 5, 5], pbc=True)) is not None
    assert bulk_crystal("Pt", a=a_limit * 1.001).info["surfgeo_bulk"]["a"] == pytest.approx(a_limit * 1.001)


def test_file_with_overlapping_atoms_is_refused(tmp_path):
    cu = ase_bulk("Cu", "fcc", a=3.61, cubic=True)
    cu.append("Cu")
    cu.positions[-1] = cu.positions[0] + [0.3, 0, 0]  # a doubled site, as from partial occupancy
    path = tmp_path / "doubled.cif"
    ase.io.write(path, cu)
    with pytest.raises(StructureError, match=r"the crystal in .*doubled.cif puts two Cu atoms 0.30 A apart"):
        bulk_crystal(str(path))


def test_ase_atoms_bulk_with_overlapping_atoms_is_refused():
    from surfgeo.slab.cut import surface_slab

    # Common practice, no source: fcc nearest neighbours at a/sqrt2 (0.7 A -> 0.49 A); minimum
    # half the sum of the covalent radii (Source: ase.data.covalent_radii, Cu 1.32 A)
    with pytest.raises(StructureError, match=r"the bulk crystal Cu given as ase.Atoms puts two Cu atoms "
                                             r"0.49 A apart, closer than the sane minimum of 1.32 A"):
        surface_slab(ase_bulk("Cu", "fcc", a=0.7, cubic=True), (1, 1, 1), layers=3)
    assert len(surface_slab(ase_bulk("Cu", "fcc", a=3.61, cubic=True), (1, 1, 1), layers=3)) == 3
