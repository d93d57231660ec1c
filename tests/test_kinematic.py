"""Kinematic intensities: glide extinctions, stepped faces, Bragg maxima, amplitudes, geometry."""

from __future__ import annotations

import math

import numpy as np
import pytest
import spglib
import spglib.error
from ase.build import fcc100, fcc211
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as C

from surfgeo.diffraction.kinematic import (
    QUALITATIVE_NOTE,
    kinematic_intensities,
    kinematic_iv,
    scattering_geometry,
)
from surfgeo.diffraction.scattering import (
    IsotropicAmplitudes,
    PartialWaveAmplitudes,
    partial_wave_amplitude,
)
from surfgeo.errors import InputError, StructureError

HBAR2_2M = C.hbar**2 / (2 * C.m_e) / C.e * 1e20  # eV A^2


# ----------------------------------------------------------------------------- models
def p4g_clock_model(a: float = 2.49, shift: float = 0.35, break_glide: bool = False):
    """Synthetic (2x2)p4g clock reconstruction of a square fcc(100)-like face.

    Top-layer atoms of a (2x2) cell are displaced tangentially by ``shift`` around the
    fourfold hollow H1 = (a/2, a/2) (clockwise there, and therefore anticlockwise around the
    neighbouring hollow H2 = (3a/2, 3a/2)); light atoms sit in H1 and H2; three substrate layers
    below. Returns positions (N, 3), numbers (N,), the (2x2) cell (2x2 rows) and the 1x1
    reciprocal basis.
    """
    nominal = np.array([[0, 0], [a, 0], [0, a], [a, a]], dtype=float)
    h1 = np.array([a / 2, a / 2])
    v = nominal - h1
    tangent = np.column_stack([-v[:, 1], v[:, 0]])
    tangent /= np.linalg.norm(tangent, axis=1)[:, None]
    top = nominal + shift * tangent
    if break_glide:
        top[1] = nominal[1]  # one atom left in place: the glide lines are gone
    pos = [[*p, 0.0] for p in top] + [[*h1, 0.1], [*(h1 + a), 0.1]]
    num = [28] * 4 + [6, 6]
    for layer in range(1, 4):
        off = a / 2 if layer % 2 else 0.0
        for m in range(2):
            for n in range(2):
                pos.append([off + m * a, off + n * a, -1.76 * layer])
                num.append(28)
    cell = np.diag([2 * a, 2 * a])
    recip1x1 = 2 * np.pi / a * np.eye(2)
    return np.array(pos), np.array(num), cell, recip1x1


def p2mg_model(a: float = 2.55, b: float = 3.61, x: float = 0.1, y: float = 0.2):
    """Synthetic (2x1) p2mg overlayer on a rectangular fcc(110)-like substrate.

    Four adsorbate atoms at the general positions of plane group p2mg in the (2x1) cell
    (x, y), (-x, -y), (1/2 - x, y), (1/2 + x, -y) (International Tables Vol. A, p2mg, origin
    on 2mm... here on the twofold axis), substrate atoms on the special positions.
    """
    A, B = 2 * a, b
    ads = np.array([[x, y], [-x, -y], [0.5 - x, y], [0.5 + x, -y]])
    frac = [[*p, 1.0] for p in ads]
    num = [8] * 4
    for layer in range(4):
        base = np.array([[0.0, 0.0], [0.5, 0.0]]) + (np.array([0.25, 0.5]) if layer % 2 else 0.0)
        for p in base:
            frac.append([*p, -1.28 * layer])
            num.append(29)
    frac = np.array(frac)
    pos = np.column_stack([frac[:, 0] * A, frac[:, 1] * B, frac[:, 2]])
    cell = np.diag([A, B])
    recip1x1 = np.diag([2 * np.pi / a, 2 * np.pi / b])
    return pos, np.array(num), cell, recip1x1


