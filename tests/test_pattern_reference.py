"""Relaxed against ideal patterns: surfgeo.diffraction.pattern.compare_slab_* and ``pattern --reference``."""

from __future__ import annotations

import json
import math

import ase.io
import numpy as np
import pytest
from ase import Atoms
from PIL import Image
from scipy import constants

from surfgeo.cli.main import main
from surfgeo.diffraction.pattern import (
    APPEARS,
    BOTH_EXTINCT,
    align_to_reference,
    compare_slab_patterns,
    compare_slab_sweeps,
    intensity_ratio,
)
from surfgeo.errors import StructureError
from surfgeo.slab.cut import surface_slab
from surfgeo.slab.relax import relax_layers

#: Real inner potential used throughout (eV).
V0 = 10.0


def _k_inside(energy_ev):
    """Wavenumber inside the crystal, 1/Angstrom, from CODATA constants (independent of surfgeo)."""
    e_joule = (np.asarray(energy_ev, dtype=float) + V0) * constants.e
    return np.sqrt(2.0 * constants.m_e * e_joule) / constants.hbar * 1e-10


def _layer_sum_specular(heights, depths, energy, mfp):
    """Kinematic specular (00) intensity at normal incidence of a stack of identical 1x1 layers,
    one atom per cell each: I = |sum_l exp(-D_l / lambda) exp(i q_z z_l)|^2 with q_z = 2 K.

    Source: Van Hove, Weinberg and Chan, Low-Energy Electron Diffraction (Springer 1986), the
    kinematic sum over layers; common scattering amplitude and Debye-Waller factor cancel in the
    ratio of two structures of the same atoms.
    """
    qz = 2.0 * _k_inside(energy)
    z = np.asarray(heights, dtype=float)
    d = np.asarray(depths, dtype=float)
    att = np.exp(-d / mfp) if math.isfinite(mfp) else np.ones_like(d)
    amp = (att[None, :] * np.exp(1j * np.outer(qz, z))).sum(axis=1)
    return np.abs(amp) ** 2


@pytest.fixture(scope="module")
def cu100_2x1():
    """Cu(100) (2x1) cell with an O atom on a top site: non-extinct fractional-order beams."""
    slab = surface_slab("Cu", (1, 0, 0), layers=4, size=(2, 1))
    top = slab.positions[:, 2].max()
    i_top = int(np.argmax(slab.positions[:, 2]))
    o = Atoms("O", positions=[slab.positions[i_top] + [0.0, 0.0, 1.8]])
    slab = slab + o
    assert slab.positions[:, 2].max() > top
    return slab


def _shuffled_plain(atoms, seed=3):
    """What a DFT code returns: other atom order, atoms wrapped into the cell, no surfgeo record."""
    rng = np.random.default_rng(seed)
    out = atoms[rng.permutation(len(atoms))]
    out.info = {}
    out.set_constraint()
    out.wrap(pbc=True)
    return out


# ----------------------------------------------------------------------------- API
def test_identical_positions_give_every_ratio_one(cu100_2x1):
    relaxed = _shuffled_plain(cu100_2x1)
    comp = compare_slab_patterns(relaxed, cu100_2x1, 110.0, (0.0, 0.0), inner_potential=V0)
    assert comp.matching["max_displacement_A"] < 1e-9
    assert [str(h) for h in comp.relaxed.hk] == [str(h) for h in comp.ideal.hk]
    assert np.array_equal(comp.relaxed.extinct, comp.ideal.extinct)
    r = comp.ratio
    live = ~comp.ideal.extinct
    assert live.sum() > 5 and np.any(~comp.relaxed.integer[live])  # fractional-order beams compared
    # Common practice, no source: the same structure gives the same intensities
    np.testing.assert_allclose(r[live], 1.0, rtol=1e-9)
    assert all(s in ("", BOTH_EXTINCT) for s in comp.status)
    assert np.all(np.isnan(r[~live]))


