"""Matching measured spots to a candidate's prediction: the gated Hungarian assignment, the
report (matched, unexplained, absent with kinematic verdicts), residuals in px and 1/Angstrom.

Measured spots here are synthetic, made by surfgeo's own forward model."""

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from surfgeo.diffraction.electron import wavenumber
from surfgeo.diffraction.pattern import superstructure_pattern
from surfgeo.errors import InputError
from surfgeo.lattice import Lattice2D, Superstructure
from surfgeo.measure.calibrate import Calibration, fast_pixels
from surfgeo.measure.match import assign, match_spots, predict_spots
from surfgeo.measure.synthetic import synthetic_measurement


def brute_force(a, b, gate):
    """Best assignment by enumeration: most pairs within the gate, then least squared distance."""
    best = (0, 0.0)
    n, m = len(a), len(b)
    d2 = ((a[:, None, :] - b[None, :, :]) ** 2).sum(-1)
    for k in range(min(n, m), 0, -1):
        found = None
        for rows in itertools.combinations(range(n), k):
            for cols in itertools.permutations(range(m), k):
                if all(d2[r, c] <= gate * gate for r, c in zip(rows, cols, strict=True)):
                    cost = sum(d2[r, c] for r, c in zip(rows, cols, strict=True))
                    if found is None or cost < found:
                        found = cost
        if found is not None:
            return (k, found)
    return best


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.tuples(st.floats(0, 20), st.floats(0, 20)), min_size=1, max_size=5),
    st.lists(st.tuples(st.floats(0, 20), st.floats(0, 20)), min_size=1, max_size=5),
    st.floats(1.0, 8.0),
)
def test_assignment_is_optimal(meas, pred, gate):
    # Kuhn's Hungarian method solves the assignment problem exactly; checked against brute force.
    # Source: H. W. Kuhn, Naval Research Logistics Quarterly 2, 83 (1955)
    a, b = np.array(meas), np.array(pred)
    pairs, dist = assign(a, b, gate)
    assert np.all(dist <= gate + 1e-12)
    assert len(set(pairs[:, 0])) == len(pairs) and len(set(pairs[:, 1])) == len(pairs)
    k, cost = brute_force(a, b, gate)
    assert len(pairs) == k
    assert abs(float(np.sum(dist**2)) - cost) <= 1e-6 * max(1.0, cost)


def test_assignment_prefers_the_global_optimum_to_greedy_nearest():
    # measured 0 is nearest to predicted 0, but giving predicted 0 to measured 1 matches both
    a = np.array([[0.0, 0.0], [3.0, 0.0]])
    b = np.array([[2.0, 0.0], [-2.5, 0.0]])
    pairs, _ = assign(a, b, 2.6)
    assert sorted(map(tuple, pairs.tolist())) == [(0, 1), (1, 0)]
    with pytest.raises(InputError, match="gate"):
        assign(a, b, 0.0)


def test_predicted_spots_are_the_pattern_on_the_calibrated_screen():
    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(1, lattice=lat, matrix=[[3, 1], [-1, 2]], energy=130.0)
    cal = Calibration(screen=m.screen)
    pred = predict_spots(cal, m.energy, Superstructure(lat, [[3, 1], [-1, 2]]))
    pat = superstructure_pattern(lat, [[3, 1], [-1, 2]], m.energy)
    assert np.allclose(pred.pixels, m.screen.to_pixels(pat.k_parallel, m.energy), equal_nan=True)
    # (sqrt7 x sqrt7)R19.1 has two mirror domains on a hexagonal substrate.
    # Source: sources.md, Surface lattices and notation (Common practice)
    assert pred.n_domains == 2
    assert pred.visible.sum() == len(m.truth_px)


