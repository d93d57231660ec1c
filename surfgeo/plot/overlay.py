"""Overlay of a predicted pattern on a measured image (matplotlib; imported lazily by the CLI).

Style (surfgeo's own, shared with the spot maps of :mod:`surfgeo.plot.spotmap`): the image
in grey with an adjustable contrast (two percentiles and a power stretch); measured spots as
small open squares; predicted integer-order spots as light hollow hexagons; predicted
fractional-order spots as hollow circles in the colour of the domain producing them (grey when
several domains do); the residual of every matched pair as an arrow from the predicted to the
measured position, magnified; beam labels beside the predicted spots; the acceptance rim and
the gun shadow of the calibrated screen as dashed lines.
"""

from __future__ import annotations

import math

import numpy as np

from surfgeo.plot import figure
from surfgeo.plot.spotmap import DOMAIN_COLOURS, SCREEN_BACKGROUND, SCREEN_INTEGER_COLOUR, SHARED_COLOUR

#: Colours of measured spots, residual arrows, unexplained spots and the screen outline.
MEASURED_COLOUR = "#7bdff2"
RESIDUAL_COLOUR = "#ffd166"
UNEXPLAINED_COLOUR = "#ff5d8f"
OUTLINE_COLOUR = "#c77dff"


def _stretch(
    image: np.ndarray, contrast: tuple[float, float], power: float, flatten: float | None
) -> np.ndarray:
    """Display values in [0, 1]: optional glow removal, then the percentiles ``contrast`` to black
    and white, then ``** power``.

    The glow is the grey opening of the image with a ``2 flatten + 1`` px square: the largest
    background under the image that no feature narrower than that square pushes up. Unlike a
    subtracted blur it leaves no dark halo around bright spots, which would hide the faint
    fractional-order spots next to them.

    References
    ----------
    J. Serra, *Image Analysis and Mathematical Morphology*, Academic Press (1982) (opening).
    """
    data = np.asarray(image, dtype=float)
    if flatten:
        from scipy import ndimage as ndi

        filled = np.nan_to_num(data, nan=float(np.nanmedian(data)) if np.isfinite(data).any() else 0.0)
        size = 2 * max(int(round(flatten)), 1) + 1
        data = data - ndi.grey_opening(filled, size=(size, size))
    finite = data[np.isfinite(data)]
    if finite.size == 0:
        return np.zeros_like(data)
    lo, hi = np.percentile(finite, contrast)
    if hi <= lo:
        hi = lo + 1.0
    out = np.clip((np.nan_to_num(data, nan=lo) - lo) / (hi - lo), 0.0, 1.0)
    return out**power


def _label(hk) -> str:
    from surfgeo.diffraction.beams import format_index

    return f"{format_index(hk[0])},{format_index(hk[1])}"


