"""JSON output for scripts: numpy arrays, numpy scalars and fractions become plain JSON."""

from __future__ import annotations

import json
import math
import sys
from fractions import Fraction
from pathlib import Path
from typing import Any

import numpy as np

from surfgeo.io.atomic import write_text


def to_jsonable(obj: Any) -> Any:
    """Convert ``obj`` recursively into types the :mod:`json` module writes.

    Fractions become strings such as ``"1/2"`` (exact beam labels); numpy arrays become
    nested lists; non-finite floats become ``None``; paths become strings.
    """
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
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
        return to_jsonable(obj.to_dict())
    return obj


def dump_json(obj: Any, dest: str | Path, force: bool = False) -> None:
    """Write ``obj`` as indented JSON to the file ``dest``, or to stdout when ``dest`` is ``"-"``."""
    text = json.dumps(to_jsonable(obj), indent=2, ensure_ascii=False) + "\n"
    if str(dest) == "-":
        sys.stdout.write(text)
        sys.stdout.flush()
    else:
        write_text(dest, text, force)