def test_report_with_the_true_calibration():
    m = synthetic_measurement(21, max_area=6, strays=(2, 4))
    cal = Calibration(screen=m.screen, rms_px=1.0)
    res = match_spots(m.spots, cal, m.energy, m.domains[0], m.lattice, gate_px=4.5)
    strays = np.flatnonzero(m.origin < 0)
    assert len(strays) >= 2  # the test below must see some
    # every stray spot, and nothing else, is unexplained
    assert set(res.unexplained.tolist()) == set(strays.tolist())
    assert len(res.pairs) == len(m.spots) - len(strays)
    # every matched pair is the spot's own beam
    truth_label = {i: m.truth_labels[m.origin[i]] for i in range(len(m.spots)) if m.origin[i] >= 0}
    for i, j in res.pairs:
        assert res.predicted.labels[j] == truth_label[i]
    # the absent spots are the missing (weak) ones and the merged ones
    seen = {m.origin[i] for i in range(len(m.spots)) if m.origin[i] >= 0}
    not_seen = {tuple(m.truth_labels[t]) for t in range(len(m.truth_px)) if t not in seen}
    assert {tuple(res.predicted.labels[j]) for j in res.absent} == not_seen
    assert all(v == "unknown" for v in res.verdicts)  # no atoms, no verdict
    assert res.rms_px < 2.0
    # the text numbers the unexplained spots from 1, as rows of the input, with their positions
    text = "\n".join(res.summary_lines())
    for i in strays:
        x, y = m.spots.positions[i]
        assert f"#{i + 1} ({x:.1f}, {y:.1f})" in text
    d = res.to_dict()
    assert d["matched_count"] == len(res.pairs) and len(d["absent"]) == len(res.absent)


def test_residuals_in_inverse_angstrom():
    # On the far screen r = scale sin(theta) = scale |k_par| / k, so a small shift dr of a spot
    # changes |k_par| by k dr / (scale cos(theta)); near the centre cos(theta) ~ 1.
    # Common practice, no source (derivative of the radial law)
    lat = Lattice2D.square(2.55)
    scr = Calibration(
        screen=synthetic_measurement(2, lattice=lat, matrix=[[1, 0], [0, 1]], energy=150.0).screen, rms_px=1.0
    )
    pred = predict_spots(scr, 150.0, None, lat)
    vis = np.flatnonzero(pred.visible & pred.integer)
    P = pred.pixels[vis] + [1.5, 0.0]
    res = match_spots(P, scr, 150.0, None, lat, gate_px=3.0, predicted=pred)
    assert len(res.pairs) == len(vis)
    k = wavenumber(150.0)
    th = np.arcsin(np.linalg.norm(pred.k_parallel[res.pairs[:, 1]], axis=1) / k)
    stretch = 1 + scr.screen.stretch
    expected = k * 1.5 / (scr.screen.scale * np.cos(th))
    got = np.linalg.norm(res.residual_k, axis=1)
    # between the two extremes of the ellipticity and of the direction of the shift
    assert np.all(got <= expected * 1.0001) and np.all(got >= expected * np.cos(th) / stretch * 0.999)
    assert np.allclose(np.linalg.norm(res.residual_px, axis=1), 1.5)


def test_glide_extinctions_are_reported_as_extinct():
    # Ni(100)-(2x2)p4g-C (clock reconstruction; model from the structure library): the glide
    # lines extinguish (h+1/2, 0) and (0, k+1/2) at normal incidence.
    # Source: International Tables for Crystallography Vol. A, plane group p4g (reflection
    # conditions h0: h = 2n, 0k: k = 2n in the 2x2 cell); Holland and Woodruff, Surf. Sci. 36,
    # 488 (1973) (From memory: survive multiple scattering)
    from surfgeo.slab.info import surface_info
    from surfgeo.slab.model import build_model

    atoms = build_model("structures/ni100_c_p4g.toml")
    lat = surface_info(atoms).lattice
    m = synthetic_measurement(3, lattice=lat, matrix=[[2, 0], [0, 2]], energy=120.0)
    cal = Calibration(screen=m.screen, rms_px=1.0)
    pred = predict_spots(cal, m.energy, atoms)
    assert pred.extinct is not None
    # the measurement shows what the model predicts: everything but the extinct beams
    keep = pred.visible & ~pred.extinct
    P = pred.pixels[keep]
    res = match_spots(P, cal, m.energy, atoms, gate_px=3.0, predicted=pred)
    assert len(res.unexplained) == 0
    labels = [pred.labels[j] for j in res.absent]
    assert labels and all(v == "extinct" for v in res.verdicts)
    for h, k in labels:
        assert (h.denominator == 2 and k.denominator == 1 and k == 0) or (
            k.denominator == 2 and h.denominator == 1 and h == 0
        )
    # drop a strong beam too: it is 'expected', not extinct
    strong = np.flatnonzero(keep)[np.argmax(pred.intensity[keep] * ~pred.integer[keep])]
    P2 = pred.pixels[np.setdiff1d(np.flatnonzero(keep), [strong])]
    res2 = match_spots(P2, cal, m.energy, atoms, gate_px=3.0, predicted=pred)
    verdict = dict(zip(res2.absent.tolist(), res2.verdicts, strict=True))
    assert verdict[int(strong)] == "expected"
    # drop the faintest non-extinct beam: 'weak' once its intensity is below weak_fraction times
    # the median intensity of the matched spots, 'expected' above
    faint = np.flatnonzero(keep)[np.argmin(np.where(pred.integer[keep], np.inf, pred.intensity[keep]))]
    P3 = pred.pixels[np.setdiff1d(np.flatnonzero(keep), [faint])]
    median = float(np.median(pred.intensity[np.setdiff1d(np.flatnonzero(keep), [faint])]))
    ratio = pred.intensity[faint] / median
    assert 0.05 < ratio < 0.9
    for fraction, expected in ((ratio * 1.1, "weak"), (ratio * 0.9, "expected")):
        res3 = match_spots(P3, cal, m.energy, atoms, gate_px=3.0, predicted=pred, weak_fraction=fraction)
        verdict = dict(zip(res3.absent.tolist(), res3.verdicts, strict=True))
        assert verdict[int(faint)] == expected


