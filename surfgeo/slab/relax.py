"""Layer relaxations: changes of interlayer spacings and lateral shifts, with a record.

A relaxation is given per surface as changes Delta d_ij of the spacing between layers i and
j = i + 1, counted from that surface (layer 1 is the outermost), in percent of the bulk
spacing or in Angstrom, and as lateral shifts of whole layers. The deep layers stay where
they are: layer k moves along the normal by the sum of Delta d_ij for all i >= k, so that
every listed spacing changes by exactly its Delta d. Adsorbates (atoms tagged 0 on a
surfgeo slab) move with the top layer when the top surface is relaxed.

Spec strings, as on the command line::

    d12=-2.5%,d23=1.0%          spacing changes in percent of the bulk spacing
    d12=-0.05,d23=0.02A         ... or in Angstrom (a plain number or a trailing A)
    x1=0.1,y1=-0.05             lateral shift of layer 1 in Angstrom (slab frame)

Percentages refer to the bulk spacing of the ideal slab (kept in the surface record when
surfgeo built it); for other slabs the spacing measured before the first relaxation is
used, and the record says so.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping

import numpy as np

from surfgeo.errors import StructureError
from surfgeo.slab.info import surface_info, update_surface_info
from surfgeo.slab.layers import slab_layers

_KEY = re.compile(r"^(d)(\d+)$|^([xy])(\d+)$")


def _parse_value(key: str, val) -> tuple[float, str]:
    if isinstance(val, (int, float, np.integer, np.floating)) and not isinstance(val, bool):
        v = float(val)
        unit = "A"
    else:
        text = str(val).strip().replace("Å", "A")
        unit = "A"
        if text.endswith("%"):
            unit, text = "%", text[:-1]
        elif text.lower().endswith("a"):
            text = text[:-1]
        try:
            v = float(text)
        except ValueError:
            raise StructureError(
                f"relaxation {key}={val!r}: give a number in Angstrom or a percentage such as -2.5%."
            ) from None
    if not math.isfinite(v):
        raise StructureError(f"relaxation {key} must be a finite number, got {val!r}.")
    if key[0] in "xy" and unit == "%":
        raise StructureError(f"lateral shift {key} is a length in Angstrom, not a percentage.")
    return v, unit


def parse_relaxation(spec: str | Mapping) -> dict[str, tuple[float, str]]:
    """Read a relaxation spec (string or mapping) into {key: (value, unit)}.

    Keys are ``dIJ`` with J = I + 1 (spacing between layers I and J from the surface) and
    ``xK``/``yK`` (lateral shift of layer K). Units are ``"%"`` or ``"A"``.

    Examples
    --------
    >>> parse_relaxation("d12=-2.5%,d23=0.02")
    {'d12': (-2.5, '%'), 'd23': (0.02, 'A')}
    """
    if isinstance(spec, str):
        items = []
        for part in [p.strip() for p in spec.split(",") if p.strip()]:
            key, eq, val = part.partition("=")
            if not eq:
                raise StructureError(
                    f"cannot read {part!r} in the relaxation {spec!r}; write e.g. d12=-2.5%,d23=1.0%."
                )
            items.append((key.strip(), val.strip()))
    elif isinstance(spec, Mapping):
        items = list(spec.items())
    else:
        raise StructureError("a relaxation must be text such as 'd12=-2.5%' or a mapping {'d12': '-2.5%'}.")
    if not items:
        raise StructureError("the relaxation is empty; give e.g. d12=-2.5%.")
    out: dict[str, tuple[float, str]] = {}
    for key, val in items:
        k = str(key).strip().lower()
        m = _KEY.match(k)
        if not m:
            raise StructureError(
                f"unknown relaxation key {key!r}; use d12, d23, ... for spacings and x1, y1, ... for "
                "lateral shifts."
            )
        if m.group(1):
            digits = m.group(2)
            i, j = _pair(digits, key)
            if i < 1 or j != i + 1:
                raise StructureError(f"{key!r} must name neighbouring layers such as d12, d23 or d9,10.")
            k = f"d{i},{j}" if i >= 9 else f"d{i}{j}"
        else:
            if int(m.group(4)) < 1:
                raise StructureError(f"{key!r}: layers are counted from 1 at the surface.")
        if k in out:
            raise StructureError(f"relaxation key {key!r} is given twice.")
        out[k] = _parse_value(k, val)
    return out


def _pair(digits: str, key) -> tuple[int, int]:
    """'12' -> (1, 2); '910' -> (9, 10); '1011' -> (10, 11)."""
    for cut in range(1, len(digits)):
        i, j = int(digits[:cut]), int(digits[cut:])
        if j == i + 1:
            return i, j
    raise StructureError(f"{key!r} must name neighbouring layers such as d12, d23 or d910.")


def _index_of(k: str) -> int:
    if k.startswith("d"):
        body = k[1:]
        return int(body.split(",")[0]) if "," in body else int(body[: len(body) // 2])
    return int(k[1:])


def relax_layers(slab, spec, side: str = "top"):
    """A copy of ``slab`` with changed interlayer spacings and lateral layer shifts.

    Parameters
    ----------
    slab : ase.Atoms
        A slab (+z out of the top surface).
    spec : str or mapping
        See :func:`parse_relaxation` and the module docstring.
    side : {"top", "bottom", "both"}
        The surface(s) the relaxation applies to. At the bottom, layer 1 is the lowest layer
        and a negative Delta d (contraction) moves it up.

    Returns
    -------
    ase.Atoms
        The relaxed copy; its surface record gets one more entry in ``relaxations``
        ({side, changes: {key: {value, unit, angstrom}}, reference, layer_shifts}) and a
        provenance line.

    Raises
    ------
    StructureError
        Unknown keys, a layer that does not exist, relaxations of the two surfaces that
        overlap, or a change that would make layers cross (spacing <= 0).

    Examples
    --------
    >>> from surfgeo.slab.cut import surface_slab
    >>> s = relax_layers(surface_slab("Cu", (1, 1, 0), layers=6), "d12=-10%")
    >>> s.info["surfgeo"]["relaxations"][0]["changes"]["d12"]["unit"]
    '%'
    """
    if side not in ("top", "bottom", "both"):
        raise StructureError(f"side must be 'top', 'bottom' or 'both', got {side!r}.")
    changes = parse_relaxation(spec)
    atoms = slab.copy()
    layers = slab_layers(atoms)
    nl = len(layers)
    z = atoms.positions[:, 2]
    heights = np.array([z[idx].mean() for idx in layers])
    info = surface_info(atoms)
    ideal = info.extra.get("ideal_layer_heights")
    if ideal is not None and len(ideal) == nl:
        ref_heights = np.asarray(ideal, dtype=float)
        reference = "bulk spacing of the ideal slab"
    else:
        ref_heights = heights
        reference = "spacing measured before this relaxation"
    deepest = max(_index_of(k) + (1 if k.startswith("d") else 0) for k in changes)
    if deepest > nl:
        raise StructureError(
            f"the relaxation reaches layer {deepest} but the slab has only {nl} layers."
        )
    sides = ["top", "bottom"] if side == "both" else [side]
    if side == "both" and 2 * deepest > nl:
        raise StructureError(
            f"relaxing both surfaces down to layer {deepest} needs at least {2 * deepest} layers; "
            f"the slab has {nl}."
        )
    dz = np.zeros(nl)
    dxy = np.zeros((nl, 2))
    record_changes: dict[str, dict] = {}
    for sd in sides:
        order = np.arange(nl)[::-1] if sd == "top" else np.arange(nl)  # surface layer first
        sign = 1.0 if sd == "top" else -1.0
        for k, (v, unit) in changes.items():
            i = _index_of(k)
            if k.startswith("d"):
                li, lj = order[i - 1], order[i]
                d_ref = abs(ref_heights[li] - ref_heights[lj])
                delta = v / 100.0 * d_ref if unit == "%" else v
                # layers 1..i (from this surface) move outwards by delta
                dz[order[:i]] += sign * delta
                record_changes.setdefault(k, {"value": v, "unit": unit, "angstrom": delta})
            else:
                axis = 0 if k[0] == "x" else 1
                dxy[order[i - 1], axis] += v
                record_changes.setdefault(k, {"value": v, "unit": "A", "angstrom": v})
    new_heights = heights + dz
    gaps = np.diff(new_heights)
    bad = np.nonzero(gaps <= 1e-3)[0]
    if bad.size:
        b = int(bad[0])
        from_top = nl - 1 - b
        raise StructureError(
            f"this relaxation makes layers {from_top} and {from_top + 1} (counted from the top) cross or "
            "touch; a contraction must stay above -100% of the spacing."
        )
    shift = np.zeros((len(atoms), 3))
    for li, idx in enumerate(layers):
        shift[idx, 2] = dz[li]
        shift[idx, :2] = dxy[li]
    tags = atoms.get_tags()
    if info.extra.get("layers_from_tags") and np.any(tags == 0) and "top" in sides:
        shift[tags == 0] = shift[layers[-1][0]]
    atoms.positions = atoms.positions + shift
    rec = {
        "side": side,
        "changes": record_changes,
        "reference": reference,
        "layer_dz_top_down": [float(v) for v in dz[::-1]],
        "layer_shift_xy_top_down": [[float(a), float(b)] for a, b in dxy[::-1]],
    }
    rels = list(info.relaxations) + [rec]
    text = ", ".join(
        f"{k}={c['value']:+g}{'%' if c['unit'] == '%' else ' A'}" for k, c in record_changes.items()
    )
    extra = {}
    if ideal is None:
        extra["ideal_layer_heights"] = [float(v) for v in heights]
    update_surface_info(atoms, provenance=f"surfgeo relax_layers ({side}): {text}", relaxations=rels, **extra)
    return atoms


__all__ = ["parse_relaxation", "relax_layers"]
