"""Surface names such as ``Pt(111)``, ``Cu(110)``, ``Ru(0001)``, ``Pt(533)`` -> the 2D surface lattice.

Grammar (spaces allowed around the parts)::

    NAME    := ELEMENT "(" INDICES ")" [ ":" OPTIONS ]
    INDICES := compact digits with "-" before negative ones ("111", "10-10", "11-1"),
               or numbers separated by spaces or commas ("10 8 7", "1,0,-1,0")
    OPTIONS := a number (the lattice constant a, Angstrom), or comma-separated
               key=value pairs with keys a, c (Angstrom) and structure (fcc, bcc, hcp, ...)

Examples: ``Pt(111)``, ``Pt(111):3.92``, ``Ru(0001):a=2.706,c=4.282``,
``Fe(110):structure=bcc,a=2.87``, ``Cu(10 8 7)``. Element structures and lattice constants
default to ASE's reference data (see :mod:`surfgeo.slab.bulk`).
"""

from __future__ import annotations

import re

from surfgeo.errors import LatticeError, StructureError
from surfgeo.lattice import Lattice2D

NAME_HELP = (
    "ELEMENT(INDICES)[:a] or ELEMENT(INDICES):a=A,c=C,structure=KIND, e.g. Pt(111), Ru(0001), "
    "Pt(533):3.92"
)

_NAME = re.compile(r"^\s*([A-Z][a-z]?)\s*\(\s*([-\d\s,]+?)\s*\)\s*(?::\s*(.*))?$")


def parse_surface_name(name: str) -> dict:
    """Split a surface name into element, Miller indices and options.

    Returns
    -------
    dict
        ``element`` (str), ``miller`` (tuple of int), ``a``, ``c`` (float or None),
        ``structure`` (str or None).

    Examples
    --------
    >>> parse_surface_name("Ru(0001):a=2.7")["miller"]
    (0, 0, 0, 1)
    """
    if not isinstance(name, str):
        raise LatticeError(f"a surface name must be text such as 'Pt(111)', got {name!r}.")
    m = _NAME.match(name)
    if not m:
        raise LatticeError(f"cannot read the surface name {name!r}; write {NAME_HELP}.")
    element, idx, opts = m.group(1), m.group(2), m.group(3)
    t = idx.strip()
    try:
        if "," in t or re.search(r"\d\s+-?\d", t):
            miller = tuple(int(p) for p in re.split(r"[\s,]+", t) if p)
        else:
            if re.search(r"--|-$", t):
                raise ValueError
            miller = tuple(int(x) for x in re.findall(r"-?\d", t))
    except ValueError:
        raise LatticeError(
            f"bad Miller indices {idx!r} in {name!r}; write e.g. (111), (10-10) or (10 8 7)."
        ) from None
    if len(miller) not in (3, 4):
        raise LatticeError(
            f"the surface name {name!r} needs 3 Miller indices (hkl) or 4 (hkil); separate multi-digit "
            "indices with spaces, e.g. Cu(10 8 7)."
        )
    out: dict = {"element": element, "miller": miller, "a": None, "c": None, "structure": None}
    if opts is not None and opts.strip():
        parts = [p.strip() for p in opts.split(",") if p.strip()]
        for i, p in enumerate(parts):
            key, eq, val = p.partition("=")
            if not eq:
                if i == 0:
                    key, val = "a", p
                else:
                    raise LatticeError(
                        f"option {p!r} in {name!r} must be key=value with key a, c or structure."
                    )
            key = key.strip().lower()
            if key in ("a", "c"):
                try:
                    out[key] = float(val)
                except ValueError:
                    raise LatticeError(
                        f"{key} in {name!r} must be a length in Angstrom, got {val!r}."
                    ) from None
            elif key == "structure":
                out["structure"] = val.strip()
            else:
                raise LatticeError(f"unknown option {key!r} in {name!r}; use a, c or structure.")
    return out


def surface_lattice(name: str, a: float | None = None, c: float | None = None) -> Lattice2D:
    """The 1x1 surface lattice of a named surface, in surfgeo's conventions.

    The lattice is the primitive reduced surface cell of :func:`surfgeo.slab.cut.face_geometry`:
    a1 along +x, right-handed, hexagonal lattices at 120 degrees.

    Parameters
    ----------
    name : str
        E.g. ``"Pt(111)"``, ``"Cu(110)"``, ``"Ru(0001)"``, ``"Pt(533)"``, optionally with a
        lattice constant (``"Pt(111):3.92"``); see the module docstring.
    a, c : float, optional
        Lattice constants (Angstrom) overriding those in the name and the reference data.

    Returns
    -------
    Lattice2D
        Labelled with the name, e.g. ``"Pt(111)"``.

    Raises
    ------
    LatticeError
        For a name that cannot be read, or a crystal/face surfgeo cannot build (the message
        of the underlying :class:`~surfgeo.errors.StructureError` is kept).

    Examples
    --------
    >>> lat = surface_lattice("Pt(111)")
    >>> lat.kind(), round(lat.lengths[0], 4)
    ('hexagonal', 2.7719)
    """
    from surfgeo.slab.bulk import bulk_crystal
    from surfgeo.slab.cut import face_geometry, miller_string

    parts = parse_surface_name(name)
    a = a if a is not None else parts["a"]
    c = c if c is not None else parts["c"]
    try:
        if a is not None and parts["structure"] is None:
            from ase.data import atomic_numbers, reference_states

            ref = reference_states[atomic_numbers[parts["element"]]] or {}
            structure = ref.get("symmetry")
            if structure == "hcp" and c is None:
                c = ref["c/a"] * a
        else:
            structure = parts["structure"]
        bulk = bulk_crystal(parts["element"], structure, a=a, c=c)
        face = face_geometry(bulk, parts["miller"])
    except StructureError as exc:
        raise LatticeError(f"surface {name.strip()!r}: {exc}") from None
    return Lattice2D(face.cell2d, f"{parts['element']}({miller_string(face.miller)})")


__all__ = ["NAME_HELP", "parse_surface_name", "surface_lattice"]
