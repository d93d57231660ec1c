"""Figures of predicted patterns: spot maps in k-space and on a screen, trajectories, animations.

Style (surfgeo's own): integer-order beams are dark hexagons, fractional-order beams filled
circles in the colour of the domain that produces them (grey when several domains do),
overlayer beams triangles, double-diffraction beams small diamonds; beams whose kinematic
intensity vanishes (extinct) are drawn hollow. Marker area grows with the square root of the
kinematic intensity when there is one. The screen view uses a dark panel with the acceptance
rim and the gun shadow.

Imported lazily by the command line; never imported by the numerical core.
"""

from __future__ import annotations

import math

import numpy as np

from surfgeo.diffraction.beams import format_index
from surfgeo.plot import figure, save_figure

#: Domain colours (fractional-order beams), in domain order.
DOMAIN_COLOURS = (
    "#d1495b",
    "#00798c",
    "#edae49",
    "#66a182",
    "#8d5a97",
    "#3d5a80",
    "#e07a5f",
    "#81b29a",
    "#6d597a",
    "#b56576",
    "#457b9d",
    "#a8763e",
)
SHARED_COLOUR = "#8a8f98"
INTEGER_COLOUR = "#22223b"
SCREEN_INTEGER_COLOUR = "#f2e9e4"
KSPACE_BACKGROUND = "#fbf8f3"
#: At most this many trajectories (the lowest orders) carry labels.
MAX_TRAJECTORY_LABELS = 36
SCREEN_BACKGROUND = "#14213d"

_MARKERS = {"substrate": "h", "superstructure": "o", "overlayer": "^", "double": "D"}


def _label(hk) -> str:
    return f"{format_index(hk[0])},{format_index(hk[1])}"


def _style(pattern, on_screen: bool = False):
    """Per-beam marker, face colour, edge colour, size and hollowness, plus legend entries."""
    n = len(pattern)
    integer = pattern.integer
    ext = pattern.extinct
    nd = len(pattern.domain_records)
    inten = pattern.intensity
    if inten is not None and n:
        top = np.nanmax(inten) or 1.0
        rel = np.sqrt(np.clip(np.nan_to_num(inten) / top, 0, 1))
        sizes = 10 + 170 * rel
    else:
        sizes = np.where(integer, 70.0, 45.0)
    markers, colours = [], []
    for i in range(n):
        src = pattern.source[i]
        markers.append(_MARKERS.get(src, "o"))
        if integer[i] and src == "substrate":
            colours.append(SCREEN_INTEGER_COLOUR if on_screen else INTEGER_COLOUR)
        elif len(pattern.domains[i]) == 1 and nd > 1:
            colours.append(DOMAIN_COLOURS[pattern.domains[i][0] % len(DOMAIN_COLOURS)])
        elif nd == 1:
            colours.append(DOMAIN_COLOURS[0])
        else:
            colours.append(SHARED_COLOUR)
    hollow = np.zeros(n, dtype=bool) if ext is None else ext.copy()
    sizes = np.where(hollow, 45.0, sizes)
    return markers, colours, sizes, hollow


def _legend_handles(pattern, on_screen: bool = False):
    from matplotlib.lines import Line2D

    handles = []
    srcs = set(pattern.source)
    integer_colour = SCREEN_INTEGER_COLOUR if on_screen else INTEGER_COLOUR
    edge = "#999999" if on_screen else INTEGER_COLOUR
    if "substrate" in srcs:
        handles.append(
            Line2D([], [], ls="", marker="h", ms=8, mfc=integer_colour, mec=edge, label="integer order")
        )
    nd = len(pattern.domain_records)
    frac_src = [s for s in ("superstructure", "overlayer", "double") if s in srcs]
    if frac_src:
        present = (
            sorted(
                {
                    d
                    for ds, s in zip(pattern.domains, pattern.source, strict=True)
                    if s != "substrate"
                    for d in ds
                }
            )
            if nd > 1
            else [0]
        )
        for d in present[:12]:
            label = f"domain {d}" if nd > 1 else "fractional order"
            handles.append(
                Line2D([], [], ls="", marker="o", ms=7, mfc=DOMAIN_COLOURS[d % 12], mec="none", label=label)
            )
        if nd > 1 and any(
            len(ds) > 1 and s != "substrate" for ds, s in zip(pattern.domains, pattern.source, strict=True)
        ):
            handles.append(
                Line2D(
                    [], [], ls="", marker="o", ms=7, mfc=SHARED_COLOUR, mec="none", label="several domains"
                )
            )
    if "overlayer" in srcs:
        handles.append(
            Line2D([], [], ls="", marker="^", ms=7, mfc="#bbbbbb", mec="#555555", label="overlayer")
        )
    if "double" in srcs:
        handles.append(
            Line2D([], [], ls="", marker="D", ms=5, mfc="#bbbbbb", mec="#555555", label="double diffraction")
        )
    if pattern.extinct is not None and pattern.extinct.any():
        handles.append(
            Line2D(
                [],
                [],
                ls="",
                marker="o",
                ms=7,
                mfc="none",
                mec="#777777",
                mew=1.3,
                label="extinct (kinematic)",
            )
        )
    return handles


