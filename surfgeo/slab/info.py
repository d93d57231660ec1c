"""The surface metadata record that travels with every slab: ``atoms.info["surfgeo"]``.

The record is a plain JSON-able dict, so it survives extxyz files and JSON reports.
:class:`SurfaceInfo` is the typed view of it; :func:`surface_info` reads it and
:func:`set_surface_info` / :func:`update_surface_info` write it back. Every transformation
in :mod:`surfgeo.slab` keeps the record up to date and appends a line to ``provenance``.

Keys (all lengths in Angstrom, in the frame of the slab's cell)

``surface_cell``
    2x2 list, rows a1, a2 of the 1x1 surface lattice of the substrate.
``supercell_matrix``
    2x2 ints M with the slab's in-plane cell B = M @ A (Park and Madden); identity for 1x1.
``miller``
    Miller indices of the face: 3 ints, or 4 (h k i l) for hexagonal crystals; ``None`` if
    unknown.
``bulk``
    dict with at least ``formula``, ``structure``, ``a``, ``c`` (``None`` where not known).
``layer_spacing``
    Mean bulk spacing of atomic layers along the normal (Angstrom).
``relaxations``
    list of records, one per relaxation applied (see :mod:`surfgeo.slab.relax`).
``provenance``
    list of one-line strings saying what was done, oldest first (a single string written by
    other code is read as a one-item list).
``step``
    the step description of a vicinal face (see :mod:`surfgeo.slab.steps`), or ``None``.
``termination``
    the termination record of the cut (index, top layer composition, polar), or ``None``.

Any other key (reconstructions, adsorbates, the model file a slab came from, ...) is kept
verbatim in :attr:`SurfaceInfo.extra` and written back unchanged.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from surfgeo.errors import StructureError
from surfgeo.jsonable import to_jsonable
from surfgeo.lattice import Lattice2D

#: The key of the record in ``atoms.info``.
INFO_KEY = "surfgeo"

_KNOWN = (
    "surface_cell", "supercell_matrix", "miller", "bulk", "layer_spacing", "relaxations",
    "provenance", "step", "termination",
)


@dataclass
class SurfaceInfo:
    """Typed view of ``atoms.info["surfgeo"]`` (see the module docstring for the keys).

    Attributes
    ----------
    surface_cell : ndarray, shape (2, 2)
        Rows a1, a2 of the 1x1 substrate surface lattice, Angstrom, slab frame.
    supercell_matrix : ndarray of int, shape (2, 2)
        M with the slab's in-plane cell B = M @ A.
    miller : list of int or None
    bulk : dict or None
    layer_spacing : float or None
        Mean bulk atomic layer spacing along the normal, Angstrom.
    relaxations : list of dict
    provenance : list of str
    step : dict or None
    termination : dict or None
    extra : dict
        Every other key of the record, kept unchanged.
    """

    surface_cell: np.ndarray
    supercell_matrix: np.ndarray = field(default_factory=lambda: np.eye(2, dtype=int))
    miller: list[int] | None = None
    bulk: dict | None = None
    layer_spacing: float | None = None
    relaxations: list[dict] = field(default_factory=list)
    provenance: list[str] = field(default_factory=list)
    step: dict | None = None
    termination: dict | None = None
    extra: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        try:
            cell = np.array(self.surface_cell, dtype=float)
        except (TypeError, ValueError):
            raise StructureError("surface_cell must be a 2x2 list of numbers (Angstrom).") from None
        if cell.shape != (2, 2) or not np.all(np.isfinite(cell)):
            raise StructureError(f"surface_cell must be a 2x2 list of numbers, got shape {cell.shape}.")
        if abs(np.linalg.det(cell)) < 1e-8:
            raise StructureError("surface_cell rows are parallel; they must span a 2D lattice.")
        self.surface_cell = cell
        try:
            m = np.array(self.supercell_matrix, dtype=float)
        except (TypeError, ValueError):
            raise StructureError("supercell_matrix must be a 2x2 list of integers.") from None
        if m.shape != (2, 2) or not np.all(np.isfinite(m)) or np.any(np.abs(m - np.rint(m)) > 1e-9):
            raise StructureError("supercell_matrix must be a 2x2 list of integers.")
        m = np.rint(m).astype(int)
        if round(np.linalg.det(m)) == 0:
            raise StructureError("supercell_matrix must have a non-zero determinant.")
        self.supercell_matrix = m
        if isinstance(self.provenance, str):
            self.provenance = [self.provenance]
        self.provenance = [str(p) for p in (self.provenance or [])]
        self.relaxations = list(self.relaxations or [])
        if self.miller is not None:
            self.miller = [int(v) for v in self.miller]
        if self.layer_spacing is not None:
            self.layer_spacing = float(self.layer_spacing)

    # ------------------------------------------------------------------ derived
    @property
    def lattice(self) -> Lattice2D:
        """The 1x1 substrate surface lattice as a :class:`~surfgeo.lattice.Lattice2D`."""
        return Lattice2D(self.surface_cell, "surface")

    @property
    def cell2d(self) -> np.ndarray:
        """The slab's in-plane cell B = M @ A (2x2, Angstrom)."""
        return self.supercell_matrix @ self.surface_cell

    # ------------------------------------------------------------------ conversion
    def to_dict(self) -> dict:
        """The record as a JSON-able dict (known keys first, then the extra keys)."""
        out = {
            "surface_cell": self.surface_cell,
            "supercell_matrix": self.supercell_matrix,
            "miller": self.miller,
            "bulk": self.bulk,
            "layer_spacing": self.layer_spacing,
            "relaxations": self.relaxations,
            "provenance": self.provenance,
            "step": self.step,
            "termination": self.termination,
        }
        for k, v in self.extra.items():
            if k not in out:
                out[k] = v
        return to_jsonable(out)

    @classmethod
    def from_dict(cls, record: dict) -> SurfaceInfo:
        """Read a record written by :meth:`to_dict` (or by hand); unknown keys go to ``extra``."""
        if not isinstance(record, dict):
            raise StructureError("atoms.info['surfgeo'] must be a dict of surface metadata.")
        if record.get("surface_cell") is None:
            raise StructureError("atoms.info['surfgeo'] has no 'surface_cell' (the 2x2 surface lattice).")
        kw = {k: copy.deepcopy(record[k]) for k in _KNOWN if k in record and record[k] is not None}
        kw["surface_cell"] = record["surface_cell"]
        extra = {k: copy.deepcopy(v) for k, v in record.items() if k not in _KNOWN}
        return cls(**kw, extra=extra)


