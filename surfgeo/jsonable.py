"""Plain JSON types from numpy arrays, numpy scalars, fractions and records.

One converter for every layer: the surface record that travels with a slab
(:mod:`surfgeo.slab.info`) and the JSON written for scripts (:mod:`surfgeo.io.jsonout`) both use
:func:`to_jsonable`. It converts values only; it writes nothing.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction
from pathlib import Path
from typing import Any

import numpy as np


def _default(obj: Any) -> Any:
    """The non-container conversions of :func:`to_jsonable`, for :func:`json.dumps`."""
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, Fraction):
        return str(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return float(obj)
    if isinstance(obj, Path):
        return str(obj)
    if hasattr(obj, "to_dict"):
        return obj.to_dict()
    raise TypeError(f"{type(obj).__name__} is not JSON-able")


def _convert(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _convert(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_convert(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _convert(obj.tolist())
    if isinstance(obj, Fraction):
        return str(obj)
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, Path):
        return str(obj)
    if hasattr(obj, "to_dict"):
        return _convert(obj.to_dict())
    return obj


def to_jsonable(obj: Any) -> Any:
    """Convert ``obj`` recursively into types the :mod:`json` module writes.

    Dicts get string keys; tuples and numpy arrays become lists; numpy scalars become Python
    numbers; fractions become strings such as ``"1/2"`` (exact beam labels); non-finite floats
    become ``None``; paths become strings; objects with a ``to_dict`` method are converted
    through it. Anything else is returned unchanged.

    Large records go through the C JSON codec; the recursive conversion is the fallback for
    non-finite numbers and for values the codec cannot take.
    """
    try:
        return json.loads(json.dumps(obj, default=_default, allow_nan=False))
    except (TypeError, ValueError):
        return _convert(obj)


__all__ = ["to_jsonable"]