def _scatter(ax, xy, pattern, markers, colours, sizes, hollow, edge_dark: bool) -> None:
    for m in set(markers):
        sel = np.array([mk == m for mk in markers])
        for hol in (False, True):
            s = sel & (hollow == hol) & np.isfinite(xy[:, 0])
            if not s.any():
                continue
            cols = [c for c, k in zip(colours, s, strict=True) if k]
            if hol:
                ax.scatter(
                    xy[s, 0],
                    xy[s, 1],
                    s=sizes[s],
                    marker=m,
                    facecolors="none",
                    edgecolors=cols,
                    linewidths=1.3,
                    zorder=3,
                )
            else:
                ax.scatter(
                    xy[s, 0],
                    xy[s, 1],
                    s=sizes[s],
                    marker=m,
                    c=cols,
                    edgecolors="#000000" if edge_dark else "none",
                    linewidths=0.4,
                    zorder=4,
                )


def _annotate(ax, xy, pattern, colour, limit: int = 90, offset=(4, 4)) -> None:
    if len(pattern) > limit:
        return
    for i, hk in enumerate(pattern.hk):
        if np.isfinite(xy[i, 0]):
            ax.annotate(
                _label(hk),
                xy[i],
                xytext=offset,
                textcoords="offset points",
                fontsize=6,
                color=colour,
                zorder=5,
            )


def _title(pattern) -> str:
    inc = pattern.incidence
    where = "normal incidence" if inc[0] == 0 else f"incidence {inc[0]:g}\u00b0 at azimuth {inc[1]:g}\u00b0"
    return f"{_energy_text(pattern.energy)} eV, {where}"


def _energy_text(energy: float) -> str:
    """An energy for a title: up to 0.1 eV precision, no trailing zeros (161.504 -> 161.5)."""
    return f"{round(float(energy), 1):g}"


def acceptance_edge(energy: float, theta_max: float, incidence_xy, n: int = 721) -> np.ndarray:
    """Parallel momenta (n, 2) of the beams at ``theta_max`` from the screen axis (1/Angstrom).

    The acceptance cone is centred on the gun axis, so at oblique incidence its edge in k-space
    is not a circle about the origin. Points of the cone that leave no beam (behind the
    surface) are NaN, which breaks the line there.
    """
    from surfgeo.diffraction.electron import from_gun_frame, wavenumber

    t = math.radians(theta_max)
    psi = np.linspace(0.0, 2.0 * math.pi, n)
    cone = np.stack([math.sin(t) * np.cos(psi), math.sin(t) * np.sin(psi), np.full(n, math.cos(t))], axis=-1)
    d = from_gun_frame(cone, incidence_xy)
    kp = wavenumber(energy) * d[:, :2]
    kp[~(d[:, 2] > 0)] = np.nan
    return kp