def test_two_layer_specular_follows_the_kinematic_phase():
    ideal = surface_slab("Cu", (1, 0, 0), layers=2)
    relaxed = relax_layers(ideal, "d12=-12%")
    z_i = np.sort(ideal.positions[:, 2])
    z_r = np.sort(relaxed.positions[:, 2])
    d_ideal, d_rel = z_i[1] - z_i[0], z_r[1] - z_r[0]
    assert d_rel == pytest.approx(0.88 * d_ideal)
    energies = [60.0, 95.0, 140.0]
    for mfp in (math.inf, 6.0):
        got = [
            compare_slab_patterns(relaxed, ideal, e, inner_potential=V0, attenuation=mfp, domains=False)
            for e in energies
        ]
        ratio = np.array([c.ratio[c.relaxed.index_of(0, 0)] for c in got])
        # Source: Van Hove, Weinberg and Chan 1986, kinematic sum of two layers:
        # I(00) ~ |1 + a exp(i q_z d)|^2, a = exp(-d / lambda), q_z = 2 sqrt(2 m (E + V0)) / hbar
        qz = 2.0 * _k_inside(energies)
        a_i = math.exp(-d_ideal / mfp)
        a_r = math.exp(-d_rel / mfp)
        want = (np.abs(1 + a_r * np.exp(1j * qz * d_rel)) ** 2
                / np.abs(1 + a_i * np.exp(1j * qz * d_ideal)) ** 2)
        np.testing.assert_allclose(ratio, want, rtol=1e-9)
        assert np.max(np.abs(want - 1.0)) > 0.2  # the contraction matters at these energies
        if math.isinf(mfp):
            # the same thing written as 1 + cos(q_z d) (no attenuation)
            cos_form = (1 + np.cos(qz * d_rel)) / (1 + np.cos(qz * d_ideal))
            np.testing.assert_allclose(ratio, cos_form, rtol=1e-9)


def test_six_layer_specular_against_the_layer_sum_and_the_sweep():
    ideal = surface_slab("Cu", (1, 0, 0), layers=6)
    relaxed = relax_layers(ideal, "d12=-8%,d23=3%")
    mfp = 8.0
    e = np.array([70.0, 120.0, 180.0])
    z_i = np.sort(ideal.positions[:, 2])
    z_r = np.sort(relaxed.positions[:, 2])
    want = (_layer_sum_specular(z_r, z_r.max() - z_r, e, mfp)
            / _layer_sum_specular(z_i, z_i.max() - z_i, e, mfp))
    # Source: Van Hove, Weinberg and Chan 1986, kinematic sum over layers (see _layer_sum_specular)
    single = np.array([
        (lambda c: c.ratio[c.relaxed.index_of(0, 0)])(
            compare_slab_patterns(relaxed, ideal, x, inner_potential=V0, attenuation=mfp)
        )
        for x in e
    ])
    np.testing.assert_allclose(single, want, rtol=1e-9)
    sweep = compare_slab_sweeps(relaxed, ideal, e, inner_potential=V0, attenuation=mfp, show_progress=False)
    j = [i for i, hk in enumerate(sweep.relaxed.hk) if hk == (0, 0)][0]
    np.testing.assert_allclose(sweep.relaxed.intensity[:, j] / sweep.ideal.intensity[:, j], want, rtol=1e-9)
    # (00) has no symmetry-equivalent partner: a group of its own
    assert [g for g in sweep.strongest() if j in g] == [[j]]


