"""Export of slabs to DFT inputs: formats, constraints, vacuum, dipole advice, notes (surfgeo.io.dft,
surfgeo.slab.constraints, surfgeo.slab.dipole)."""

from __future__ import annotations

import json

import ase.io
import numpy as np
import pytest
from ase.build import add_adsorbate, fcc100, fcc110, fcc111, hcp0001
from ase.constraints import FixAtoms

from surfgeo.errors import InputError, OutputExistsError, StructureError
from surfgeo.io.dft import FORMATS, export_slab, format_for, note_path, prepare_export, set_vacuum
from surfgeo.io.structures import read_structure
from surfgeo.slab.constraints import (
    below_height_mask,
    bottom_layers_mask,
    fixed_mask,
    is_symmetric_slab,
    middle_layers_mask,
)
from surfgeo.slab.dipole import dipole_advice, slab_heights, vacuum_gap
from surfgeo.slab.kpoints import kpoint_mesh


def surfgeo_frame(slab):
    """ASE's fcc111/hcp0001 use a 60 degree basis; surfgeo uses 120 degrees (a2 -> a2 - a1)."""
    cell = np.array(slab.cell)
    cell[1] = cell[1] - cell[0]
    slab.set_cell(cell, scale_atoms=False)
    slab.wrap()
    return slab


def pt_with_oxygen(layers=4):
    slab = fcc111("Pt", (2, 2, layers), a=3.92, vacuum=7.5)
    add_adsorbate(slab, "O", 1.2, "fcc")
    slab.info.pop("adsorbate_info", None)
    slab = slab[[len(slab) - 1] + list(range(len(slab) - 1))]  # O first: VASP must regroup
    return surfgeo_frame(slab)


def _min_image(d, cell):
    f = np.linalg.solve(np.asarray(cell).T, d.T).T
    f -= np.round(f)
    return f @ np.asarray(cell)


# ----------------------------------------------------------------------------- formats
def test_format_from_name_and_option():
    assert format_for("POSCAR").name == "vasp"
    assert format_for("run/CONTCAR_start").name == "vasp"
    assert format_for("slab.vasp").name == "vasp"
    assert format_for("x.pwi").name == "espresso"
    assert format_for("geometry.in").name == "aims"
    assert format_for("x.cif").name == "cif"
    assert format_for("x.extxyz").name == "extxyz"
    assert format_for("x.lmp").name == "lammps"
    assert format_for("anything", "espresso-in").name == "espresso"
    assert format_for("anything", "QE").name == "espresso"
    with pytest.raises(InputError, match="--format"):
        format_for("slab.unknown")
    with pytest.raises(InputError, match="unknown export format"):
        format_for("x.cif", "gaussian")


CAN_FIX = {"vasp": True, "espresso": True, "aims": True, "extxyz": True, "cif": False, "lammps": False}
FILES = {"vasp": "POSCAR", "espresso": "slab.pwi", "aims": "geometry.in", "cif": "slab.cif",
         "extxyz": "slab.extxyz", "lammps": "slab.lmp"}


@pytest.mark.parametrize("fmt", list(FORMATS))
def test_write_read_round_trip_with_ase(fmt, tmp_path):
    slab = pt_with_oxygen()
    rng = np.random.default_rng(3)
    slab.positions += rng.normal(0.0, 0.02, slab.positions.shape)  # no special positions
    path = tmp_path / FILES[fmt]
    note = export_slab(slab, path, bottom=2)
    back = read_structure(path)
    order = np.array(note["file_index_to_source_index"] or range(len(slab)))
    src = slab[order]
    # Source: ASE's readers (ase.io.read), an implementation independent of surfgeo's writer calls.
    assert back.get_chemical_symbols() == src.get_chemical_symbols()  # species order as written
    assert np.allclose(np.array(back.cell), np.array(slab.cell), atol=1e-6)
    d = _min_image(back.positions - src.positions, slab.cell)
    assert np.abs(d).max() < 1e-6  # positions to 1e-6 A (some formats wrap into the cell)
    fixed_src = bottom_layers_mask(slab, 2)[order]
    if CAN_FIX[fmt]:
        assert np.array_equal(fixed_mask(back), fixed_src)
        assert note["constraints_in_file"] is True
    else:
        assert not back.constraints  # CIF and LAMMPS data cannot hold fixed atoms ...
        assert any("cannot hold fixed atoms" in c for c in note["caution"])  # ... and the note says so
    mesh = json.loads(note_path(path).read_text())["kpoints"]["mesh"]
    assert mesh == list(kpoint_mesh(slab.cell, 0.25).mesh)