def _kspace_frame(ax, pattern) -> None:
    """Background, emergence circle, screen edge, incident beam, limits and labels of a k-space panel."""
    from matplotlib.patches import Circle

    from surfgeo.diffraction.electron import incident_k_parallel, wavenumber

    ax.set_facecolor(KSPACE_BACKGROUND)
    k = wavenumber(pattern.energy)
    kin = incident_k_parallel(pattern.energy, pattern.incidence_xy)
    ax.add_patch(Circle((0, 0), k, fill=False, ls="--", lw=0.8, ec="#9a8c98", zorder=1))
    if pattern.theta_max < 90:
        edge = acceptance_edge(pattern.energy, pattern.theta_max, pattern.incidence_xy)
        ax.plot(edge[:, 0], edge[:, 1], ls=":", lw=0.8, color="#9a8c98", zorder=1)
    ax.plot([kin[0]], [kin[1]], marker="+", color="#9a8c98", ms=10, zorder=2)
    lim = k * 1.08
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_aspect("equal")
    ax.set_xlabel("k$_x$ (1/\u00c5)")
    ax.set_ylabel("k$_y$ (1/\u00c5)")
    dotted = "; dotted: screen edge" if pattern.theta_max < 90 else ""
    ax.set_title(f"parallel momentum (dashed: |k$_\\parallel$| = k{dotted})", fontsize=9)


def _screen_frame(ax, screen, axis_labels: bool = True) -> None:
    """Background, acceptance rim, gun and holder shadow, limits (y down) and labels of a screen panel."""
    ax.set_facecolor(SCREEN_BACKGROUND)
    rim = screen.rim()
    ax.plot(rim[:, 0], rim[:, 1], ls="--", lw=0.8, color="#e5e5e5", zorder=1)
    _draw_shadow(ax, screen)
    ax.set_xlim(-0.5, screen.width - 0.5)
    ax.set_ylim(screen.height - 0.5, -0.5)
    ax.set_aspect("equal")
    if axis_labels:
        ax.set_xlabel("x (px)")
        ax.set_ylabel("y (px)")
        ax.set_title(f"{screen.kind} screen, acceptance {screen.acceptance_deg:g}\u00b0", fontsize=9)
    else:
        ax.set_xticks([])
        ax.set_yticks([])


def draw_kspace(ax, pattern) -> None:
    """Spot map in parallel momentum (1/Angstrom) on ``ax``."""
    _kspace_frame(ax, pattern)
    markers, colours, sizes, hollow = _style(pattern)
    _scatter(ax, pattern.k_parallel, pattern, markers, colours, sizes, hollow, edge_dark=False)
    _annotate(ax, pattern.k_parallel, pattern, "#4a4e69")


def draw_screen(ax, pattern, screen, annotate: bool = True) -> None:
    """Spot map on the screen model (pixels, y down) on ``ax``."""
    _screen_frame(ax, screen)
    px, vis = pattern.screen_positions(screen)
    px = np.where(vis[:, None], px, np.nan)
    markers, colours, sizes, hollow = _style(pattern, on_screen=True)
    _scatter(ax, px, pattern, markers, colours, sizes, hollow, edge_dark=False)
    if annotate:
        _annotate(ax, px, pattern, "#e5e5e5")


def _draw_shadow(ax, screen) -> None:
    from matplotlib.patches import Circle, Polygon

    r = screen.shadow_radius
    if r <= 0:
        return
    ax.add_patch(Circle((screen.centre_x, screen.centre_y), r, color="#0b0f1a", zorder=2))
    if screen.holder_deg is not None:
        h = math.radians(screen.holder_deg)
        u = np.array([math.cos(h), -math.sin(h)])  # image coordinates, y down
        n = np.array([-u[1], u[0]])
        c = np.array([screen.centre_x, screen.centre_y])
        far = 2.0 * max(screen.width, screen.height)
        pts = [c + r * n, c + r * n + far * u, c - r * n + far * u, c - r * n]
        ax.add_patch(Polygon(pts, closed=True, color="#0b0f1a", zorder=2))


