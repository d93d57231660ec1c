"""Where the vacuum of a slab is, and where a dipole correction belongs.

A slab whose two faces differ (an adsorbate on one side only, one relaxed side, a polar
termination) carries a dipole along the surface normal. In a periodic calculation this
dipole couples to its images through the vacuum; the usual remedy is a dipole correction:
a compensating potential step placed inside the vacuum, as far from both faces as
possible, i.e. in the middle of the vacuum gap. This module finds the vacuum gap of a
slab (also when atoms are wrapped across the cell boundary along c) and recommends the
direction and position of that plane.

Heights are measured along the surface normal ``n = a1 x a2 / |a1 x a2|`` (``+z`` in the
surfgeo cell convention). Because ``a1`` and ``a2`` are perpendicular to ``n``, the height
of an atom depends only on its fractional coordinate along the third cell vector ``c``:
``h = s3 (c . n)``, which is how the slab is unwrapped.

Whether the correction is needed, and its exact settings, remain the user's decision: the
recommendation is a starting point based on geometry, not on the charge density.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from surfgeo.errors import StructureError


def surface_normal(cell) -> np.ndarray:
    """Unit surface normal ``a1 x a2 / |a1 x a2|`` of a cell (rows a1, a2, c)."""
    c = np.asarray(cell, dtype=float)
    n = np.cross(c[0], c[1])
    norm = np.linalg.norm(n)
    if norm <= 1e-12:
        raise StructureError("the first two cell vectors are parallel or zero; they do not span a surface.")
    return n / norm


def _normal_extent(cell) -> float:
    """Length of the cell along the surface normal (c . n), Angstrom; 0 if c is absent."""
    c = np.asarray(cell, dtype=float)
    return float(c[2] @ surface_normal(c))


@dataclass(frozen=True)
class VacuumGap:
    """The vacuum gap of a slab along the surface normal.

    Attributes
    ----------
    thickness : float
        Width of the largest empty gap between periodic images of the slab along the
        normal, Angstrom (atom centre to atom centre).
    slab_thickness : float
        Height difference between the lowest and the highest atom, Angstrom.
    bottom, top : float
        Heights of the lowest and highest atom (unwrapped, in the frame of the input), Angstrom.
    centre_fraction : float
        Fractional coordinate along ``c`` of the middle of the vacuum, in [0, 1).
    centre_height : float
        Height of the middle of the vacuum (above ``top``), Angstrom.
    slab_centre_fraction : float
        Fractional coordinate along ``c`` of the middle of the slab, in [0, 1).
    """

    thickness: float
    slab_thickness: float
    bottom: float
    top: float
    centre_fraction: float
    centre_height: float
    slab_centre_fraction: float

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def _fractions_along_c(positions, cell) -> np.ndarray:
    cell = np.asarray(cell, dtype=float)
    return np.linalg.solve(cell.T, np.asarray(positions, dtype=float).T)[2]


def slab_heights(atoms) -> np.ndarray:
    """Heights (Angstrom) of the atoms along the surface normal, unwrapped across the cell.

    Atoms wrapped across the cell boundary along ``c`` are brought back next to the rest
    of the slab (the slab is taken to be the complement of the largest empty gap). The
    result stays as close as possible to the heights in the input frame: when nothing
    is wrapped it equals ``positions @ n``.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab with a cell whose first two vectors span the surface. If the third cell
        vector is zero, no unwrapping is done.

    Returns
    -------
    ndarray, shape (N,)
    """
    cell = np.asarray(atoms.cell, dtype=float)
    n = surface_normal(cell)
    raw = np.asarray(atoms.positions, dtype=float) @ n
    extent = float(cell[2] @ n) if np.linalg.norm(cell[2]) > 0 else 0.0
    return raw + unwrap_shifts(raw, extent) * extent


def unwrap_shifts(heights, extent: float) -> np.ndarray:
    """Whole numbers of ``c`` vectors to add to each atom so that the slab is contiguous.

    Parameters
    ----------
    heights : array_like, shape (N,)
        Heights along the normal, Angstrom.
    extent : float
        ``c . n``, the period along the normal (Angstrom); 0 for no period.

    Returns
    -------
    ndarray of float, shape (N,)
        Integer-valued shifts. The slab is taken to be the complement of the largest empty
        gap; among the equivalent choices the one closest to the input heights is returned
        (all zeros when nothing is wrapped).
    """
    h = np.asarray(heights, dtype=float)
    if extent <= 1e-9 or len(h) < 2:
        return np.zeros(len(h))
    s = h / extent  # fractional coordinate along c (a1, a2 do not contribute)
    w = s - np.floor(s)
    order = np.sort(w)
    gaps = np.diff(np.concatenate([order, [order[0] + 1.0]]))
    start = order[(int(np.argmax(gaps)) + 1) % len(order)]  # lowest atom of the slab, fractional
    u = (w - start) % 1.0 + start
    u += np.round(np.mean(s - u))
    return np.round(u - s)


def vacuum_gap(atoms) -> VacuumGap:
    """The vacuum gap of a slab: thickness, slab extent and the middle of the vacuum.

    Parameters
    ----------
    atoms : ase.Atoms
        Slab with a third cell vector ``c`` that spans slab plus vacuum.

    Raises
    ------
    StructureError
        If the cell has no third vector (no vacuum is defined).
    """
    cell = np.asarray(atoms.cell, dtype=float)
    extent = _normal_extent(cell) if np.linalg.norm(cell[2]) > 0 else 0.0
    if extent <= 1e-9:
        raise StructureError(
            "the slab has no third cell vector, so it has no vacuum; give a cell with c "
            "(or set a vacuum thickness)."
        )
    if len(atoms) == 0:
        raise StructureError("the slab has no atoms.")
    h = slab_heights(atoms)
    bottom, top = float(h.min()), float(h.max())
    thickness = extent - (top - bottom)
    centre = top + thickness / 2.0
    slab_centre = (top + bottom) / 2.0
    return VacuumGap(
        thickness=float(thickness),
        slab_thickness=float(top - bottom),
        bottom=bottom,
        top=top,
        centre_fraction=float((centre / extent) % 1.0),
        centre_height=float(centre),
        slab_centre_fraction=float((slab_centre / extent) % 1.0),
    )


@dataclass(frozen=True)
class DipoleAdvice:
    """Recommendation for a dipole correction along the surface normal.

    Attributes
    ----------
    recommended : bool
        True for slabs whose two faces are not related by symmetry.
    reason : str
        One sentence saying why.
    axis : int
        The cell vector along which the correction acts, 1-based (3 = c, the normal).
    plane_fraction : float
        Fractional coordinate along ``c`` of the correction plane (middle of the vacuum).
    plane_height : float
        Height of that plane along the normal, Angstrom, in the frame of the input.
    slab_centre_fraction : float
        Fractional coordinate of the middle of the slab along ``c`` (the reference point
        some codes ask for instead of the plane).
    hints : dict
        Code-specific keywords as text, for orientation only.
    """

    recommended: bool
    reason: str
    axis: int
    plane_fraction: float
    plane_height: float
    slab_centre_fraction: float
    hints: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        d = dict(self.__dict__)
        d["hints"] = dict(self.hints)
        return d


def _code_hints(gap: VacuumGap, extent: float) -> dict:
    # Keywords recalled from the codes' manuals; the note says to check them there.
    width = min(0.1, 0.5 * gap.thickness / extent)
    emaxpos = (gap.centre_fraction - width / 2.0) % 1.0
    return {
        "VASP (INCAR)": f"LDIPOL = .TRUE.; IDIPOL = 3; DIPOL = 0.5 0.5 {gap.slab_centre_fraction:.4f}",
        "Quantum ESPRESSO (&CONTROL/&SYSTEM)": (
            f"tefield = .true.; dipfield = .true.; edir = 3; emaxpos = {emaxpos:.4f}; "
            f"eopreg = {width:.4f}; eamp = 0.0"
        ),
        "FHI-aims (control.in)": f"use_dipole_correction; set_vacuum_level {gap.centre_height:.4f}",
        "caution": "keywords recalled from the codes' manuals; check them against your code's version.",
    }


def dipole_advice(atoms, symmetric: bool | None = None, symprec: float = 0.01) -> DipoleAdvice:
    """Recommend (or not) a dipole correction for a slab, with the plane in the vacuum middle.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab; the third cell vector must span slab plus vacuum.
    symmetric : bool, optional
        Whether the two faces are equivalent; detected with
        :func:`surfgeo.slab.constraints.is_symmetric_slab` when not given.
    symprec : float
        Distance tolerance (Angstrom) of the symmetry detection.

    Returns
    -------
    DipoleAdvice

    Notes
    -----
    The correction acts along the third cell vector, which is the surface normal for
    slabs built by surfgeo. Its plane goes in the middle of the vacuum gap, as far as
    possible from both faces. A slab with equivalent faces has no net dipole along the
    normal by symmetry and needs no correction. This is a geometric recommendation; it
    does not replace a check of the electrostatic potential in the vacuum.
    """
    gap = vacuum_gap(atoms)
    cell = np.asarray(atoms.cell, dtype=float)
    extent = _normal_extent(cell)
    if symmetric is None:
        from surfgeo.slab.constraints import is_symmetric_slab

        symmetric = is_symmetric_slab(atoms, symprec=symprec)
    if symmetric:
        reason = "the two faces of the slab are related by symmetry, so it has no dipole along the normal."
    else:
        reason = (
            "the two faces of the slab differ, so it may carry a dipole along the normal; "
            "correct it in the middle of the vacuum."
        )
    return DipoleAdvice(
        recommended=not symmetric,
        reason=reason,
        axis=3,
        plane_fraction=gap.centre_fraction,
        plane_height=gap.centre_height,
        slab_centre_fraction=gap.slab_centre_fraction,
        hints={} if symmetric else _code_hints(gap, extent),
    )


__all__ = [
    "DipoleAdvice",
    "VacuumGap",
    "dipole_advice",
    "slab_heights",
    "surface_normal",
    "unwrap_shifts",
    "vacuum_gap",
]
