"""Grouping the atoms of a slab into atomic layers along the surface normal (+z)."""

from __future__ import annotations

import numpy as np

from surfgeo.checks import positive_number

#: Default height tolerance (Angstrom): atoms closer than this in z share a layer.
LAYER_TOL = 0.3


def group_layers(heights, tol: float = LAYER_TOL) -> list[np.ndarray]:
    """Split atoms into layers by height.

    Atoms are sorted by height and a new layer starts wherever the gap to the next atom
    exceeds ``tol``, so a buckled layer stays one layer as long as no internal gap exceeds
    ``tol``.

    Parameters
    ----------
    heights : array_like, shape (N,) or (N, 3)
        z coordinates in Angstrom, or Cartesian positions (the last column is used).
    tol : float
        Largest height gap (Angstrom) inside one layer; positive.

    Returns
    -------
    list of ndarray of int
        Atom indices of each layer, from the bottom layer to the top layer.

    Raises
    ------
    InputError
        If ``tol`` is not a positive finite height.

    Examples
    --------
    >>> [l.tolist() for l in group_layers([0.0, 2.0, 0.05, 2.1])]
    [[0, 2], [1, 3]]
    """
    tol = positive_number(tol, "the layer tolerance", "height")
    z = np.asarray(heights, dtype=float)
    if z.ndim == 2:
        z = z[:, -1]
    if z.size == 0:
        return []
    order = np.argsort(z, kind="stable")
    breaks = np.nonzero(np.diff(z[order]) > tol)[0] + 1
    return [np.sort(part) for part in np.split(order, breaks)]


def layer_heights(heights, layers: list[np.ndarray]) -> np.ndarray:
    """Mean height (Angstrom) of each layer given by :func:`group_layers`."""
    z = np.asarray(heights, dtype=float)
    if z.ndim == 2:
        z = z[:, -1]
    return np.array([z[idx].mean() for idx in layers])


def slab_layers(atoms, tol: float | None = None) -> list[np.ndarray]:
    """The atomic layers of a slab's substrate, from the bottom layer to the top layer.

    A slab built by surfgeo carries its layer numbers in ``tags`` (1 = top layer, ASE's
    convention; 0 = adsorbate), which stays right for closely spaced layers of high-index
    faces and after relaxations. Other slabs are grouped by height with ``tol`` (default
    :data:`LAYER_TOL`). Atoms tagged 0 (adsorbates) are left out when tags are used.

    Returns
    -------
    list of ndarray of int
        Atom indices of each layer, bottom first.
    """
    record = atoms.info.get("surfgeo") or {}
    tags = np.asarray(atoms.get_tags())
    if record.get("layers_from_tags") and tags.size and tags.max() > 0:
        numbers = np.unique(tags[tags > 0])[::-1]  # deepest (largest tag) first
        order = np.argsort(-tags, kind="stable")
        sorted_tags = tags[order]
        keep = sorted_tags > 0
        order, sorted_tags = order[keep], sorted_tags[keep]
        bounds = np.searchsorted(-sorted_tags, -numbers)
        parts = np.split(order, bounds[1:])
        return [np.sort(p) for p in parts]
    return group_layers(np.asarray(atoms.positions)[:, 2], LAYER_TOL if tol is None else tol)
