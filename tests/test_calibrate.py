"""Screen calibration: the forward map, recognition of the integer spots without a guess, the
robust fit, the joint energy-offset fit, saving and loading, and bad input.

Synthetic spot lists come from surfgeo's own forward model (surfgeo.measure.synthetic)."""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants

from surfgeo.diffraction.electron import wavenumber
from surfgeo.errors import FileFormatError, InputError
from surfgeo.lattice import Lattice2D
from surfgeo.measure import calibrate as C
from surfgeo.measure.synthetic import positions_coincide, synthetic_measurement
from surfgeo.screen import CameraScreen, FarScreen, FlatDetector, default_screen


def integer_positions(screen, lattice, energy):
    labels, kp = C.integer_beams(lattice, energy, screen)
    px = C.fast_pixels(screen, kp, energy)
    vis = C.on_screen(screen, px, kp, wavenumber(energy), margin=4.0)
    return px[vis]


def same_integer_pattern(cal_screen, true_screen, lattice, energy, tol=2.0):
    a = integer_positions(cal_screen, lattice, energy)
    b = integer_positions(true_screen, lattice, energy)
    return positions_coincide(a, b, true_screen, tol_px=tol)


# --------------------------------------------------------------------------- forward map
@pytest.mark.parametrize("cls", [FarScreen, CameraScreen, FlatDetector])
def test_fast_pixels_agree_with_the_screen_models(cls):
    scr = cls(
        centre_x=250.3,
        centre_y=240.1,
        scale=300.0,
        rotation_deg=37.0,
        stretch=0.03,
        stretch_deg=20.0,
        mirror=True,
        acceptance_deg=50.0,
    )
    rng = np.random.default_rng(0)
    kp = rng.uniform(-4, 4, (500, 2))
    a = C.fast_pixels(scr, kp, 90.0)
    b = scr.to_pixels(kp, 90.0)
    assert np.allclose(a, b, equal_nan=True, atol=1e-9)
    assert np.array_equal(np.isnan(a), np.isnan(b))
    # linear_part is the screen's own linear map (rotation, mirror, stretch)
    assert np.allclose(C.linear_part(scr), scr._linear())


def test_first_order_spot_radius_follows_the_grating_equation():
    # At normal incidence a 1D grating of period a diffracts order n at sin(theta) = n lambda / a;
    # lambda = h / sqrt(2 m E) = 1.0000 Angstrom at 150.4 eV.
    # Source: sources.md (CODATA via scipy.constants); grating equation: Van Hove, Weinberg and
    # Chan, Low-Energy Electron Diffraction (1986), Ewald construction.
    lam = constants.h / math.sqrt(2 * constants.m_e * 150.4 * constants.e) * 1e10
    assert abs(lam - 1.0) < 2e-4
    a = 2.5
    scr = default_screen(size=512)
    labels, kp = C.integer_beams(Lattice2D.square(a), 150.4, scr)
    i = labels.tolist().index([1, 0])
    px = C.fast_pixels(scr, kp[i : i + 1], 150.4)[0]
    r = math.hypot(px[0] - scr.centre_x, px[1] - scr.centre_y)
    assert abs(r / scr.scale - lam / a) < 1e-6  # far screen: r = scale sin(theta)


@settings(max_examples=60, deadline=None)
@given(
    cx=st.floats(0, 1000),
    cy=st.floats(0, 1000),
    scale=st.floats(50, 2000),
    rot=st.floats(-720, 720),
    stretch=st.floats(0, 0.3),
    sdeg=st.floats(0, 179.9),
    mirror=st.booleans(),
)
def test_fit_parameters_round_trip(cx, cy, scale, rot, stretch, sdeg, mirror):
    scr = FarScreen(
        centre_x=cx,
        centre_y=cy,
        scale=scale,
        rotation_deg=rot,
        stretch=stretch,
        stretch_deg=sdeg,
        mirror=mirror,
    )
    p = C._params_from_screen(scr)
    back = scr.with_params(**C._fields_from_params(p, mirror))
    w = np.array([[0.3, 0.1], [-0.2, 0.5], [0.0, -0.7]])
    assert np.allclose(C.pixels_from_normalised(back, w), C.pixels_from_normalised(scr, w), atol=1e-7 * scale)
    # the affine form of the same map gives the same parameters
    A = np.diag([1.0, -1.0]) @ (scale * C.linear_part(scr))
    p2, m2 = C._params_from_affine(np.array([cx, cy]), A)
    assert m2 == mirror
    back2 = scr.with_params(**C._fields_from_params(p2, m2))
    assert np.allclose(
        C.pixels_from_normalised(back2, w), C.pixels_from_normalised(scr, w), atol=1e-6 * scale
    )