def layer_group(pos, num, cell2d):
    """spglib's layer group (number, symbol) of a slab given in Cartesian coordinates."""
    cell = np.zeros((3, 3))
    cell[:2, :2] = cell2d
    cell[2, 2] = 40.0
    frac = np.linalg.solve(cell.T, pos.T).T
    frac[:, 2] += 0.5
    spglib.error.OLD_ERROR_HANDLING = False  # raise instead of the deprecated None return
    ds = spglib.get_symmetry_layerdataset((cell, frac, num), aperiodic_dir=2)
    return ds.number, ds.international


def half_order_beams(recip1x1, nmax: int = 4):
    """All (h/2, k/2) beams with |h|, |k| <= nmax, labels (2h, 2k) as integers and g vectors."""
    hk2 = np.array([(h, k) for h in range(-nmax, nmax + 1) for k in range(-nmax, nmax + 1)])
    g = (hk2 / 2.0) @ recip1x1
    return hk2, g


# ----------------------------------------------------------------------------- glide extinctions
def test_p4g_model_has_layer_group_p4bm():
    pos, num, cell, _ = p4g_clock_model()
    # Source: spglib layer-group finder; From memory: layer group p4bm (No. 56) is the layer
    # group whose projection is plane group p4g (International Tables Vol. E).
    assert layer_group(pos, num, cell) == (56, "p4bm")
    pos, num, cell, _ = p4g_clock_model(break_glide=True)
    assert layer_group(pos, num, cell)[0] != 56


@pytest.mark.parametrize("energy", [65.0, 120.0, 230.0])
def test_p4g_glide_extinctions_at_normal_incidence(energy):
    pos, num, cell, recip = p4g_clock_model()
    hk2, g = half_order_beams(recip)
    intensity = kinematic_intensities(pos, num, g, energy)
    ok = ~np.isnan(intensity)
    imax = np.nanmax(intensity)
    h, k = hk2[:, 0], hk2[:, 1]
    extinct = ok & (((h % 2 == 1) & (k == 0)) | ((h == 0) & (k % 2 == 1)))
    assert extinct.sum() >= 4
    # Source: International Tables for Crystallography Vol. A, plane group p4g reflection
    # conditions h0: h = 2n, 0k: k = 2n (in the (2x2) cell: substrate (1/2, 0), (0, 1/2),
    # (3/2, 0) ...); Holland and Woodruff, Surf. Sci. 36, 488 (1973) (from memory).
    assert np.all(intensity[extinct] <= 1e-24 * imax)
    # the other fractional-order beams are present: the extinction is not an artefact
    others = ok & ((h % 2 == 1) | (k % 2 == 1)) & ~extinct
    assert np.all(intensity[others] > 1e-6 * imax)  # Common practice, no source


def test_p4g_extinction_needs_the_glide():
    pos, num, _, recip = p4g_clock_model(break_glide=True)
    g = np.array([[0.5, 0.0], [0.0, 0.5]]) @ recip
    intensity = kinematic_intensities(pos, num, g, 120.0)
    # Common practice, no source: without the glide line the (1/2, 0) beam is not extinct
    assert np.all(intensity > 1e-6)


def test_p4g_kinematic_extinction_also_off_normal():
    pos, num, _, recip = p4g_clock_model()
    hk2, g = half_order_beams(recip)
    h, k = hk2[:, 0], hk2[:, 1]
    for incidence in [(12.0, 0.0), (25.0, 37.0), (40.0, 90.0)]:
        intensity = kinematic_intensities(pos, num, g, 150.0, incidence)
        ok = ~np.isnan(intensity)
        extinct = ok & (((h % 2 == 1) & (k == 0)) | ((h == 0) & (k % 2 == 1)))
        assert extinct.sum() >= 4
        # Source: glide phase exp(i g . t) with q_parallel = g (International Tables Vol. A
        # reflection conditions applied to the kinematic sum). In real LEED, multiple scattering
        # lifts this off normal incidence; the module documents it.
        assert np.all(intensity[extinct] <= 1e-24 * np.nanmax(intensity))
    assert "multiple scattering lifts it" in QUALITATIVE_NOTE


