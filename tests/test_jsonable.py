"""The one JSON converter shared by the surface record and the JSON outputs (surfgeo.jsonable)."""

from __future__ import annotations

import json
import math
from fractions import Fraction
from pathlib import Path

import numpy as np

from surfgeo.io import to_jsonable as io_to_jsonable
from surfgeo.jsonable import to_jsonable
from surfgeo.slab.cut import surface_slab
from surfgeo.slab.info import surface_info, update_surface_info


class _Record:
    def to_dict(self):
        return {"k": np.float64(2.5), "label": Fraction(-1, 3)}


def test_every_kind_of_value_and_both_paths():
    value = {
        1: np.arange(3), "f": Fraction(1, 2), "t": (np.int64(4), np.bool_(True)), "p": Path("a/b.json"),
        "r": _Record(), "x": np.float32(0.25),
    }
    want = {"1": [0, 1, 2], "f": "1/2", "t": [4, True], "p": "a/b.json",
            "r": {"k": 2.5, "label": "-1/3"}, "x": 0.25}
    assert to_jsonable(value) == want  # the fast path (C codec)
    # a non-finite number sends the same value through the recursive path: same result, NaN -> None
    assert to_jsonable({**value, "nan": math.nan, "inf": np.array([np.inf])}) == {**want, "nan": None,
                                                                                 "inf": [None]}
    json.dumps(to_jsonable({**value, "nan": math.nan}), allow_nan=False)
    assert io_to_jsonable is to_jsonable  # one converter, re-exported by surfgeo.io


def test_surface_record_keeps_fractions_as_text():
    slab = surface_slab("Cu", (1, 0, 0), layers=3)
    update_surface_info(slab, coverage_note=Fraction(1, 4))
    assert surface_info(slab).extra["coverage_note"] == "1/4"