# --------------------------------------------------------------------------- recognition and fit
def test_exact_spots_give_the_exact_screen():
    lat = Lattice2D.rectangular(2.55, 3.61)
    m = synthetic_measurement(
        3,
        lattice=lat,
        matrix=[[2, 0], [0, 1]],
        energy=140.0,
        jitter_px=(0.0, 0.0),
        strays=(0, 0),
        missing_fraction=0.0,
    )
    cal = C.calibrate(m.spots, lat, m.energy, m.nominal_screen)
    t, s = m.screen, cal.screen
    # rectangular substrate: its 2-fold rotation and mirrors can relabel the beams, so compare
    # the parts every labelling shares, and the predicted integer spots
    assert abs(s.centre_x - t.centre_x) < 1e-4 and abs(s.centre_y - t.centre_y) < 1e-4
    assert abs(s.scale / t.scale - 1) < 1e-6
    assert abs(s.stretch - t.stretch) < 1e-6
    assert same_integer_pattern(s, t, lat, m.energy, tol=1e-3)
    assert cal.rms_px < 1e-4


def test_recognition_with_fractional_and_stray_spots():
    # Random synthetic cases (lattice, superstructure up to area 12 with domains, energy, screen,
    # jitter, missing and stray spots). When only the first shell of integer spots is on the
    # screen among dense fractional spots, several hypotheses can be nearly equally good; the
    # calibration keeps them all as candidates and indexing chooses (test_index). Measured on
    # these 40 cases: the best hypothesis is right in 35, the right one is among the candidates
    # in 39.
    rng = np.random.default_rng(2024)
    n, best, among = 40, 0, 0
    for _ in range(n):
        m = synthetic_measurement(rng)
        cands = C.calibration_candidates(m.spots, m.lattice, m.energy, m.nominal_screen)
        ok = [same_integer_pattern(c.screen, m.screen, m.lattice, m.energy, tol=3.0) for c in cands]
        best += ok[0]
        among += any(ok)
    print(f"calibration: best hypothesis right in {best}/{n}, right one among the candidates in {among}/{n}")
    assert among >= 38
    assert best >= 32


def test_p2x2_hexagonal_at_low_energy_is_not_taken_for_a_smaller_lattice():
    # Only the first shell of integer spots on the screen, and half-order spots that form a
    # lattice: a denser lattice of spots or a shifted centre would fit them just as well.
    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(5, lattice=lat, matrix=[[2, 0], [0, 2]], energy=70.0, min_integer=4)
    cal = C.calibrate(m.spots, lat, m.energy, m.nominal_screen)
    assert (
        abs(cal.screen.centre_x - m.screen.centre_x) < 1.0
        and abs(cal.screen.centre_y - m.screen.centre_y) < 1.0
    )
    assert abs(cal.screen.scale / m.screen.scale - 1) < 0.03


def test_centre_candidates_find_the_inversion_centre():
    rng = np.random.default_rng(8)
    for _ in range(5):
        c = rng.uniform(150, 350, 2)
        half = rng.uniform(-200, 200, (25, 2))
        pts = np.vstack([c + half, c - half, rng.uniform(0, 500, (4, 2))])
        pts = pts + rng.normal(0, 0.5, pts.shape)
        found = C.centre_candidates(pts, None, n=3)
        assert np.linalg.norm(found[0] - c) < 1.0