def test_sweep_of_identical_structures():
    ideal = surface_slab("Pt", (1, 1, 1), layers=4)
    energies = np.arange(50.0, 131.0, 10.0)
    comp = compare_slab_sweeps(_shuffled_plain(ideal), ideal, energies, show_progress=False)
    ok = np.isfinite(comp.mean_ratio)
    assert ok.any()
    np.testing.assert_allclose(comp.mean_ratio[ok], 1.0, rtol=1e-9)
    corr = comp.correlation()
    np.testing.assert_allclose(corr[np.isfinite(corr)], 1.0, rtol=1e-9)
    pr, pi = comp.peak_energies()
    np.testing.assert_array_equal(pr, pi)
    groups = comp.strongest()
    assert sorted(sum(groups, [])) == list(range(len(comp.relaxed.hk)))
    # Common practice, no source: on fcc(111) the six first-order beams fall into two sets of three
    # (threefold substrate, 3m), so in a kinematic sum they form two groups of equal curves
    first = [g for g in groups if tuple(comp.relaxed.hk[g[0]]) in {(1, 0), (0, 1), (-1, 0), (0, -1),
                                                                    (1, 1), (-1, -1)}]
    assert sorted(len(g) for g in first) == [3, 3]


def test_broken_symmetry_makes_extinct_beams_appear():
    ideal = surface_slab("Cu", (1, 0, 0), layers=3, size=(2, 1))
    relaxed = ideal.copy()
    top = np.flatnonzero(np.isclose(relaxed.positions[:, 2], relaxed.positions[:, 2].max()))
    assert len(top) == 2
    relaxed.positions[top[0], 0] += 0.08  # pairing in the top layer: no longer a 1x1 structure
    comp = compare_slab_patterns(relaxed, ideal, 100.0, domains=False)
    half = comp.relaxed.index_of("1/2", 0)
    # Common practice, no source: a (2x1) cell of a 1x1 structure gives no fractional-order intensity
    # (kinematic sum over the two equal halves cancels), a pairing distortion lifts that
    assert comp.ideal.extinct[half] and not comp.relaxed.extinct[half]
    assert comp.status[half] == APPEARS and math.isinf(comp.ratio[half])
    first = comp.change_groups(1)[0]
    assert comp.status[first[0]] == APPEARS
    data = comp.to_dict(top=3)["reference"]
    b = data["beams"][half]
    assert b["hk"] == ["1/2", "0"] and b["ratio"] is None and b["status"] == APPEARS and b["extinct"] is True
    assert data["largest_changes"][0]["status"] == APPEARS
    json.dumps(data)  # no inf or NaN reaches the JSON


def test_intensity_ratio_rules():
    r = intensity_ratio([10.0, 1e-14, 4.0, 1e-15, np.nan], [5.0, 2.0, 1e-13, 1e-16, 3.0])
    assert r[0] == 2.0 and r[1] == 0.0 and math.isinf(r[2]) and np.isnan(r[3]) and np.isnan(r[4])


def test_not_the_same_system_is_refused(cu100_2x1):
    other = cu100_2x1.copy()
    other.numbers[-1] = 6  # C instead of O
    with pytest.raises(StructureError, match="not the same system"):
        align_to_reference(other, cu100_2x1)
    with pytest.raises(StructureError, match="atoms"):
        align_to_reference(cu100_2x1[:-1], cu100_2x1)
    far = cu100_2x1.copy()
    far.positions[-1, 2] += 2.5
    with pytest.raises(StructureError, match="moved"):
        align_to_reference(far, cu100_2x1)


def test_aligned_copy_keeps_the_reference_record_and_frame(cu100_2x1):
    relaxed = cu100_2x1.copy()
    relaxed.positions[-1] += [0.05, -0.02, -0.1]
    # a rotated frame, as LAMMPS files have: the displacements stay the same
    rot = relaxed.copy()
    rot.rotate(30, "z", rotate_cell=True)
    rot.info = {}
    aligned, m = align_to_reference(rot, cu100_2x1)
    assert aligned.info["surfgeo"] == cu100_2x1.info["surfgeo"]
    np.testing.assert_allclose(aligned.positions, relaxed.positions, atol=1e-9)
    assert m["max_displacement_A"] == pytest.approx(math.sqrt(0.05**2 + 0.02**2 + 0.1**2))
    assert m["max_displacement_atom"] == len(relaxed) - 1