def test_p2mg_model_and_extinctions():
    pos, num, cell, recip = p2mg_model()
    # Source: spglib layer-group finder; From memory: layer group pma2 (No. 24) projects on
    # plane group p2mg (International Tables Vol. E).
    assert layer_group(pos, num, cell) == (24, "pma2")
    hk2, g = half_order_beams(recip)
    h, k = hk2[:, 0], hk2[:, 1]
    for incidence in [(0.0, 0.0), (20.0, 55.0)]:
        intensity = kinematic_intensities(pos, num, g, 140.0, incidence)
        ok = ~np.isnan(intensity)
        imax = np.nanmax(intensity)
        # the (2x1) cell doubles a1 only: beams with odd k are not lattice beams of this model
        lattice_beams = ok & (k % 2 == 0)
        extinct = lattice_beams & (h % 2 == 1) & (k == 0)
        assert extinct.sum() >= 2
        # Source: International Tables Vol. A, p2mg reflection condition h0: h = 2n;
        # Holland and Woodruff 1973 (from memory)
        assert np.all(intensity[extinct] <= 1e-24 * imax)
        present = lattice_beams & (h % 2 == 1) & (k != 0)
        assert np.all(intensity[present] > 1e-6 * imax)  # Common practice, no source


# ----------------------------------------------------------------------------- stepped face
def _step_setup(layers: int = 24):
    a = 3.61
    slab = fcc211("Cu", size=(3, 1, layers), a=a)
    d = a / math.sqrt(3.0)  # monatomic step height = (111) spacing
    n_terrace = np.array([-1.0 / 3.0, 0.0, math.sqrt(8.0) / 3.0])  # [111] in ASE's fcc211 frame
    T = np.array(slab.cell[0])  # step translation vector (one terrace + one step)
    return slab, d, n_terrace, T


def test_fcc211_frame_from_ase():
    slab, d, n_t, T = _step_setup()
    # Source: ASE fcc211 builder axes x = [1 -1 -1], y = [0 1 -1], z = [2 1 1]: the (111)
    # terrace normal is (-1/3, 0, sqrt(8)/3) there; From memory: the (211) face is
    # 3(111)x(100) (Lang, Joyner and Somorjai 1972), miscut 19.47 degrees.
    assert math.degrees(math.acos(n_t[2])) == pytest.approx(19.4712, abs=1e-3)
    # the step translation rises by one step height along the terrace normal
    assert abs(T @ n_t) == pytest.approx(d, rel=1e-9)


@pytest.mark.parametrize("S", [3, 4, 5, 3.5, 4.5, 5.5])
def test_stepped_face_in_phase_and_out_of_phase(S):
    slab, d, n_t, T = _step_setup()
    L = float(np.linalg.norm(T))
    b1 = 2 * np.pi / L * T / L  # reciprocal vector perpendicular to the steps
    # Source: Henzler, Surf. Sci. 19, 159 (1970) (from memory): E_S = 150.4 S^2 / (4 d^2)
    energy = HBAR2_2M * (math.pi * S / d) ** 2
    assert energy == pytest.approx(150.4 * S**2 / (4 * d**2), rel=1e-3)
    theta = math.degrees(math.acos(n_t[2]))  # incident beam along the terrace normal
    phi = 0.0  # its parallel momentum points along +x, i.e. along -n_t's parallel part
    assert np.allclose(-n_t[:2] / np.linalg.norm(n_t[:2]), [math.cos(phi), math.sin(phi)])
    k = math.sqrt(energy / HBAR2_2M)
    g_spec = 2 * k * n_t[:2]  # parallel momentum transfer of the terrace-specular direction
    s = (g_spec @ b1[:2]) / (b1[:2] @ b1[:2])  # position of the terrace specular in units of b1
    # Source: Henzler 1970 (from memory): q . T = 2 pi S for q = 2 k n_terrace
    assert (2 * k * n_t) @ T == pytest.approx(-2 * np.pi * S, rel=1e-12)
    n0 = round(s) if float(S).is_integer() else math.floor(s)
    orders = np.arange(n0 - 2, n0 + 4)
    g = orders[:, None] * b1[None, :2]
    intensity = kinematic_intensities(
        slab.positions, slab.numbers, g, energy, (theta, phi), inner_potential=0.0, temperature=None
    )
    by_order = dict(zip(orders.tolist(), intensity.tolist(), strict=True))
    if float(S).is_integer():
        # in phase: the terrace specular direction is a beam and holds the intensity near it
        assert s == pytest.approx(n0, abs=1e-9)
        near = by_order[n0 - 1] + by_order[n0] + by_order[n0 + 1]
        assert by_order[n0] / near > 0.9  # Source: Henzler 1970 (from memory)
    else:
        # out of phase: the terrace specular lies midway; the two beams share about equally
        assert s == pytest.approx(n0 + 0.5, abs=1e-9)
        i1, i2 = by_order[n0], by_order[n0 + 1]
        assert abs(i1 - i2) / (i1 + i2) < 0.1  # Source: Henzler 1970 (from memory)
        assert i1 + i2 > 0.6 * (i1 + i2 + by_order[n0 - 1] + by_order[n0 + 2])
        # the two beams are 2 pi / L apart in parallel momentum
        assert np.linalg.norm(g[orders == n0 + 1] - g[orders == n0]) == pytest.approx(2 * np.pi / L)