def overlay_figure(
    image=None,
    measured_px=None,
    predicted_px=None,
    *,
    predicted_labels=None,
    predicted_integer=None,
    predicted_domains=None,
    pairs=None,
    unexplained=None,
    screen=None,
    title: str | None = None,
    contrast: tuple[float, float] = (2.0, 99.8),
    power: float = 0.5,
    flatten: float | None = 12.0,
    residual_scale: float = 5.0,
    max_labels: int = 80,
    size: tuple[int, int] | None = None,
):
    """Draw measured and predicted spots over an image.

    Parameters
    ----------
    image : ndarray (H, W), optional
        The measured image; without it a dark panel of ``size`` (or the screen's size).
    measured_px : array_like (N, 2), optional
        Measured spot positions, px.
    predicted_px : array_like (M, 2), optional
        Predicted spot positions, px.
    predicted_labels : sequence of (h, k), optional
        Beam labels of the predicted spots (drawn beside them, lowest orders first).
    predicted_integer : array_like of bool, optional
        Integer-order flags (default: from the labels).
    predicted_domains : sequence of tuple of int, optional
        Domains producing each predicted spot (for the colours).
    pairs : array_like (P, 2), optional
        (measured index, predicted index) of matched pairs; their residuals are drawn.
    unexplained : array_like of int, optional
        Measured spots no prediction explains (highlighted).
    screen : ScreenGeometry, optional
        Draws the acceptance rim and the gun shadow.
    contrast : (float, float)
        Percentiles of the image mapped to black and white.
    power : float
        Power stretch after the percentiles (0.5: square root).
    flatten : float or None
        Remove the background glow before the stretch: subtract the grey opening of the image
        with a square of ``2 flatten + 1`` px (spots narrower than that stand out, without dark
        halos); None shows the image as it is.
    residual_scale : float
        Magnification of the residual arrows.
    max_labels : int
        Most beam labels drawn.
    size : (width, height), optional
        Panel size without an image.

    Returns
    -------
    matplotlib.figure.Figure
    """
    meas = np.zeros((0, 2)) if measured_px is None else np.asarray(measured_px, dtype=float).reshape(-1, 2)
    pred = np.zeros((0, 2)) if predicted_px is None else np.asarray(predicted_px, dtype=float).reshape(-1, 2)
    if image is not None:
        img = np.asarray(image, dtype=float)
        h, w = img.shape
    else:
        if size is None:
            size = (screen.width, screen.height) if screen is not None else (512, 512)
        w, h = int(size[0]), int(size[1])
        img = None
    fig = figure(figsize=(9.4, 7.2 * h / max(w, 1) + 0.4))
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor(SCREEN_BACKGROUND)
    if img is not None:
        ax.imshow(
            _stretch(img, contrast, power, flatten),
            cmap="gray",
            origin="upper",
            extent=(-0.5, w - 0.5, h - 0.5, -0.5),
            interpolation="nearest",
        )
    if screen is not None:
        rim = screen.rim()
        ax.plot(rim[:, 0], rim[:, 1], ls="--", lw=0.8, color=OUTLINE_COLOUR)
        if screen.shadow_radius > 0:
            t = np.linspace(0, 2 * math.pi, 100)
            ax.plot(
                screen.centre_x + screen.shadow_radius * np.cos(t),
                screen.centre_y + screen.shadow_radius * np.sin(t),
                ls=":",
                lw=0.8,
                color=OUTLINE_COLOUR,
            )
    n = len(pred)
    labels = list(predicted_labels) if predicted_labels is not None else [None] * n
    if predicted_integer is not None:
        integer = np.asarray(predicted_integer, dtype=bool)
    else:
        integer = (
            np.array(
                [
                    lab is not None and float(lab[0]).is_integer() and float(lab[1]).is_integer()
                    for lab in labels
                ],
                dtype=bool,
            )
            if n
            else np.zeros(0, dtype=bool)
        )
    doms = list(predicted_domains) if predicted_domains is not None else [()] * n
    colours = []
    for i in range(n):
        d = doms[i] if i < len(doms) else ()
        if len(d) == 1:
            colours.append(DOMAIN_COLOURS[d[0] % len(DOMAIN_COLOURS)])
        elif len(d) == 0:
            colours.append(DOMAIN_COLOURS[0])
        else:
            colours.append(SHARED_COLOUR)
    colours = np.array(colours, dtype=object)
    if n:
        frac = ~integer
        if frac.any():
            ax.scatter(
                pred[frac, 0],
                pred[frac, 1],
                s=60,
                facecolors="none",
                edgecolors=list(colours[frac]),
                linewidths=1.2,
                marker="o",
                label="predicted fractional order",
                zorder=3,
            )
        if integer.any():
            ax.scatter(
                pred[integer, 0],
                pred[integer, 1],
                s=110,
                facecolors="none",
                edgecolors=SCREEN_INTEGER_COLOUR,
                linewidths=1.4,
                marker="h",
                label="predicted integer order",
                zorder=3,
            )
    if len(meas):
        ax.scatter(
            meas[:, 0],
            meas[:, 1],
            s=14,
            facecolors="none",
            edgecolors=MEASURED_COLOUR,
            linewidths=0.9,
            marker="s",
            label="measured",
            zorder=4,
        )
    if unexplained is not None and len(unexplained):
        u = meas[np.asarray(unexplained, dtype=int)]
        ax.scatter(
            u[:, 0],
            u[:, 1],
            s=70,
            facecolors="none",
            edgecolors=UNEXPLAINED_COLOUR,
            linewidths=1.4,
            marker="s",
            label="unexplained",
            zorder=5,
        )
    if pairs is not None and len(pairs) and n and len(meas):
        pr = np.asarray(pairs, dtype=int)
        start = pred[pr[:, 1]]
        delta = (meas[pr[:, 0]] - start) * residual_scale
        ax.quiver(
            start[:, 0],
            start[:, 1],
            delta[:, 0],
            delta[:, 1],
            angles="xy",
            scale_units="xy",
            scale=1.0,
            color=RESIDUAL_COLOUR,
            width=0.003,
            zorder=6,
            label=f"residual × {residual_scale:g}",
        )
    if n and any(lab is not None for lab in labels):
        order = np.argsort(
            [abs(float(lab[0])) + abs(float(lab[1])) if lab is not None else 1e9 for lab in labels]
        )
        for i in order[:max_labels]:
            if labels[i] is None or not np.all(np.isfinite(pred[i])):
                continue
            ax.annotate(
                _label(labels[i]),
                pred[i],
                xytext=(4, 4),
                textcoords="offset points",
                fontsize=5.5,
                color=SCREEN_INTEGER_COLOUR if integer[i] else colours[i],
                zorder=7,
            )
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_aspect("equal")
    ax.set_xlabel("x (px)")
    ax.set_ylabel("y (px)")
    if title:
        ax.set_title(title, fontsize=9)
    handles, _ = ax.get_legend_handles_labels()
    if handles:
        # beside the panel, so that it hides no spot; on the panel's colour, so that every marker shows
        leg = ax.legend(
            loc="upper left",
            bbox_to_anchor=(1.01, 1.0),
            fontsize=7,
            framealpha=1.0,
            facecolor=SCREEN_BACKGROUND,
            labelcolor="white",
        )
        leg.get_frame().set_edgecolor(OUTLINE_COLOUR)
    return fig


