"""File formats and output handling (the edge of the package; the numerical core never imports it)."""

from surfgeo.io.atomic import atomic_output, check_writable, write_bytes, write_text
from surfgeo.io.jsonout import dump_json, to_jsonable

__all__ = [
    "atomic_output",
    "check_writable",
    "write_bytes",
    "write_text",
    "dump_json",
    "to_jsonable",
]
