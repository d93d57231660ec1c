"""A plain summary of a slab for people and scripts (the ``build`` command prints it).

:func:`slab_summary` works on any slab: surfgeo's own (using its surface record and layer
tags) or one from elsewhere (layers grouped by height, the in-plane cell taken as 1x1).
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from surfgeo.lattice import Lattice2D
from surfgeo.slab.info import surface_info
from surfgeo.slab.layers import slab_layers


def _composition(symbols) -> dict[str, int]:
    return dict(sorted(Counter(symbols).items()))


def slab_summary(atoms, symmetry: bool | None = None, symprec: float = 1e-3) -> dict:
    """Summary of a slab as a JSON-able dict.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab.
    symmetry : bool, optional
        Add the layer group and plane group found by spglib
        (:func:`surfgeo.slab.symmetry.layer_symmetry`). By default only for slabs of at most
        5000 atoms.
    symprec : float
        spglib tolerance in Angstrom.

    Returns
    -------
    dict
        ``surface_lattice`` {kind, a1, a2, area, lengths, gamma_deg} (the 1x1 substrate
        cell, Angstrom), ``supercell_matrix``, ``miller``, ``bulk``, ``layer_spacing``
        (mean bulk atomic layer spacing, Angstrom), ``bulk_layer_spacings``, ``n_atoms``,
        ``formula``, ``n_layers``, ``layers`` (heights in Angstrom, bottom layer first),
        ``atoms_per_layer``, ``layer_compositions``, ``spacings`` (measured, bottom first),
        ``top_spacings`` {d12, d23, ...} (measured from the top), ``registry`` (in-plane
        position of each layer's first atom relative to the top layer's, in fractions of
        a1, a2 of the 1x1 cell, bottom first), ``thickness``, ``vacuum_gap`` (empty space
        along the normal between the slab and its periodic image), ``termination``,
        ``step_notation`` (None for a flat face), ``terrace_width`` and ``step_height``
        (Angstrom or None), ``miscut_deg`` (0 for a flat face), ``step`` (the full step
        description), ``relaxations``, ``provenance``, ``model`` (the model file's record or
        None), ``reconstructions``, ``adsorbates`` and ``overlayers`` (the records of a model
        build, empty lists otherwise) and, when computed, ``symmetry``.
    """
    info = surface_info(atoms)
    lat = Lattice2D(info.surface_cell, "surface")
    layers = slab_layers(atoms)
    z = atoms.positions[:, 2]
    symbols = np.array(atoms.get_chemical_symbols(), dtype=object)
    heights = np.array([z[idx].mean() for idx in layers]) if layers else np.zeros(0)
    spacings = np.diff(heights)
    top = spacings[::-1]
    top_spacings = {
        (f"d{i + 1}{i + 2}" if i + 1 < 9 else f"d{i + 1},{i + 2}"): float(v) for i, v in enumerate(top)
    }
    inv = np.linalg.inv(info.surface_cell)
    registry = []
    if layers:
        ref = atoms.positions[layers[-1][0], :2]
        for idx in layers:
            f = (atoms.positions[idx[0], :2] - ref) @ inv
            f = f - np.floor(f + 1e-6)
            registry.append([float(v) for v in np.where(np.abs(f) < 1e-6, 0.0, f)])
    thickness = float(z.max() - z.min()) if len(z) else 0.0
    cz = float(atoms.cell[2, 2])
    layer_spacing = info.layer_spacing
    if layer_spacing is None and len(spacings):
        layer_spacing = float(np.median(spacings))
    step = info.step
    out = {
        "surface_lattice": {
            "kind": lat.kind(),
            "a1": lat.a1.tolist(),
            "a2": lat.a2.tolist(),
            "area": lat.area,
            "lengths": list(lat.lengths),
            "gamma_deg": lat.gamma,
        },
        "supercell_matrix": info.supercell_matrix.tolist(),
        "miller": info.miller,
        "bulk": info.bulk,
        "layer_spacing": layer_spacing,
        "bulk_layer_spacings": info.extra.get("bulk_layer_spacings"),
        "n_atoms": len(atoms),
        "formula": atoms.get_chemical_formula(mode="hill"),
        "n_layers": len(layers),
        "layers": [float(h) for h in heights],
        "atoms_per_layer": [int(len(idx)) for idx in layers],
        "layer_compositions": [_composition(symbols[idx]) for idx in layers],
        "spacings": [float(v) for v in spacings],
        "top_spacings": top_spacings,
        "registry": registry,
        "thickness": thickness,
        "vacuum_gap": (cz - thickness) if bool(atoms.pbc[2]) or cz > thickness else None,
        "termination": info.termination,
        "step_notation": step.get("step_notation") if step else None,
        "terrace_width": step.get("terrace_width") if step else None,
        "step_height": step.get("step_height") if step else None,
        "miscut_deg": step.get("miscut_deg") if step else 0.0,
        "step": step,
        "relaxations": info.relaxations,
        "provenance": info.provenance,
        "model": info.extra.get("model"),
        "reconstructions": info.extra.get("reconstructions") or [],
        "adsorbates": info.extra.get("adsorbates") or [],
        "overlayers": info.extra.get("overlayers") or [],
    }
    if symmetry is None:
        symmetry = len(atoms) <= 5000
    if symmetry and len(atoms):
        from surfgeo.errors import SurfgeoError
        from surfgeo.slab.symmetry import layer_symmetry

        try:
            out["symmetry"] = layer_symmetry(atoms, symprec=symprec).to_dict()
        except SurfgeoError as exc:
            out["symmetry"] = {"error": str(exc)}
    return out


def format_summary(summary: dict) -> str:
    """A short human-readable text of :func:`slab_summary` (a few lines)."""
    sl = summary["surface_lattice"]
    lines = []
    miller = summary.get("miller")
    bulk = summary.get("bulk") or {}
    head = f"{bulk.get('formula', summary['formula'])}"
    if miller:
        head += "(" + " ".join(str(v) for v in miller) + ")"
    if bulk.get("structure"):
        head += f"  {bulk['structure']}"
        if bulk.get("a"):
            head += f", a = {bulk['a']:.4f} A"
        if bulk.get("c") and bulk.get("structure") in ("hcp", "wurtzite"):
            head += f", c = {bulk['c']:.4f} A"
    lines.append(head)
    model = summary.get("model") or {}
    if model.get("name"):
        lines.append(f"model: {model['name']}" + (" (synthetic)" if model.get("synthetic") else "")
                     + (f", from {model['file']}" if model.get("file") else ""))
    a1, a2 = sl["lengths"]
    lines.append(
        f"surface lattice: {sl['kind']}, |a1| = {a1:.4f} A, |a2| = {a2:.4f} A, "
        f"gamma = {sl['gamma_deg']:.2f} deg, "
        f"area = {sl['area']:.4f} A^2"
    )
    m = summary["supercell_matrix"]
    if m != [[1, 0], [0, 1]]:
        lines.append(f"cell: supercell matrix {m} of the 1x1 cell")
    if summary.get("layer_spacing") is not None:
        lines.append(f"bulk layer spacing: {summary['layer_spacing']:.4f} A")
    apl = summary["atoms_per_layer"]
    same = len(set(apl)) == 1
    lines.append(
        f"{summary['n_atoms']} atoms ({summary['formula']}) in {summary['n_layers']} layers, "
        + (f"{apl[0]} per layer" if same and apl else f"per layer (bottom first): {apl}")
        + f"; thickness {summary['thickness']:.3f} A"
        + (f", vacuum {summary['vacuum_gap']:.3f} A" if summary.get("vacuum_gap") is not None else "")
    )
    term = summary.get("termination")
    if term and len(summary.get("layer_compositions", [])) and term.get("polar") is not None:
        comp = " ".join(f"{k}{v if v != 1 else ''}" for k, v in term["top_layer"].items())
        polar = "polar" if term["polar"] else "non-polar"
        lines.append(
            f"termination {term['index']}: top layer {comp}, {polar} (Tasker type {term.get('tasker_type')})"
        )
    if summary.get("step_notation"):
        lines.append(
            f"steps: {summary['step_notation']}, terrace width {summary['terrace_width']:.3f} A, "
            f"step height {summary['step_height']:.3f} A, miscut {summary['miscut_deg']:.2f} deg"
        )
        st = summary.get("step") or {}
        if st.get("kinks_per_edge_period"):
            lines.append(f"kinks: one every {st['kink_spacing']:.3f} A along the step edge")
    top = summary.get("top_spacings") or {}
    if top:
        first = list(top.items())[:3]
        lines.append("spacings from the top: " + ", ".join(f"{k} = {v:.4f} A" for k, v in first))
    sym = summary.get("symmetry")
    if sym and "plane_group" in sym:
        lines.append(f"symmetry: plane group {sym['plane_group']} at normal incidence; layer group "
                     f"{sym['layer_group']} ({sym['layer_symbol']})")
    for rel in summary.get("relaxations") or []:
        ch = ", ".join(
            f"{k} {c['value']:+g}{'%' if c['unit'] == '%' else ' A'}" for k, c in rel["changes"].items()
        )
        lines.append(f"relaxed ({rel['side']}): {ch}")
    for rec in summary.get("reconstructions") or []:
        lines.append(f"reconstruction: {rec.get('type', '?')}"
                     + (f", plane group {rec['plane_group']} afterwards" if rec.get("plane_group") else ""))
    for ads in summary.get("adsorbates") or []:
        where = ads.get("site") or "given positions"
        lines.append(f"adsorbate: {ads.get('species')} x{ads.get('count')} on {where}"
                     + (f", coverage {ads['coverage']} ML" if ads.get("coverage") else ""))
    for film in summary.get("overlayers") or []:
        text = f"overlayer {film.get('name', 'film')!r}: {film.get('outcome')}"
        co = film.get("coincidence") or {}
        if film.get("outcome") == "incommensurate":
            text += ("; no film atoms are written, the film is kept as its own lattice in the surface "
                     "record (.extxyz)")
            if co.get("substrate_cells"):
                text += f"; smallest coincidence cell {co['substrate_cells']} substrate cells"
        else:
            text += f", {film.get('atoms_added', 0)} atoms added"
        lines.append(text)
    return "\n".join(lines)


__all__ = ["slab_summary", "format_summary"]