def plot_pattern(pattern, path, screen=None, force: bool = False, view: str = "both",
                 footer: str | None = None) -> None:
    """Write a spot-map figure (PNG or SVG by the ending of ``path``).

    Parameters
    ----------
    pattern : surfgeo.diffraction.pattern.Pattern
    path : str or Path
    screen : ScreenGeometry, optional
        Draw the screen panel with this model (needed for ``view`` "screen" or "both").
    view : {"both", "kspace", "screen"}
    footer : str, optional
        A note printed in bold along the bottom of the figure, wrapped to the figure's width
        (e.g. the label of synthetic data), below the note on what the intensities mean.
    """
    panels = (
        ["kspace", "screen"]
        if view == "both" and screen is not None
        else ["screen" if view == "screen" and screen is not None else "kspace"]
    )
    fig = figure(figsize=(5.6 * len(panels) + 1.8, 6.0))
    axes = fig.subplots(1, len(panels), squeeze=False)[0]
    for ax, kind in zip(axes, panels, strict=True):
        if kind == "kspace":
            draw_kspace(ax, pattern)
        else:
            draw_screen(ax, pattern, screen)
    handles = _legend_handles(pattern)
    fig.legend(handles=handles, loc="center right", fontsize=8, frameon=False)
    fig.suptitle(f"Predicted pattern \u2014 {_title(pattern)}", fontsize=11)
    note = (
        "kinematic intensities: qualitative; positions and normal-incidence extinctions: exact"
        if pattern.intensity is not None
        else "positions only (no atoms given)"
    )
    if pattern.intensity is not None and pattern.incidence[0] > 0 and pattern.extinct.any():
        note += "; hollow (kinematically extinct) spots off normal incidence are not predictions"
    y = 0.01
    if footer:
        import textwrap

        lines = textwrap.wrap(" ".join(str(footer).split()), width=int(30 * fig.get_figwidth()))
        fig.text(0.01, y, "\n".join(lines), fontsize=7, fontweight="bold", color="#7a1f1f", va="bottom")
        y += 0.025 * len(lines)
    fig.text(0.01, y, note, fontsize=7, color="#555555", va="bottom")
    fig.subplots_adjust(right=0.83, wspace=0.25)
    save_figure(fig, path, force)


def plot_trajectories(sweep, screen, path, force: bool = False) -> None:
    """Spot trajectories on the screen over the energy range, coloured by energy."""
    from matplotlib import colormaps
    from matplotlib.cm import ScalarMappable
    from matplotlib.collections import LineCollection
    from matplotlib.colors import Normalize

    px, vis = sweep.screen_positions(screen)
    e = sweep.energies
    fig = figure(figsize=(7.6, 6.4))
    ax = fig.add_subplot(1, 1, 1)
    _screen_frame(ax, screen)
    norm = Normalize(e.min(), e.max() if e.max() > e.min() else e.min() + 1)
    cmap = colormaps["plasma"]
    # label the lowest orders only, so that the figure stays readable
    gnorm = np.linalg.norm(sweep.base.g[sweep.index], axis=1)
    labelled = set(np.argsort(gnorm, kind="stable")[:MAX_TRAJECTORY_LABELS].tolist())
    for j in range(px.shape[1]):
        p = np.where(vis[:, j, None], px[:, j], np.nan)
        ok = np.isfinite(p[:, 0])
        if ok.sum() >= 2:
            seg = np.stack([p[:-1], p[1:]], axis=1)
            good = ok[:-1] & ok[1:]
            lc = LineCollection(seg[good], cmap=cmap, norm=norm, linewidths=1.6)
            lc.set_array(0.5 * (e[:-1] + e[1:])[good])
            ax.add_collection(lc)
        if not ok.any():
            continue
        first, last = np.flatnonzero(ok)[[0, -1]]
        integer = sweep.base.integer[sweep.index[j]]
        entering = sweep.onset[j] > e[0]
        ax.plot(
            *p[first],
            marker="h" if integer else "o",
            ms=5 if entering else 3,
            color=cmap(norm(e[first])),
            mec="#ffffff" if entering else "none",
            mew=0.5,
        )
        if j in labelled:
            # at the highest energy on the screen: beams entering together at the rim part there
            text = _label(sweep.hk[j]) + (f" ({sweep.onset[j]:.0f} eV)" if entering else "")
            ax.annotate(
                text, p[last], xytext=(3, 3), textcoords="offset points", fontsize=5.5, color="#e5e5e5"
            )
    fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, label="energy (eV)", shrink=0.8)
    where = _title(sweep.base).split(", ", 1)[1]
    ax.set_title(
        f"Spot trajectories {_energy_text(e.min())}\u2013{_energy_text(e.max())} eV ({where})\n"
        "ringed dot: a beam enters the screen; label (onset) at the highest energy",
        fontsize=9,
    )
    save_figure(fig, path, force)


