"""Inelastic attenuation: Seah-Dench mean free path, path lengths, imaginary inner potential."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase.build import bulk
from scipy import constants as C
from scipy.optimize import minimize_scalar

from surfgeo.diffraction.attenuation import (
    DEFAULT_MONOLAYER_THICKNESS,
    FixedMeanFreePath,
    ImaginaryInnerPotential,
    SeahDench,
    monolayer_thickness,
    resolve_attenuation,
    seah_dench_imfp,
)
from surfgeo.diffraction.kinematic import kinematic_intensities, scattering_geometry
from surfgeo.errors import InputError

HBAR2_2M = C.hbar**2 / (2 * C.m_e) / C.e * 1e20  # eV A^2


def test_seah_dench_formula_and_value():
    # Source: Seah and Dench, Surf. Interface Anal. 1, 2 (1979), elements:
    # lambda[monolayers] = 538 / E^2 + 0.41 (a E)^(1/2), a in nm (from memory, sources.md)
    for e in (20.0, 50.0, 100.0, 400.0):
        monolayers = 538.0 / e**2 + 0.41 * math.sqrt(0.25 * e)
        assert seah_dench_imfp(e, 2.5) == pytest.approx(monolayers * 2.5, rel=1e-12)
    # From memory (sources.md): about 5 A at 100 eV for a = 0.25 nm
    assert 4.5 < float(seah_dench_imfp(100.0, 2.5)) < 6.0


def test_universal_curve_minimum():
    res = minimize_scalar(lambda e: float(seah_dench_imfp(e, 2.5)), bounds=(5.0, 500.0), method="bounded")
    # Common practice, no source: the universal curve has its minimum at a few tens of eV
    assert 20.0 < res.x < 80.0
    # analytic minimum of the formula: E^(5/2) = 4 * 538 / (0.41 sqrt(a[nm]))
    assert res.x == pytest.approx((4 * 538 / (0.41 * math.sqrt(0.25))) ** 0.4, rel=1e-4)


def test_monolayer_thickness_against_ase_bulk():
    for sym, z in (("Cu", [29]), ("W", [74]), ("Si", [14]), ("Ru", [44])):
        atoms = bulk(sym)
        # Source: ASE bulk builder (reference states): volume per atom
        assert monolayer_thickness(z) == pytest.approx((atoms.get_volume() / len(atoms)) ** (1 / 3), rel=1e-9)
    v_cu, v_w = (bulk(sym).get_volume() / len(bulk(sym)) for sym in ("Cu", "W"))
    assert monolayer_thickness([29, 74, 29]) == pytest.approx(((2 * v_cu + v_w) / 3) ** (1 / 3), rel=1e-9)
    # oxygen has no crystal in ASE's reference states: left out of the mean
    assert monolayer_thickness([29, 8, 8]) == pytest.approx(monolayer_thickness([29]))
    assert monolayer_thickness([8]) == DEFAULT_MONOLAYER_THICKNESS


@pytest.mark.parametrize("incidence", [(0.0, 0.0), (35.0, 20.0)])
def test_path_length_attenuation_of_a_buried_atom(incidence):
    """One atom at depth D: I = f^2 exp(-(D/cos t_in + D/cos t_out) / lambda), angles inside."""
    lam, depth, energy, v0r = 6.0, 4.0, 120.0, 10.0
    g = np.array([[0.0, 0.0], [1.5, -0.7], [-2.5, 0.4]])
    kw = dict(inner_potential=v0r, temperature=None, attenuation=lam)
    surface = kinematic_intensities([[0.0, 0.0, 0.0]], [29], g, energy, incidence, **kw)
    buried = kinematic_intensities([[0.0, 0.0, -depth]], [29], g, energy, incidence, surface_z=0.0, **kw)
    k = math.sqrt(energy / HBAR2_2M)
    K = math.sqrt((energy + v0r) / HBAR2_2M)
    th, ph = (math.radians(v) for v in incidence)
    kpi = k * math.sin(th) * np.array([math.cos(ph), math.sin(ph)])
    # Source: Snell's law for electrons (parallel momentum conserved) and the Beer-Lambert decay
    # of intensity along the path (Seah and Dench 1979 define lambda that way)
    cos_in = math.sqrt(1 - (kpi @ kpi) / K**2)
    cos_out = np.sqrt(1 - np.sum((kpi + g) ** 2, axis=1) / K**2)
    expected = np.exp(-(depth / cos_in + depth / cos_out) / lam)
    assert surface == pytest.approx(29.0 * np.ones(3))
    assert buried / surface == pytest.approx(expected, rel=1e-12)
    # atoms above surface_z are not attenuated
    above = kinematic_intensities([[0.0, 0.0, 1.0]], [29], g, energy, incidence, surface_z=0.0, **kw)
    assert above == pytest.approx(surface)


@pytest.mark.parametrize("incidence", [(0.0, 0.0), (30.0, 60.0)])
def test_imaginary_potential_matches_lifetime_mean_free_path(incidence):
    """Small V0i equals the path model with lambda = hbar v / (2 V0i)."""
    v0i, v0r = 0.02, 8.0
    g = np.array([[0.0, 0.0], [1.0, 0.5]])
    energies = np.array([60.0, 150.0, 300.0])
    geom = scattering_geometry(g, energies, incidence, v0r)
    assert geom.emerges.all()
    model = ImaginaryInnerPotential(v0i)
    kappa = model.amplitude_decay(energies, geom.k_inside, geom.k_in[:, 2], geom.k_out[..., 2])
    # Source: Pendry, Low Energy Electron Diffraction (1974) (from memory): lifetime hbar/(2 V0i),
    # mean free path lambda = v hbar / (2 V0i) with v the velocity inside the crystal
    v = np.sqrt(2 * (energies + v0r) * C.e / C.m_e)
    lam = v * C.hbar / (2 * v0i * C.e) * 1e10
    assert model.mean_free_path(energies, v0r) == pytest.approx(lam, rel=1e-12)
    path = FixedMeanFreePath(1.0)
    for i, e in enumerate(energies):
        ref = FixedMeanFreePath(float(lam[i])).amplitude_decay(
            energies[i : i + 1], geom.k_inside[i : i + 1], geom.k_in[i : i + 1, 2],
            geom.k_out[i : i + 1, :, 2],
        )
        assert kappa[i] == pytest.approx(ref[0], rel=1e-3)
        assert path.mean_free_path(e) == 1.0


def test_imaginary_potential_exact_decay():
    """Im sqrt(k_z^2 + i V0i/(hbar^2/2m)) is the exact decay of a wave with a complex potential."""
    v0i = 4.0
    energies = np.array([100.0])
    geom = scattering_geometry([[0.0, 0.0]], energies, (0.0, 0.0), 10.0)
    model = ImaginaryInnerPotential(v0i)
    kappa = model.amplitude_decay(energies, geom.k_inside, geom.k_in[:, 2], geom.k_out[..., 2])
    # Common practice, no source: E + V0r + i V0i = (hbar^2/2m) k^2 with complex k
    kc = np.sqrt((110.0 + 1j * v0i) / HBAR2_2M)
    assert kappa[0, 0] == pytest.approx(2 * kc.imag, rel=1e-12)
    assert kappa[0, 0] > 0


def test_default_is_seah_dench_of_the_atoms():
    model = resolve_attenuation(None).for_atoms([29, 29])
    assert isinstance(model, SeahDench)
    assert model.monolayer_thickness == pytest.approx(monolayer_thickness([29]))
    g = [[0.0, 0.0]]
    default = kinematic_intensities([[0, 0, 0], [0, 0, -3.0]], [29, 29], g, 100.0, temperature=None)
    explicit = kinematic_intensities(
        [[0, 0, 0], [0, 0, -3.0]], [29, 29], g, 100.0, temperature=None, attenuation=model
    )
    assert default == pytest.approx(explicit)
    assert isinstance(resolve_attenuation(5), FixedMeanFreePath)
    # infinite mean free path: no attenuation at all
    none = kinematic_intensities([[0, 0, -50.0]], [29], g, 100.0, temperature=None, attenuation=math.inf,
                                 surface_z=0.0)
    assert none[0] == pytest.approx(29.0)


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: seah_dench_imfp(-1.0, 2.5), "energy"),
        (lambda: seah_dench_imfp(100.0, 0.0), "monolayer thickness"),
        (lambda: FixedMeanFreePath(0.0), "positive length"),
        (lambda: FixedMeanFreePath("x"), "number"),
        (lambda: ImaginaryInnerPotential(-4.0), "magnitude"),
        (lambda: resolve_attenuation(True), "attenuation"),
    ],
)
def test_errors(call, words):
    with pytest.raises(InputError, match=words):
        call()