def test_summary_mentions_counts():
    m = synthetic_measurement(4, max_area=4)
    res = match_spots(m.spots, Calibration(screen=m.screen, rms_px=1.0), m.energy, m.domains[0], m.lattice)
    text = "\n".join(res.summary_lines())
    assert f"matched      {len(res.pairs)} spots" in text
    assert math.isfinite(res.rms_px) and math.isfinite(res.rms_k)
    assert res.gate_px == pytest.approx(3.5)


def test_fast_pixels_used_for_predictions_handles_non_emerging_beams():
    scr = Calibration(screen=synthetic_measurement(5).screen)
    px = fast_pixels(scr.screen, np.array([[100.0, 0.0]]), 50.0)
    assert np.all(np.isnan(px))


def test_refit_to_the_matched_spots_recovers_the_rim():
    # A calibration fitted to the first shell of integer spots of a 1024 px image extrapolates
    # badly to the rim: there, real fractional-order spots fell outside the gate and were called
    # unexplained. Refitting the screen to every matched spot and matching again explains them.
    from surfgeo.measure.calibrate import calibrate
    from surfgeo.measure.match import match_with_refit

    lat = Lattice2D.hexagonal(2.77)
    m = synthetic_measurement(5, lattice=lat, matrix=[[2, 1], [-1, 1]], energy=96.0, size=1024)
    sup = Superstructure(lat, [[2, 1], [-1, 1]])
    cal = calibrate(m.spots, lat, m.energy, m.nominal_screen)
    strays = set(np.flatnonzero(m.origin < 0).tolist())
    first = match_spots(m.spots, cal, m.energy, sup)
    assert set(first.unexplained.tolist()) > strays  # the defect this guards against
    res, refit = match_with_refit(m.spots, cal, m.energy, sup)
    assert set(res.unexplained.tolist()) == strays
    assert refit.n_refit >= len(first.pairs) and refit.n_matched == cal.n_matched
    # every pair is a spot with the beam that made it (labels agree only up to the lattice
    # symmetry the screen cannot fix, so compare where the truth put that beam)
    i, j = res.pairs.T
    assert np.all(np.linalg.norm(res.predicted.pixels[j] - m.truth_px[m.origin[i]], axis=1) < 1.0)
    # and the refitted screen puts the outermost beams closer to the truth than the first one
    r = np.linalg.norm(m.truth_px[m.origin[i]] - [m.screen.centre_x, m.screen.centre_y], axis=1)
    far = np.argsort(r)[-6:]
    k = res.predicted.k_parallel[j[far]]
    truth = m.truth_px[m.origin[i[far]]]
    before = np.linalg.norm(cal.to_pixels(k, m.energy) - truth, axis=1)
    after = np.linalg.norm(refit.to_pixels(k, m.energy) - truth, axis=1)
    assert after.max() < before.max() and after.max() < 1.0


