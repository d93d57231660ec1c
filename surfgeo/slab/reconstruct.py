"""Surface reconstructions as parameterised transformations of a slab.

Every function takes a slab (``ase.Atoms`` with its ``info["surfgeo"]`` record), returns a
new slab and leaves the input unchanged. It appends an entry to the record's
``reconstructions`` list with its parameters and the plane group that spglib finds for the
result (:func:`surfgeo.slab.symmetry.plane_group`), and a line to ``provenance``.

Layers are counted from the vacuum: layer 1 is the outermost substrate layer, as
:func:`surfgeo.slab.layers.slab_layers` defines them (the layer tags of a slab built by
surfgeo, else atoms grouped by height with :data:`surfgeo.slab.layers.LAYER_TOL`). Adsorbates
and overlayer films are never moved or removed here; added rows become the new layer 1 (the
layer tags are renumbered when the slab carries them).

Rows
----
Row reconstructions act on rows of atoms running along one vector of the 1x1 surface cell,
``along="a1"`` or ``"a2"`` (``"auto"``: the shorter one, i.e. the close-packed rows of an
fcc(110) face). With a period n the slab becomes the (1 x n) supercell (rows along a1) or
(n x 1) (rows along a2) if it is still 1x1. Within one layer the rows of the supercell are
numbered 0, 1, ... by their fractional coordinate along the other cell vector.

The transformations
-------------------
:func:`missing_row`
    remove chosen rows of one or more top layers, e.g. every second close-packed row of
    fcc(110) for the (1x2) missing-row model, or two rows of layer 1 and one of layer 2 for
    the (1x3) model; optional relaxations of the rows that remain.
:func:`added_row`
    add rows of substrate atoms on top, on the sites of the next bulk layer, optionally with
    adsorbate atoms between them along the row (the oxygen-induced added rows on fcc(110)).
:func:`clock_rotation`
    displace the atoms of a layer around chosen hollows alternately clockwise and
    anticlockwise (the p4g (2x2) of square faces).
:func:`pair_rows`
    move neighbouring rows of a layer towards each other (row pairing).
:func:`displace`
    any displacement field given per atom of the cell, for reconstructions without a name.
:func:`substitute`
    replace the element on chosen sites of a layer (surface alloys, layer exchange).

References
----------
.. [1] K. Hermann, *Crystallography and Surface Structure*, Wiley-VCH (2011), ch. on
   reconstructions (missing-row, added-row and clock models).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from surfgeo.errors import ComputationError, StructureError
from surfgeo.slab.info import surface_info, update_surface_info
from surfgeo.slab.layers import slab_layers
from surfgeo.slab.supercell import (
    ADSORBATE_KEY,
    ORIGIN_KEY,
    SHIFT_KEY,
    SUBLATTICE_KEY,
    copy_slab,
    make_supercell,
    slab_cell2d,
)

#: Largest lateral distance (Angstrom) between a given fractional position and the atom it names.
MATCH_TOL = 0.5


# ---------------------------------------------------------------------------- helpers
def substrate_mask(atoms) -> np.ndarray:
    """True for substrate atoms (not adsorbates, not overlayer films)."""
    mask = np.ones(len(atoms), dtype=bool)
    for key in (ADSORBATE_KEY, SUBLATTICE_KEY):
        if key in atoms.arrays:
            mask &= np.asarray(atoms.arrays[key]) == 0
    return mask


def layers_from_top(atoms, tol: float | None = None) -> list[np.ndarray]:
    """Substrate atom indices of each atomic layer, layer 1 (outermost) first.

    Layers as :func:`surfgeo.slab.layers.slab_layers` finds them (tags of a surfgeo slab,
    else grouping by height with ``tol``), without adsorbate and film atoms.
    """
    mask = substrate_mask(atoms)
    if not np.any(mask):
        raise StructureError("the slab has no substrate atoms.")
    out = [g[mask[g]] for g in reversed(slab_layers(atoms, tol))]
    return [g for g in out if len(g)]


def _layer(layers: list[np.ndarray], layer: int, field: str = "layer") -> np.ndarray:
    if isinstance(layer, bool) or not isinstance(layer, (int, np.integer)) or not 1 <= layer <= len(layers):
        raise StructureError(
            f"{field} must be a layer number from 1 (outermost) to {len(layers)}, got {layer!r}."
        )
    return layers[int(layer) - 1]


def _along(info, along: str) -> int:
    """Index (0 for a1, 1 for a2) of the 1x1 vector the rows run along."""
    if along == "auto":
        n = np.linalg.norm(info.surface_cell, axis=1)
        return 0 if n[0] <= n[1] * (1 + 1e-6) else 1
    if along in ("a1", "a2"):
        return 0 if along == "a1" else 1
    raise StructureError(f"along must be 'a1', 'a2' or 'auto', got {along!r}.")


def _row_cell(atoms, k: int, period: int, what: str):
    """The slab in the supercell that has ``period`` rows along 1x1 vector k, and M."""
    if isinstance(period, bool) or not isinstance(period, (int, np.integer)) or period < 1:
        raise StructureError(f"{what}: period must be a positive whole number of rows, got {period!r}.")
    M = np.array([[1, 0], [0, period]]) if k == 0 else np.array([[period, 0], [0, 1]])
    info = surface_info(atoms)
    C = np.asarray(info.supercell_matrix)
    if np.array_equal(C, M):
        return copy_slab(atoms), M
    if np.array_equal(C, np.eye(2, dtype=int)):
        return make_supercell(atoms, M), M
    raise StructureError(
        f"{what} with period {period} needs the slab in its 1x1 cell or in the cell {M.tolist()}, "
        f"but its cell is {C.tolist()}."
    )


def row_numbers(atoms, idx: np.ndarray, along_cell: int, tol: float = 0.3) -> np.ndarray:
    """Row number of each atom in ``idx``: rows run along cell vector ``along_cell`` (0 or 1).

    Rows are numbered 0, 1, ... by the fractional coordinate along the other cell vector;
    atoms within ``tol`` Angstrom (perpendicular to the rows) share a row.
    """
    B = slab_cell2d(atoms)
    o = 1 - along_cell
    f = (atoms.positions[idx, :2] @ np.linalg.inv(B))[:, o]
    f -= np.floor(f + 1e-9)
    area = abs(float(np.linalg.det(B)))
    width = area / float(np.linalg.norm(B[along_cell]))
    ftol = tol / width
    order = np.argsort(f, kind="stable")
    fs = f[order]
    lab = np.concatenate([[0], np.cumsum(np.diff(fs) > ftol)])
    if len(fs) > 1 and lab[-1] > 0 and (fs[0] + 1.0 - fs[-1]) <= ftol:
        lab[lab == lab[-1]] = 0  # the last row wraps round to the first
    out = np.empty(len(idx), dtype=int)
    out[order] = lab
    return out


def _perp_unit(B: np.ndarray, along_cell: int) -> np.ndarray:
    """In-plane unit vector perpendicular to the rows, pointing to increasing row number."""
    u = B[along_cell] / np.linalg.norm(B[along_cell])
    p = np.array([-u[1], u[0]])
    if p @ B[1 - along_cell] < 0:
        p = -p
    return p


def _plane_group(atoms) -> str | None:
    from surfgeo.slab.symmetry import plane_group

    try:
        return plane_group(atoms)
    except ComputationError:
        return None


def _record(new, old, entry: dict, line: str):
    entry = dict(entry)
    entry["plane_group"] = _plane_group(new)
    info = surface_info(old)
    recs = list(info.extra.get("reconstructions", [])) + [entry]
    update_surface_info(new, provenance=f"{line}; plane group {entry['plane_group']}", reconstructions=recs)
    return new


def _lateral_match(atoms, idx: np.ndarray, frac_points, tol: float, what: str) -> np.ndarray:
    """Atom of ``idx`` nearest (laterally, periodic) to each fractional position."""
    B = slab_cell2d(atoms)
    try:
        pts = np.array(frac_points, dtype=float).reshape(-1, 2)
    except (TypeError, ValueError):
        raise StructureError(f"{what}: positions must be pairs of fractional coordinates.") from None
    f_at = atoms.positions[idx, :2] @ np.linalg.inv(B)
    out = []
    for p in pts:
        df = f_at - p
        df -= np.rint(df)
        dist = np.linalg.norm(df @ B, axis=1)
        k = int(np.argmin(dist))
        if dist[k] > tol:
            raise StructureError(
                f"{what}: no atom of the layer lies within {tol} A of fractional position "
                f"{p.round(4).tolist()} (nearest {dist[k]:.2f} A)."
            )
        out.append(idx[k])
    return np.array(out, dtype=int)


def _check_number(name: str, v) -> float:
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise StructureError(f"{name} must be a number, got {v!r}.") from None
    if not math.isfinite(f):
        raise StructureError(f"{name} must be finite, got {v!r}.")
    return f


# ---------------------------------------------------------------------------- missing / added rows
def missing_row(
    atoms,
    period: int = 2,
    along: str = "auto",
    remove: Sequence[Sequence[int]] = ((0,),),
    relax: Sequence[float] = (),
    shifts: Sequence[Sequence[float]] = (),
):
    """Remove rows of the top layer(s): the (1 x n) / (n x 1) missing-row reconstruction.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab in its 1x1 cell (or already in the row supercell).
    period : int
        n: one period of the reconstruction holds n rows of each layer.
    along : {"auto", "a1", "a2"}
        The 1x1 vector the rows run along (module docstring).
    remove : sequence of sequences of int
        ``remove[k]`` lists the row numbers (0 .. n-1) removed from layer k+1. Default: row 0
        of layer 1, which with ``period=2`` is the (1x2) missing-row model.
    relax : sequence of float
        Vertical displacement (Angstrom, + towards the vacuum) of the remaining atoms of
        layer 1, 2, ...
    shifts : sequence of (layer, row, d_perp, d_z)
        Further displacement of single rows (Angstrom): ``d_perp`` in-plane perpendicular to
        the rows towards increasing row number, ``d_z`` along +z. Row numbers refer to the
        rows before removal.

    Returns
    -------
    ase.Atoms

    Examples
    --------
    >>> from ase.build import fcc110
    >>> s = missing_row(fcc110("Au", (1, 1, 6), vacuum=6.0))
    >>> len(s), s.info["surfgeo"]["reconstructions"][-1]["plane_group"]
    (11, 'p2mm')
    """
    info = surface_info(atoms)
    k = _along(info, along)
    new, M = _row_cell(atoms, k, period, "missing_row")
    layers = layers_from_top(new)
    B = slab_cell2d(new)
    perp = _perp_unit(B, k)
    delete: list[int] = []
    row_of = {}
    for li, rows in enumerate(remove):
        idx = _layer(layers, li + 1, "missing_row layer")
        nums = row_numbers(new, idx, k)
        row_of[li + 1] = (idx, nums)
        for r in rows:
            if isinstance(r, bool) or not isinstance(r, (int, np.integer)) or not 0 <= r <= nums.max():
                raise StructureError(
                    f"missing_row: row {r!r} does not exist in layer {li + 1}; rows are 0..{nums.max()}."
                )
            delete.extend(idx[nums == r].tolist())
    for li, dz in enumerate(relax):
        idx = _layer(layers, li + 1, "missing_row relax layer")
        new.positions[idx, 2] += _check_number(f"relax[{li}]", dz)
    for entry in shifts:
        if len(entry) != 4:
            raise StructureError("missing_row shifts entries must be (layer, row, d_perp, d_z).")
        layer, row, dp, dz = entry
        idx = _layer(layers, layer, "missing_row shift layer")
        nums = row_numbers(new, idx, k) if layer not in row_of else row_of[layer][1]
        sel = idx[nums == row]
        if len(sel) == 0:
            raise StructureError(f"missing_row shift: row {row!r} does not exist in layer {layer}.")
        new.positions[sel, :2] += _check_number("d_perp", dp) * perp
        new.positions[sel, 2] += _check_number("d_z", dz)
    keep = np.setdiff1d(np.arange(len(new)), np.array(delete, dtype=int))
    new = new[keep]
    entry = {
        "type": "missing-row", "period": int(period), "along": ["a1", "a2"][k],
        "matrix": M.tolist(), "remove": [list(map(int, r)) for r in remove],
        "relax": [float(v) for v in relax], "shifts": [list(map(float, e)) for e in shifts],
        "removed_atoms": len(delete),
    }
    return _record(new, atoms, entry, f"missing-row {M.tolist()}: removed {len(delete)} atom(s)")


def added_row(
    atoms,
    period: int = 2,
    along: str = "auto",
    rows: Sequence[int] = (0,),
    element: str | None = None,
    height: float | None = None,
    decorate: Sequence[dict] | dict | None = None,
):
    """Add rows of substrate atoms on top, on the sites of the next bulk layer.

    The positions of a complete next layer are those of layer 1 shifted by the vector from
    a layer-2 atom to its nearest layer-1 atom (the stacking continued); of these, the rows
    listed in ``rows`` of every period are kept.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab in its 1x1 cell (or already in the row supercell).
    period : int
        One added row every ``period`` rows.
    along : {"auto", "a1", "a2"}
        The 1x1 vector the added rows run along; ``"auto"`` here means the *longer* vector
        (on fcc(110): [001], as in the oxygen-induced (2x1) added rows).
    rows : sequence of int
        Row numbers (0 .. period-1) of the next layer that are filled.
    element : str, optional
        Element of the added atoms (default: that of the outermost layer).
    height : float, optional
        Height of the added row above layer 1 (Angstrom; default: the bulk stacking).
    decorate : dict or list of dict, optional
        Adsorbate atoms along the added rows: ``{"element": "O", "offset": 0.5, "dz": 0.0}``
        puts one atom per added atom, shifted by ``offset`` times the row's repeat vector and
        by ``dz`` (Angstrom) vertically. They are marked as adsorbates.

    Returns
    -------
    ase.Atoms
    """
    from ase import Atoms
    from ase.data import chemical_symbols

    info = surface_info(atoms)
    if along == "auto":
        n = np.linalg.norm(info.surface_cell, axis=1)
        k = 1 if n[1] >= n[0] * (1 - 1e-6) else 0
    else:
        k = _along(info, along)
    new, M = _row_cell(atoms, k, period, "added_row")
    layers = layers_from_top(new)
    if len(layers) < 2:
        raise StructureError("added_row needs a slab of at least two layers to continue the stacking.")
    top, second = layers[0], layers[1]
    B = slab_cell2d(new)
    p_top = new.positions[top[0]]
    d2 = new.positions[second] - p_top
    f = d2[:, :2] @ np.linalg.inv(B)
    d2[:, :2] = (f - np.rint(f)) @ B
    shift = -d2[int(np.argmin(np.linalg.norm(d2, axis=1)))]  # layer 2 -> layer 1
    if height is not None:
        shift[2] = _check_number("added_row height", height)
        if shift[2] <= 0:
            raise StructureError(f"added_row height must be positive (Angstrom), got {height!r}.")
    cand = new.positions[top] + shift
    tmp = Atoms(positions=cand, cell=new.cell)
    nums = row_numbers(tmp, np.arange(len(cand)), k)
    for r in rows:
        if isinstance(r, bool) or not isinstance(r, (int, np.integer)) or not 0 <= r < period:
            raise StructureError(f"added_row: row {r!r} does not exist; rows are 0..{period - 1}.")
    sel = np.isin(nums, list(rows))
    added = cand[sel]
    if element is None:
        element = new[top[0]].symbol
    if element not in chemical_symbols[1:]:
        raise StructureError(f"added_row element must be a chemical symbol, got {element!r}.")
    n0 = len(new)
    tagged = bool(surface_info(new).extra.get("layers_from_tags"))
    new.extend(Atoms(symbols=[element] * len(added), positions=added))
    if tagged:  # the added row is the new layer 1
        tags = new.get_tags()
        tags[:n0][tags[:n0] > 0] += 1
        tags[n0:] = 1
        new.set_tags(tags)
    if ORIGIN_KEY in new.arrays:
        new.arrays[ORIGIN_KEY][n0:] = -1
    if SHIFT_KEY in new.arrays:
        new.arrays[SHIFT_KEY][n0:] = 0
    decs = [] if decorate is None else ([decorate] if isinstance(decorate, dict) else list(decorate))
    dec_entries = []
    for dec in decs:
        if not isinstance(dec, dict) or "element" not in dec:
            raise StructureError("added_row decorate entries need at least an 'element'.")
        unknown = set(dec) - {"element", "offset", "dz"}
        if unknown:
            raise StructureError(
                f"added_row decorate has unknown key(s) {sorted(unknown)}; valid keys are element, "
                "offset, dz."
            )
        el = dec["element"]
        if el not in chemical_symbols[1:]:
            raise StructureError(f"added_row decorate element must be a chemical symbol, got {el!r}.")
        off = _check_number("decorate offset", dec.get("offset", 0.5))
        dz = _check_number("decorate dz", dec.get("dz", 0.0))
        pos = added + np.array([*(off * B[k]), dz])
        n1 = len(new)
        ids = np.asarray(new.arrays.get(ADSORBATE_KEY, np.zeros(n1, int)), dtype=int)
        start = int(ids.max()) + 1 if len(ids) else 1
        new.arrays[ADSORBATE_KEY] = ids
        new.extend(Atoms(symbols=[el] * len(pos), positions=pos))
        new.arrays[ADSORBATE_KEY][n1:] = np.arange(start, start + len(pos))
        if ORIGIN_KEY in new.arrays:
            new.arrays[ORIGIN_KEY][n1:] = -1
        dec_entries.append({"element": el, "offset": off, "dz": dz})
    entry = {
        "type": "added-row", "period": int(period), "along": ["a1", "a2"][k], "matrix": M.tolist(),
        "rows": [int(r) for r in rows], "element": element, "height": float(shift[2]),
        "decorate": dec_entries, "added_atoms": int(len(added)),
    }
    return _record(new, atoms, entry, f"added-row {M.tolist()}: {len(added)} {element} atom(s)")


# ---------------------------------------------------------------------------- clock rotation
def clock_rotation(
    atoms,
    angle: float | None = None,
    displacement: float | None = None,
    layer: int = 1,
    centres: Sequence[Sequence[float]] | None = None,
):
    """Rotate the atoms of a layer around chosen hollows, alternately clockwise and anticlockwise.

    Every atom next to a centre moves tangentially (perpendicular to the line from the
    centre) by d; the square (or triangle) of atoms around a centre turns by
    atan(d / r) for centre-atom distance r and widens by sqrt(1 + (d/r)^2). An atom shared
    by several centres gets the mean of their displacements, which must agree (they do for
    alternating senses on a square face); otherwise the centres are rejected.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab. Without ``centres`` its 1x1 lattice must be square: the slab becomes the
        (2x2) cell and the centres are the fourfold hollows at (1/2, 1/2) (anticlockwise)
        and (3/2, 3/2) (clockwise) from an atom of the layer, in 1x1 units: the p4g clock
        reconstruction.
    angle : float
        Rotation of each square in degrees (d = r tan(angle)), positive anticlockwise at
        the anticlockwise centres. Give ``angle`` or ``displacement``.
    displacement : float
        d in Angstrom.
    layer : int
        The layer whose atoms move (1 = outermost).
    centres : sequence of (f1, f2, sense), optional
        Fractional positions in the slab's current cell and sense +1 (anticlockwise seen
        from the vacuum) or -1 (clockwise).

    Returns
    -------
    ase.Atoms
    """
    if (angle is None) == (displacement is None):
        raise StructureError(
            "clock_rotation needs exactly one of angle (degrees) and displacement (Angstrom)."
        )
    if angle is not None:
        ang = _check_number("clock_rotation angle", angle)
        if not -45.0 < ang < 45.0:
            raise StructureError(f"clock_rotation angle must lie between -45 and 45 degrees, got {angle!r}.")
    else:
        disp = _check_number("clock_rotation displacement", displacement)
    info = surface_info(atoms)
    if centres is None:
        if info.lattice.kind() != "square":
            raise StructureError(
                "clock_rotation without centres needs a square surface lattice; give the centres "
                "as (f1, f2, sense) for other faces."
            )
        C = np.asarray(info.supercell_matrix)
        M = np.array([[2, 0], [0, 2]])
        if np.array_equal(C, np.eye(2, dtype=int)):
            new = make_supercell(atoms, M)
        elif np.array_equal(C, M):
            new = copy_slab(atoms)
        else:
            raise StructureError(
                f"clock_rotation without centres needs the slab in its 1x1 or (2x2) cell, not {C.tolist()}."
            )
        layers = layers_from_top(new)
        idx = _layer(layers, layer, "clock_rotation layer")
        B = slab_cell2d(new)
        f0 = new.positions[idx[0], :2] @ np.linalg.inv(B)
        cen = [(*(f0 + (0.25, 0.25)), 1.0), (*(f0 + (0.75, 0.75)), -1.0)]
    else:
        new = copy_slab(atoms)
        layers = layers_from_top(new)
        idx = _layer(layers, layer, "clock_rotation layer")
        B = slab_cell2d(new)
        cen = []
        for c in centres:
            if len(c) != 3 or float(c[2]) not in (1.0, -1.0):
                raise StructureError("clock_rotation centres must be (f1, f2, sense) with sense +1 or -1.")
            cen.append((_check_number("centre f1", c[0]), _check_number("centre f2", c[1]), float(c[2])))
    Binv = np.linalg.inv(B)
    f_at = new.positions[idx, :2] @ Binv
    total = np.zeros((len(idx), 2))
    count = np.zeros(len(idx))
    contrib: list[list[np.ndarray]] = [[] for _ in idx]
    for f1, f2, sense in cen:
        df = f_at - np.array([f1, f2])
        df -= np.rint(df)
        v = df @ B
        r = np.linalg.norm(v, axis=1)
        rmin = float(r.min())
        if rmin < 0.1:
            raise StructureError(
                f"clock_rotation centre ({f1:.4g}, {f2:.4g}) lies on an atom; centres must be hollows."
            )
        near = np.nonzero(r <= rmin * 1.05)[0]
        d = rmin * math.tan(math.radians(ang)) if angle is not None else disp
        for j in near:
            u = v[j] / r[j]
            t = sense * d * np.array([-u[1], u[0]])
            total[j] += t
            count[j] += 1
            contrib[j].append(t)
    moved = count > 0
    total[moved] /= count[moved][:, None]
    for j in np.nonzero(moved)[0]:
        spread = max(float(np.linalg.norm(c - total[j])) for c in contrib[j])
        if spread > 1e-3 + 1e-3 * float(np.linalg.norm(total[j])):
            raise StructureError(
                "clock_rotation: the centres ask one atom to move in different directions; choose "
                "centres with alternating senses so that shared atoms move consistently."
            )
    new.positions[idx, :2] += total
    dval = float(np.abs(total[moved]).max()) if np.any(moved) else 0.0
    frac_c = [[float(f1 - math.floor(f1 + 1e-9)), float(f2 - math.floor(f2 + 1e-9)), s] for f1, f2, s in cen]
    entry = {
        "type": "clock-rotation", "angle_deg": None if angle is None else float(angle),
        "displacement": None if displacement is None else float(displacement), "layer": int(layer),
        "centres": frac_c, "moved_atoms": int(moved.sum()),
    }
    line = f"clock rotation of layer {layer} about {len(cen)} centre(s), max shift {dval:.3f} A"
    return _record(new, atoms, entry, line)


# ---------------------------------------------------------------------------- generic displacements
def pair_rows(atoms, amount: float, layer: int = 1, along: str = "auto"):
    """Move rows 2k and 2k+1 of a layer towards each other by ``amount`` Angstrom in total.

    Parameters
    ----------
    atoms : ase.Atoms
        A slab in its 1x1 cell (it becomes the period-2 row cell) or already in it.
    amount : float
        Change of the distance between paired rows (Angstrom); negative moves them apart.
    layer : int
        Layer number (1 = outermost).
    along : {"auto", "a1", "a2"}
        Direction of the rows (module docstring).
    """
    amount = _check_number("pair_rows amount", amount)
    info = surface_info(atoms)
    k = _along(info, along)
    new, M = _row_cell(atoms, k, 2, "pair_rows")
    layers = layers_from_top(new)
    idx = _layer(layers, layer, "pair_rows layer")
    nums = row_numbers(new, idx, k)
    if (nums.max() + 1) % 2:
        raise StructureError(
            f"pair_rows needs an even number of rows in layer {layer}, found {nums.max() + 1}."
        )
    perp = _perp_unit(slab_cell2d(new), k)
    sign = np.where(nums % 2 == 0, 1.0, -1.0)
    new.positions[idx, :2] += (amount / 2.0) * sign[:, None] * perp
    entry = {"type": "row-pairing", "matrix": M.tolist(), "along": ["a1", "a2"][k], "layer": int(layer),
             "amount": amount}
    return _record(new, atoms, entry, f"row pairing of layer {layer} by {amount:.3f} A")


def displace(atoms, displacements, tol: float = MATCH_TOL):
    """Apply a displacement field given per atom of the cell.

    Parameters
    ----------
    atoms : ase.Atoms
    displacements : array_like (N, 3) or sequence of dict
        Either one (dx, dy, dz) per atom (Angstrom), or entries
        ``{"layer": 2, "at": [f1, f2], "shift": [dx, dy, dz]}`` naming the atom of a layer
        nearest to a fractional position of the cell (within ``tol`` Angstrom).
    tol : float
        Matching tolerance for positions.

    Returns
    -------
    ase.Atoms
    """
    new = copy_slab(atoms)
    n = len(new)
    entries = []
    if isinstance(displacements, np.ndarray) or (
        isinstance(displacements, Sequence) and len(displacements) == n and n > 0
        and all(not isinstance(d, dict) for d in displacements)
    ):
        try:
            field = np.array(displacements, dtype=float)
        except (TypeError, ValueError):
            raise StructureError("displacements must be an (N, 3) array of numbers in Angstrom.") from None
        if field.shape != (n, 3) or not np.all(np.isfinite(field)):
            raise StructureError(f"displacements must be an array of shape ({n}, 3) of finite numbers.")
        new.positions += field
        moved = int(np.count_nonzero(np.linalg.norm(field, axis=1) > 0))
        biggest = float(np.linalg.norm(field, axis=1).max())
        entry = {"type": "displacement", "moved_atoms": moved, "max": biggest}
    else:
        layers = layers_from_top(new)
        field = np.zeros((n, 3))
        for k, d in enumerate(displacements):
            if not isinstance(d, dict):
                raise StructureError(f"displacement entry {k} must be a dict with layer, at and shift.")
            unknown = set(d) - {"layer", "at", "shift"}
            if unknown or not {"layer", "at", "shift"} <= set(d):
                raise StructureError(
                    f"displacement entry {k} needs exactly the keys layer, at, shift; got {sorted(d)}."
                )
            idx = _layer(layers, d["layer"], f"displacement entry {k} layer")
            j = _lateral_match(new, idx, d["at"], tol, f"displacement entry {k}")
            try:
                s = np.array(d["shift"], dtype=float)
            except (TypeError, ValueError):
                raise StructureError(
                    f"displacement entry {k} shift must be three numbers (Angstrom)."
                ) from None
            if s.shape != (3,) or not np.all(np.isfinite(s)):
                raise StructureError(f"displacement entry {k} shift must be three finite numbers (Angstrom).")
            field[j] += s
            entries.append({"layer": int(d["layer"]), "at": list(map(float, np.ravel(d["at"]))),
                            "shift": s.tolist()})
        new.positions += field
        entry = {"type": "displacement", "entries": entries}
    return _record(new, atoms, entry, "displacement field")


def substitute(atoms, element: str, layer: int = 1, at=None, tol: float = MATCH_TOL):
    """Replace the element of atoms of a layer: surface alloys and layer exchange.

    Parameters
    ----------
    atoms : ase.Atoms
    element : str
        The new chemical symbol.
    layer : int
        Layer number (1 = outermost).
    at : array_like (k, 2), optional
        Fractional positions in the slab's cell naming the atoms (nearest within ``tol``
        Angstrom); default: the whole layer.
    tol : float
        Matching tolerance.
    """
    from ase.data import chemical_symbols

    if element not in chemical_symbols[1:]:
        raise StructureError(f"substitute element must be a chemical symbol, got {element!r}.")
    new = copy_slab(atoms)
    layers = layers_from_top(new)
    idx = _layer(layers, layer, "substitute layer")
    sel = idx if at is None else _lateral_match(new, idx, at, tol, "substitute")
    syms = new.get_chemical_symbols()
    for j in sel:
        syms[j] = element
    new.set_chemical_symbols(syms)
    entry = {"type": "substitution", "element": element, "layer": int(layer),
             "at": None if at is None else np.array(at, dtype=float).reshape(-1, 2).tolist(),
             "count": int(len(sel))}
    return _record(new, atoms, entry, f"{len(sel)} atom(s) of layer {layer} replaced by {element}")


__all__ = [
    "MATCH_TOL",
    "added_row",
    "clock_rotation",
    "displace",
    "layers_from_top",
    "missing_row",
    "pair_rows",
    "row_numbers",
    "substitute",
    "substrate_mask",
]
