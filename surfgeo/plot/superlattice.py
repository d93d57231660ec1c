"""Real-space drawing of a superstructure: substrate lattice points and the superlattice cells
of every symmetry domain (used by ``surfgeo notation --plot``)."""

from __future__ import annotations

import numpy as np

from surfgeo.plot import figure


def _points_in_box(vectors: np.ndarray, half: float) -> np.ndarray:
    """All lattice points (rows) of the basis ``vectors`` inside the square |x|, |y| <= half."""
    inv = np.linalg.inv(vectors)
    corners = np.array([[-half, -half], [-half, half], [half, -half], [half, half]]) @ inv
    lo = np.floor(corners.min(axis=0)).astype(int) - 1
    hi = np.ceil(corners.max(axis=0)).astype(int) + 1
    i, j = np.meshgrid(np.arange(lo[0], hi[0] + 1), np.arange(lo[1], hi[1] + 1), indexing="ij")
    pts = np.stack([i.ravel(), j.ravel()], axis=1) @ vectors
    keep = np.all(np.abs(pts) <= half, axis=1)
    return pts[keep]


def superstructure_figure(sup, max_domains: int = 12):
    """A matplotlib figure of ``sup`` (a :class:`surfgeo.lattice.Superstructure`).

    Small grey dots: substrate lattice points. Black rings: superlattice points of the first
    domain (M itself). Outlined parallelograms from the origin: the cell of each domain, the
    first one solid and thick, the others thin and dashed, each labelled with its number.
    """
    from surfgeo.lattice.rational import format_matrix, to_float

    A = sup.lattice.vectors
    B = sup.vectors
    span = max(float(np.max(np.linalg.norm(B, axis=1))) * 2.2, 4.0 * float(np.max(np.linalg.norm(A, axis=1))))
    fig = figure(figsize=(5.5, 5.5))
    ax = fig.add_subplot(1, 1, 1)
    sub = _points_in_box(A, span)
    ax.scatter(sub[:, 0], sub[:, 1], s=6, color="0.6", zorder=1, label="substrate lattice")
    sl = _points_in_box(B, span)
    ax.scatter(sl[:, 0], sl[:, 1], s=60, facecolors="none", edgecolors="black", linewidths=1.0,
               zorder=2, label="superlattice (domain 1)")
    domains = sup.domains()[:max_domains]
    for n, dom in enumerate(domains, 1):
        Bd = to_float(dom.matrix) @ A
        cell = np.array([[0, 0], Bd[0], Bd[0] + Bd[1], Bd[1], [0, 0]])
        first = n == 1
        ax.plot(cell[:, 0], cell[:, 1], lw=2.2 if first else 0.9, ls="-" if first else "--",
                zorder=3 if first else 2, label=f"cell of domain {n}" if n <= 4 else None)
        centre = 0.5 * (Bd[0] + Bd[1])
        ax.annotate(str(n), centre, fontsize=8, ha="center", va="center")
    ax.set_aspect("equal")
    ax.set_xlim(-span, span)
    ax.set_ylim(-span, span)
    ax.set_xlabel("x (\u00c5)")
    ax.set_ylabel("y (\u00c5)")
    w = sup.wood()
    note = f"; {sup.basis_note}" if sup.basis_note else ""
    ax.set_title(f"{w.unicode if w else 'no Wood form'}   M = {format_matrix(sup.matrix)}{note}\n"
                 f"{sup.kind}, {len(sup.domains())} domain(s) under {sup.point_group_symbol}", fontsize=9)
    ax.legend(loc="upper right", fontsize=7, framealpha=0.9)
    return fig