def animate_sweep(
    sweep, screen, path, force: bool = False, max_frames: int = 120, fps: int = 8, show_progress=None
) -> None:
    """A GIF animation of the pattern on the screen through the energy range.

    Frames are drawn with matplotlib and written with Pillow; at most ``max_frames`` energies
    (evenly spaced) are shown. A progress bar is drawn on a terminal.
    """
    import matplotlib.pyplot as plt
    from PIL import Image

    from surfgeo.io import atomic_output
    from surfgeo.progress import progress

    px, vis = sweep.screen_positions(screen)
    e = sweep.energies
    frames = np.unique(np.linspace(0, len(e) - 1, min(len(e), max_frames)).round().astype(int))
    base = sweep.base
    integer = np.array([base.integer[i] for i in sweep.index])
    inten = sweep.intensity
    fig = figure(figsize=(5.4, 5.6))
    ax = fig.add_subplot(1, 1, 1)
    _screen_frame(ax, screen, axis_labels=False)
    nd = len(base.domain_records)
    colours = []
    for j, i in enumerate(sweep.index):
        ds = base.domains[i]
        if integer[j]:
            colours.append(SCREEN_INTEGER_COLOUR)
        elif len(ds) == 1 or nd == 1:
            colours.append(DOMAIN_COLOURS[ds[0] % 12])
        else:
            colours.append(SHARED_COLOUR)
    colours = np.array(colours, dtype=object)
    dots = ax.scatter(np.empty(0), np.empty(0), s=np.empty(0), zorder=3)
    title = ax.set_title("", fontsize=10)

    def update(f):
        ok = vis[f] & np.isfinite(px[f, :, 0])
        if inten is not None:
            row = np.nan_to_num(inten[f])
            top = row[ok].max() if ok.any() and row[ok].max() > 0 else 1.0
            size = 8 + 150 * np.sqrt(np.clip(row / top, 0, 1))
        else:
            size = np.where(integer, 60.0, 40.0)
        dots.set_offsets(px[f, ok] if ok.any() else np.empty((0, 2)))
        dots.set_sizes(size[ok])
        dots.set_facecolor(list(colours[ok]))
        dots.set_edgecolor("none")
        title.set_text(f"{e[f]:.1f} eV \u2014 {ok.sum()} beams on the screen")
        return dots, title

    images = []
    try:
        for f in progress(frames, desc="animation", enabled=show_progress):
            update(f)
            fig.canvas.draw()
            rgba = np.asarray(fig.canvas.buffer_rgba())
            images.append(Image.fromarray(rgba[..., :3].copy()).quantize(colors=128))
    finally:
        plt.close(fig)
    with atomic_output(path, force) as tmp:
        images[0].save(
            tmp, format="GIF", save_all=True, append_images=images[1:], duration=int(1000 / fps), loop=0
        )


# ----------------------------------------------------------------------------- relaxed against ideal
#: Colours of the two structures in comparison figures.
IDEAL_COLOUR = "#7d8fa6"
RELAXED_COLOUR = "#e8793a"


def _half_disc(side: str):
    """A half-disc marker path (``"left"`` or ``"right"``) centred on the full disc's centre."""
    from matplotlib.path import Path

    start = 0.5 * math.pi if side == "left" else -0.5 * math.pi
    t = np.linspace(start, start + math.pi, 33)
    verts = np.column_stack([np.cos(t), np.sin(t)])
    verts = np.vstack([verts, verts[:1]])
    codes = [Path.MOVETO] + [Path.LINETO] * (len(verts) - 2) + [Path.CLOSEPOLY]
    return Path(verts, codes)


def _split_spots(ax, xy, comp, on_screen: bool) -> None:
    """Each beam as a disc split in two: left half the ideal, right half the relaxed structure.

    Areas grow with the square root of the intensity relative to the strongest beam of either
    structure (so that the two halves compare); extinct halves are drawn hollow.
    """
    rel, ideal = comp.relaxed, comp.ideal
    top = max(float(np.nanmax(rel.intensity)), float(np.nanmax(ideal.intensity))) if len(rel) else 1.0
    top = top if top > 0 else 1.0
    ok = np.isfinite(xy[:, 0])
    for pat, side, colour in ((ideal, "left", IDEAL_COLOUR), (rel, "right", RELAXED_COLOUR)):
        size = 12 + 220 * np.sqrt(np.clip(np.nan_to_num(pat.intensity) / top, 0, 1))
        ext = pat.extinct
        marker = _half_disc(side)
        full = ok & ~ext
        if full.any():
            ax.scatter(xy[full, 0], xy[full, 1], s=size[full], marker=marker, c=colour, edgecolors="none",
                       zorder=4)
        hol = ok & ext
        if hol.any():
            ax.scatter(xy[hol, 0], xy[hol, 1], s=45.0, marker=marker, facecolors="none", edgecolors=colour,
                       linewidths=1.1, zorder=4)
    if len(rel) <= 90:
        _annotate(ax, xy, rel, "#e5e5e5" if on_screen else "#4a4e69", offset=(6, 5))