def test_spots_on_masked_pixels_are_hidden_not_missing():
    from surfgeo.measure.match import masked_spots

    m = synthetic_measurement(4, max_area=4)
    cal = Calibration(screen=m.screen.with_params(shadow_radius=0.0, holder_deg=None), rms_px=1.0)
    pred = predict_spots(cal, m.energy, m.domains[0], m.lattice)
    usable = np.ones((m.screen.height, m.screen.width), dtype=bool)
    y, x = np.mgrid[0 : m.screen.height, 0 : m.screen.width]
    usable[np.hypot(x - m.screen.centre_x, y - m.screen.centre_y) < 30.0] = False  # a gun shadow
    r = np.linalg.norm(pred.pixels - [cal.screen.centre_x, cal.screen.centre_y], axis=1)
    inside = np.flatnonzero(pred.visible & (r < 29.0))
    hidden = masked_spots(pred, usable)
    assert set(inside.tolist()) <= set(hidden.tolist()) and len(inside) >= 1  # (00) at least
    res = match_spots(np.zeros((0, 2)), cal, m.energy, None, predicted=pred).with_hidden(hidden)
    verdict = dict(zip(res.absent.tolist(), res.verdicts, strict=True))
    assert all(verdict[int(j)] == "hidden" for j in hidden)
    assert sum(v == "hidden" for v in res.verdicts) == len(hidden)


# --------------------------------------------------------------------------- crystal azimuth
#: A synthetic test model: O in an fcc hollow and C on a top site of one Pt(111) p(2x2) cell.
#: Two adsorbates at different heights make the fractional-order intensities threefold, not sixfold
#: (with one adsorbate per cell, or all scatterers of the cell in one plane, the kinematic
#: fractional-order intensities obey I(g) = I(-g) and are sixfold).
TWO_ADSORBATE_MODEL = """# Synthetic test model (invented): not a claim about a real structure.
[model]
format = 1
name = "test: Pt(111)-p(2x2)-(O+C)"
description = "Synthetic: two adsorbates at different heights, a threefold (3m) pattern."
synthetic = true

[substrate]
crystal = "Pt"
face = [1, 1, 1]
layers = 4
vacuum = 10.0

[cell]
wood = "p(2x2)"

[[adsorbate]]
species = "O"
site = "fcc-hollow"
bond_length = 2.05

[[adsorbate]]
species = "C"
site = "top"
height = 1.85
"""


def _threefold_twin_measurement(energy: float, folder):
    """The test model turned by 60 degrees on the screen: the spots whose kinematic intensity
    clears a detection threshold (synthetic). Returns the model file too."""
    from surfgeo.measure.match import turn_prediction
    from surfgeo.slab.info import surface_info
    from surfgeo.slab.model import build_model

    path = folder / "pt111_two_adsorbates.toml"
    path.write_text(TWO_ADSORBATE_MODEL)
    atoms = build_model(path)
    lat = surface_info(atoms).lattice
    m = synthetic_measurement(3, lattice=lat, matrix=[[2, 0], [0, 2]], energy=energy)
    cal = Calibration(screen=m.screen, rms_px=1.0)
    ops = lat.point_group()
    turn60 = next(o for o in ops if o.is_rotation and abs(o.angle_deg - 60.0) < 1e-6)
    truth = turn_prediction(predict_spots(cal, energy, atoms), turn60, cal)
    vis = truth.visible & ~truth.extinct
    threshold = np.quantile(truth.intensity[vis], 0.5)  # the fainter half is not detected
    keep = vis & (truth.intensity >= threshold)
    # verdict 'weak' for exactly what fell below the detection threshold
    weak_fraction = 1.0001 * threshold / float(np.median(truth.intensity[keep]))
    return atoms, lat, cal, truth, keep, weak_fraction, path