def test_camera_distance_is_fitted():
    lat = Lattice2D.square(2.55)
    true = CameraScreen(
        centre_x=260,
        centre_y=250,
        scale=330,
        rotation_deg=10,
        camera_distance=3.0,
        acceptance_deg=55,
        shadow_radius=12,
    )
    labels, kp = C.integer_beams(lat, 160.0, true)
    px = C.fast_pixels(true, kp, 160.0)
    vis = C.on_screen(true, px, kp, wavenumber(160.0))
    nominal = default_screen(model="camera", size=512, camera_distance=5.0).with_params(shadow_radius=12)
    cal = C.calibrate(px[vis], lat, 160.0, nominal)
    assert abs(cal.screen.camera_distance - 3.0) < 0.01
    assert abs(cal.screen.scale / 330 - 1) < 1e-3
    assert "camera_distance" in cal.uncertainties


def test_energy_offset_from_several_energies():
    # Spots are made at E_true = E_nominal + 4.5 eV (e.g. a contact potential); the joint fit
    # must find the offset and the true scale, which one energy cannot separate.
    # Common practice, no source (E_true = E_nominal + offset)
    lat = Lattice2D.hexagonal(2.77)
    true = FarScreen(
        centre_x=251, centre_y=259, scale=297, rotation_deg=17, stretch=0.01, stretch_deg=40, shadow_radius=12
    )
    rng = np.random.default_rng(1)
    lists, nominal = [], [70.0, 110.0, 160.0, 220.0]
    for e in nominal:
        labels, kp = C.integer_beams(lat, e + 4.5, true)
        px = C.fast_pixels(true, kp, e + 4.5)
        vis = C.on_screen(true, px, kp, wavenumber(e + 4.5)) & np.any(labels != 0, axis=1)
        lists.append(px[vis] + rng.normal(0, 0.3, (int(vis.sum()), 2)))
    scr = default_screen(size=512).with_params(shadow_radius=12)
    cal = C.calibrate_series(lists, lat, nominal, scr)
    assert cal.fitted_energy_offset
    err = cal.uncertainties["energy_offset"]
    assert 0 < err < 1.0
    assert abs(cal.energy_offset - 4.5) < max(3 * err, 0.3)
    assert abs(cal.screen.scale / true.scale - 1) < 0.005
    # a single energy cannot fit the offset
    with pytest.raises(InputError, match="two or more different energies"):
        C.calibrate_series(lists[:1], lat, nominal[:1], scr, fit_energy_offset=True)


def test_uncertainties_shrink_with_less_noise():
    lat = Lattice2D.square(2.55)
    sig = []
    for j in ((1.0, 1.0), (0.25, 0.25)):
        m = synthetic_measurement(
            12, lattice=lat, matrix=[[1, 1], [-1, 1]], energy=180.0, jitter_px=j, strays=(0, 0)
        )
        cal = C.calibrate(m.spots, lat, m.energy, m.nominal_screen)
        sig.append(cal.uncertainties["centre_x"])
        # the reported standard error is honest: the true centre lies within 4 of them
        assert abs(cal.screen.centre_x - m.screen.centre_x) < 4 * cal.uncertainties["centre_x"] + 0.05
    assert sig[1] < sig[0] / 2


# --------------------------------------------------------------------------- save and load
def test_calibration_round_trips_through_json(tmp_path):
    m = synthetic_measurement(6)
    cal = C.calibrate(m.spots, m.lattice, m.energy, m.nominal_screen)
    path = tmp_path / "cal.json"
    path.write_text(json.dumps(cal.to_dict()))
    back = C.load_calibration(path)
    assert back.screen == cal.screen
    assert back.energy_offset == cal.energy_offset and back.n_matched == cal.n_matched
    d = cal.to_dict()
    for key in ("centre_px", "rotation_deg", "mirror", "scale_px_per_rad"):
        assert key in d
    # the screen spec parser reads the same file as a screen
    from surfgeo.screen import parse_screen

    assert parse_screen(str(path)) == cal.screen