def _comparison_legend():
    from matplotlib.lines import Line2D

    return [
        Line2D([], [], ls="", marker=_half_disc("left"), ms=11, mfc=IDEAL_COLOUR, mec="none",
               label="ideal (left half)"),
        Line2D([], [], ls="", marker=_half_disc("right"), ms=11, mfc=RELAXED_COLOUR, mec="none",
               label="relaxed (right half)"),
        Line2D([], [], ls="", marker="o", ms=8, mfc="none", mec="#777777", label="extinct (kinematic)"),
    ]


def _draw_changes(ax, comp, top: int) -> None:
    """Horizontal bars of log2(I_relaxed / I_ideal) for the groups of beams that changed most."""
    from surfgeo.diffraction.pattern import APPEARS, VANISHES

    groups = comp.change_groups(top)
    ratio = comp.ratio
    status = comp.status
    if not groups:
        ax.text(0.5, 0.5, "every beam is extinct\nin both structures", ha="center", va="center",
                transform=ax.transAxes, fontsize=9)
        ax.set_axis_off()
        return
    finite = [math.log2(ratio[g[0]]) for g in groups if 0 < ratio[g[0]] < np.inf]
    span = max([abs(v) for v in finite] + [0.1]) * 1.25
    y = np.arange(len(groups))[::-1]
    for yi, g in zip(y, groups, strict=True):
        i = g[0]
        st = status[i]
        if st in (APPEARS, VANISHES):
            v = span if st == APPEARS else -span
            ax.barh(yi, v, color="none", edgecolor=RELAXED_COLOUR if v > 0 else IDEAL_COLOUR, hatch="///",
                    height=0.7)
            ax.text(v, yi, " appears" if v > 0 else "vanishes ", va="center",
                    ha="left" if v > 0 else "right", fontsize=7)
        else:
            v = math.log2(ratio[i])
            ax.barh(yi, v, color=RELAXED_COLOUR if v >= 0 else IDEAL_COLOUR, height=0.7)
            ax.text(v, yi, f" {100 * (ratio[i] - 1):+.1f}% " if abs(v) > 0 else " 0% ", va="center",
                    ha="left" if v >= 0 else "right", fontsize=7)
    labels = []
    for g in groups:
        h, k = comp.relaxed.hk[g[0]]
        lab = f"({format_index(h)},{format_index(k)})"
        labels.append(lab + (f" \u00d7{len(g)}" if len(g) > 1 else ""))
    ax.set_yticks(y)
    ax.set_yticklabels(labels, fontsize=7)
    ax.axvline(0.0, color="#333333", lw=0.8)
    ax.set_xlim(-span * 1.45, span * 1.45)
    ax.set_xlabel("log$_2$(I$_{relaxed}$ / I$_{ideal}$)")
    ax.set_title(f"largest changes ({len(groups)} groups of equivalent beams)", fontsize=9)


