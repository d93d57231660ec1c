"""Which atoms of a slab to hold fixed in a relaxation, and whether the slab is symmetric.

Three common rules:

- fix the bottom N layers (an asymmetric slab: the bottom mimics the bulk, the top relaxes);
- fix every atom below a height;
- fix the middle N layers of a symmetric slab, so that both faces relax alike.

Layers are found with :func:`surfgeo.slab.layers.group_layers` on heights along the
surface normal, unwrapped across the cell boundary (:func:`surfgeo.slab.dipole.slab_heights`).
The constraint is an ASE :class:`~ase.constraints.FixAtoms`, which ASE's writers turn into
selective dynamics (VASP), ``if_pos`` flags (Quantum ESPRESSO), ``constrain_relaxation``
(FHI-aims) or a ``move_mask`` column (extended XYZ).

How many layers to fix (and whether the slab is thick enough) is the user's choice; check
it by convergence tests.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from surfgeo.errors import InputError, StructureError
from surfgeo.slab.dipole import slab_heights, surface_normal
from surfgeo.slab.layers import LAYER_TOL, group_layers


def default_layer_tol(atoms) -> float:
    """Height tolerance (Angstrom) for grouping the atoms of ``atoms`` into layers.

    :data:`surfgeo.slab.layers.LAYER_TOL`, reduced to half the bulk layer spacing when the
    slab's metadata (``atoms.info["surfgeo"]["layer_spacing"]``) says the layers are closer
    than that (high-index faces).
    """
    meta = atoms.info.get("surfgeo") if hasattr(atoms, "info") else None
    spacing = meta.get("layer_spacing") if isinstance(meta, dict) else None
    try:
        spacing = float(spacing)
    except (TypeError, ValueError):
        return LAYER_TOL
    if np.isfinite(spacing) and spacing > 0:
        return min(LAYER_TOL, 0.5 * spacing)
    return LAYER_TOL


def slab_layers(atoms, tol: float | None = None) -> list[np.ndarray]:
    """Atom indices of each layer, bottom to top (heights unwrapped across the cell)."""
    return group_layers(slab_heights(atoms), default_layer_tol(atoms) if tol is None else tol)


def _count(name: str, value) -> int:
    try:
        n = int(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a whole number of layers, got {value!r}.") from None
    if n != value and not isinstance(value, str):
        raise InputError(f"{name} must be a whole number of layers, got {value!r}.")
    if n < 1:
        raise InputError(f"{name} must be at least 1 layer, got {value!r}.")
    return n


def bottom_layers_mask(atoms, n_layers: int, tol: float | None = None) -> np.ndarray:
    """Boolean mask of the atoms in the ``n_layers`` lowest layers.

    Raises
    ------
    InputError
        If ``n_layers`` is not a positive integer smaller than the number of layers.
    """
    n = _count("the number of bottom layers to fix", n_layers)
    layers = slab_layers(atoms, tol)
    if n >= len(layers):
        raise InputError(
            f"cannot fix the bottom {n} layers of a slab with {len(layers)} layers; "
            f"choose at most {len(layers) - 1} so that something can relax."
        )
    mask = np.zeros(len(atoms), dtype=bool)
    mask[np.concatenate(layers[:n])] = True
    return mask


def below_height_mask(atoms, height: float) -> np.ndarray:
    """Boolean mask of the atoms whose height along the normal is below ``height`` (Angstrom).

    The height is measured in the frame of the structure (the z coordinate for slabs with
    a1, a2 in the xy-plane), after unwrapping atoms across the cell boundary along c.
    """
    try:
        z = float(height)
    except (TypeError, ValueError):
        raise InputError(f"the height below which atoms are fixed must be a number in Angstrom, "
                         f"got {height!r}.") from None
    h = slab_heights(atoms)
    mask = h < z
    if mask.all():
        raise InputError(
            f"every atom lies below {z:g} A (the highest is at {h.max():.3f} A); choose a lower height "
            "so that something can relax."
        )
    if not mask.any():
        raise InputError(
            f"no atom lies below {z:g} A (the lowest is at {h.min():.3f} A); choose a greater height."
        )
    return mask


def middle_layers_mask(atoms, n_layers: int, tol: float | None = None,
                       require_symmetric: bool = True, symprec: float = 0.01) -> np.ndarray:
    """Boolean mask of the ``n_layers`` layers in the middle of a symmetric slab.

    Both faces keep the same number of free layers, so the number of layers minus
    ``n_layers`` must be even.

    Raises
    ------
    StructureError
        If ``require_symmetric`` and the slab's two faces are not related by symmetry.
    InputError
        If the layer count does not allow a centred block of ``n_layers`` layers.
    """
    n = _count("the number of middle layers to fix", n_layers)
    if require_symmetric and not is_symmetric_slab(atoms, symprec=symprec):
        raise StructureError(
            "the slab is not symmetric (its two faces differ), so fixing the middle layers would "
            "relax the faces differently; fix the bottom layers instead."
        )
    layers = slab_layers(atoms, tol)
    total = len(layers)
    if n >= total or (total - n) % 2:
        valid = [k for k in range(1, total) if (total - k) % 2 == 0]
        raise InputError(
            f"cannot fix {n} middle layers of a slab with {total} layers symmetrically; "
            f"valid numbers are {', '.join(map(str, valid)) or 'none'}."
        )
    first = (total - n) // 2
    mask = np.zeros(len(atoms), dtype=bool)
    mask[np.concatenate(layers[first:first + n])] = True
    return mask


def fixed_mask(atoms) -> np.ndarray:
    """Boolean mask of the atoms fully fixed by :class:`~ase.constraints.FixAtoms` constraints."""
    from ase.constraints import FixAtoms

    mask = np.zeros(len(atoms), dtype=bool)
    for c in atoms.constraints:
        if isinstance(c, FixAtoms):
            mask[c.get_indices()] = True
    return mask


def apply_fixed(atoms, mask):
    """A copy of ``atoms`` whose only constraint is ``FixAtoms`` on the atoms where ``mask`` is true."""
    from ase.constraints import FixAtoms

    mask = np.asarray(mask, dtype=bool)
    if mask.shape != (len(atoms),):
        raise InputError(
            f"the fixed-atom mask must have one entry per atom ({len(atoms)}), got shape {mask.shape}."
        )
    out = atoms.copy()
    out.set_constraint()
    if mask.any():
        out.set_constraint(FixAtoms(mask=mask))
    return out


def is_symmetric_slab(atoms, symprec: float = 0.01) -> bool:
    """True if an operation of the slab maps one face onto the other.

    The slab is searched for symmetry operations with spglib (treating the cell with its
    vacuum as periodic); the slab is symmetric if one of them reverses the surface
    normal (a mirror plane parallel to the surface, an inversion centre, a two-fold axis
    in the surface plane, or a glide/screw variant of these).

    Parameters
    ----------
    atoms : ase.Atoms
        Slab with a full 3D cell (vacuum included).
    symprec : float
        Distance tolerance in Angstrom.

    References
    ----------
    A. Togo and I. Tanaka, "Spglib: a software library for crystal symmetry search",
    arXiv:1808.01590 (2018).
    """
    import spglib

    cell = np.asarray(atoms.cell, dtype=float)
    if abs(np.linalg.det(cell)) < 1e-9:
        raise StructureError("the slab needs a full 3D cell (with vacuum) to test its symmetry.")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # spglib's error-handling transition notice
        try:
            data = spglib.get_symmetry((cell, atoms.get_scaled_positions(wrap=True), atoms.numbers),
                                       symprec=symprec)
        except Exception:  # noqa: BLE001 - newer spglib raises where older returned None
            data = None
    if not data:
        return False
    n = surface_normal(cell)
    at = cell.T
    inv = np.linalg.inv(at)
    rot = np.einsum("ij,njk,kl->nil", at, np.asarray(data["rotations"], dtype=float), inv)
    return bool(np.any(np.abs(np.einsum("i,nij,j->n", n, rot, n) + 1.0) < 1e-6))


@dataclass(frozen=True)
class ConstraintChoice:
    """What was fixed and why, for the export note."""

    rule: str
    fixed: int
    fixed_indices: tuple[int, ...]
    layers: int

    def to_dict(self) -> dict:
        return {"rule": self.rule, "fixed": self.fixed, "fixed_indices": list(self.fixed_indices),
                "layers": self.layers}


def choose_fixed(atoms, bottom: int | None = None, below: float | None = None,
                 middle: int | None = None, tol: float | None = None,
                 symprec: float = 0.01) -> tuple[np.ndarray, ConstraintChoice]:
    """Apply one of the three rules (or keep the constraints the structure already has).

    Parameters
    ----------
    atoms : ase.Atoms
    bottom : int, optional
        Fix the bottom ``bottom`` layers.
    below : float, optional
        Fix all atoms below this height (Angstrom).
    middle : int, optional
        Fix the ``middle`` central layers of a symmetric slab.
    tol : float, optional
        Layer height tolerance (Angstrom); see :func:`default_layer_tol`.

    Returns
    -------
    mask : ndarray of bool
    choice : ConstraintChoice
    """
    given = [name for name, v in (("bottom", bottom), ("below", below), ("middle", middle)) if v is not None]
    if len(given) > 1:
        raise InputError(f"choose one constraint rule, not {' and '.join(given)}.")
    nlayers = len(slab_layers(atoms, tol)) if len(atoms) else 0
    if bottom is not None:
        mask = bottom_layers_mask(atoms, bottom, tol)
        rule = f"bottom {int(bottom)} layer(s) fixed"
    elif below is not None:
        mask = below_height_mask(atoms, below)
        rule = f"atoms below {float(below):g} A fixed"
    elif middle is not None:
        mask = middle_layers_mask(atoms, middle, tol, symprec=symprec)
        rule = f"middle {int(middle)} layer(s) fixed (symmetric slab)"
    else:
        mask = fixed_mask(atoms)
        rule = "constraints of the input kept" if mask.any() else "no atoms fixed"
    idx = tuple(int(i) for i in np.nonzero(mask)[0])
    return mask, ConstraintChoice(rule=rule, fixed=len(idx), fixed_indices=idx, layers=nlayers)


__all__ = [
    "ConstraintChoice",
    "apply_fixed",
    "below_height_mask",
    "bottom_layers_mask",
    "choose_fixed",
    "default_layer_tol",
    "fixed_mask",
    "is_symmetric_slab",
    "middle_layers_mask",
    "slab_layers",
]