# ----------------------------------------------------------------------------- CLI
@pytest.fixture(scope="module")
def files(tmp_path_factory, cu100_2x1):
    d = tmp_path_factory.mktemp("relaxed")
    ideal = d / "ideal.extxyz"
    ase.io.write(ideal, cu100_2x1)
    relaxed = relax_layers(cu100_2x1, "d12=-6%")
    contcar = d / "CONTCAR"
    ase.io.write(contcar, _shuffled_plain(relaxed), format="vasp")
    same = d / "same.vasp"
    ase.io.write(same, _shuffled_plain(cu100_2x1, seed=5), format="vasp")
    extra = cu100_2x1 + Atoms("O", positions=[[1.0, 1.0, cu100_2x1.positions[:, 2].max() + 1.5]])
    bigger = d / "bigger.vasp"
    ase.io.write(bigger, extra, format="vasp")
    return {"ideal": ideal, "contcar": contcar, "same": same, "bigger": bigger}


def _run(capsys, *argv):
    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return status, out, err


def test_cli_single_energy_outputs(capsys, tmp_path, files):
    js, csv, png = tmp_path / "c.json", tmp_path / "c.csv", tmp_path / "c.png"
    status, out, err = _run(
        capsys, "pattern", files["contcar"], "--reference", files["ideal"], "--energy", "120",
        "--json", js, "--csv", csv, "--plot", png, "--top", "3", "--theta-max", "50",
    )
    assert status == 0, err
    assert "qualitative" in out and "largest changes" in out and "I_ideal" in out
    data = json.loads(js.read_text())
    ref = data["reference"]
    assert {"file", "relaxed_file", "matching", "domains", "beams", "largest_changes", "notes"} <= set(ref)
    assert ref["file"].endswith("ideal.extxyz") and ref["matching"]["method"] in ("index", "distance")
    assert len(ref["beams"]) == len(data["beams"]) and len(ref["largest_changes"]) <= 3
    for top, b in zip(data["beams"], ref["beams"], strict=True):
        assert top["hk"] == b["hk"]
        if b["ratio"] is not None:
            assert b["ratio"] == pytest.approx(top["intensity"] / b["intensity"], rel=1e-9)
            assert b["relative_change"] == pytest.approx(b["ratio"] - 1.0)
    # the (00) beam changes with d12 (kinematic layer phase), the contraction is not invisible
    spec = [b for b in ref["beams"] if b["hk"] == ["0", "0"]][0]
    assert abs(spec["relative_change"]) > 0.01
    assert any("qualitative" in n for n in ref["notes"])
    lines = csv.read_text().splitlines()
    assert lines[0].endswith(",intensity_reference,ratio") and len(lines) == len(data["beams"]) + 1
    with Image.open(png) as im:
        assert im.format == "PNG"


def test_cli_identical_structure_ratio_one(capsys, files):
    status, out, err = _run(
        capsys, "pattern", files["same"], "--reference", files["ideal"], "--energy", "90", "--json", "-",
    )
    assert status == 0, err
    ref = json.loads(out)["reference"]
    # the POSCAR keeps positions to about 1e-9 A, which moves weak beams by about 1e-9 relative
    assert ref["matching"]["max_displacement_A"] < 1e-7
    ratios = [b["ratio"] for b in ref["beams"] if b["status"] != BOTH_EXTINCT]
    assert ratios and ratios == pytest.approx([1.0] * len(ratios), rel=1e-6)
    assert {b["status"] for b in ref["beams"]} <= {"", BOTH_EXTINCT}


