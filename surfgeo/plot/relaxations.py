"""Figure of a relaxation: displacement profile through the slab.

Three panels share the vertical axis (height of the atoms in the reference slab, Angstrom):
vertical displacement of every atom with the layer means, lateral displacement with the
layer mean shift, and the change of each interlayer spacing in % of the reference spacing,
drawn between the two layers it belongs to.
"""

from __future__ import annotations

import numpy as np

from surfgeo.plot import figure


def relaxation_figure(report, title: str | None = None):
    """A matplotlib figure of a :class:`~surfgeo.slab.relaxations.RelaxationReport`.

    Parameters
    ----------
    report : RelaxationReport
        From :func:`surfgeo.slab.relaxations.analyse_relaxation`.
    title : str, optional
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = figure(figsize=(10.0, 5.5))
    ax_z, ax_xy, ax_d = fig.subplots(1, 3, sharey=True, gridspec_kw={"width_ratios": [1.2, 1.0, 1.0]})
    h = np.asarray(report.heights_ideal)
    d = np.asarray(report.displacements)
    ads = np.asarray(report.adsorbate_mask, dtype=bool)
    sub = ~ads
    lat = np.hypot(d[:, 0], d[:, 1])

    layer_h = np.array([x.height_ideal for x in report.layers])
    layer_dz = np.array([x.dz for x in report.layers])
    layer_lat = np.array([x.lateral_shift_norm for x in report.layers])

    ax_z.axvline(0.0, color="0.6", lw=0.8)
    zlim = max(0.01, 1.1 * float(np.abs(d[:, 2]).max()) if len(d) else 0.0)
    ax_z.set_xlim(-zlim, zlim)
    ax_z.scatter(d[sub, 2], h[sub], s=10, color="0.55", label="substrate atoms", zorder=2)
    if ads.any():
        ax_z.scatter(d[ads, 2], h[ads], s=28, marker="D", color="tab:red", label="adsorbate atoms", zorder=3)
    if len(layer_h):
        ax_z.plot(layer_dz, layer_h, "-o", color="tab:blue", ms=5, label="layer mean", zorder=4)
    ax_z.set_xlabel("vertical displacement (A)")
    ax_z.set_ylabel("height in the reference slab (A)")
    ax_z.legend(loc="best", fontsize=8)

    ax_xy.scatter(lat[sub], h[sub], s=10, color="0.55", zorder=2)
    if ads.any():
        ax_xy.scatter(lat[ads], h[ads], s=28, marker="D", color="tab:red", zorder=3)
    if len(layer_h):
        ax_xy.plot(layer_lat, layer_h, "-o", color="tab:blue", ms=5, label="|mean lateral shift|", zorder=4)
        ax_xy.legend(loc="best", fontsize=8)
    ax_xy.set_xlabel("lateral displacement (A)")
    ax_xy.set_xlim(0.0, max(0.01, 1.1 * float(lat.max()) if len(lat) else 0.0))

    if report.spacings:
        hl = {x.number: x.height_ideal for x in report.layers}
        mids = np.array([(hl[s.upper] + hl[s.lower]) / 2 for s in report.spacings])
        gaps = np.array([s.ideal for s in report.spacings])
        pct = np.array([s.percent for s in report.spacings])
        colours = np.where(pct < 0, "tab:orange", "tab:green")
        ax_d.barh(mids, pct, height=0.5 * np.min(np.abs(gaps)), color=colours)
        for y, s in zip(mids, report.spacings, strict=True):
            ax_d.annotate(f"{s.label} {s.percent:+.1f}%", (0.0, y), xytext=(3 if s.percent < 0 else -3, 0),
                          textcoords="offset points", ha="left" if s.percent < 0 else "right", va="center",
                          fontsize=7)
        lim = max(1.0, 1.3 * float(np.abs(pct).max()))
        ax_d.set_xlim(-lim, lim)
    ax_d.axvline(0.0, color="0.6", lw=0.8)
    ax_d.set_xlabel("spacing change (% of reference)")
    for ax in (ax_z, ax_xy, ax_d):
        ax.grid(True, lw=0.3, alpha=0.5)
    fig.suptitle(title or f"Relaxation profile ({report.atoms} atoms, matched by {report.method})")
    fig.tight_layout()
    return fig


__all__ = ["relaxation_figure"]