# ----------------------------------------------------------------------------- Bragg maxima
@pytest.mark.parametrize("v0r", [0.0, 10.0])
def test_fcc100_specular_maxima(v0r):
    a = 3.61
    slab = fcc100("Cu", size=(1, 1, 30), a=a)
    d = a / 2
    energies = np.arange(20.0, 421.0, 1.0)
    curve = kinematic_iv(
        slab.positions, slab.numbers, [[0.0, 0.0]], energies,
        inner_potential=v0r, temperature=None, attenuation=8.0,
    )[:, 0]
    peaks = energies[1:-1][(curve[1:-1] > curve[:-2]) & (curve[1:-1] > curve[2:])]
    # Source: Van Hove, Weinberg and Chan, Low-Energy Electron Diffraction (1986):
    # kinematic (00) maxima at E_n = (hbar^2/2m)(n pi/d)^2 - V0r
    expected = [HBAR2_2M * (n * math.pi / d) ** 2 - v0r for n in range(1, 10)]
    expected = [e for e in expected if energies[0] + 2 < e < energies[-1] - 2]
    assert len(expected) >= 4
    strong = peaks[curve[np.searchsorted(energies, peaks)] > 0.1 * curve.max()]
    assert len(strong) == len(expected)
    for e_n in expected:
        assert np.min(np.abs(strong - e_n)) <= 1.0  # within the energy grid spacing


# ----------------------------------------------------------------------------- geometry
def test_scattering_geometry_refraction_and_emergence():
    g = np.array([[0.0, 0.0], [2.0, 1.0], [4.0, 0.0], [6.0, 0.0]])
    geom = scattering_geometry(g, [60.0, 150.0], (30.0, 40.0), inner_potential=12.0)
    k = np.sqrt(np.array([60.0, 150.0]) / HBAR2_2M)
    K = np.sqrt(k**2 + 12.0 / HBAR2_2M)
    # Source: scipy.constants (CODATA): k = 0.51232 sqrt(E) 1/A
    assert geom.k_vacuum == pytest.approx(0.51232 * np.sqrt([60.0, 150.0]), rel=1e-4)
    assert geom.k_inside == pytest.approx(K)
    # Common practice, no source: parallel momentum conserved, |k| = K inside, q_par = g
    azimuth = math.radians(40)
    kpi = k * math.sin(math.radians(30)) * np.array([[math.cos(azimuth), math.sin(azimuth)]]).T
    assert geom.k_in[:, :2] == pytest.approx(kpi.T)
    assert np.linalg.norm(geom.k_in, axis=1) == pytest.approx(K)
    kpo2 = np.sum((kpi.T[:, None, :] + g[None]) ** 2, axis=-1)
    assert np.array_equal(geom.emerges, kpo2 < k[:, None] ** 2)
    em = geom.emerges
    assert np.linalg.norm(geom.k_out[em], axis=-1) == pytest.approx(np.repeat(K, em.sum(1)))
    assert np.allclose(geom.q[em][:, :2], np.broadcast_to(g, em.shape + (2,))[em])
    assert np.all(np.isnan(geom.q[~em]))
    assert not em.all() and em.any()


