"""The generator of synthetic measurements (everything here is synthetic, from surfgeo's own
forward model): reproducible, faithful to its truth, and drawn as the issue asks."""

import math

import numpy as np
import pytest
from scipy.spatial import cKDTree

from surfgeo.diffraction.electron import wavenumber
from surfgeo.lattice import Lattice2D
from surfgeo.measure.calibrate import fast_pixels, on_screen
from surfgeo.measure.synthetic import (
    LATTICE_KINDS,
    SYNTHETIC_NOTE,
    positions_coincide,
    random_lattice,
    synthetic_measurement,
)


def test_same_integer_gives_the_same_measurement():
    a = synthetic_measurement(41)
    b = synthetic_measurement(41)
    assert np.array_equal(a.spots.positions, b.spots.positions)
    assert a.energy == b.energy and np.array_equal(a.matrix, b.matrix)
    c = synthetic_measurement(42)
    assert not (len(c.spots) == len(a.spots) and np.allclose(c.spots.positions, a.spots.positions))


def test_it_says_it_is_synthetic():
    m = synthetic_measurement(1)
    assert "synthetic" in m.note and m.note == SYNTHETIC_NOTE


@pytest.mark.parametrize("kind", LATTICE_KINDS)
def test_random_lattices_have_the_kind_asked_for(kind):
    rng = np.random.default_rng(3)
    for _ in range(5):
        lat = random_lattice(rng, kind)
        assert lat.kind(length_tol=1e-3, angle_tol=0.1) == kind
        assert 2.0 < min(lat.lengths) < 7.0


def test_truth_matches_the_forward_model_and_the_screen():
    m = synthetic_measurement(7, max_area=12)
    from surfgeo.diffraction.pattern import superstructure_pattern

    pat = superstructure_pattern(m.lattice, m.matrix, m.energy)
    px = m.screen.to_pixels(pat.k_parallel, m.energy)
    vis = on_screen(m.screen, px, pat.k_parallel, wavenumber(m.energy))
    # the truth is exactly the visible beams of the pattern on the true screen
    assert len(m.truth_px) == int(vis.sum())
    d, _ = cKDTree(px[vis]).query(m.truth_px)
    assert d.max() < 1e-9
    # on the screen: not in the gun's shadow or holder, inside the image and the acceptance
    assert not m.screen.in_shadow(m.truth_px).any()
    assert np.all((m.truth_px >= -0.5) & (m.truth_px <= m.screen.width - 0.5))


def test_measured_spots_are_jittered_truth_plus_strays():
    rng = np.random.default_rng(11)
    n_missing = n_fractional = 0
    for _ in range(25):
        m = synthetic_measurement(rng)
        real = m.origin >= 0
        # jitter 0.5-1 px per axis; merged spots move by at most half the merge radius more
        d = np.linalg.norm(m.spots.positions[real] - m.truth_px[m.origin[real]], axis=1)
        assert np.median(d) < 2.0 and d.max() < 6.0
        assert 0.5 <= m.jitter_px <= 1.0
        assert 0 <= int((~real).sum()) <= 4
        # integer-order spots are never left out
        assert not m.truth_integer[m.missing].any()
        n_missing += len(m.missing)
        n_fractional += int((~m.truth_integer).sum())
        assert m.area <= 12 and len(m.domains) >= 1
    # about 10 % of the fractional-order spots are missing (binomial, thousands of spots)
    assert 0.07 < n_missing / n_fractional < 0.13


def test_every_case_has_enough_integer_spots():
    rng = np.random.default_rng(5)
    for _ in range(10):
        m = synthetic_measurement(rng)
        non00 = [i for i, lab in enumerate(m.truth_labels) if m.truth_integer[i] and (lab[0] or lab[1])]
        assert len(non00) >= 6


def test_fixed_lattice_matrix_and_energy_are_kept():
    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(2, lattice=lat, matrix=[[2, 1], [-1, 1]], energy=120.0)
    assert m.lattice is lat and m.energy == 120.0 and m.matrix.tolist() == [[2, 1], [-1, 1]]
    # (sqrt3 x sqrt3)R30 has one domain on a hexagonal lattice.
    # Source: sources.md, domains = |G| / |stabiliser| (Common practice)
    assert len(m.domains) == 1


def test_rendered_image_shows_the_spots():
    m = synthetic_measurement(9, lattice=Lattice2D.square(2.55), matrix=[[2, 0], [0, 1]], energy=110.0)
    img = m.render()
    assert img.image.shape == (m.screen.height, m.screen.width) and img.image.dtype == np.uint16
    # each spot's pixel is brighter than the glow around it (photons well above the noise)
    data = img.expected
    xy = np.rint(m.spots.positions).astype(int)
    inside = (
        (xy[:, 0] > 5) & (xy[:, 0] < m.screen.width - 6) & (xy[:, 1] > 5) & (xy[:, 1] < m.screen.height - 6)
    )
    peak = data[xy[inside, 1], xy[inside, 0]]
    ring = data[xy[inside, 1], xy[inside, 0] + 5]
    assert np.all(peak > ring)


def test_positions_coincide_is_a_real_test():
    m = synthetic_measurement(4)
    assert positions_coincide(m.truth_px, m.truth_px, m.screen)
    assert not positions_coincide(m.truth_px + [6.0, 0.0], m.truth_px, m.screen)
    drop = m.truth_px[
        np.linalg.norm(m.truth_px - [m.screen.centre_x, m.screen.centre_y], axis=1).argsort()[5:]
    ]
    assert not positions_coincide(drop, m.truth_px, m.screen)


def test_camera_model_cases():
    m = synthetic_measurement(8, model="camera")
    assert m.screen.kind == "camera"
    k = wavenumber(m.energy)
    from surfgeo.diffraction.pattern import superstructure_pattern

    pat = superstructure_pattern(m.lattice, m.matrix, m.energy)
    px = fast_pixels(m.screen, pat.k_parallel, m.energy)
    assert np.allclose(px, m.screen.to_pixels(pat.k_parallel, m.energy), equal_nan=True)
    assert math.isfinite(k)
