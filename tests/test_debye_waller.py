"""Debye model of thermal vibrations and the Debye-Waller factor in the kinematic sum."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase.build import fcc111
from ase.data import atomic_masses, atomic_numbers
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as C
from scipy.integrate import quad

from surfgeo.diffraction.debye_waller import (
    DEBYE_TEMPERATURES,
    DEFAULT_DEBYE_TEMPERATURE,
    atomic_mean_square_displacements,
    debye_temperatures_for,
    debye_waller_exponent,
    mean_square_displacement,
    missing_debye_temperatures,
)
from surfgeo.diffraction.kinematic import kinematic_intensities
from surfgeo.errors import InputError

HBAR2_2M = C.hbar**2 / (2 * C.m_e) / C.e * 1e20  # eV A^2


def debye_msd_reference(mass_amu: float, theta: float, t: float) -> float:
    """<u_x^2> (A^2) of the Debye model by numerical quadrature (independent of the module).

    Source: Willis and Pryor, Thermal Vibrations in Crystallography (1975) (from memory):
    <u_x^2> = 3 hbar^2/(m k_B Theta) [ (T/Theta)^2 int_0^{Theta/T} x/(e^x - 1) dx + 1/4 ].
    """
    m = mass_amu * C.atomic_mass
    x = theta / t
    integral, _ = quad(lambda s: s / math.expm1(s) if s > 0 else 1.0, 0.0, x, epsabs=1e-14, epsrel=1e-13)
    return 3 * C.hbar**2 / (m * C.k * theta) * (integral / x**2 + 0.25) * 1e20


def test_table_values_from_sources():
    # From memory: Kittel, Introduction to Solid State Physics, Debye temperatures (sources.md)
    expected = {"Cu": 343, "Ag": 225, "Au": 165, "Pt": 240, "Pd": 274,
                "Ni": 450, "Al": 428, "W": 400, "Fe": 470}
    for sym, theta in expected.items():
        assert DEBYE_TEMPERATURES[atomic_numbers[sym]] == theta


@pytest.mark.parametrize("t", [10.0, 77.0, 300.0, 900.0])
@pytest.mark.parametrize("sym", ["Cu", "W", "Pb"])
def test_debye_model_against_quadrature(sym, t):
    z = atomic_numbers[sym]
    theta = DEBYE_TEMPERATURES[z]
    got = mean_square_displacement(atomic_masses[z], theta, t)
    assert got == pytest.approx(debye_msd_reference(atomic_masses[z], theta, t), rel=1e-10)


def test_high_temperature_limit_and_zero_point():
    m, theta = atomic_masses[29], 343.0
    # Source: sources.md / Van Hove, Weinberg and Chan (1986): <u_x^2> = 3 hbar^2 T/(m k_B Theta^2)
    high = 3 * C.hbar**2 * 300.0 / (m * C.atomic_mass * C.k * theta**2) * 1e20
    assert mean_square_displacement(m, theta, 300.0, "high-temperature") == pytest.approx(high, rel=1e-12)
    # Source: Bernoulli expansion x/(e^x-1) = 1 - x/2 + x^2/12 - x^4/720 (Abramowitz and Stegun
    # 23.1.1): the Debye bracket is 1 + x^2/36 - x^4/3600 + ... with x = Theta/T
    for t in (3000.0, 10000.0):
        x = theta / t
        high_t = mean_square_displacement(m, theta, t, "high-temperature")
        ratio = mean_square_displacement(m, theta, t) / high_t
        assert ratio == pytest.approx(1 + x**2 / 36 - x**4 / 3600, rel=1e-9)
    # Source: Debye model zero-point motion <u_x^2> = 3 hbar^2 / (4 m k_B Theta) (Willis and Pryor,
    # from memory)
    zero = 3 * C.hbar**2 / (4 * m * C.atomic_mass * C.k * theta) * 1e20
    assert mean_square_displacement(m, theta, 0.0) == pytest.approx(zero, rel=1e-12)
    # Source: int_0^inf x/(e^x - 1) dx = pi^2/6 (Abramowitz and Stegun 23.2.7, zeta(2)): at low T the
    # bracket is 1/4 + (pi^2/6)(T/Theta)^2 up to exponentially small terms
    for t in (1.0, 5.0):
        pre = 3 * C.hbar**2 / (m * C.atomic_mass * C.k * theta) * 1e20
        low = pre * (0.25 + math.pi**2 / 6 * (t / theta) ** 2)
        assert mean_square_displacement(m, theta, t) == pytest.approx(low, rel=1e-12)


def test_room_temperature_copper_magnitude():
    # From memory: room-temperature rms vibration amplitude of Cu is about 0.08 A per direction
    u = math.sqrt(float(mean_square_displacement(atomic_masses[29], 343.0, 293.0)))
    assert 0.06 < u < 0.10


@settings(max_examples=40, deadline=None)
@given(t1=st.floats(1.0, 2000.0), t2=st.floats(1.0, 2000.0), theta=st.floats(50.0, 2000.0))
def test_msd_increases_with_temperature(t1, t2, theta):
    # Common practice, no source: vibrations grow with temperature, shrink with stiffness
    lo, hi = sorted((t1, t2))
    a = mean_square_displacement(50.0, theta, lo)
    b = mean_square_displacement(50.0, theta, hi)
    assert b >= a * (1 - 1e-12)
    assert mean_square_displacement(50.0, theta * 1.5, hi) < b


@pytest.mark.parametrize("model", ["debye", "high-temperature"])
def test_intensity_ratio_between_temperatures(model):
    """I(T1)/I(T2) = exp(-2 (M1 - M2)) for a one-element slab, every beam, to 1e-6."""
    slab = fcc111("Pt", size=(1, 1, 6), a=3.92)
    a1, a2 = slab.cell[0, :2], slab.cell[1, :2]
    recip = 2 * np.pi * np.linalg.inv(np.array([a1, a2])).T
    hk = np.array([(h, k) for h in range(-3, 4) for k in range(-3, 4)])
    g = hk @ recip
    energy, v0r = 140.0, 9.0
    t1, t2 = 150.0, 600.0
    kw = dict(inner_potential=v0r, vibration_model=model)
    i1 = kinematic_intensities(slab.positions, slab.numbers, g, energy, temperature=t1, **kw)
    i2 = kinematic_intensities(slab.positions, slab.numbers, g, energy, temperature=t2, **kw)
    ok = ~np.isnan(i1)
    assert ok.sum() >= 7
    # q inside the crystal at normal incidence, written out here independently
    K2 = (energy + v0r) / HBAR2_2M
    with np.errstate(invalid="ignore"):
        qz = math.sqrt(K2) + np.sqrt(K2 - np.sum(g**2, axis=1))
    q2 = np.sum(g**2, axis=1) + qz**2
    theta, m = 240.0, atomic_masses[78]
    if model == "debye":
        u1, u2 = debye_msd_reference(m, theta, t1), debye_msd_reference(m, theta, t2)
    else:
        u1, u2 = (3 * C.hbar**2 * t / (m * C.atomic_mass * C.k * theta**2) * 1e20 for t in (t1, t2))
    # Source: Debye-Waller factor exp(-2M), M = q^2 <u_x^2> / 2 (Van Hove, Weinberg and Chan 1986)
    expected = np.exp(-2 * (0.5 * q2 * u1 - 0.5 * q2 * u2))
    assert i1[ok] / i2[ok] == pytest.approx(expected[ok], rel=1e-6)
    assert np.all(expected[ok] > 1)  # the colder sample diffracts more strongly


def test_debye_waller_off_and_overrides():
    pos = np.array([[0.0, 0.0, 0.0]])
    g = [[0.0, 0.0]]
    kw = dict(attenuation=math.inf, inner_potential=0.0)
    off = kinematic_intensities(pos, [29], g, 100.0, temperature=None, **kw)[0]
    assert off == pytest.approx(29.0)
    q2 = 4 * 100.0 / HBAR2_2M
    for override in ({"Cu": 200.0}, {29: 200.0}, [200.0]):
        on = kinematic_intensities(
            pos, [29], g, 100.0, temperature=300.0, debye_temperatures=override, **kw
        )[0]
        u = debye_msd_reference(atomic_masses[29], 200.0, 300.0)
        # Source: exp(-2M) with M = q^2 <u_x^2>/2 (Van Hove, Weinberg and Chan 1986)
        assert on / off == pytest.approx(math.exp(-q2 * u), rel=1e-9)


def test_per_atom_temperatures_and_fallback():
    z = [29, 29, 8, 1]
    theta = debye_temperatures_for(z, {"Cu": 300.0})
    assert theta.tolist() == [300.0, 300.0, DEFAULT_DEBYE_TEMPERATURE, DEFAULT_DEBYE_TEMPERATURE]
    assert missing_debye_temperatures(z) == [1, 8]
    assert missing_debye_temperatures(z, {"O": 500, "H": 900}) == []
    per_atom = debye_temperatures_for(z, [250.0, 343.0, 500.0, 900.0])
    assert per_atom.tolist() == [250.0, 343.0, 500.0, 900.0]
    msd = atomic_mean_square_displacements(z, 300.0, [250.0, 343.0, 500.0, 900.0])
    assert msd[0] > msd[1]  # softer surface atom vibrates more (Common practice, no source)
    assert debye_waller_exponent(4.0, 0.01) == pytest.approx(0.02)


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: mean_square_displacement(63.5, 343.0, -1.0), "temperature"),
        (lambda: mean_square_displacement(63.5, 343.0, 0.0, "high-temperature"), "above 0 K"),
        (lambda: mean_square_displacement(63.5, -343.0, 300.0), "positive"),
        (lambda: mean_square_displacement(63.5, 343.0, 300.0, "classical"), "vibration model"),
        (lambda: debye_temperatures_for([29], {"Cu": -5}), "positive temperature"),
        (lambda: debye_temperatures_for([29], {200: 300}), "1 to 118"),
        (lambda: debye_temperatures_for([29], 300.0), "mapping"),
    ],
)
def test_errors(call, words):
    with pytest.raises(InputError, match=words):
        call()
