"""Plane groups and layer groups of slabs (surfgeo.slab.symmetry) against spglib and ITA."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase import Atoms
from ase.build import bcc100, bcc110, bcc111, diamond111, fcc100, fcc110, fcc111, fcc211, hcp0001, hcp10m10

from surfgeo.errors import StructureError
from surfgeo.slab.symmetry import PLANE_GROUPS, layer_symmetry, plane_group

# General positions of the 17 plane groups in their conventional cells.
# Source: International Tables for Crystallography Vol. A, plane groups 1-17 (general
# positions); From memory: the coordinate triplets below were recalled, and each group is
# cross-checked against the layer group spglib finds for the same structure (second column).
_P3 = ["x,y", "-y,x-y", "-x+y,-x"]
GENERAL = {
    "p1": ("oblique", ["x,y"], "p1"),
    "p2": ("oblique", ["x,y", "-x,-y"], "p112"),
    "pm": ("rect", ["x,y", "-x,y"], "pm11"),
    "pg": ("rect", ["x,y", "-x,y+1/2"], "pb11"),
    "cm": ("rect", ["x,y", "-x,y", "x+1/2,y+1/2", "-x+1/2,y+1/2"], "cm11"),
    "p2mm": ("rect", ["x,y", "-x,-y", "-x,y", "x,-y"], "pmm2"),
    "p2mg": ("rect", ["x,y", "-x,-y", "-x+1/2,y", "x+1/2,-y"], "pma2"),
    "p2gg": ("rect", ["x,y", "-x,-y", "-x+1/2,y+1/2", "x+1/2,-y+1/2"], "pba2"),
    "c2mm": ("rect", ["x,y", "-x,-y", "-x,y", "x,-y", "x+1/2,y+1/2", "-x+1/2,-y+1/2",
                      "-x+1/2,y+1/2", "x+1/2,-y+1/2"], "cmm2"),
    "p4": ("square", ["x,y", "-x,-y", "-y,x", "y,-x"], "p4"),
    "p4mm": ("square", ["x,y", "-x,-y", "-y,x", "y,-x", "-x,y", "x,-y", "y,x", "-y,-x"], "p4mm"),
    "p4g": ("square", ["x,y", "-x,-y", "-y,x", "y,-x", "-x+1/2,y+1/2", "x+1/2,-y+1/2",
                       "y+1/2,x+1/2", "-y+1/2,-x+1/2"], "p4bm"),
    "p3": ("hex", _P3, "p3"),
    "p3m1": ("hex", _P3 + ["-y,-x", "-x+y,y", "x,x-y"], "p3m1"),
    "p31m": ("hex", _P3 + ["y,x", "x-y,-y", "-x,-x+y"], "p31m"),
    "p6": ("hex", _P3 + ["-x,-y", "y,-x+y", "x-y,x"], "p6"),
    "p6mm": ("hex", _P3 + ["-x,-y", "y,-x+y", "x-y,x", "-y,-x", "-x+y,y", "x,x-y", "y,x",
                           "x-y,-y", "-x,-x+y"], "p6mm"),
}
CELLS = {
    "oblique": [[3.0, 0, 0], [0.7, 4.1, 0], [0, 0, 20]],
    "rect": [[3.0, 0, 0], [0, 4.3, 0], [0, 0, 20]],
    "square": [[3.0, 0, 0], [0, 3.0, 0], [0, 0, 20]],
    "hex": [[3.0, 0, 0], [-1.5, 1.5 * math.sqrt(3), 0], [0, 0, 20]],
}


def _orbit(ops, x, y):
    out = []
    for op in ops:
        fx, fy = (eval(part.replace("1/2", "0.5"), {"x": x, "y": y}) for part in op.split(","))
        out.append([fx, fy, 0.5])
    return np.array(out) % 1.0


def _pattern(name: str, angle_deg: float = 0.0) -> Atoms:
    """Two general-position orbits (two species, two heights) of a plane group."""
    kind, ops, _ = GENERAL[name]
    cell = np.array(CELLS[kind], dtype=float)
    f = _orbit(ops, 0.137, 0.291)
    g = _orbit(ops, 0.383, 0.052)
    atoms = Atoms(f"Cu{len(f)}O{len(g)}", scaled_positions=np.vstack([f, g]), cell=cell, pbc=True)
    atoms.positions[len(f):, 2] += 1.3
    if angle_deg:
        atoms.rotate(angle_deg, "z", rotate_cell=True)
    return atoms


@pytest.mark.parametrize("name", PLANE_GROUPS)
def test_all_seventeen_plane_groups(name):
    atoms = _pattern(name)
    sym = layer_symmetry(atoms)
    assert sym.plane_group == name  # Source: ITA Vol. A general positions (see GENERAL)
    # Source: spglib layer-group finder (polar layer group of the same pattern)
    assert sym.layer_symbol == GENERAL[name][2]
    assert not sym.flips_z


@pytest.mark.parametrize("name", ["p4g", "p2gg", "c2mm", "p31m", "cm", "pg"])
def test_plane_group_survives_supercell_and_rotation(name):
    atoms = _pattern(name, angle_deg=37.0).repeat((2, 3, 1))
    assert plane_group(atoms) == name  # Common practice, no source: symmetry is frame-independent


# Ideal low-index slabs built by ASE. Expected plane groups at normal incidence:
# Common practice, no source (fcc(111) and hcp(0001): p3m1; fcc/bcc(100): p4mm;
# fcc(110): p2mm; bcc(110): c2mm; fcc(211): pm; diamond(111): p3m1).
# Layer groups: Source: spglib's layer-group finder, whose symbol must agree with the
# plane group (its z-preserving part).
ASE_SLABS = [
    (fcc111, "Pt", "p3m1"),
    (fcc100, "Pt", "p4mm"),
    (fcc110, "Pt", "p2mm"),
    (bcc100, "Fe", "p4mm"),
    (bcc110, "Fe", "c2mm"),
    (bcc111, "Fe", "p3m1"),
    (hcp0001, "Ru", "p3m1"),
    (hcp10m10, "Ru", "p2mm"),
    (fcc211, "Pt", "pm"),
    (diamond111, "Si", "p3m1"),
]


@pytest.mark.parametrize("builder,element,expected", ASE_SLABS, ids=lambda v: getattr(v, "__name__", str(v)))
def test_ase_low_index_slabs(builder, element, expected):
    size = (3, 2, 5) if builder is fcc211 else (2, 2, 5)
    slab = builder(element, size, vacuum=6.0)
    sym = layer_symmetry(slab)
    assert sym.plane_group == expected
    # a thin slab of a centrosymmetric crystal has both surfaces equivalent
    # Common practice, no source
    assert sym.flips_z or builder is diamond111


def test_layer_group_numbers_of_symmetric_slabs():
    # Source: spglib layer-group finder; ITA Vol. E numbers p4/mmm = 61, p-3m1 = 72.
    # Odd numbers of fcc(100) layers keep the mirror through the middle layer.
    assert layer_symmetry(fcc100("Cu", (1, 1, 5), vacuum=6.0)).layer_group == 61
    assert layer_symmetry(fcc111("Cu", (1, 1, 3), vacuum=6.0)).layer_group == 72


def test_top_layers_only():
    slab = fcc111("Pt", (2, 2, 4), vacuum=6.0)
    # a single close-packed layer seen alone has six-fold symmetry
    # Common practice, no source
    assert plane_group(slab, layers=1) == "p6mm"
    assert plane_group(slab, layers=2) == "p3m1"


def test_bad_cells():
    slab = fcc111("Pt", (1, 1, 3), vacuum=6.0)
    slab.rotate(30, "x", rotate_cell=True)
    with pytest.raises(StructureError, match="xy-plane"):
        plane_group(slab)
    with pytest.raises(StructureError, match="layers"):
        plane_group(fcc111("Pt", (1, 1, 3), vacuum=6.0), layers=0)
