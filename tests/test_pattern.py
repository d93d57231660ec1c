"""Pattern assembly: domains, superposition, overlayers, slab intensities, terraces, sweeps."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from ase import Atoms
from ase.build import add_adsorbate, fcc100, fcc111, fcc211

from surfgeo.diffraction.electron import HBAR2_2M, onset_energy
from surfgeo.diffraction.kinematic import kinematic_iv
from surfgeo.diffraction.pattern import slab_pattern, superstructure_pattern
from surfgeo.diffraction.sweep import parse_energies, pattern_sweep
from surfgeo.errors import InputError
from surfgeo.lattice import Lattice2D

HEX = Lattice2D.hexagonal(2.77)
SQUARE = Lattice2D.square(2.55)
F = Fraction


def _labels(p):
    return {(h, k) for h, k in p.hk}


def _positions(p):
    return np.unique(np.round(p.g, 9), axis=0)


# ----------------------------------------------------------------------------- domains, positions
def test_p2x2_and_three_domain_2x1_on_hexagonal_coincide():
    # Source: sources.md (common practice): three-domain (2x1) on a hexagonal lattice gives the p(2x2)
    # positions
    for energy in (60.0, 150.0, 310.0):
        p22 = superstructure_pattern(HEX, [[2, 0], [0, 2]], energy)
        p21 = superstructure_pattern(HEX, [[2, 0], [0, 1]], energy)
        assert len(p21.domain_records) == 3 and len(p22.domain_records) == 1
        assert _labels(p21) == _labels(p22)
        assert np.array_equal(_positions(p21), _positions(p22))
        # a single (2x1) domain is not enough
        one = superstructure_pattern(HEX, [[2, 0], [0, 1]], energy, domains=False)
        assert _labels(one) < _labels(p22)


def test_two_domain_2x1_on_square_lacks_half_half():
    # Source: sources.md (common practice): two-domain (2x1) on a square lattice gives the p(2x2)
    # positions without the (1/2, 1/2) spots
    p21 = superstructure_pattern(SQUARE, [[2, 0], [0, 1]], 120.0)
    p22 = superstructure_pattern(SQUARE, [[2, 0], [0, 2]], 120.0)
    assert len(p21.domain_records) == 2
    missing = _labels(p22) - _labels(p21)
    assert (F(1, 2), F(1, 2)) in missing and (F(-1, 2), F(3, 2)) in missing
    assert all(h.denominator == 2 and k.denominator == 2 for h, k in missing)
    assert _labels(p21) <= _labels(p22)
    # every beam lists the domains producing it: (1/2, 0) from the (2x1) domain, (0, 1/2) from (1x2)
    d0 = p21.domains[p21.index_of("1/2", 0)]
    d1 = p21.domains[p21.index_of(0, "1/2")]
    assert len(d0) == 1 and len(d1) == 1 and d0 != d1
    assert p21.domains[p21.index_of(1, 0)] == (0, 1)
    assert p21.integer[p21.index_of(1, 0)] and not p21.integer[p21.index_of("1/2", 0)]


def test_c2x2_labels_and_orders():
    # Common practice, no source: c(2x2) adds only (h+1/2, k+1/2) spots
    p = superstructure_pattern(SQUARE, [[1, 1], [-1, 1]], 100.0)
    frac = [hk for hk, i in zip(p.hk, p.integer, strict=True) if not i]
    assert frac and all(h.denominator == 2 and k.denominator == 2 for h, k in frac)
    assert p.order[p.index_of(0, 0)] == "integer"


def test_theta_max_and_no_domains():
    # Common practice, no source: at normal incidence the screen axis is the surface normal, so the
    # acceptance keeps exactly the beams with exit angle theta <= theta_max
    p = superstructure_pattern(HEX, [[2, 1], [-1, 1]], 100.0, theta_max=30.0)
    assert np.all(p.theta <= 30.0 + 1e-9)
    full = superstructure_pattern(HEX, [[2, 1], [-1, 1]], 100.0)
    assert len(full) > len(p)
    assert _labels(p) == {hk for hk, t in zip(full.hk, full.theta, strict=True) if t <= 30.0}
    one = superstructure_pattern(HEX, [[3, 1], [-1, 2]], 100.0, domains=False)
    assert len(one.domain_records) == 1 and all(d == (0,) for d in one.domains)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(matrix=[[1, 0], [0, 0]]), "singular"),
        (dict(matrix=[[2, 0], [0, 1]], weights=[1, 2]), "3 domain"),
        (dict(matrix=[[2, 0], [0, 1]], weights=[0, 0, 0]), "not all zero"),
        (dict(energy=-3.0), "energy"),
        (dict(energy=2500.0), "at most 2000 eV"),
        (dict(theta_max=95.0), "theta_max"),
        (dict(double_order=-1), "order"),
        (dict(incidence=(90, 0)), "incidence"),
    ],
)
def test_bad_input(kwargs, match):
    args = dict(matrix=None, energy=100.0)
    args.update(kwargs)
    lattice = HEX
    with pytest.raises(InputError, match=match):
        superstructure_pattern(lattice, args.pop("matrix"), args.pop("energy"), **args)


# ----------------------------------------------------------------------------- overlayers
def test_incommensurate_overlayer_with_double_diffraction():
    # an overlayer sqrt(1.3) (irrational) times the substrate, rotated 10 degrees
    s = math.sqrt(1.3)
    c, sn = math.cos(math.radians(10)), math.sin(math.radians(10))
    R = np.array([[c, -sn], [sn, c]])
    B = s * HEX.vectors @ R.T
    M = B @ np.linalg.inv(HEX.vectors)
    single = superstructure_pattern(HEX, M, 200.0)
    double = superstructure_pattern(HEX, M, 200.0, double_order=1)
    assert not single.exact and set(single.source) == {"substrate", "overlayer"}
    assert "double" in double.source
    assert len(double) > len(single)
    # Common practice, no source: double diffraction puts beams at g_substrate + g_overlayer
    A_rec = HEX.reciprocal
    for i, src in enumerate(double.source):
        if src != "double":
            continue
        via = double.via[i]
        Md = np.array(
            double.domain_records[via["domain"]].matrix, dtype=float
        )  # overlayer indices of that domain
        B_rec = np.linalg.inv(Md).T @ A_rec
        gs = np.array([int(v) for v in via["substrate"]]) @ A_rec
        go = np.array([int(v) for v in via["overlayer"]]) @ B_rec
        assert np.allclose(double.g[i], gs + go, atol=1e-9)
        assert double.order[i] == "fractional"
    # the moire vector g_overlayer(1,0) - g_substrate is short: satellites near the specular beam
    gmin = np.min(np.linalg.norm(double.g[np.array(double.source) == "double"], axis=1))
    assert gmin < 0.4 * np.linalg.norm(A_rec[0])


def test_coincidence_overlayer_labels_are_exact():
    p = superstructure_pattern(SQUARE, [[F(3, 2), 0], [0, F(3, 2)]], 150.0, double_order=1)
    assert p.exact
    assert (F(2, 3), F(0)) in _labels(p)
    # Common practice, no source: g_s + g_o of a coincidence lattice lies on the coincidence reciprocal
    # lattice
    for h, k in p.hk:
        assert (3 * h).denominator == 1 and (3 * k).denominator == 1


# ----------------------------------------------------------------------------- slabs
def _tag(atoms, M, A=None):
    M = np.array(M)
    if A is None:
        A = np.linalg.inv(M) @ atoms.cell[:2, :2]
    atoms.info["surfgeo"] = {"surface_cell": np.asarray(A).tolist(), "supercell_matrix": M.tolist()}
    return atoms


def _rot(deg):
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    return np.array([[c, -s], [s, c]])


def _intensity_at(p, g):
    d = np.linalg.norm(p.g - g, axis=1)
    i = int(np.argmin(d))
    assert d[i] < 1e-9
    return p.intensity[i]


def test_fcc111_substrate_is_threefold_not_sixfold():
    # Source: ASE fcc111 builder (ABC stacking): the (111) face has point symmetry 3m, so the first-order
    # beams alternate in intensity (Common practice, no source) while 120 degree partners agree
    slab = _tag(fcc111("Pt", (1, 1, 5), vacuum=6.0), [[1, 0], [0, 1]])
    p = slab_pattern(slab, 120.0, temperature=None)
    first = [i for i in range(len(p)) if abs(np.linalg.norm(p.g[i]) - np.linalg.norm(p.g[1])) < 1e-9]
    assert len(first) == 6
    g = p.g[first[0]]
    i0 = _intensity_at(p, g)
    assert _intensity_at(p, _rot(120) @ g) == pytest.approx(i0, rel=1e-9)
    assert _intensity_at(p, _rot(240) @ g) == pytest.approx(i0, rel=1e-9)
    assert abs(_intensity_at(p, _rot(60) @ g) - i0) > 0.05 * i0
    assert any("6 of the 12" in n for n in p.notes)


def test_domain_average_restores_substrate_symmetry():
    # an adsorbate off every mirror line of fcc(100): one lattice domain, eight structural domains
    slab = fcc100("Cu", (1, 1, 4), vacuum=6.0)
    a = slab.cell[0, 0]
    slab += Atoms("O", positions=[[0.31 * a, 0.12 * a, slab.positions[:, 2].max() + 1.1]])
    _tag(slab, [[1, 0], [0, 1]])
    p = slab_pattern(slab, 150.0, temperature=None)
    assert len(p.domain_records) == 1 and p.domain_records[0].structures == 8
    # Common practice, no source: the incoherent sum over the orientations has the substrate's 4mm symmetry
    gx, gy = p.lattice.reciprocal
    for g in (gx, gx + 2 * gy):
        ref = _intensity_at(p, g)
        for R in (_rot(90), _rot(180), _rot(270), np.diag([1.0, -1.0]), np.array([[0.0, 1.0], [1.0, 0.0]])):
            assert _intensity_at(p, R @ g) == pytest.approx(ref, rel=1e-9)
    bare = slab_pattern(slab, 150.0, temperature=None, domains=False)
    assert abs(_intensity_at(bare, gx) - _intensity_at(bare, gy)) > 1e-3 * _intensity_at(bare, gx)
    # the average equals the mean of the eight rotated copies computed directly
    ops = [R for R in (_rot(0), _rot(90), _rot(180), _rot(270))]
    ops += [R @ np.diag([1.0, -1.0]) for R in ops]
    direct = np.zeros(len(p))
    for R in ops:
        pos = slab.positions.copy()
        pos[:, :2] = pos[:, :2] @ R.T
        direct += kinematic_iv(pos, slab.numbers, p.g, [150.0], temperature=None)[0]
    assert np.allclose(p.intensity, direct / 8, rtol=1e-9)


def test_two_domain_2x1_slab_intensities_and_weights():
    slab = fcc100("Cu", (2, 1, 4), vacuum=6.0)
    add_adsorbate(slab, "O", 1.0, (0.0, 0.0))  # one O per (2x1) cell, on top
    _tag(slab, [[2, 0], [0, 1]])
    p = slab_pattern(slab, 100.0, temperature=None)
    assert len(p.domain_records) == 2
    # Common practice, no source: incoherent domain sum I = sum_d w_d I_d; the two (2x1) domains are
    # related by the fourfold axis of fcc(100), so (1/2, 0) of one equals (0, 1/2) of the other
    i10 = _intensity_at(p, p.lattice.reciprocal[0] / 2)
    i01 = _intensity_at(p, p.lattice.reciprocal[1] / 2)
    assert i10 == pytest.approx(i01, rel=1e-9) and i10 > 0
    w = slab_pattern(slab, 100.0, temperature=None, weights=[3, 1])
    assert [r.weight for r in w.domain_records] == [0.75, 0.25]
    # (1/2, 0) belongs to domain 0 only: its intensity scales with that domain's weight
    assert _intensity_at(w, w.lattice.reciprocal[0] / 2) == pytest.approx(1.5 * i10, rel=1e-9)
    assert _intensity_at(w, w.lattice.reciprocal[1] / 2) == pytest.approx(0.5 * i01, rel=1e-9)
    # (1/2, 1/2) is not a beam of either domain
    with pytest.raises(KeyError):
        p.index_of("1/2", "1/2")


def test_centred_adsorbate_in_a_2x2_cell_has_extinct_half_order_beams():
    # Source: International Tables Vol. A, centred cell: reflections with h + k odd are absent; a c(2x2)
    # layer described in a p(2x2) cell gives zero (1/2, 0) intensity (Common practice, no source)
    slab = fcc100("Cu", (2, 2, 3), vacuum=6.0)
    add_adsorbate(slab, "O", 1.2, (0.0, 0.0))
    add_adsorbate(slab, "O", 1.2, (slab.cell[0, 0] / 2, slab.cell[1, 1] / 2))
    _tag(slab, [[2, 0], [0, 2]])
    p = slab_pattern(slab, 130.0, temperature=None)
    ext = p.extinct
    assert ext[p.index_of("1/2", 0)] and ext[p.index_of(0, "1/2")]
    assert not ext[p.index_of("1/2", "1/2")] and not ext[p.index_of(1, 0)]
    assert any("qualitative" in n for n in p.notes)


def test_slab_pattern_errors():
    with pytest.raises(InputError):
        slab_pattern("not atoms", 100.0)
    slab = _tag(fcc100("Cu", (2, 1, 2), vacuum=5.0), [[2, 0], [0, 1]])
    with pytest.raises(InputError, match="domain weights"):
        slab_pattern(slab, 100.0, weights=[1, 2, 3])


# ----------------------------------------------------------------------------- stepped face
def _fcc211(layers=24):
    a = 3.61
    slab = fcc211("Cu", size=(3, 1, layers), a=a)
    _tag(slab, [[1, 0], [0, 1]], slab.cell[:2, :2])
    # Source: ASE fcc211 axes x = [1 -1 -1], y = [0 1 -1], z = [2 1 1]; (111) terrace vectors a/2 [1 -1 0]
    # and a/2 [0 1 -1] expressed in that frame
    t1 = np.array([a / math.sqrt(3), -a / (2 * math.sqrt(2)), a / (2 * math.sqrt(6))])
    t2 = np.array([0.0, a / math.sqrt(2), 0.0])
    n_t = np.array([-1 / 3, 0.0, math.sqrt(8) / 3])
    return slab, a / math.sqrt(3), np.array([t1, t2]), n_t


@pytest.mark.parametrize("S", [4, 5, 4.5])
def test_terrace_labels_of_a_stepped_face(S):
    slab, d, t, n_t = _fcc211()
    assert np.allclose(t @ n_t, 0.0, atol=1e-12)
    # Source: Henzler, Surf. Sci. 19, 159 (1970) (from memory): in-phase energies E_S = 150.4 S^2 / (4 d^2)
    energy = HBAR2_2M * (math.pi * S / d) ** 2
    theta = math.degrees(math.acos(n_t[2]))  # incident beam along the terrace normal
    p = slab_pattern(
        slab, energy, (theta, 0.0), terrace=t, inner_potential=0.0, temperature=None, domains=False
    )
    row = np.array([k == 0 for _, k in p.hk])  # beams in the plane of incidence
    ht = p.terrace_hk[:, 0]
    assert np.allclose(p.terrace_hk[row, 1], 0.0, atol=1e-9)
    if float(S).is_integer():
        # in phase: one beam lies exactly on the terrace specular (terrace index (0, 0)), strongest nearby
        j = np.flatnonzero(row & (np.abs(ht) < 1e-9))
        assert len(j) == 1
        near = row & (np.abs(ht) < 0.9)  # between the neighbouring terrace rods
        assert p.intensity[j[0]] > 0.9 * p.intensity[near].sum()
    else:
        # out of phase: the terrace specular falls between two beams that share the intensity
        left = np.flatnonzero(row & (ht < 0) & (ht > -1))
        right = np.flatnonzero(row & (ht > 0) & (ht < 1))
        i1 = p.intensity[left[np.argmax(ht[left])]]
        i2 = p.intensity[right[np.argmin(ht[right])]]
        assert abs(i1 - i2) / (i1 + i2) < 0.1


# ----------------------------------------------------------------------------- sweeps
def test_parse_energies():
    assert np.allclose(parse_energies("40:44:2"), [40, 42, 44])
    assert np.allclose(parse_energies("100"), [100])
    assert np.allclose(parse_energies("50, 80"), [50, 80])
    # distinct energies in increasing order: "100,100" is one energy, not a sweep of two
    assert parse_energies("80,50,80").tolist() == [50.0, 80.0]
    assert parse_energies("100,100").tolist() == [100.0]
    for bad in ("a", "40:30:2", "40:50:0", "-5", "1:2", "1:1000000:0.001", "30000", "100:3000:10", "nan"):
        with pytest.raises(InputError):
            parse_energies(bad)


def test_sweep_positions_and_onsets():
    sw = pattern_sweep(np.arange(40.0, 201.0, 5.0), lattice=SQUARE, matrix=[[2, 0], [0, 1]], theta_max=50.0)
    # Source: grating equation sin(theta) = |g| / k with E = hbar^2 k^2 / 2m (Van Hove, Weinberg and Chan
    # 1986): onset E = hbar^2 |g|^2 / (2 m sin^2 theta_max) at normal incidence
    gnorm = np.linalg.norm(sw.base.g[sw.index], axis=1)
    assert np.allclose(sw.onset, HBAR2_2M * gnorm**2 / math.sin(math.radians(50)) ** 2)
    assert np.all(sw.onset <= 200.0)
    # positions versus energy agree with single-energy patterns
    for f in (0, 10, -1):
        single = superstructure_pattern(SQUARE, [[2, 0], [0, 1]], sw.energies[f])
        for j, hk in enumerate(sw.hk):
            if np.isfinite(sw.theta[f, j]):
                assert sw.theta[f, j] == pytest.approx(single.theta[single.index_of(*hk)], abs=1e-9)
    # a beam is within theta_max exactly from its onset on
    for j in range(len(sw.index)):
        inside = sw.theta[:, j] <= 50.0 + 1e-9
        assert np.array_equal(inside, sw.energies >= sw.onset[j] - 1e-9)


def test_sweep_intensities_match_single_energies():
    slab = _tag(fcc100("Cu", (2, 1, 4), vacuum=6.0), [[2, 0], [0, 1]])
    add_adsorbate(slab, "O", 1.0, (0.0, 0.0))
    energies = np.array([60.0, 90.0, 140.0])
    sw = pattern_sweep(energies, atoms=slab, incidence=(8.0, 20.0), temperature=None)
    for f, e in enumerate(energies):
        single = slab_pattern(slab, e, (8.0, 20.0), temperature=None)
        for j, hk in enumerate(sw.hk):
            if np.isfinite(sw.theta[f, j]):
                assert sw.intensity[f, j] == pytest.approx(single.intensity[single.index_of(*hk)], rel=1e-9)
    on = onset_energy(sw.base.g[sw.index], 90.0, (8.0, 20.0))
    assert np.allclose(sw.onset, on)


@pytest.mark.parametrize("miller", [(2, 1, 1), (5, 3, 3), (3, 3, 1)])
def test_terrace_lattice_from_the_slab_record(miller):
    from surfgeo.diffraction.pattern import terrace_lattice, terrace_normal
    from surfgeo.slab.bulk import bulk_crystal
    from surfgeo.slab.cut import surface_slab

    slab = surface_slab(bulk_crystal("Cu"), miller, layers=24)
    step = slab.info["surfgeo"]["step"]
    t = terrace_lattice(slab)
    n_t = terrace_normal(step)
    a = slab.info["surfgeo"]["bulk"]["a"]
    # Source: the (111) terrace of fcc is hexagonal with the nearest-neighbour distance a / sqrt2
    # (ASE reference_states lattice constant); its normal is tilted by the miscut angle
    assert np.linalg.norm(t, axis=1) == pytest.approx([a / math.sqrt(2)] * 2, rel=1e-6)
    cos = t[0] @ t[1] / np.prod(np.linalg.norm(t, axis=1))
    assert abs(cos) == pytest.approx(0.5, abs=1e-6)
    assert np.allclose(t @ n_t, 0.0, atol=1e-6)
    assert np.degrees(np.arccos(n_t[2])) == pytest.approx(step["miscut_deg"])
    # Source: Henzler, Surf. Sci. 19, 159 (1970) (from memory): at the in-phase energies, with the
    # incident beam along the terrace normal, the terrace specular is a beam (terrace index (0, 0))
    # that holds the intensity between the neighbouring terrace rods
    d = step["step_height"]
    azimuth = math.degrees(math.atan2(-n_t[1], -n_t[0]))
    for S in (4, 5):
        energy = HBAR2_2M * (math.pi * S / d) ** 2
        p = slab_pattern(slab, energy, (step["miscut_deg"], azimuth), inner_potential=0.0, temperature=None,
                         domains=False)
        th = p.terrace_hk
        plane = np.abs(th[:, 1]) < 1e-6  # beams in the plane of incidence
        j = np.flatnonzero(plane & (np.abs(th[:, 0]) < 1e-9))
        assert len(j) == 1
        near = plane & (np.abs(th[:, 0]) < 0.9)
        assert p.intensity[j[0]] > 0.9 * p.intensity[near].sum()
    assert "terrace_hk" in p.to_dict()["beams"][0]


def test_superstructure_object_and_wood_input():
    from surfgeo.lattice import Superstructure

    sup = Superstructure.from_wood(HEX, "(sqrt3 x sqrt3)R30")
    p = superstructure_pattern(sup, energy=120.0)
    q = superstructure_pattern(HEX, [[2, 1], [-1, 1]], 120.0)
    assert _labels(p) == _labels(q)
    # Common practice, no source: the (sqrt3 x sqrt3)R30 spots at (1/3, 1/3) in the 120 degree basis
    # (the matrix [[2, 1], [-1, 1]] is from sources.md)
    assert (F(1, 3), F(1, 3)) in _labels(p)


def test_integer_flags_are_computed_once_per_label_list():
    # a regression: output loops index pattern.integer[i] / pattern.order[i] per beam, and both were
    # rebuilt from the Fractions on every access (16000 beams took over a minute to print)
    p = superstructure_pattern(HEX, [[2, 0], [0, 1]], 400.0)
    flags = p.integer
    assert p.integer is flags and not flags.flags.writeable
    assert p.order is p.order
    # Common practice, no source: a label is integer order exactly when both indices are integers
    assert flags.tolist() == [h.denominator == 1 and k.denominator == 1 for h, k in p.hk]
    assert list(p.order) == ["integer" if f else "fractional" for f in flags]
    # a new label list is seen
    p.hk = [(F(1, 2), F(0))] + list(p.hk[1:])
    assert not p.integer[0] and p.order[0] == "fractional"


def test_extinction_is_judged_against_the_specular_beam_when_it_is_not_listed():
    # a regression: with only one beam on the screen, that beam was its own scale and a glide
    # extinction (1e-27 of the specular beam) was printed as an intensity
    from pathlib import Path

    from surfgeo.slab.model import build_model

    slab = build_model(Path(__file__).resolve().parents[1] / "structures" / "ni100_c_p4g.toml")
    narrow = slab_pattern(slab, 5.0, (40.0, 0.0), theta_max=20.0)
    assert [tuple(str(x) for x in hk) for hk in narrow.hk] == [("-1/2", "0")]
    full = slab_pattern(slab, 5.0, (40.0, 0.0))
    i00 = full.intensity[full.index_of(0, 0)]
    assert narrow.intensity_scale == pytest.approx(i00, rel=1e-12)
    assert full.intensity_scale == pytest.approx(i00, rel=1e-12)
    # Source: International Tables for Crystallography Vol. A, plane group p4g: h0 with h odd absent
    # in the (2x2) cell; in the kinematic sum also off normal incidence (kinematic.QUALITATIVE_NOTE)
    assert narrow.extinct.tolist() == [True]
    assert full.extinct[full.index_of("-1/2", 0)] and not full.extinct[full.index_of(0, 0)]
    assert narrow.intensity[0] <= 1e-20 * i00


def test_incommensurate_film_kept_in_the_record_is_named():
    # a regression: a film recorded but not built as atoms (incommensurate) left no trace in the
    # slab's pattern; the note now gives its matrix, whose beams are the film's
    from pathlib import Path

    from surfgeo.slab.model import build_model

    model = Path(__file__).resolve().parents[1] / "structures" / "pt111_graphene_incommensurate.toml"
    slab = build_model(model)
    p = slab_pattern(slab, 90.0)
    note = next(n for n in p.notes if "not among the atoms" in n)
    numbers = note.split("--matrix ")[1].split(" in this substrate basis")[0].split()
    M = np.array([float(x) for x in numbers]).reshape(2, 2)
    film = superstructure_pattern(p.lattice, M, 90.0)
    over = np.array([s == "overlayer" for s in film.source])
    gmin = np.min(np.linalg.norm(film.g[over], axis=1))
    # Common practice, no source: a hexagonal lattice of constant a has |b| = 4 pi / (sqrt(3) a); the
    # film of the model file has a = 2.46 A, rotated by 30 degrees against the substrate
    assert gmin == pytest.approx(4 * math.pi / (math.sqrt(3) * 2.46), rel=1e-5)
    first = film.g[over][np.isclose(np.linalg.norm(film.g[over], axis=1), gmin, rtol=1e-6)]
    sub = p.lattice.reciprocal[0]
    ang = np.degrees(np.arccos(np.clip(first @ sub / (np.linalg.norm(first, axis=1) * np.linalg.norm(sub)),
                                       -1, 1)))
    assert np.min(np.abs(((ang + 30) % 60) - 30)) == pytest.approx(30.0, abs=1e-3)


def test_azimuths_are_measured_from_a1():
    # the incidence azimuth and the exit azimuths refer to a1, also when a1 is not along +x
    c, s = math.cos(math.radians(30)), math.sin(math.radians(30))
    rotated = Lattice2D.from_vectors([2.55 * c, 2.55 * s], [-2.55 * s, 2.55 * c])
    p = superstructure_pattern(rotated, None, 100.0, (20.0, 0.0), theta_max=90.0)
    q = superstructure_pattern(SQUARE, None, 100.0, (20.0, 0.0), theta_max=90.0)
    a1 = rotated.a1 / np.linalg.norm(rotated.a1)
    spec = p.index_of(0, 0)
    # Common practice, no source (issue 5: azimuth measured from a1): the incident parallel momentum
    # k sin(theta) points along a1, and the specular beam leaves at azimuth 0 from a1
    assert p.k_parallel[spec] == pytest.approx(math.sqrt(100.0 / HBAR2_2M) * math.sin(math.radians(20)) * a1)
    assert p.phi[spec] == pytest.approx(0.0, abs=1e-9) or p.phi[spec] == pytest.approx(360.0)
    # the same physical pattern as for a1 along +x, turned by 30 degrees: same labels, angles
    assert _labels(p) == _labels(q)
    for hk in q.hk:
        i, j = p.index_of(*hk), q.index_of(*hk)
        assert p.theta[i] == pytest.approx(q.theta[j], abs=1e-9)
        assert (p.phi[i] - q.phi[j] + 180.0) % 360.0 - 180.0 == pytest.approx(0.0, abs=1e-9)