def match_figure(match, image=None, screen=None, title: str | None = None, **kwargs):
    """Overlay of a :class:`surfgeo.measure.match.MatchResult` (visible predictions only)."""
    p = match.predicted
    vis = np.flatnonzero(p.visible)
    remap = {int(j): i for i, j in enumerate(vis)}
    pairs = [(int(a), remap[int(b)]) for a, b in match.pairs if int(b) in remap]
    return overlay_figure(
        image,
        match.measured_px,
        p.pixels[vis],
        predicted_labels=[p.labels[j] for j in vis],
        predicted_integer=p.integer[vis],
        predicted_domains=[p.domains[j] for j in vis],
        pairs=np.array(pairs, dtype=int).reshape(-1, 2),
        unexplained=match.unexplained,
        screen=screen,
        title=title
        or f"{p.description}: {len(match.pairs)} matched, {len(match.unexplained)} unexplained, "
        f"{len(match.absent)} not seen",
        **kwargs,
    )


def index_figure(result, image=None, title: str | None = None, **kwargs):
    """Overlay of the best candidate of a :class:`surfgeo.measure.index.IndexResult`."""
    screen = result.screen if result.screen is not None else result.calibration.screen
    if result.match is not None:
        c = result.candidates[0]
        return match_figure(
            result.match,
            image=image,
            screen=screen,
            title=title or f"best: {c.name()}, score {c.score:.1f}",
            **kwargs,
        )
    c = result.candidates[0]
    return overlay_figure(
        image,
        None,
        c.predicted_px,
        predicted_labels=c.predicted_labels,
        screen=screen,
        title=title or f"best: {c.name()}",
        **kwargs,
    )


def calibration_figure(
    calibration,
    measured_px,
    lattice,
    energy_eV: float,
    image=None,
    image_index: int = 0,
    title: str | None = None,
    **kwargs,
):
    """The integer-order beams of a calibration over the measured spots, with residuals."""
    from surfgeo.measure.calibrate import integer_beams

    E = calibration.energy(energy_eV)
    labels, kp = integer_beams(lattice, E, calibration.screen)
    px = calibration.to_pixels(kp, energy_eV)
    index = {(int(h), int(k)): i for i, (h, k) in enumerate(labels.tolist())}
    pairs = [
        (j, index[(h, k)])
        for im, j, h, k, _, _ in calibration.matches
        if im == image_index and (h, k) in index
    ]
    return overlay_figure(
        image,
        measured_px,
        px,
        predicted_labels=[tuple(v) for v in labels.tolist()],
        predicted_integer=np.ones(len(px), dtype=bool),
        pairs=np.array(pairs, dtype=int).reshape(-1, 2),
        screen=calibration.screen,
        title=title
        or f"calibration at {energy_eV:g} eV: {len(pairs)} integer-order spots, rms "
        f"{calibration.rms_px:.2f} px",
        **kwargs,
    )


__all__ = ["overlay_figure", "match_figure", "index_figure", "calibration_figure"]