@pytest.mark.parametrize("energy", [80.0, 140.0])
def test_a_threefold_model_turned_by_60_degrees_is_matched_in_its_own_orientation(energy, tmp_path):
    from surfgeo.measure.match import amplitude_r_factor, match_orientations, position_misfits

    atoms, lat, cal, truth, keep, wf, _ = _threefold_twin_measurement(energy, tmp_path)
    # an fcc(111) slab with adsorbates is threefold: its 60-degree twin has other intensities
    # Common practice, no source: fcc(111) surface point group 3m, lattice holohedry 6mm
    assert np.ptp(truth.intensity[keep]) > 0
    P = truth.pixels[keep]
    choice = match_orientations(P, cal, energy, atoms, intensities=truth.intensity[keep], gate_px=3.0,
                                weak_fraction=wf)
    assert len(choice.tried) == 12  # every operation of 6mm
    # the chosen azimuth has the R factor of the true crystal itself: the detected spots agree
    # exactly (same model), the undetected ones enter as measured zeros
    true_r, _ = amplitude_r_factor(np.where(keep, truth.intensity, 0.0)[truth.visible],
                                   truth.intensity[truth.visible])
    assert abs(choice.r_factor - true_r) < 1e-9
    assert choice.misfits == 0 and "expected" not in choice.result.verdicts
    assert set(choice.result.verdicts) <= {"weak", "extinct"}
    # ... and is the 60-degree twin class, not the model's own threefold class
    assert choice.label != "as modelled"
    assert abs(choice.tried["turned by 60 deg"][1] - true_r) < 1e-9
    assert choice.tried["as modelled"][1] > true_r + 0.05
    nxt = choice.runner_up()
    assert nxt is not None and (nxt[1] > 0 or nxt[2] > 0.05)
    assert "next best" in choice.summary()
    # without the search (the model as modelled), spots that are faint in the crystal are
    # predicted bright: wrong 'expected' verdicts, and misfits the search removes
    plain = match_spots(P, cal, energy, atoms, gate_px=3.0, weak_fraction=wf)
    assert plain.verdicts.count("expected") >= 3
    assert position_misfits(plain) > choice.misfits
    only_identity = match_orientations(P, cal, energy, atoms, gate_px=3.0, weak_fraction=wf,
                                       operations=lat.point_group()[:1])
    assert only_identity.label == "as modelled" and only_identity.result.verdicts == plain.verdicts


def test_orientations_tie_for_a_candidate_without_atoms():
    from surfgeo.measure.match import match_orientations

    m = synthetic_measurement(4, max_area=4)
    cal = Calibration(screen=m.screen, rms_px=1.0)
    choice = match_orientations(m.spots, cal, m.energy, m.domains[0], m.lattice)
    # positions of all domains are invariant under the lattice's point group: every orientation ties
    assert choice.label == "as modelled" and choice.runner_up() is None
    assert len({v for v in choice.tried.values()}) == 1
    assert "fit equally well" in choice.summary()


def test_cli_match_reports_the_orientation(tmp_path, capsys):
    import json

    from surfgeo.cli.main import main
    from surfgeo.io import dump_json

    energy = 80.0
    atoms, lat, cal, truth, keep, _, model = _threefold_twin_measurement(energy, tmp_path)
    rows = ["x,y,intensity"] + [f"{x:.4f},{y:.4f},{i:.6g}" for (x, y), i in
                                zip(truth.pixels[keep], truth.intensity[keep], strict=True)]
    (tmp_path / "spots.csv").write_text("\n".join(rows) + "\n")
    dump_json(cal.to_dict(), tmp_path / "screen.json")
    base = ["match", str(tmp_path / "spots.csv"), "--lattice", "Pt(111)", "--energy", "80",
            "--model", str(model), "--calibration", str(tmp_path / "screen.json")]
    assert main(base + ["--json", "-"]) == 0
    data = json.loads(capsys.readouterr().out)
    o = data["orientation"]
    assert o["chosen"] != "as modelled"
    assert abs(o["tried"]["turned by 60 deg"]["r_factor"] - o["r_factor"]) < 1e-12
    assert o["tried"]["as modelled"]["r_factor"] > o["r_factor"] + 0.05
    assert o["next_best"] is not None and o["next_best"]["r_factor"] > o["r_factor"]
    assert data["unexplained_count"] == 0 and data["matched_count"] == int(keep.sum())
    assert main(base) == 0
    out = capsys.readouterr().out
    assert "orientation  turned by" in out and "next best" in out
    assert main(base + ["--as-modelled", "--json", "-"]) == 0
    assert "orientation" not in json.loads(capsys.readouterr().out)
