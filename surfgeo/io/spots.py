"""Spot lists as CSV text: reading (pixel or momentum lists) and atomic writing.

Layout of a spot-list file
--------------------------
* One header line naming the columns, then one spot per line. Commas separate the fields
  (a semicolon or tab is accepted when the header uses it throughout). Spaces around
  values are ignored, blank lines and lines starting with ``#`` are skipped.
* Pixel lists need the columns ``x`` and ``y`` (pixels; x right, y down, the centre of the
  top-left pixel at (0, 0)); optional columns are ``intensity``, ``intensity_error``,
  ``sigma``, ``snr``, ``uncertainty`` (numbers; empty means unknown) and ``saturated``,
  ``edge`` (0/1). Momentum lists need ``kx`` and ``ky`` (1/Angstrom, with 2 pi) and may
  have ``intensity``. Column names are case-insensitive; other columns are ignored.

The numerical core never imports this module; the command line does.
"""

from __future__ import annotations

import csv
import io
import math
import os
from pathlib import Path

import numpy as np

from surfgeo.errors import FileFormatError
from surfgeo.io.atomic import write_text
from surfgeo.measure.spotlist import MOMENTUM_COLUMNS, SPOT_COLUMNS, MomentumSpotList, SpotList

_FLOAT_COLUMNS = ("intensity", "intensity_error", "sigma", "snr", "uncertainty")
_BOOL_COLUMNS = ("saturated", "edge")
_TRUE = {"1", "true", "yes", "y", "t"}
_FALSE = {"0", "false", "no", "n", "f", ""}


def _number(text: str, where: str, column: str, required: bool) -> float:
    t = text.strip()
    if not t:
        if required:
            raise FileFormatError(f"{where}: column {column!r} is empty; it must hold a number.")
        return math.nan
    try:
        v = float(t)
    except ValueError:
        raise FileFormatError(f"{where}: column {column!r} holds {t!r}, which is not a number.") from None
    if required and not math.isfinite(v):
        raise FileFormatError(f"{where}: column {column!r} must be a finite number, got {t!r}.")
    return v


def _flag(text: str, where: str, column: str) -> bool:
    t = text.strip().lower()
    if t in _TRUE:
        return True
    if t in _FALSE:
        return False
    raise FileFormatError(f"{where}: column {column!r} holds {text.strip()!r}; use 0 or 1.")


def parse_spot_csv(text: str, source: str = "spot list") -> SpotList | MomentumSpotList:
    """Parse spot-list CSV text (see the module docstring for the layout).

    Returns a :class:`SpotList` when the header has ``x`` and ``y``, a
    :class:`MomentumSpotList` when it has ``kx`` and ``ky``.

    Raises
    ------
    FileFormatError
        Empty text, a header without ``x,y`` or ``kx,ky`` (or with both), a line with too few
        fields, or a value that is not a number; the message names the line and column.
    """
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines())
             if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise FileFormatError(f"{source} is empty; it needs a header line such as 'x,y,intensity'.")
    head_no, head = lines[0]
    delim = ","
    if "," not in head:
        delim = ";" if ";" in head else ("\t" if "\t" in head else ",")
    rows = list(csv.reader((ln for _, ln in lines), delimiter=delim))
    header = [h.strip().lower() for h in rows[0]]
    pixel = "x" in header and "y" in header
    momentum = "kx" in header and "ky" in header
    if pixel and momentum:
        raise FileFormatError(f"{source} line {head_no}: the header has both x,y and kx,ky; keep one pair.")
    if not (pixel or momentum):
        found = ", ".join(h for h in header if h) or "nothing"
        raise FileFormatError(
            f"{source} line {head_no}: the header must name the columns x,y (pixels) or kx,ky "
            f"(1/Angstrom); found {found}."
        )
    known = SPOT_COLUMNS if pixel else MOMENTUM_COLUMNS
    index = {}
    for name in known:
        if header.count(name) > 1:
            raise FileFormatError(f"{source} line {head_no}: column {name!r} appears twice in the header.")
        if name in header:
            index[name] = header.index(name)
    required = ("x", "y") if pixel else ("kx", "ky")
    cols: dict[str, list] = {name: [] for name in index}
    for (line_no, _), row in zip(lines[1:], rows[1:], strict=True):
        where = f"{source} line {line_no}"
        for name, j in index.items():
            if j >= len(row):
                if name in required:
                    raise FileFormatError(
                        f"{where}: column {name!r} is missing (the line has {len(row)} fields)."
                    )
                cell = ""
            else:
                cell = row[j]
            if name in _BOOL_COLUMNS:
                cols[name].append(_flag(cell, where, name))
            else:
                cols[name].append(_number(cell, where, name, name in required))
    arrays = {name: np.asarray(v, dtype=bool if name in _BOOL_COLUMNS else float) for name, v in cols.items()}
    if pixel:
        return SpotList.from_columns(**arrays)
    return MomentumSpotList.from_columns(**arrays)


def read_spot_csv(path: str | os.PathLike) -> SpotList | MomentumSpotList:
    """Read a spot-list CSV file; see :func:`parse_spot_csv`.

    Raises
    ------
    FileFormatError
        If the file does not exist, cannot be decoded as text, or does not parse.
    """
    p = Path(path)
    if not p.is_file():
        raise FileFormatError(f"{p} does not exist or is not a file; give a spot-list CSV file.")
    try:
        text = p.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise FileFormatError(
            f"{p} is not a text file; a spot list is CSV text with a header line."
        ) from None
    except OSError as exc:
        raise FileFormatError(f"{p} cannot be read ({exc.strerror}).") from None
    return parse_spot_csv(text, source=str(p))


def _fmt(v: float, digits: int) -> str:
    return "" if not math.isfinite(v) else f"{v:.{digits}f}"


def spot_csv_text(spots: SpotList | MomentumSpotList) -> str:
    """The CSV text of a spot list (header line, then one spot per line; unknown values empty)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    if isinstance(spots, MomentumSpotList):
        w.writerow(MOMENTUM_COLUMNS)
        for a, b, c in zip(spots.kx, spots.ky, spots.intensity, strict=True):
            w.writerow([_fmt(a, 6), _fmt(b, 6), _fmt(c, 6)])
        return buf.getvalue()
    w.writerow(SPOT_COLUMNS)
    digits = {"x": 4, "y": 4, "intensity": 3, "intensity_error": 3, "sigma": 4, "snr": 2, "uncertainty": 4}
    cols = [getattr(spots, name) for name in SPOT_COLUMNS]
    for i in range(len(spots)):
        row = []
        for name, arr in zip(SPOT_COLUMNS, cols, strict=True):
            row.append(str(int(bool(arr[i]))) if name in _BOOL_COLUMNS else _fmt(float(arr[i]), digits[name]))
        w.writerow(row)
    return buf.getvalue()


def write_spot_csv(path: str | os.PathLike, spots: SpotList | MomentumSpotList, force: bool = False) -> Path:
    """Write a spot list as CSV, atomically; an existing file is replaced only with ``force``."""
    return write_text(path, spot_csv_text(spots), force)


__all__ = ["parse_spot_csv", "read_spot_csv", "spot_csv_text", "write_spot_csv"]
