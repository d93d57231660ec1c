"""The surface metadata record atoms.info['surfgeo'] (surfgeo.slab.info)."""

from __future__ import annotations

import json

import ase.io
import numpy as np
import pytest
from ase.build import fcc111

from surfgeo.errors import StructureError
from surfgeo.slab.info import (
    INFO_KEY,
    SurfaceInfo,
    add_provenance,
    set_surface_info,
    surface_info,
    update_surface_info,
)


def _record() -> SurfaceInfo:
    return SurfaceInfo(
        surface_cell=np.array([[2.77, 0.0], [-1.385, 2.399]]),
        supercell_matrix=np.array([[2, 0], [0, 2]]),
        miller=[1, 1, 1],
        bulk={"formula": "Pt", "structure": "fcc", "a": 3.92, "c": None},
        layer_spacing=2.263,
        relaxations=[{"side": "top", "dz": [-0.05]}],
        provenance=["built by a test"],
        extra={"adsorbates": [{"symbol": "O", "site": "fcc"}]},
    )


def test_record_is_json_and_survives_extxyz(tmp_path):
    slab = fcc111("Pt", (2, 2, 3), vacuum=5.0)
    set_surface_info(slab, _record())
    json.dumps(slab.info[INFO_KEY])  # plain JSON types only
    path = tmp_path / "slab.extxyz"
    ase.io.write(path, slab)
    back = surface_info(ase.io.read(path))
    assert np.allclose(back.surface_cell, _record().surface_cell)
    assert back.supercell_matrix.tolist() == [[2, 0], [0, 2]]
    assert back.extra["adsorbates"][0]["site"] == "fcc"
    assert back.relaxations == [{"side": "top", "dz": [-0.05]}]
    assert np.allclose(back.cell2d, [[5.54, 0.0], [-2.77, 4.798]])


def test_missing_record_falls_back_to_the_cell_unless_strict():
    slab = fcc111("Pt", (1, 1, 3), vacuum=5.0)
    info = surface_info(slab)
    assert np.allclose(info.surface_cell, slab.cell[:2, :2])
    assert info.supercell_matrix.tolist() == [[1, 0], [0, 1]]
    with pytest.raises(StructureError, match="no surfgeo surface record"):
        surface_info(slab, strict=True)


def test_update_and_provenance_string_from_other_code():
    slab = fcc111("Pt", (1, 1, 3), vacuum=5.0)
    slab.info[INFO_KEY] = {"surface_cell": slab.cell[:2, :2].tolist(), "provenance": "model x.toml"}
    add_provenance(slab, "relaxed")
    info = update_surface_info(slab, miller=[1, 1, 1], model="x.toml")
    assert info.provenance == ["model x.toml", "relaxed"]
    assert slab.info[INFO_KEY]["model"] == "x.toml"
    assert slab.info[INFO_KEY]["miller"] == [1, 1, 1]


@pytest.mark.parametrize(
    "record,match",
    [
        ({}, "surface_cell"),
        ({"surface_cell": [[1, 0, 0], [0, 1, 0]]}, "2x2"),
        ({"surface_cell": [[1, 0], [2, 0]]}, "parallel"),
        ({"surface_cell": [[1, 0], [0, 1]], "supercell_matrix": [[1.5, 0], [0, 1]]}, "integers"),
        ({"surface_cell": [[1, 0], [0, 1]], "supercell_matrix": [[1, 1], [1, 1]]}, "determinant"),
    ],
)
def test_bad_records(record, match):
    with pytest.raises(StructureError, match=match):
        SurfaceInfo.from_dict(record)
