"""Pictures of slabs: a top view of the outer layers with the surface cell, and a side view."""

from __future__ import annotations

import numpy as np

from surfgeo.plot import figure, save_figure


def slab_figure(atoms, title: str = "", top_layers: int = 3):
    """A matplotlib figure with a top view (outer ``top_layers`` layers) and a side view.

    Substrate atoms are drawn as discs shaded by depth below the top layer (lighter = higher);
    adsorbate and film atoms (the per-atom marks of the model builder) are drawn on top as
    smaller discs in their element's colour, one legend entry per element. The in-plane cell of
    the slab is outlined, and the 1x1 surface cell is dashed when the slab is a supercell.
    """
    from ase.data import atomic_numbers
    from ase.data.colors import jmol_colors
    from matplotlib import colormaps

    from surfgeo.slab.info import surface_info
    from surfgeo.slab.layers import slab_layers
    from surfgeo.slab.reconstruct import substrate_mask

    info = surface_info(atoms)
    layers = slab_layers(atoms)
    pos = atoms.positions
    cell = np.asarray(atoms.cell[:])
    fig = figure(figsize=(10, 4.8))
    ax_top = fig.add_subplot(1, 2, 1)
    ax_side = fig.add_subplot(1, 2, 2)
    cmap = colormaps["cividis"]
    z = pos[:, 2]
    ztop = float(z[layers[-1]].mean()) if layers else 0.0
    # depth window: the outer ``top_layers`` layers, or two step heights on a stepped face
    window = 0.0
    if len(layers) >= 1:
        deepest = layers[-min(top_layers, len(layers))]
        window = ztop - float(z[deepest].mean())
    if info.step:
        window = max(window, 2.2 * float(info.step["step_height"]))
    depth = ztop - z
    ads = ~substrate_mask(atoms)
    symbols = np.array(atoms.get_chemical_symbols())
    shown = np.nonzero((depth <= window + 0.05) & ~ads)[0]
    shown = shown[np.argsort(-depth[shown])]  # deepest first, so the top is drawn last
    shifts = np.array([[i, j] for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float) @ cell[:2, :2]
    xy = (pos[shown, :2][None, :, :] + shifts[:, None, :]).reshape(-1, 2)
    dd = np.tile(depth[shown], len(shifts))
    order = np.argsort(-dd, kind="stable")
    scale = max(window, 1e-9)
    sc = ax_top.scatter(xy[order, 0], xy[order, 1], s=240 - 120 * dd[order] / scale,
                        c=dd[order], cmap=cmap.reversed(), vmin=0.0, vmax=scale,
                        edgecolors="black", linewidths=0.5, zorder=5)
    fig.colorbar(sc, ax=ax_top, label="depth below the top layer (Å)", shrink=0.8)
    for el in sorted(set(symbols[ads])):
        idx = np.nonzero(ads & (symbols == el))[0]
        idx = idx[np.argsort(z[idx])]
        pts = (pos[idx, :2][None, :, :] + shifts[:, None, :]).reshape(-1, 2)
        colour = jmol_colors[atomic_numbers[el]]
        ax_top.scatter(pts[:, 0], pts[:, 1], s=90, color=colour, edgecolors="black", linewidths=1.0,
                       zorder=10, label=f"adsorbate {el}")
        ax_side.scatter(pos[idx, 1], pos[idx, 2], s=60, color=colour, edgecolors="black", linewidths=1.0,
                        zorder=10, label=f"adsorbate {el}")
    a1, a2 = cell[0, :2], cell[1, :2]
    outline = np.array([[0, 0], a1, a1 + a2, a2, [0, 0]])
    ax_top.plot(outline[:, 0], outline[:, 1], color="crimson", lw=1.5, zorder=20, label="slab cell")
    if info.supercell_matrix.tolist() != [[1, 0], [0, 1]]:
        s1, s2 = info.surface_cell
        unit = np.array([[0, 0], s1, s1 + s2, s2, [0, 0]])
        ax_top.plot(unit[:, 0], unit[:, 1], color="crimson", lw=1.0, ls="--", zorder=20, label="1x1 cell")
    corners = np.array([[0, 0], a1, a2, a1 + a2])
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    pad = 0.25 * max(hi - lo)
    ax_top.set_xlim(lo[0] - pad, hi[0] + pad)
    ax_top.set_ylim(lo[1] - pad, hi[1] + pad)
    ax_top.set_aspect("equal")
    ax_top.set_xlabel("x (Å)")
    ax_top.set_ylabel("y (Å)")
    ax_top.set_title("top view (outer atoms)")
    ax_top.legend(loc="upper right", fontsize=7, framealpha=0.8)

    # side view: project along a1 (x), horizontal axis = y
    sub = ~ads
    zmax = pos[sub, 2].max() if sub.any() else 0.0
    depth_all = zmax - pos[sub, 2]
    span = max(float(depth_all.max()), 1e-9) if sub.any() else 1.0
    ax_side.scatter(pos[sub, 1], pos[sub, 2], s=60, c=cmap(1.0 - 0.8 * depth_all / span),
                    edgecolors="black", linewidths=0.4)
    ax_side.axhline(zmax, color="grey", lw=0.5, ls=":")
    if ads.any():
        ax_side.legend(loc="lower right", fontsize=7, framealpha=0.8)
    ax_side.set_aspect("equal")
    ax_side.set_xlabel("y (Å)")
    ax_side.set_ylabel("z (Å), +z into the vacuum")
    ax_side.set_title("side view (along a1)")
    if title:
        fig.suptitle(title)
    return fig


def save_slab_figure(atoms, path, force: bool = False, title: str = "") -> None:
    """Draw :func:`slab_figure` and save it atomically (PNG or SVG from the ending)."""
    save_figure(slab_figure(atoms, title=title), path, force=force)


__all__ = ["slab_figure", "save_slab_figure"]