def test_refit_keeps_the_integer_spot_count_apart(tmp_path):
    # refine_calibration rests the screen on spots of every order; the record keeps the number of
    # integer-order spots and says how many spots the refit used, and describes it in those words
    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(3, lattice=lat, matrix=[[2, 1], [-1, 1]], energy=120.0)
    cal = C.calibrate(m.spots, lat, m.energy, m.nominal_screen)
    real = m.origin >= 0
    labels = np.array([[float(h), float(k)] for h, k in m.truth_labels])[m.origin[real]]
    ref = C.refine_calibration(cal, m.spots.positions[real], labels @ lat.reciprocal, m.energy)
    assert ref.n_matched == cal.n_matched and ref.n_refit == int(real.sum()) > cal.n_matched
    text = ref.describe()
    assert f"{cal.n_matched} integer-order spots; refitted to all {ref.n_refit} matched spots" in text
    assert f"{ref.n_refit} integer-order" not in ref.describe()
    path = tmp_path / "refit.json"
    path.write_text(json.dumps(ref.to_dict()))
    back = C.load_calibration(path)
    assert (back.n_matched, back.n_refit) == (ref.n_matched, ref.n_refit)
    assert same_integer_pattern(ref.screen, m.screen, lat, m.energy, tol=1.0)
    # a set (not fitted) energy offset is said, not hidden
    assert "+1.50 eV (set, not fitted)" in C.Calibration(screen=cal.screen, energy_offset=1.5).describe()
    assert "energy offset" not in C.Calibration(screen=cal.screen).describe()


def test_unseen_integer_spots_flag_a_wrong_energy():
    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(3, lattice=lat, matrix=[[2, 1], [-1, 1]], energy=120.0)
    cal = C.calibrate(m.spots, lat, m.energy, m.nominal_screen)
    n, unseen = C.unseen_integer_spots(cal, m.spots, lat, m.energy)
    assert n >= 6 and unseen == 0
    wrong = C.calibrate(m.spots, lat, 1500.0, m.nominal_screen)
    n, unseen = C.unseen_integer_spots(wrong, m.spots, lat, 1500.0)
    assert unseen > n - unseen


def test_bad_calibration_files(tmp_path):
    with pytest.raises(FileFormatError, match="does not exist"):
        C.load_calibration(tmp_path / "nope.json")
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    with pytest.raises(FileFormatError, match="not readable JSON"):
        C.load_calibration(bad)
    other = tmp_path / "other.json"
    other.write_text(json.dumps({"centre": 1}))
    with pytest.raises(FileFormatError, match="no 'screen' object"):
        C.load_calibration(other)


# --------------------------------------------------------------------------- bad input
def test_too_few_spots():
    with pytest.raises(InputError, match="at least 3 measured spots"):
        C.calibrate([[100.0, 100.0], [200.0, 200.0]], Lattice2D.hexagonal(2.77), 100.0)


def test_energy_too_low_for_any_beam():
    lat = Lattice2D.hexagonal(2.77)
    scr = default_screen()
    with pytest.raises(InputError, match="no integer-order beam") as exc:
        C.calibrate(np.random.default_rng(0).uniform(0, 500, (10, 2)), lat, 5.0, scr)
    # The onset quoted is E = hbar^2 |g|^2 / (2 m sin^2 theta_max) for the first order.
    # Source: sources.md (hbar^2 / 2m from scipy.constants)
    g = 4 * math.pi / (math.sqrt(3) * 2.77)
    e = (
        (constants.hbar**2 / (2 * constants.m_e) / constants.e * 1e20)
        * g**2
        / math.sin(math.radians(55)) ** 2
    )
    assert f"{e:.1f} eV" in str(exc.value)


def test_unrecognisable_spots_say_what_to_check():
    lat = Lattice2D.hexagonal(2.77)
    with pytest.raises(InputError, match="check --lattice, --energy"):
        # a few spots on a line far apart: no integer pattern fits
        C.calibrate([[10.0, 10.0], [11.0, 12.0], [500.0, 500.0]], lat, 100.0)
