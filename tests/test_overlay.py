"""The overlay figures of calibrate, match and index (surfgeo.plot.overlay): what the index
figure draws. Spots here are synthetic."""

import numpy as np

from surfgeo.lattice import Lattice2D
from surfgeo.measure import index as IX
from surfgeo.measure.calibrate import Calibration
from surfgeo.measure.synthetic import synthetic_measurement
from surfgeo.plot.overlay import index_figure


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