def test_vasp_groups_species_and_records_the_order(tmp_path):
    slab = pt_with_oxygen()
    slab = slab[[3, 0, 5, 1, 2] + list(range(6, len(slab))) + [4]]  # O somewhere in the middle
    note = export_slab(slab, tmp_path / "POSCAR")
    lines = (tmp_path / "POSCAR").read_text().splitlines()
    # Common practice, no source: a VASP 5 POSCAR lists species (line 6) and counts (line 7) once each.
    assert lines[5].split() == ["Pt", "O"]
    assert lines[6].split() == ["16", "1"]
    back = read_structure(tmp_path / "POSCAR")
    order = np.array(note["file_index_to_source_index"])
    assert sorted(order.tolist()) == list(range(len(slab)))
    assert np.abs(_min_image(back.positions - slab.positions[order], slab.cell)).max() < 1e-6


def test_espresso_input_has_the_mesh_and_placeholders(tmp_path):
    slab = pt_with_oxygen()
    export_slab(slab, tmp_path / "a.pwi", kspacing=0.3)
    text = (tmp_path / "a.pwi").read_text()
    mesh = kpoint_mesh(slab.cell, 0.3).mesh
    assert f"K_POINTS automatic\n{mesh[0]} {mesh[1]} {mesh[2]}" in text
    assert "pseudopotential-to-choose" in text
    export_slab(slab, tmp_path / "b.pwi", pseudopotentials={"Pt": "Pt.pbe.UPF", "O": "O.pbe.UPF"})
    text = (tmp_path / "b.pwi").read_text()
    assert "Pt.pbe.UPF" in text and "to-choose" not in text


def test_pseudopotentials_for_absent_species_or_other_formats_are_refused(tmp_path):
    # Regression: --pseudo Au=Au.UPF for a Pt slab was silently ignored (and, being non-empty,
    # suppressed the caution about the Pt placeholder); --pseudo with a POSCAR was ignored too.
    slab = pt_with_oxygen()
    with pytest.raises(InputError, match="which the slab does not contain"):
        export_slab(slab, tmp_path / "a.pwi", pseudopotentials={"Au": "Au.UPF"})
    with pytest.raises(InputError, match="only into a pw.x input"):
        export_slab(slab, tmp_path / "POSCAR", pseudopotentials={"Pt": "Pt.UPF"})
    assert list(tmp_path.iterdir()) == []
    note = export_slab(slab, tmp_path / "b.pwi", pseudopotentials={"Pt": "Pt.pbe.UPF"})
    assert any("placeholder pseudopotential files for O;" in c for c in note["caution"])
    assert "O.pseudopotential-to-choose.UPF" in (tmp_path / "b.pwi").read_text()


def test_comments_where_the_format_allows(tmp_path):
    slab = pt_with_oxygen()
    for name in ("POSCAR", "geometry.in", "s.cif"):
        export_slab(slab, tmp_path / name, bottom=1)
        assert "k-point mesh" in (tmp_path / name).read_text()
    export_slab(slab, tmp_path / "s.extxyz")
    back = ase.io.read(tmp_path / "s.extxyz")
    assert back.info["surfgeo_export"]["kpoints"] == list(kpoint_mesh(slab.cell, 0.25).mesh)


def test_metadata_and_provenance_travel(tmp_path):
    slab = pt_with_oxygen()
    slab.info["surfgeo"] = {"surface_cell": [[2.77, 0.0], [-1.386, 2.4]],
                            "provenance": ["synthetic test model"], "bulk": {"formula": "Pt"}}
    note = export_slab(slab, tmp_path / "s.extxyz", source="model.toml")
    assert note["provenance"] == ["synthetic test model"]
    assert note["source"] == "model.toml"
    assert ase.io.read(tmp_path / "s.extxyz").info["surfgeo"]["provenance"] == ["synthetic test model"]
    assert "synthetic test model" in json.loads(note_path(tmp_path / "s.extxyz").read_text())["surface"][
        "provenance"]


