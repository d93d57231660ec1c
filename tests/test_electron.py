"""Electron kinematics: wavelength, wavenumber, exit angles, onset energies, gun frame."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants

from surfgeo.diffraction.electron import (
    HBAR2_2M,
    MAX_ENERGY_EV,
    check_pattern_energies,
    emergence_energy,
    exit_angles,
    exit_directions,
    from_gun_frame,
    gun_frame_rotation,
    incident_k_parallel,
    onset_energy,
    to_gun_frame,
    wavelength,
    wavenumber,
)
from surfgeo.errors import InputError


def test_wavelength_codata_150_eV():
    # Source: CODATA via scipy.constants, lambda = h / sqrt(2 m_e E); sources.md: 1.0000 A at 150.4 eV
    assert round(wavelength(150.4), 4) == 1.0000
    ref = constants.h / math.sqrt(2 * constants.m_e * 150.4 * constants.e) * 1e10
    assert wavelength(150.4) == pytest.approx(ref, rel=1e-12)


def test_wavenumber_and_hbar2_2m_constants():
    # Source: sources.md, k = 0.51232 sqrt(E[eV]) 1/A and hbar^2/(2 m_e) = 3.80998 eV A^2 (CODATA)
    assert HBAR2_2M == pytest.approx(3.80998, abs=5e-6)
    for e in (20.0, 100.0, 400.0):
        assert wavenumber(e) == pytest.approx(0.51232 * math.sqrt(e), rel=2e-5)
    e = np.array([10.0, 50.0, 300.0])
    assert np.allclose(wavenumber(e) * wavelength(e), 2 * math.pi)


def test_energy_limit_keeps_the_relativistic_error_below_a_thousandth():
    # Source: relativistic de Broglie wavelength lambda = h / sqrt(2 m E (1 + E / (2 m c^2))) (e.g.
    # L. Reimer, Transmission Electron Microscopy, Springer), constants from scipy.constants (CODATA)
    mc2 = constants.m_e * constants.c**2 / constants.e  # eV
    for e in (100.0, 1000.0, MAX_ENERGY_EV):
        rel = constants.h / math.sqrt(2 * constants.m_e * e * constants.e * (1 + e / (2 * mc2))) * 1e10
        assert 0 < wavelength(e) / rel - 1 < 1e-3
    # just above the limit the pattern functions refuse, in one sentence naming the limit
    assert check_pattern_energies([40.0, MAX_ENERGY_EV]).tolist() == [40.0, MAX_ENERGY_EV]
    with pytest.raises(InputError, match="at most 2000 eV") as exc:
        check_pattern_energies(3e4, "--energy")
    assert str(exc.value).startswith("--energy") and str(exc.value).count(". ") == 0


@pytest.mark.parametrize("bad", [0.0, -5.0, float("nan"), float("inf")])
def test_bad_energy_is_an_input_error(bad):
    with pytest.raises(InputError, match="energy"):
        wavenumber(bad)


@pytest.mark.parametrize("bad", [(90, 0), (-1, 0), ("a", 0), (10,)])
def test_bad_incidence_is_an_input_error(bad):
    with pytest.raises(InputError, match="incidence"):
        incident_k_parallel(100.0, bad)


def test_exit_angle_of_first_order_beam():
    # Common practice, no source: at normal incidence sin(theta) = |g| / k (grating equation)
    g = 2 * math.pi / 2.55  # |b1| of a square lattice, a = 2.55 A
    theta, phi = exit_angles(np.array([[0.0, g]]), 100.0)
    assert math.sin(math.radians(theta[0])) == pytest.approx(g / wavenumber(100.0), rel=1e-12)
    assert phi[0] == pytest.approx(90.0)
    theta, _ = exit_angles(np.array([[50.0, 0.0]]), 100.0)  # evanescent
    assert np.isnan(theta[0])


def test_onset_energy_normal_incidence_formula():
    # Source: grating equation sin(theta) = |g| / k at normal incidence with E = hbar^2 k^2 / 2m (Van Hove,
    # Weinberg and Chan, Low-Energy Electron Diffraction, 1986): E = hbar^2 |g|^2 / (2 m sin^2 theta_max);
    # constants from scipy.constants (CODATA)
    rng = np.random.default_rng(1)
    g = rng.normal(size=(50, 2)) * 3
    hbar2_2m = constants.hbar**2 / (2 * constants.m_e) / constants.e * 1e20
    for tmax in (30.0, 55.0, 90.0):
        ref = hbar2_2m * np.sum(g * g, axis=1) / math.sin(math.radians(tmax)) ** 2
        assert np.allclose(onset_energy(g, tmax), ref, rtol=1e-12)
    assert np.allclose(emergence_energy(g), hbar2_2m * np.sum(g * g, axis=1), rtol=1e-12)
    assert onset_energy(np.zeros((1, 2)), 40.0)[0] == 0.0


def _lab_angle(g, energy, incidence):
    kp = incident_k_parallel(energy, incidence) + g
    d = to_gun_frame(exit_directions(kp, energy), incidence)
    return np.degrees(np.arccos(np.clip(d[..., 2], -1, 1)))


@pytest.mark.parametrize("incidence", [(10.0, 0.0), (25.0, 70.0), (5.0, 200.0)])
def test_onset_energy_oblique_incidence_matches_a_scan(incidence):
    # Common practice, no source: a brute-force energy scan of the exit direction brackets the onset
    tmax = 50.0
    rng = np.random.default_rng(2)
    g = rng.normal(size=(40, 2)) * 2.5
    onset = onset_energy(g, tmax, incidence)
    energies = np.linspace(1.0, 3000.0, 30001)
    for gi, e0 in zip(g, onset, strict=True):
        inside = np.array([_lab_angle(gi, e, incidence) <= tmax for e in energies[::50]])
        first = energies[::50][np.argmax(inside)] if inside.any() else np.inf
        if not np.isfinite(e0):
            assert not inside.any() or first > 2900
            continue
        # just above the onset the beam is on the screen, just below it is not
        assert _lab_angle(gi, e0 * (1 + 1e-7), incidence) <= tmax + 1e-6
        if e0 > 1.0:
            below = _lab_angle(gi, e0 * (1 - 1e-4), incidence)
            assert np.isnan(below) or below > tmax
        assert e0 <= first + 1e-9


def test_specular_beam_appears_at_twice_the_incidence_angle():
    # Common practice, no source: law of reflection; tilting the sample by t moves (00) to 2t on the screen
    for inc in [(0.0, 0.0), (12.0, 30.0), (30.0, 250.0)]:
        ang = _lab_angle(np.zeros(2), 80.0, inc)
        assert ang == pytest.approx(2 * inc[0], abs=1e-9)
        # the incident beam itself comes from the screen axis
        kin = incident_k_parallel(80.0, inc)
        k = wavenumber(80.0)
        d_in = np.array([kin[0], kin[1], -math.sqrt(k * k - kin @ kin)]) / k
        assert to_gun_frame(-d_in, inc) == pytest.approx([0.0, 0.0, 1.0], abs=1e-12)


@settings(max_examples=50, deadline=None)
@given(st.floats(0.0, 89.0), st.floats(-360.0, 360.0))
def test_gun_frame_rotation_is_proper_and_invertible(theta, phi):
    # Common practice, no source: rotation matrices are orthogonal with determinant +1
    r = gun_frame_rotation((theta, phi))
    assert np.allclose(r @ r.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(r) == pytest.approx(1.0)
    v = np.array([[0.3, -0.2, 0.9], [0.0, 0.0, 1.0]])
    assert np.allclose(from_gun_frame(to_gun_frame(v, (theta, phi)), (theta, phi)), v, atol=1e-12)
