"""Figure of detected spots drawn on their image (matplotlib; imported lazily by the CLI).

The image is shown with a square-root stretch between two percentiles (pixel centres at
integer coordinates, x right, y down); each spot is circled at its intensity aperture
(3 spot widths) and numbered in the order of the spot list; the border of the usable
region (screen, gun shadow, user mask) is outlined.
"""

from __future__ import annotations

import numpy as np

from surfgeo.measure.spotlist import SpotList
from surfgeo.plot import figure

#: Colours: ordinary spots, spots with saturated pixels, spots touching a mask or border.
SPOT_COLOUR = "#ff8c1a"
SATURATED_COLOUR = "#e8112d"
EDGE_COLOUR = "#9b5fe0"
MASK_COLOUR = "#37c8d8"


def spots_figure(
    image,
    spots: SpotList,
    usable=None,
    title: str | None = None,
    contrast: tuple[float, float] = (1.0, 99.8),
    radius: float | np.ndarray | None = None,
    max_labels: int = 150,
):
    """An annotated figure of spots on their image.

    Parameters
    ----------
    image : ndarray, shape (H, W)
        The image (any units).
    spots : SpotList
        Spots to mark (pixels).
    usable : ndarray of bool, shape (H, W), optional
        Usable pixels; the border of this region is outlined.
    title : str, optional
        Figure title.
    contrast : (float, float)
        Lower and upper percentiles of the finite pixels mapped to black and white.
    radius : float or array, optional
        Circle radii, px (default: 3 x each spot's sigma, or 6 px where unknown).
    max_labels : int
        Number spots only when there are at most this many.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.collections import EllipseCollection
    from matplotlib.colors import PowerNorm
    from matplotlib.lines import Line2D

    data = np.asarray(image, dtype=float)
    h, w = data.shape
    finite = data[np.isfinite(data)]
    lo, hi = np.percentile(finite, contrast) if finite.size else (0.0, 1.0)
    if not hi > lo:
        hi = lo + 1.0
    scale = 7.0 / max(h, w)
    fig = figure(figsize=(max(3.5, w * scale) + 0.6, max(3.5, h * scale) + 0.4))
    ax = fig.add_subplot(1, 1, 1)
    ax.imshow(np.clip(data, lo, hi), cmap="gray", norm=PowerNorm(0.5, vmin=lo, vmax=hi),
              origin="upper", interpolation="nearest")
    outlined = False
    if usable is not None:
        u = np.asarray(usable, dtype=float)
        if 0 < u.mean() < 1:
            ax.contour(u, levels=[0.5], colors=[MASK_COLOUR], linewidths=0.8)
            outlined = True
    n = len(spots)
    if n:
        if radius is None:
            r = np.where(np.isfinite(spots.sigma), 3 * spots.sigma, 6.0)
        else:
            r = np.broadcast_to(np.asarray(radius, dtype=float), (n,))
        colours = np.where(spots.saturated, SATURATED_COLOUR, np.where(spots.edge, EDGE_COLOUR, SPOT_COLOUR))
        ax.add_collection(EllipseCollection(
            2 * r, 2 * r, np.zeros(n), units="xy", offsets=spots.positions, offset_transform=ax.transData,
            facecolors="none", edgecolors=list(colours), linewidths=0.9,
        ))
        if n <= max_labels:
            for i, (x, y, ri) in enumerate(zip(spots.x, spots.y, r, strict=True)):
                ax.annotate(str(i), (x + 0.75 * ri, y - 0.75 * ri), color=SPOT_COLOUR, fontsize=6,
                            ha="left", va="bottom")
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_xlabel("x (px)")
    ax.set_ylabel("y (px)")
    handles = [Line2D([], [], ls="", marker="o", mfc="none", mec=SPOT_COLOUR, label=f"spots ({n})")]
    if n and spots.saturated.any():
        handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec=SATURATED_COLOUR,
                              label="with saturated pixels"))
    if n and spots.edge.any():
        handles.append(Line2D([], [], ls="", marker="o", mfc="none", mec=EDGE_COLOUR,
                              label="touching a mask or the border"))
    if outlined:
        handles.append(Line2D([], [], color=MASK_COLOUR, label="edge of the usable region"))
    ax.legend(handles=handles, loc="upper right", fontsize=7, framealpha=0.7)
    if title:
        ax.set_title(title, fontsize=9)
    return fig


__all__ = ["spots_figure"]