def test_caution_is_in_every_note(tmp_path):
    note = export_slab(pt_with_oxygen(), tmp_path / "POSCAR")
    assert any("starting point" in c and "pseudopotentials" in c for c in note["caution"])


# ----------------------------------------------------------------------------- constraints
def test_bottom_layers_follow_ase_layer_tags():
    slab = fcc100("Cu", (2, 2, 6), vacuum=6.0)
    for n in (1, 2, 5):
        # Source: ASE's surface builders tag layers 1 (top) to N (bottom).
        assert np.array_equal(bottom_layers_mask(slab, n), slab.get_tags() > 6 - n)
    with pytest.raises(InputError, match="at most 5"):
        bottom_layers_mask(slab, 6)
    with pytest.raises(InputError, match="whole number"):
        bottom_layers_mask(slab, 1.5)


def test_below_height_and_wrapped_slab():
    slab = fcc100("Cu", (2, 2, 4), vacuum=6.0)
    z = slab.positions[:, 2]
    assert np.array_equal(below_height_mask(slab, z.min() + 2.0), z < z.min() + 2.0)
    with pytest.raises(InputError, match="every atom"):
        below_height_mask(slab, z.max() + 1)
    with pytest.raises(InputError, match="no atom"):
        below_height_mask(slab, z.min() - 1)
    # a slab wrapped across the cell boundary along c keeps its layers
    wrapped = slab.copy()
    wrapped.positions[:, 2] -= z.min() + 0.5 * (z.max() - z.min())
    wrapped.wrap()
    assert np.array_equal(bottom_layers_mask(wrapped, 2), bottom_layers_mask(slab, 2))


def test_middle_layers_of_symmetric_slabs():
    slab = fcc111("Pt", (2, 2, 7), vacuum=6.0)
    mask = middle_layers_mask(slab, 3)
    # Source: ASE's layer tags; the three central layers of seven are tags 3, 4, 5.
    assert np.array_equal(mask, np.isin(slab.get_tags(), [3, 4, 5]))
    with pytest.raises(InputError, match="valid numbers are 1, 3, 5"):
        middle_layers_mask(slab, 2)
    asym = pt_with_oxygen(5)
    with pytest.raises(StructureError, match="not symmetric"):
        middle_layers_mask(asym, 1)


@pytest.mark.parametrize("slab", [
    fcc111("Pt", (2, 2, 4), vacuum=6.0), fcc111("Pt", (1, 1, 5), vacuum=6.0),
    fcc100("Cu", (2, 2, 5), vacuum=6.0), fcc110("Ni", (2, 2, 6), vacuum=6.0),
    hcp0001("Ru", (2, 2, 3), vacuum=6.0), hcp0001("Ru", (2, 2, 2), vacuum=6.0),
])
def test_bulk_terminated_low_index_slabs_are_symmetric(slab):
    # Common practice, no source: fcc and hcp crystals have inversion centres (at atoms and at
    # octahedral holes), so bulk-terminated low-index slabs have equivalent faces at any thickness.
    assert is_symmetric_slab(slab)
    if len(set(slab.get_tags())) < 3:
        return  # two layers stay symmetric whatever their spacing
    one_sided = slab.copy()
    top = one_sided.positions[:, 2] > one_sided.positions[:, 2].max() - 0.1
    one_sided.positions[top, 2] -= 0.08  # relax the top face only
    assert not is_symmetric_slab(one_sided)


def test_adsorbates_on_both_faces_keep_the_symmetry():
    slab = fcc100("Cu", (1, 1, 5), vacuum=6.0)
    add_adsorbate(slab, "O", 1.0, "hollow")
    assert not is_symmetric_slab(slab)
    below = slab.copy()
    zmin = slab.positions[:-1, 2].min()
    # the bottom layer's hollow sits over the atom of the second layer from the bottom
    second = slab.positions[np.argsort(slab.positions[:-1, 2])[1]]
    below.append("O")
    below.positions[-1] = [second[0], second[1], zmin - 1.0]
    assert is_symmetric_slab(below)


