"""Step notation both ways, step geometry and stepped slabs (surfgeo.slab.steps)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from surfgeo.errors import NotationError, StructureError
from surfgeo.slab.bulk import bulk_crystal
from surfgeo.slab.cut import face_geometry, surface_slab
from surfgeo.slab.steps import (
    decompose,
    miller_from_notation,
    step_description,
    step_notation,
    stepped_slab,
)
from surfgeo.slab.symmetry import plane_group

# Source: sources.md, step notation of B. Lang, R. W. Joyner and G. A. Somorjai, Surf. Sci. 30,
# 440 (1972) and M. A. Van Hove and G. A. Somorjai, Surf. Sci. 92, 489 (1980); the values there
# are marked "derived from the rule; cross-check in code" - the geometric cross-check is below.
FCC_TABLE = [
    ((3, 1, 1), "2(111)×(100)"),
    ((2, 1, 1), "3(111)×(100)"),
    ((5, 3, 3), "4(111)×(100)"),
    ((7, 5, 5), "6(111)×(100)"),
    ((3, 3, 1), "3(111)×(111)"),
    ((2, 2, 1), "4(111)×(111)"),
    ((5, 5, 3), "5(111)×(111)"),
    ((3, 3, 2), "6(111)×(111)"),
    ((9, 9, 7), "9(111)×(111)"),
]


@pytest.mark.parametrize("miller,notation", FCC_TABLE)
def test_fcc_table_miller_to_notation(miller, notation):
    assert step_notation(miller, "fcc") == notation


@pytest.mark.parametrize("miller,notation", FCC_TABLE)
def test_fcc_table_notation_to_miller(miller, notation):
    assert miller_from_notation(notation, "fcc") == miller
    # other spellings of the same notation
    assert miller_from_notation(notation.replace("×", "x"), "fcc") == miller
    assert miller_from_notation(notation.replace("×", " x ").replace("(111)", "(1 1 1)"), "fcc") == miller


def test_fcc_table_symmetry_equivalents():
    # Common practice, no source: equivalent faces have the same notation
    assert step_notation((3, 5, 3), "fcc") == "4(111)×(100)"
    assert step_notation((-5, 3, 3), "fcc") == "4(111)×(100)"
    assert step_notation((7, 9, 9), "fcc") == "9(111)×(111)"


def test_fcc_100_terraces():
    # From memory: fcc(511) = 3(100)x(111) and fcc(410) = 4(100)x(110) (Van Hove and Somorjai 1980)
    assert step_notation((5, 1, 1), "fcc") == "3(100)×(111)"
    assert step_notation((4, 1, 0), "fcc") == "4(100)×(110)"
    assert miller_from_notation("3(100)x(111)", "fcc") == (5, 1, 1)


@pytest.mark.parametrize("miller", [(1, 1, 1), (1, 0, 0), (1, 1, 0), (2, 2, 2)])
def test_flat_faces_have_no_notation(miller):
    assert step_notation(miller, "fcc") is None
    assert step_description(face_geometry("Cu", miller)) is None


@pytest.mark.parametrize(
    "structure,terrace,step,kinks",
    [("fcc", "111", "100", 0), ("fcc", "111", "111", 0), ("fcc", "100", "111", 0), ("fcc", "100", "110", 1),
     ("bcc", "110", "100", 1), ("bcc", "110", "110", 0), ("hcp", "0001", "10-11", 0)],
)
def test_round_trip_and_geometric_row_count(structure, terrace, step, kinks):
    """n(t)x(s) -> Miller -> n(t)x(s), and n equals the number of atom rows counted on the lattice.

    The geometric count ceil(w cos(theta) / r) uses only the lattice (terrace width w = h/sin
    theta along the surface, row spacing r on the terrace), independently of the notation.
    Source: elementary geometry of a regular staircase; Common practice, no source.
    """
    element = {"fcc": "Pt", "bcc": "W", "hcp": "Ru"}[structure]
    bulk = bulk_crystal(element)
    for n in range(2, 12):
        miller = miller_from_notation(f"{n}({terrace})×({step})", structure)
        dec = decompose(miller, structure)
        if n == 2 and dec.kind == "flat":  # e.g. 2(111)x(111) is fcc(110) itself
            continue
        assert dec.kind == "stepped" and dec.rows == n, (n, miller, dec)
        desc = step_description(face_geometry(bulk, miller), bulk)
        assert desc["terrace_rows"] == n
        assert desc["terrace_rows_geometric"] == n, (n, miller)
        # Common practice, no source: steps along close-packed rows are straight; <100> steps
        # on fcc(100) and bcc(110) run across the close-packed rows (one kink per edge period)
        assert desc["kinks_per_edge_period"] == kinks


@pytest.mark.parametrize("miller", [(5, 3, 3), (9, 9, 7), (3, 3, 2), (7, 5, 5), (10, 8, 7), (6, 4, 3)])
def test_step_geometry_is_consistent(miller):
    bulk = bulk_crystal("Pt")
    a = 3.92
    f = face_geometry(bulk, miller)
    d = step_description(f, bulk)
    # Common practice, no source: monatomic (111) steps are a/sqrt(3) high
    assert d["step_height"] == pytest.approx(a / math.sqrt(3))
    # Common practice, no source: miscut = angle between the face normal and (111)
    h, k, l = miller
    cos_t = (h + k + l) / math.sqrt(3 * (h * h + k * k + l * l))
    assert d["miscut_deg"] == pytest.approx(math.degrees(math.acos(cos_t)))
    # the surface cell is one step-edge period times one terrace width per step
    assert f.area == pytest.approx(d["step_edge_length"] * d["terrace_width"] * d["steps_per_cell"])
    assert d["terrace_width"] * math.sin(math.radians(d["miscut_deg"])) == pytest.approx(d["step_height"])


def test_known_miscut_angles():
    # From memory: Pt(533) is 14.4 degrees and Pt(997) 6.5 degrees off (111)
    assert step_description(face_geometry("Pt", (5, 3, 3)))["miscut_deg"] == pytest.approx(14.4, abs=0.05)
    assert step_description(face_geometry("Pt", (9, 9, 7)))["miscut_deg"] == pytest.approx(6.45, abs=0.05)


def test_kinked_faces():
    bulk = bulk_crystal("Pt")
    d = step_description(face_geometry(bulk, (10, 8, 7)), bulk)
    assert d["kind"] == "kinked"
    # Common practice, no source: the step edge of (10 8 7) on (111) runs along [-1 3 -2], a
    # lattice vector of length a sqrt(14)/2 that holds one kink (a one-row offset)
    assert d["step_edge_length"] == pytest.approx(3.92 * math.sqrt(14) / 2)
    assert d["kinks_per_edge_period"] == 1
    assert d["kink_density"] == pytest.approx(1 / d["step_edge_length"])
    # the microfacet sum reads back to the same face
    assert miller_from_notation(d["step_notation"], "fcc") == (10, 8, 7)
    assert miller_from_notation(d["notation_explicit"], "fcc") == (10, 8, 7)
    # straight steps have no kinks
    assert step_description(face_geometry(bulk, (5, 3, 3)), bulk)["kinks_per_edge_period"] == 0


def test_ambiguous_family_form_is_written_out():
    # bcc (411): a (2-11) step; the family form "3(110)x(211)" would read back as (431)
    # Derived from the rule of sources.md: 2 (1,1,0) + (2,-1,1) = (4,1,1); 2 (1,1,0) + (2,1,1) = (4,3,1)
    assert step_notation((4, 1, 1), "bcc") == "3(110)×(2-11)"
    assert miller_from_notation("3(110)×(2-11)", "bcc") == (4, 1, 1)
    assert miller_from_notation("3(110)×(211)", "bcc") == (4, 3, 1)


def test_hcp_four_index():
    # Derived from the rule of sources.md with g(0001) = (0,0,2), g(10-11) = (1,0,1):
    # 2 (0,0,2) + (1,0,1) = (1,0,5), i.e. (1 0 -1 5) in four indices
    assert step_notation((1, 0, -1, 5), "hcp") == "3(0001)×(10-11)"
    assert miller_from_notation("3(0001)x(10-11)", "hcp") == (1, 0, -1, 5)
    assert step_notation((0, 0, 0, 1), "hcp") is None
    assert step_notation((1, 1, -2, 0), "hcp") is None


@pytest.mark.parametrize(
    "text,match",
    [
        ("4(111)", "cannot read"),
        ("4[111]x(100)", "cannot read"),
        ("1(111)x(100)", "at least 2 atom rows"),
        ("4(111)x2(100)", "takes no count"),
        ("4(123)x(100)", "not a low-index microfacet"),
        ("", "step notation"),
    ],
)
def test_bad_notation(text, match):
    with pytest.raises(NotationError, match=match):
        miller_from_notation(text, "fcc")


def test_unsupported_structure():
    with pytest.raises(StructureError, match="step notation"):
        step_notation((5, 3, 3), "rocksalt")


def test_stepped_slab_cell_follows_the_terrace():
    s = stepped_slab("Pt", "4(111)×(100)", layers=16, size=(2, 1))
    rec = s.info["surfgeo"]
    st = rec["step"]
    assert rec["miller"] == [5, 3, 3]
    assert st["step_notation"] == "4(111)×(100)"
    # a1 runs along the step edge (+x), a2 crosses exactly one terrace period
    a1 = np.array(rec["surface_cell"][0])
    a2 = np.array(rec["surface_cell"][1])
    assert np.allclose(a1 / np.linalg.norm(a1), [1.0, 0.0])
    assert np.linalg.norm(a1) == pytest.approx(st["step_edge_length"])
    assert abs(a2[1]) == pytest.approx(st["terrace_width"])
    # Common practice, no source: the (533) surface lattice has one mirror line across the steps
    # and is centred; spglib confirms the plane group cm
    assert plane_group(s) == "cm"
    same = surface_slab("Pt", (5, 3, 3), layers=16)
    assert abs(np.linalg.det(same.cell[:2, :2])) * 2 == pytest.approx(abs(np.linalg.det(s.cell[:2, :2])))


def test_stepped_slab_rejects_flat_face():
    with pytest.raises(StructureError, match="not a stepped"):
        stepped_slab("Pt", (1, 1, 1))