def test_cli_energy_range_compares_iv_curves(capsys, tmp_path, files):
    js, png = tmp_path / "iv.json", tmp_path / "iv.svg"
    status, out, err = _run(
        capsys, "pattern", files["contcar"], "--reference", files["ideal"], "--energy", "60:100:20",
        "--json", js, "--plot", png, "--top", "4", "--theta-max", "45",
    )
    assert status == 0, err
    assert "I(V) curves" in out and "qualitative" in out and "onset_eV" in out
    data = json.loads(js.read_text())
    ref = data["reference"]
    assert len(ref["strongest"]) <= 4 and all(isinstance(g, list) for g in ref["strongest"])
    b = ref["beams"][0]
    assert {"hk", "intensity", "mean_ratio", "correlation", "peak_eV_relaxed", "peak_eV_ideal"} <= set(b)
    assert len(b["intensity"]) == 3 and data["energy_eV"] == [60.0, 80.0, 100.0]
    assert png.read_text().lstrip().startswith("<?xml")


@pytest.mark.parametrize(
    "which, extra, words",
    [
        ("bigger", [], "not the same system"),
        ("contcar", ["--lattice", "square:2.55"], "leave out"),
        ("contcar", ["--max-shift", "0.01"], "moved"),
        ("contcar", ["--top", "0"], "--top"),
        ("contcar", ["--double-order", "1"], "double-order"),
    ],
)
def test_cli_refusals_one_sentence(capsys, tmp_path, files, which, extra, words):
    out_json = tmp_path / "out.json"
    status, _, err = _run(
        capsys, "pattern", files[which], "--reference", files["ideal"], "--energy", "100", *extra,
        "--json", out_json, "--plot", tmp_path / "out.png",
    )
    assert status == 2
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1 and words in err
    assert list(tmp_path.iterdir()) == []


def test_cli_reference_needs_the_relaxed_model(capsys, files):
    status, _, err = _run(capsys, "pattern", "--reference", files["ideal"], "--energy", "100")
    assert status == 2 and "MODEL" in err and "Traceback" not in err


def test_cli_model_file_reference_keeps_p4g_extinctions(capsys, tmp_path):
    from pathlib import Path

    from surfgeo.slab.model import build_model

    model = Path(__file__).resolve().parents[1] / "structures" / "ni100_c_p4g.toml"
    ideal = build_model(model)
    ni = np.flatnonzero(ideal.numbers == 28)
    top_ni = ni[np.isclose(ideal.positions[ni, 2], ideal.positions[ni, 2].max(), atol=0.05)]
    assert len(top_ni) == 4
    relaxed = ideal.copy()
    relaxed.positions[top_ni, 2] += 0.06  # the clock-rotated Ni layer moves out as a whole: p4g is kept
    contcar = tmp_path / "CONTCAR"
    ase.io.write(contcar, _shuffled_plain(relaxed), format="vasp")
    status, out, err = _run(
        capsys, "pattern", contcar, "--reference", model, "--energy", "120", "--theta-max", "40",
        "--json", "-",
    )
    assert status == 0, err
    data = json.loads(out)
    ref = {tuple(b["hk"]): b for b in data["reference"]["beams"]}
    # Source: International Tables for Crystallography Vol. A, plane group p4g: h0 with h = 2n and 0k with
    # k = 2n in the (2x2) cell, i.e. (1/2, 0), (0, 1/2) ... absent at normal incidence, in both structures
    for hk in [("1/2", "0"), ("0", "1/2"), ("-1/2", "0"), ("0", "-1/2")]:
        assert ref[hk]["status"] == BOTH_EXTINCT and ref[hk]["ratio"] is None
    assert ref[("1/2", "1/2")]["status"] == "" and ref[("1/2", "1/2")]["ratio"] != pytest.approx(1.0)
    # breaking the glide (one C atom moved along a1) lifts the extinction
    broken = ideal.copy()
    c0 = np.flatnonzero(broken.numbers == 6)[0]
    broken.positions[c0, 0] += 0.1
    comp = compare_slab_patterns(broken, ideal, 120.0, theta_max=40.0, domains=False)
    half = comp.relaxed.index_of("1/2", 0)
    assert comp.status[half] == APPEARS
