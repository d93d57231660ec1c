"""Every model in structures/ builds, is labelled synthetic, and has the expected structure."""

from __future__ import annotations

import io
import math
from fractions import Fraction
from pathlib import Path

import ase.io
import numpy as np
import pytest

from surfgeo.slab.adsorbates import close_contacts, coverage
from surfgeo.slab.model import build_model
from surfgeo.slab.reconstruct import layers_from_top
from surfgeo.slab.symmetry import plane_group

LIBRARY = Path(__file__).resolve().parent.parent / "structures"
FILES = sorted(LIBRARY.glob("*.toml"))

# file -> (plane group, coverage, supercell matrix). Plane groups come from spglib
# (surfgeo.slab.symmetry); the expected values are what each transformation must give.
EXPECT = {
    # Common practice, no source: p(2x2) adsorbate on a high-symmetry site of fcc(111) keeps p3m1
    "pt111_o_p2x2.toml": ("p3m1", {"O": Fraction(1, 4)}, [[2, 0], [0, 2]]),
    # From memory: (sqrt3 x sqrt3)R30 on top sites of fcc(111) turns the mirrors onto the cell
    # vectors: p31m
    "rh111_co_sqrt3.toml": ("p31m", {"CO": Fraction(1, 3)}, [[2, 1], [-1, 1]]),
    # Source: issue check list (ideal c(2x2) adsorbate in fcc(100) hollows -> p4mm)
    "ni100_s_c2x2.toml": ("p4mm", {"S": Fraction(1, 2)}, [[1, 1], [-1, 1]]),
    # Source: issue check list (missing-row (1x2) on fcc(110) -> p2mm)
    "au110_missing_row_1x2.toml": ("p2mm", {}, [[1, 0], [0, 2]]),
    # Common practice, no source: removing whole rows ((1x3) as for (1x2)) keeps both mirrors: p2mm
    "pt110_missing_row_1x3.toml": ("p2mm", {}, [[1, 0], [0, 3]]),
    # Common practice, no source: (2x1) added rows with O between the Cu atoms keep both mirrors
    "cu110_added_row_o_2x1.toml": ("p2mm", {"O": Fraction(1, 2)}, [[2, 0], [0, 1]]),
    # Source: issue check list (clock rotation -> p4g)
    "ni100_c_p4g.toml": ("p4g", {"C": Fraction(1, 2)}, [[2, 0], [0, 2]]),
    # Common practice, no source: n(111)x(100) faces have one mirror across the steps on a
    # centred lattice: cm
    "pt533_co_step_edge.toml": ("cm", {"CO": Fraction(1)}, [[1, 0], [0, 1]]),
    # Common practice, no source: only the bare fcc(111) slab is built (the film is recorded): p3m1
    "pt111_graphene_incommensurate.toml": ("p3m1", {}, [[1, 0], [0, 1]]),
    # Common practice, no source: a film rotated off the mirror lines keeps only the 3-fold axes
    "pt111_graphene_sqrt7.toml": ("p3", {}, None),
    # From memory: ordered (sqrt3 x sqrt3)R30 substitutional alloys on fcc(111): p31m
    "cu111_sn_sqrt3_alloy.toml": ("p31m", {}, [[2, 1], [-1, 1]]),
    # Common practice, no source: pairing rows of a square face keeps both mirror lines: p2mm
    "ag100_row_pairing_2x1.toml": ("p2mm", {}, [[1, 0], [0, 2]]),
    # Common practice, no source: one mirror (across the Pt-Pt bond) on a hexagonal lattice: cm
    "pt111_c2h4_bridge.toml": ("cm", {"C2H4": Fraction(1, 4)}, [[2, 0], [0, 2]]),
}


def test_library_has_the_issue_examples():
    names = {p.name for p in FILES}
    assert set(EXPECT) <= names
    assert len(names) >= 12


@pytest.fixture(scope="module")
def built():
    return {p.name: build_model(p) for p in FILES}


@pytest.mark.parametrize("path", FILES, ids=[p.name for p in FILES])
def test_every_model_builds_and_is_labelled_synthetic(path, built):
    s = built[path.name]
    text = path.read_text(encoding="utf-8")
    head = text.split("[model]")[0].lower()
    assert "synthetic" in head and "illustrative" in head
    rec = s.info["surfgeo"]["model"]
    assert rec["synthetic"] is True and rec["file"] == path.name
    assert close_contacts(s) == []
    assert len(s) > 0


@pytest.mark.parametrize("name", sorted(EXPECT))
def test_expected_structure(name, built):
    s = built[name]
    group, cov, matrix = EXPECT[name]
    assert plane_group(s) == group
    assert coverage(s) == cov
    if matrix is not None:
        assert s.info["surfgeo"]["supercell_matrix"] == matrix


def test_details_of_selected_models(built):
    # O of the p(2x2) sits in an fcc hollow: directly above a third-layer atom (ABC stacking)
    s = built["pt111_o_p2x2.toml"]
    o = [i for i, a in enumerate(s) if a.symbol == "O"][0]
    layers = layers_from_top(s)
    B = s.cell[:2, :2]

    def below(i, layer):
        d = (s.positions[layers[layer - 1], :2] - s.positions[i, :2]) @ np.linalg.inv(B)
        d -= np.rint(d)
        return np.min(np.linalg.norm(d @ B, axis=1))

    # Common practice, no source: fcc hollow above a third-layer atom, not a second-layer one
    assert below(o, 3) < 1e-6 and below(o, 2) > 1.0
    # Pt-O bond length as written in the file
    pt = [i for i, a in enumerate(s) if a.symbol == "Pt"]
    assert np.sort(s.get_distances(o, pt, mic=True))[:3] == pytest.approx([2.05] * 3)

    # CO on every step-edge atom of Pt(533): on the outermost Pt, upright
    s = built["pt533_co_step_edge.toml"]
    c = [i for i, a in enumerate(s) if a.symbol == "C"]
    pt = [i for i, a in enumerate(s) if a.symbol == "Pt"]
    top_pt = pt[int(np.argmax(s.positions[pt, 2]))]
    assert len(c) == 1 and s.get_distance(c[0], top_pt, mic=True) == pytest.approx(1.85)
    assert s.info["surfgeo"]["step"] is not None

    # the incommensurate film is only recorded, at 30 degrees
    s = built["pt111_graphene_incommensurate.toml"]
    rec = s.info["surfgeo"]["overlayers"][0]
    assert rec["outcome"] == "incommensurate" and "C" not in s.get_chemical_symbols()
    v = np.array(rec["rotated_vectors"][0])
    assert math.degrees(math.atan2(v[1], v[0])) == pytest.approx(30.0)

    # the sqrt7 coincidence cell holds 3x3 film cells (18 C)
    # From memory: graphene on Pt(111) forms a (3x3) film cell on (sqrt7 x sqrt7)R19.1 of Pt
    s = built["pt111_graphene_sqrt7.toml"]
    assert s.get_chemical_symbols().count("C") == 18
    assert round(abs(np.linalg.det(s.info["surfgeo"]["supercell_matrix"]))) == 7


def test_builds_are_byte_identical(built):
    for name in ("ni100_c_p4g.toml", "cu110_added_row_o_2x1.toml"):
        a, b = io.StringIO(), io.StringIO()
        ase.io.write(a, built[name], format="extxyz")
        ase.io.write(b, build_model(LIBRARY / name), format="extxyz")
        assert a.getvalue() == b.getvalue()