# ----------------------------------------------------------------------------- vacuum and dipole
def test_vacuum_of_ase_slabs_and_across_the_boundary():
    slab = fcc111("Pt", (2, 2, 4), a=3.92, vacuum=7.5)
    gap = vacuum_gap(slab)
    # Source: ASE's fcc111 puts `vacuum` on both sides of the slab.
    assert gap.thickness == pytest.approx(15.0, abs=1e-9)
    assert gap.slab_thickness == pytest.approx(3 * 3.92 / np.sqrt(3), abs=1e-9)  # From memory: d111 = a/sqrt3
    c = slab.cell[2, 2]
    shifted = slab.copy()
    shifted.positions[:, 2] += 0.6 * c
    shifted.wrap()  # now the slab straddles the cell boundary
    g2 = vacuum_gap(shifted)
    assert g2.thickness == pytest.approx(15.0, abs=1e-9)
    assert (g2.centre_fraction - gap.centre_fraction - 0.6) % 1.0 == pytest.approx(0.0, abs=1e-9) or \
        (g2.centre_fraction - gap.centre_fraction - 0.6) % 1.0 == pytest.approx(1.0, abs=1e-9)
    h = slab_heights(shifted)
    assert np.ptp(h) == pytest.approx(gap.slab_thickness, abs=1e-9)


def test_dipole_plane_is_in_the_middle_of_the_vacuum():
    slab = pt_with_oxygen()
    adv = dipole_advice(slab)
    assert adv.recommended and adv.axis == 3
    h = slab_heights(slab)
    c = slab.cell[2, 2]
    # Common practice, no source: the correction plane is equidistant from both faces through the vacuum.
    plane = adv.plane_fraction * c
    up = (plane - h.max()) % c
    down = (h.min() - plane) % c
    assert up == pytest.approx(down, abs=1e-9)
    assert up + down == pytest.approx(vacuum_gap(slab).thickness, abs=1e-9)
    assert (adv.plane_fraction - adv.slab_centre_fraction) % 1.0 == pytest.approx(0.5, abs=1e-12)
    assert not dipole_advice(fcc111("Pt", (1, 1, 4), vacuum=7.0)).recommended


def test_set_vacuum_keeps_positions():
    slab = fcc100("Cu", (2, 2, 4), vacuum=3.0)
    out = set_vacuum(slab, 18.0)
    assert vacuum_gap(out).thickness == pytest.approx(18.0, abs=1e-9)
    assert np.allclose(out.positions, slab.positions)
    with pytest.raises(InputError, match="vacuum"):
        set_vacuum(slab, -1)


def test_prepare_export_notes_thin_vacuum_and_needs_a_cell():
    slab = fcc100("Cu", (1, 1, 4), vacuum=3.0)
    _, note = prepare_export(slab)
    assert any("only 6.0 A" in c for c in note["caution"])
    flat = slab.copy()
    flat.cell[2] = 0.0
    with pytest.raises(StructureError, match="third cell vector"):
        prepare_export(flat)
    atoms, note = prepare_export(flat, vacuum=12.0)
    assert note["vacuum"]["thickness"] == pytest.approx(12.0)


# ----------------------------------------------------------------------------- refusing
def test_existing_output_is_not_overwritten(tmp_path):
    slab = pt_with_oxygen()
    target = tmp_path / "POSCAR"
    target.write_text("keep me")
    with pytest.raises(OutputExistsError, match="--force"):
        export_slab(slab, target)
    assert target.read_text() == "keep me"
    assert not note_path(target).exists()
    # an existing note alone also stops the export before anything is written
    target.unlink()
    note_path(target).write_text("old note")
    with pytest.raises(OutputExistsError):
        export_slab(slab, target)
    assert not target.exists() and note_path(target).read_text() == "old note"
    export_slab(slab, target, force=True)
    assert read_structure(target).get_chemical_formula() == "OPt16"


def test_rules_are_exclusive_and_existing_constraints_are_kept(tmp_path):
    slab = fcc100("Cu", (2, 2, 4), vacuum=6.0)
    with pytest.raises(InputError, match="one constraint rule"):
        prepare_export(slab, bottom=1, below=3.0)
    slab.set_constraint(FixAtoms(indices=[0, 1]))
    out, note = prepare_export(slab)
    assert note["constraints"]["rule"] == "constraints of the input kept"
    assert fixed_mask(out).sum() == 2
