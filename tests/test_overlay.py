"""The overlay figures of calibrate, match and index (surfgeo.plot.overlay): the display stretch
and what the index figure draws. Images and spots here are synthetic."""

import numpy as np

from surfgeo.lattice import Lattice2D
from surfgeo.measure import index as IX
from surfgeo.measure.calibrate import Calibration
from surfgeo.measure.synthetic import synthetic_measurement
from surfgeo.plot.overlay import _stretch, index_figure


def gaussian(shape, x0, y0, amplitude, sigma):
    y, x = np.mgrid[0 : shape[0], 0 : shape[1]]
    return amplitude * np.exp(-((x - x0) ** 2 + (y - y0) ** 2) / (2 * sigma**2))


def test_glow_removal_leaves_no_dark_halo_around_bright_spots():
    # A faint spot 12 px from a spot 2000 times brighter must show as brightly as the same faint
    # spot on its own; subtracting a blurred copy of the image (width 12 px) used to dig a dark
    # halo around the bright spot (about 1700 counts deep there) that swallowed its neighbour.
    shape = (96, 96)
    y, x = np.mgrid[0 : shape[0], 0 : shape[1]]
    glow = 200.0 + 0.8 * x + 0.5 * y  # smooth background
    image = glow + gaussian(shape, 30, 30, 1e5, 2.0) + gaussian(shape, 30, 42, 50.0, 2.0)
    image += gaussian(shape, 70, 70, 50.0, 2.0)
    shown = _stretch(image, (0.0, 100.0), 1.0, 12.0)  # linear, from the minimum to the maximum
    near, alone = shown[42, 30], shown[70, 70]
    assert alone > 0.0
    assert abs(near - alone) < 0.1 * alone
    # and the background between them is dark, not lifted or dug
    assert shown[50, 50] < 0.2 * alone


def test_index_figure_draws_every_matched_prediction():
    # The calibration's acceptance is narrower than the spots; the indexing widens it, and the
    # figure must draw the predicted spots out there (they are matched), within the wider rim.
    m = synthetic_measurement(3, lattice=Lattice2D.hexagonal(2.77), matrix=[[2, 1], [-1, 1]], energy=120.0)
    narrow = m.screen.with_params(acceptance_deg=m.screen.acceptance_deg - 10.0)
    res = IX.index_pattern(m.spots, m.lattice, m.energy, calibration=Calibration(screen=narrow, rms_px=1.0))
    fig = index_figure(res)
    ax = fig.axes[0]
    drawn = {}
    for coll in ax.collections:
        label = coll.get_label()
        if label.startswith("predicted"):
            drawn[label] = coll.get_offsets()
    predicted = np.vstack(list(drawn.values()))
    matched_at = res.match.predicted.pixels[res.match.pairs[:, 1]]
    d = np.min(np.linalg.norm(matched_at[:, None, :] - predicted[None, :, :], axis=2), axis=1)
    assert np.all(d < 1e-6)
    import matplotlib.pyplot as plt

    plt.close(fig)
