"""Lattice spec strings for the command line: ``hex:2.77``, ``square:2.55`` ...

Surface names such as ``Pt(111)`` are resolved one layer up (the slab package), because
the lattice package knows nothing of crystals.
"""

from __future__ import annotations

from surfgeo.errors import LatticeError
from surfgeo.lattice.lattice2d import Lattice2D

SPEC_HELP = (
    "hex:A, hex60:A (60 degree basis), square:A, rect:A,B, rhombic:A,GAMMA, "
    "oblique:A,B,GAMMA or vectors:X1,Y1,X2,Y2 (Angstrom, degrees)"
)

_KINDS = {
    "hex": ("hexagonal", 1),
    "hexagonal": ("hexagonal", 1),
    "hex60": ("hex60", 1),
    "square": ("square", 1),
    "sq": ("square", 1),
    "rect": ("rectangular", 2),
    "rectangular": ("rectangular", 2),
    "rhombic": ("rhombic", 2),
    "centred": ("rhombic", 2),
    "oblique": ("oblique", 3),
    "vectors": ("vectors", 4),
}


def parse_lattice(spec: str) -> Lattice2D:
    """Build a :class:`Lattice2D` from a spec string.

    Parameters
    ----------
    spec : str
        ``KIND:PARAMS`` with KIND one of ``hex``, ``hex60``, ``square``, ``rect``,
        ``rhombic``, ``oblique``, ``vectors`` and comma-separated parameters in Angstrom
        and degrees.

    Examples
    --------
    >>> parse_lattice("rect:2.55,3.61").lengths
    (2.55, 3.61)
    """
    if not isinstance(spec, str) or ":" not in spec:
        raise LatticeError(f"lattice spec {spec!r} is not of the form KIND:PARAMS; use {SPEC_HELP}.")
    kind, _, params = spec.partition(":")
    key = kind.strip().lower()
    if key not in _KINDS:
        raise LatticeError(f"unknown lattice kind {kind!r} in {spec!r}; use {SPEC_HELP}.")
    name, nparams = _KINDS[key]
    parts = [p.strip() for p in params.split(",") if p.strip()]
    if len(parts) != nparams:
        raise LatticeError(
            f"lattice kind {kind!r} takes {nparams} parameter(s), got {len(parts)} in {spec!r}; "
            f"use {SPEC_HELP}."
        )
    try:
        values = [float(p) for p in parts]
    except ValueError:
        raise LatticeError(f"lattice parameters in {spec!r} must be numbers.") from None
    if name == "hexagonal":
        return Lattice2D.hexagonal(values[0])
    if name == "hex60":
        return Lattice2D.hexagonal(values[0], gamma=60)
    if name == "square":
        return Lattice2D.square(values[0])
    if name == "rectangular":
        return Lattice2D.rectangular(*values)
    if name == "rhombic":
        return Lattice2D.rhombic(*values)
    if name == "oblique":
        return Lattice2D.oblique(*values)
    return Lattice2D.from_vectors(values[:2], values[2:])