def test_non_emerging_beams_are_nan():
    pos = np.array([[0.0, 0.0, 0.0]])
    k = math.sqrt(100.0 / HBAR2_2M)
    g = np.array([[0.0, 0.0], [0.999 * k, 0.0], [1.0 * k, 0.0], [1.2 * k, 0.0]])
    intensity = kinematic_intensities(pos, [29], g, 100.0)
    assert np.isfinite(intensity[:2]).all()
    assert np.isnan(intensity[2:]).all()


# ----------------------------------------------------------------------------- amplitudes
def test_partial_wave_s_wave_and_optical_theorem():
    k = 4.0
    # Source: Sakurai, Modern Quantum Mechanics: s-wave amplitude exp(i d) sin(d) / k
    f = partial_wave_amplitude([0.7], k, np.array([1.0, 0.0, -1.0]))
    assert f == pytest.approx(np.exp(0.7j) * math.sin(0.7) / k)
    deltas = np.array([1.1, 0.6, 0.25, 0.05])
    f0 = partial_wave_amplitude(deltas, k, 1.0)
    sigma = 4 * math.pi / k**2 * np.sum((2 * np.arange(4) + 1) * np.sin(deltas) ** 2)
    # Source: optical theorem Im f(0) = k sigma_tot / (4 pi) (Sakurai)
    assert f0.imag == pytest.approx(k * sigma / (4 * math.pi), rel=1e-12)


def test_angle_dependent_amplitude_plugs_in():
    """A callable amplitude model receives the scattering angle inside the crystal."""
    seen = {}

    def model(numbers, energy, k_inside, cos_angle):
        seen["k"] = k_inside
        return np.outer(np.ones(len(numbers)), 1.0 + 2.0 * cos_angle + 0.5j * cos_angle**2)

    pos = np.array([[0.3, -0.2, 1.0]])
    g = np.array([[0.0, 0.0], [1.5, 0.5], [-2.0, 1.0]])
    energy, v0r, incidence = 90.0, 8.0, (15.0, 30.0)
    intensity = kinematic_intensities(
        pos, [47], g, energy, incidence, inner_potential=v0r, temperature=None,
        attenuation=math.inf, amplitudes=model,
    )
    k = math.sqrt(energy / HBAR2_2M)
    K = math.sqrt(k**2 + v0r / HBAR2_2M)
    th, ph = np.radians(incidence)
    # Source: Snell's law for electrons at a refracting potential step (parallel momentum
    # conserved), Van Hove, Weinberg and Chan (1986)
    kin = np.array([k * math.sin(th) * math.cos(ph), k * math.sin(th) * math.sin(ph), 0.0])
    kin[2] = -math.sqrt(K**2 - kin[0] ** 2 - kin[1] ** 2)
    kp = kin[:2] + g
    kout = np.column_stack([kp, np.sqrt(K**2 - np.sum(kp**2, axis=1))])
    c = kout @ kin / K**2
    assert seen["k"] == pytest.approx(K)
    assert intensity == pytest.approx(np.abs(1.0 + 2.0 * c + 0.5j * c**2) ** 2, rel=1e-12)


def test_partial_wave_amplitudes_in_the_sum():
    pos = np.array([[0.0, 0.0, 0.0]])
    shifts = {"Cu": lambda e: np.array([1.0, 0.5 + 0.001 * e, 0.1])}
    model = PartialWaveAmplitudes(shifts)
    energies = np.array([50.0, 100.0, 200.0])
    iv = kinematic_iv(pos, [29], [[0.0, 0.0]], energies, inner_potential=10.0, temperature=None,
                      attenuation=math.inf, amplitudes=model)[:, 0]
    K = np.sqrt((energies + 10.0) / HBAR2_2M)
    expect = [abs(partial_wave_amplitude(shifts["Cu"](e + 10.0), kk, -1.0)) ** 2 for e, kk in zip(energies, K,
                                                                                                    strict=True)]
    # backscattering at normal incidence: scattering angle 180 degrees (Common practice, no source)
    assert iv == pytest.approx(expect, rel=1e-12)
    with pytest.raises(InputError, match="no phase shifts"):
        kinematic_intensities(pos, [8], [[0.0, 0.0]], 50.0, amplitudes=model)