def surface_info(atoms, strict: bool = False) -> SurfaceInfo:
    """The surface metadata of a slab.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab. Its ``info["surfgeo"]`` record is read when present.
    strict : bool
        If true, a slab without a record is an error. If false (default), a minimal record
        is made from the cell: the in-plane cell rows (which must lie in the xy-plane) are
        taken as a 1x1 surface cell, nothing else is known.

    Returns
    -------
    SurfaceInfo
        A copy; change it and write it back with :func:`set_surface_info`.

    Raises
    ------
    StructureError
        If the record is malformed, or missing with ``strict=True``, or the cell does not
        follow the slab convention (a1, a2 in the xy-plane).
    """
    record = atoms.info.get(INFO_KEY)
    if record is not None:
        return SurfaceInfo.from_dict(record)
    if strict:
        raise StructureError(
            "this structure carries no surfgeo surface record; build it with surfgeo or give the "
            "surface lattice explicitly."
        )
    cell = np.asarray(atoms.cell[:], dtype=float)
    if np.any(np.abs(cell[:2, 2]) > 1e-6):
        raise StructureError(
            "the first two cell vectors must lie in the xy-plane (z = 0) for a slab; "
            "this cell has z components in a1 or a2."
        )
    return SurfaceInfo(
        surface_cell=cell[:2, :2],
        provenance=["no surfgeo record: the in-plane cell was taken as the 1x1 surface cell"],
    )


def set_surface_info(atoms, info: SurfaceInfo | dict) -> None:
    """Write the record into ``atoms.info["surfgeo"]`` as a JSON-able dict (in place)."""
    if isinstance(info, dict):
        info = SurfaceInfo.from_dict(info)
    atoms.info[INFO_KEY] = info.to_dict()


def update_surface_info(atoms, provenance: str | None = None, **changes: Any) -> SurfaceInfo:
    """Change some fields of the record in place and optionally append a provenance line.

    Unknown field names are stored among the extra keys. Returns the updated record.

    Examples
    --------
    >>> from ase.build import fcc111
    >>> s = fcc111("Pt", (1, 1, 3), vacuum=5.0)
    >>> update_surface_info(s, provenance="made by ase.build.fcc111", miller=[1, 1, 1]).miller
    [1, 1, 1]
    """
    info = surface_info(atoms)
    for key, value in changes.items():
        if key in _KNOWN:
            setattr(info, key, value)
        else:
            info.extra[key] = value
    if provenance:
        info.provenance.append(str(provenance))
    info = SurfaceInfo.from_dict(info.to_dict())  # re-validate
    set_surface_info(atoms, info)
    return info


def add_provenance(atoms, text: str) -> None:
    """Append one line to the provenance list of the record (creating a minimal record if needed)."""
    update_surface_info(atoms, provenance=text)


__all__ = [
    "INFO_KEY",
    "SurfaceInfo",
    "surface_info",
    "set_surface_info",
    "update_surface_info",
    "add_provenance",
]
