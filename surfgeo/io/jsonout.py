"""JSON output for scripts: numpy arrays, numpy scalars and fractions become plain JSON.

The conversion itself is :func:`surfgeo.jsonable.to_jsonable` (shared with the surface record
of the slab package); this module writes the result.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

from surfgeo.io.atomic import write_text
from surfgeo.jsonable import to_jsonable


def dump_json(obj: Any, dest: str | Path, force: bool = False) -> None:
    """Write ``obj`` as indented JSON to the file ``dest``, or to stdout when ``dest`` is ``"-"``."""
    text = json.dumps(to_jsonable(obj), indent=2, ensure_ascii=False) + "\n"
    if str(dest) == "-":
        sys.stdout.write(text)
        sys.stdout.flush()
    else:
        write_text(dest, text, force)