def plot_comparison(comp, path, screen=None, force: bool = False, view: str = "both", top: int = 8,
                    names=None) -> None:
    """Relaxed against ideal at one energy: split-spot maps and a bar chart of the changes.

    Parameters
    ----------
    comp : surfgeo.diffraction.pattern.PatternComparison
    path : str or Path
        PNG or SVG (from the ending).
    screen : ScreenGeometry, optional
        For the screen panel (``view`` "screen" or "both").
    view : {"both", "kspace", "screen"}
        Spot-map panels; the bar chart of the changes is always drawn.
    top : int
        Groups of equivalent beams in the bar chart.
    names : (str, str), optional
        File names of the relaxed and the ideal structure, for the title.
    """
    rel = comp.relaxed
    panels = (
        ["kspace", "screen"]
        if view == "both" and screen is not None
        else ["screen" if view == "screen" and screen is not None else "kspace"]
    )
    fig = figure(figsize=(5.4 * len(panels) + 5.0, 6.0))
    axes = fig.subplots(1, len(panels) + 1, squeeze=False, gridspec_kw={"width_ratios": [1.0] * len(panels)
                                                                           + [0.85]})[0]
    for ax, kind in zip(axes, panels, strict=False):
        if kind == "kspace":
            _kspace_frame(ax, rel)
            _split_spots(ax, rel.k_parallel, comp, on_screen=False)
        else:
            _screen_frame(ax, screen)
            px, vis = rel.screen_positions(screen)
            _split_spots(ax, np.where(vis[:, None], px, np.nan), comp, on_screen=True)
    _draw_changes(axes[-1], comp, top)
    fig.legend(handles=_comparison_legend(), loc="lower center", ncol=3, fontsize=8, frameon=False,
               bbox_to_anchor=(0.5, 0.02))
    who = f" ({names[0]} against {names[1]})" if names else ""
    fig.suptitle(f"Relaxed against ideal{who} \u2014 {_title(rel)}", fontsize=11)
    fig.text(0.01, 0.005, "kinematic intensities and their changes: qualitative for LEED; same units for "
             "both structures", fontsize=7, color="#555555")
    fig.subplots_adjust(bottom=0.16, wspace=0.35)
    save_figure(fig, path, force)


def plot_iv_comparison(comp, path, force: bool = False, top: int = 8, names=None) -> None:
    """Kinematic I(V) curves of the strongest beams, relaxed (solid) against ideal (dashed).

    Parameters
    ----------
    comp : surfgeo.diffraction.pattern.SweepComparison
    path : str or Path
        PNG or SVG (from the ending).
    top : int
        Number of panels: the strongest groups of equivalent beams (one curve per group).
    names : (str, str), optional
        File names of the relaxed and the ideal structure, for the title.
    """
    groups = comp.strongest(top)
    e = comp.relaxed.energies
    n = max(1, len(groups))
    cols = min(n, 4)
    rows = math.ceil(n / cols)
    fig = figure(figsize=(3.3 * cols + 0.6, 2.6 * rows + 1.0))
    axes = fig.subplots(rows, cols, squeeze=False)
    ratio = comp.mean_ratio
    corr = comp.correlation()
    hk = comp.relaxed.hk
    for a, ax in enumerate(axes.ravel()):
        if a >= len(groups):
            ax.set_axis_off()
            continue
        j = groups[a][0]
        ax.plot(e, comp.ideal.intensity[:, j], ls="--", lw=1.3, color=IDEAL_COLOUR, label="ideal")
        ax.plot(e, comp.relaxed.intensity[:, j], ls="-", lw=1.4, color=RELAXED_COLOUR, label="relaxed")
        lab = f"({format_index(hk[j][0])},{format_index(hk[j][1])})"
        if len(groups[a]) > 1:
            lab += f" \u00d7{len(groups[a])}"
        ax.set_title(lab, fontsize=9)
        info = []
        if np.isfinite(ratio[j]):
            info.append(f"mean ratio {ratio[j]:.3g}")
        if np.isfinite(corr[j]):
            info.append(f"corr {corr[j]:.2f}")
        ax.text(0.98, 0.96, "\n".join(info), transform=ax.transAxes, ha="right", va="top", fontsize=7,
                color="#333333")
        ax.tick_params(labelsize=7)
        ax.set_ylim(bottom=0)
        if a // cols == rows - 1 or a + cols >= len(groups):
            ax.set_xlabel("energy (eV)", fontsize=8)
        if a % cols == 0:
            ax.set_ylabel("intensity (|f|$^2$)", fontsize=8)
    handles, labels = axes[0, 0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="upper right", fontsize=8, frameon=False)
    who = f" ({names[0]} against {names[1]})" if names else ""
    inc = comp.relaxed.base.incidence
    where = "normal incidence" if inc[0] == 0 else f"incidence {inc[0]:g}\u00b0 at azimuth {inc[1]:g}\u00b0"
    fig.suptitle(f"Kinematic I(V): relaxed against ideal{who}, {where}", fontsize=10)
    fig.text(0.01, 0.005, "kinematic I(V) curves are qualitative for LEED (multiple scattering is strong); "
             "\u00d7n: n equivalent beams", fontsize=7, color="#555555")
    fig.tight_layout(rect=(0, 0.03, 1, 0.95))
    save_figure(fig, path, force)
