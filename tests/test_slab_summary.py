"""The slab summary (surfgeo.slab.summary)."""

from __future__ import annotations

import json

import pytest
from ase.build import fcc110

from surfgeo.io import to_jsonable
from surfgeo.slab.cut import surface_slab
from surfgeo.slab.relax import relax_layers
from surfgeo.slab.steps import stepped_slab
from surfgeo.slab.summary import format_summary, slab_summary

REQUIRED = ("surface_lattice", "layer_spacing", "atoms_per_layer", "layers", "step_notation",
            "terrace_width", "step_height", "miscut_deg")


def test_flat_face_summary():
    s = surface_slab("Pt", (1, 1, 1), layers=5, size=(2, 2))
    sm = slab_summary(s)
    for k in REQUIRED:
        assert k in sm
    json.dumps(to_jsonable(sm))
    assert set(sm["surface_lattice"]) >= {"kind", "a1", "a2", "area"}
    assert sm["surface_lattice"]["kind"] == "hexagonal"
    assert sm["atoms_per_layer"] == [4] * 5
    assert len(sm["layers"]) == 5 and sm["layers"] == sorted(sm["layers"])
    assert sm["step_notation"] is None and sm["terrace_width"] is None and sm["miscut_deg"] == 0.0
    # Common practice, no source: fcc(111) spacing a/sqrt(3)
    assert sm["layer_spacing"] == pytest.approx(3.92 / 3**0.5)
    assert sm["symmetry"]["plane_group"] == "p3m1"
    assert sm["registry"][-1] == [0.0, 0.0]
    text = format_summary(sm)
    assert "hexagonal" in text and "5 layers" in text


def test_stepped_and_relaxed_summary():
    s = relax_layers(stepped_slab("Pt", "9(111)x(111)", layers=20), "d12=-1%")
    sm = slab_summary(s)
    assert sm["step_notation"] == "9(111)×(111)"
    assert sm["step_height"] == pytest.approx(3.92 / 3**0.5)
    assert sm["miscut_deg"] == pytest.approx(6.45, abs=0.01)
    assert sm["relaxations"][0]["changes"]["d12"]["value"] == -1.0
    text = format_summary(sm)
    assert "9(111)×(111)" in text and "relaxed (top)" in text


def test_summary_of_a_foreign_slab():
    sm = slab_summary(fcc110("Cu", (2, 3, 4), vacuum=5.0))
    assert sm["n_layers"] == 4 and sm["atoms_per_layer"] == [6] * 4
    assert sm["miller"] is None
    assert sm["vacuum_gap"] == pytest.approx(10.0)


def test_model_builds_name_their_model_adsorbates_and_films():
    # Regression: building an incommensurate-film model printed "4 atoms (Pt4)" with no word about
    # the film, which is not written as atoms; the summary now says so.
    from pathlib import Path

    from surfgeo.slab.model import build_model

    lib = Path(__file__).resolve().parent.parent / "structures"
    sm = slab_summary(build_model(lib / "pt111_graphene_incommensurate.toml"), symmetry=False)
    assert sm["overlayers"][0]["outcome"] == "incommensurate" and sm["formula"] == "Pt4"
    text = format_summary(sm)
    assert "no film atoms are written" in text and "(synthetic)" in text
    sm = slab_summary(build_model(lib / "ni100_c_p4g.toml"), symmetry=False)
    text = format_summary(sm)
    assert "reconstruction: clock-rotation, plane group p4g" in text
    assert "adsorbate: C x2 on fourfold-hollow, coverage 1/2 ML" in text
    assert slab_summary(surface_slab("Pt", (1, 1, 1), layers=3), symmetry=False)["overlayers"] == []