def test_isotropic_default_and_overrides():
    pos = np.array([[0.0, 0.0, 0.0]])
    kw = dict(temperature=None, attenuation=math.inf)
    # the documented model choice (no source): default amplitude f = Z ** 0.5, so I = Z for one atom
    assert kinematic_intensities(pos, [29], [[0.0, 0.0]], 80.0, **kw)[0] == pytest.approx(29.0)
    assert kinematic_intensities(pos, [29], [[0.0, 0.0]], 80.0, amplitudes={"Cu": 2.0}, **kw)[0] == 4.0
    iso = IsotropicAmplitudes({29: 1 + 1j}, exponent=0.0)
    assert iso.element_amplitudes([29, 8]) == pytest.approx([1 + 1j, 1.0])


# ----------------------------------------------------------------------------- implementation
def _random_model(rng, n=40):
    pos = rng.uniform([-3, -3, -6], [3, 3, 0], size=(n, 3))
    pos[: n // 2, 2] = np.round(pos[: n // 2, 2])  # some shared heights (groups)
    num = rng.choice([8, 29, 78], size=n)
    return pos, num


def test_grouped_and_direct_paths_agree():
    rng = np.random.default_rng(3)
    pos, num = _random_model(rng)
    g = rng.uniform(-3, 3, size=(25, 2))
    energies = np.linspace(40, 200, 17)
    kw = dict(debye_temperatures={"O": 500}, surface_z=0.5)
    iv = kinematic_iv(pos, num, g, energies, (18.0, 70.0), **kw)
    loop = np.array([kinematic_intensities(pos, num, g, e, (18.0, 70.0), **kw) for e in energies])
    assert np.array_equal(np.isnan(iv), np.isnan(loop))
    ok = ~np.isnan(iv)
    assert iv[ok] == pytest.approx(loop[ok], rel=1e-9, abs=1e-12 * np.nanmax(loop))
    # layered model: few groups, grouped path exercised
    slab = fcc100("Pt", size=(2, 2, 6), a=3.92)
    iv = kinematic_iv(slab.positions, slab.numbers, g, energies, (10.0, 5.0))
    loop = np.array(
        [kinematic_intensities(slab.positions, slab.numbers, g, e, (10.0, 5.0)) for e in energies]
    )
    ok = ~np.isnan(iv)
    assert iv[ok] == pytest.approx(loop[ok], rel=1e-9, abs=1e-12 * np.nanmax(loop))


def test_chunking_does_not_change_results():
    rng = np.random.default_rng(5)
    pos, num = _random_model(rng, 30)
    g = rng.uniform(-2, 2, size=(11, 2))
    ref = kinematic_intensities(pos, num, g, 120.0, (5.0, 0.0))
    for chunk in (1, 7, 64):
        out = kinematic_intensities(pos, num, g, 120.0, (5.0, 0.0), chunk_elements=chunk)
        assert out == pytest.approx(ref, rel=1e-10)
    energies = [50.0, 60.0, 70.0]
    ref = kinematic_iv(pos, num, g, energies, chunk_elements=10**6)
    out = kinematic_iv(pos, num, g, energies, chunk_elements=3)
    assert out == pytest.approx(ref, rel=1e-10)


def test_beam_blocks_in_the_sweep(monkeypatch):
    import surfgeo.diffraction.kinematic as kin

    slab = fcc100("Cu", size=(2, 2, 5), a=3.61)
    g = np.random.default_rng(2).uniform(-3, 3, size=(13, 2))
    energies = np.arange(50.0, 70.0, 2.0)
    ref = kinematic_iv(slab.positions, slab.numbers, g, energies, (8.0, 0.0))
    monkeypatch.setattr(kin, "PLANE_ELEMENTS", 7)
    out = kinematic_iv(slab.positions, slab.numbers, g, energies, (8.0, 0.0))
    assert np.array_equal(np.isnan(ref), np.isnan(out))
    assert out[~np.isnan(ref)] == pytest.approx(ref[~np.isnan(ref)], rel=1e-12)


@settings(max_examples=25, deadline=None)
@given(
    shift=st.tuples(*(st.floats(-10, 10),) * 3),
    key=st.integers(0, 2**16),
    theta=st.floats(0, 60),
    phi=st.floats(0, 360),
)
def test_rigid_translation_and_permutation_invariance(shift, key, theta, phi):
    rng = np.random.default_rng(key)
    pos, num = _random_model(rng, 12)
    g = rng.uniform(-2, 2, size=(6, 2))
    ref = kinematic_intensities(pos, num, g, 110.0, (theta, phi))
    moved = kinematic_intensities(pos + np.array(shift), num, g, 110.0, (theta, phi))
    perm = rng.permutation(len(num))
    permuted = kinematic_intensities(pos[perm], num[perm], g, 110.0, (theta, phi))
    ok = ~np.isnan(ref)
    # Common practice, no source: |sum|^2 ignores a common phase and the order of the atoms
    assert np.array_equal(ok, ~np.isnan(moved))
    assert moved[ok] == pytest.approx(ref[ok], rel=1e-8, abs=1e-10)
    assert permuted[ok] == pytest.approx(ref[ok], rel=1e-8, abs=1e-10)
    assert np.all(ref[ok] >= 0)


def test_empty_inputs():
    assert kinematic_intensities(np.zeros((0, 3)), [], [[0.0, 0.0]], 50.0).tolist() == [0.0]
    assert kinematic_intensities([[0, 0, 0]], [29], np.zeros((0, 2)), 50.0).shape == (0,)


@pytest.mark.parametrize(
    "kwargs, error, words",
    [
        (dict(positions=[[0, 0]]), StructureError, "positions"),
        (dict(numbers=[29, 29]), StructureError, "numbers"),
        (dict(numbers=[0]), StructureError, "atomic numbers"),
        (dict(positions=[[0, 0, np.nan]]), StructureError, "finite"),
        (dict(g_parallel=[[1, 2, 3]]), InputError, "g_parallel"),
        (dict(energy=-5.0), InputError, "energy"),
        (dict(energy=[50.0, 60.0]), InputError, "kinematic_iv"),
        (dict(incidence=(90.0, 0.0)), InputError, "polar angle"),
        (dict(incidence="x"), InputError, "incidence"),
        (dict(inner_potential=-1.0), InputError, "inner_potential"),
        (dict(temperature=-3.0), InputError, "temperature"),
        (dict(attenuation=-2.0), InputError, "attenuation"),
        (dict(attenuation="lots"), InputError, "attenuation"),
        (dict(amplitudes=3), InputError, "amplitudes"),
        (dict(amplitudes=lambda n, e, k, c: np.ones((5, 7))), InputError, "amplitude model"),
        (dict(debye_temperatures={"Xx": 300}), InputError, "unknown element"),
        (dict(debye_temperatures=[300, 200]), InputError, "one per atom"),
        (dict(vibration_model="einstein"), InputError, "vibration_model"),
        (dict(surface_z="top"), InputError, "surface_z"),
        (dict(chunk_elements=0), InputError, "chunk_elements"),
    ],
)
def test_bad_input_raises_one_sentence(kwargs, error, words):
    args = dict(positions=[[0.0, 0.0, 0.0]], numbers=[29], g_parallel=[[0.0, 0.0], [1.0, 0.0]], energy=80.0)
    args.update(kwargs)
    with pytest.raises(error) as info:
        kinematic_intensities(
            args.pop("positions"), args.pop("numbers"), args.pop("g_parallel"), args.pop("energy"), **args
        )
    message = str(info.value)
    assert words in message
    assert message.count(". ") == 0 and message.endswith(".")
