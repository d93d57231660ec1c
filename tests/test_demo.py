"""The demo end to end (fast mode) against the invented truth behind its synthetic data.

The pipeline runs once per module (fixture ``demo``) and writes its folder once (``folder``);
the tests read what came out. The truth (``surfgeo/data/demo/truth.json``) is what
``scripts/make_demo_data.py`` used to generate the images; the demo never reads it.
"""

from __future__ import annotations

import base64
import json
import math
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from surfgeo.cli.main import main
from surfgeo.errors import InputError, OutputExistsError
from surfgeo.workflows import demo as demo_mod
from surfgeo.workflows import report as report_mod
from surfgeo.workflows.demo import DEMO_DATA, SYNTHETIC_LABEL, amplitude_r_factor, run_demo

ROOT = Path(__file__).resolve().parent.parent
TRUTH = json.loads((DEMO_DATA / "truth.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def demo():
    return run_demo(fast=True, show_progress=False)


@pytest.fixture(scope="module")
def folder(demo, tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "result"
    return report_mod.write_demo_folder(demo, out, dpi=60)


# ------------------------------------------------------------------------- the shipped data
def test_shipped_data_is_small_labelled_and_in_step_with_the_models():
    files = [p for p in DEMO_DATA.rglob("*") if p.is_file()]
    assert sum(p.stat().st_size for p in files) < 400_000  # "a few hundred kB at most"
    scenario = json.loads((DEMO_DATA / "scenario.json").read_text(encoding="utf-8"))
    assert scenario["synthetic"] is True and "SYNTHETIC" in scenario["label"]
    assert TRUTH["synthetic"] is True
    for name in scenario["candidates"]:
        # the packaged copies are the models of structures/
        assert (DEMO_DATA / "models" / name).read_bytes() == (ROOT / "structures" / name).read_bytes()
    from PIL import Image

    for im in scenario["images"]:
        with Image.open(DEMO_DATA / im["file"]) as img:
            arr = np.asarray(img)
        assert arr.dtype == np.uint16 and arr.shape == (400, 400)


# ------------------------------------------------------------------------- the answer
def test_answer_is_the_invented_truth(demo):
    ans = demo.answer()
    assert ans["model_file"] == TRUTH["true_model"]
    assert ans["matrix"] == TRUTH["superstructure"]["matrix"]
    assert demo.best.rank == 1
    # the other two candidates are clearly worse on the intensities
    assert all(c.r_factor > 5 * demo.best.r_factor for c in demo.candidates[1:])


def test_positions_alone_cannot_separate_the_candidates(demo):
    # Common practice, no source (shared/sources.md): three-domain (2x1) on a hexagonal lattice gives
    # the spot positions of p(2x2); fcc and hcp hollows of one p(2x2) cell give the same positions.
    assert len(demo.position_groups) == 1 and len(demo.position_groups[0]) == 3
    assert demo.decided_by == "intensities"
    assert len({c.position_misfits for c in demo.candidates}) == 1


def test_indexing_finds_the_p2x2_positions(demo):
    for ix in demo.indexing:
        best = ix.candidates[0]
        same = [best.matrix.tolist()] + [d["matrix"] for d in best.indistinguishable_from]
        # p(2x2) = [[2, 0], [0, 2]] is the best or predicts the same spots as the best
        assert [[2, 0], [0, 2]] in same


def test_calibration_recovers_the_true_screen(demo):
    from surfgeo.measure.calibrate import linear_part
    from surfgeo.screen import screen_from_dict

    true = screen_from_dict(TRUTH["screen"])
    cal = demo.best.calibration.screen
    assert math.hypot(cal.centre_x - true.centre_x, cal.centre_y - true.centre_y) < 0.5
    assert cal.scale == pytest.approx(true.scale, rel=0.01)
    # orientation is fixed only modulo the lattice point group (6mm): some operation maps one onto the other
    L_true, L_cal = linear_part(true), linear_part(cal)
    ops = demo.lattice.point_group()
    assert min(np.abs(L_cal @ np.asarray(op.cartesian) - L_true).max() for op in ops) < 0.01


def test_energy_offset(demo):
    cal = demo.calibration
    true = TRUTH["energy_offset_eV"]
    # from positions: within three standard errors; refined on the intensities: within 0.2 eV
    assert abs(cal.energy_offset - true) < 3 * cal.uncertainties["energy_offset"]
    assert demo.best.energy_offset == pytest.approx(true, abs=0.2)


def test_detection_against_the_rendered_spots(demo):
    for im, truth in zip(demo.images, TRUTH["images"], strict=True):
        P = np.column_stack([im.spots.x, im.spots.y])
        real = [s for s in truth["spots"] if s["visible"] and s["snr"] >= 5]
        for s in real:
            assert np.min(np.hypot(P[:, 0] - s["x"], P[:, 1] - s["y"])) < 1.0
        allpos = np.array([[s["x"], s["y"]] for s in truth["spots"] + truth["stray_spots"]])
        for x, y in P:
            assert np.min(np.hypot(allpos[:, 0] - x, allpos[:, 1] - y)) < 2.0


def test_unexplained_spots_are_the_strays(demo):
    best = demo.best
    for fit, im, truth in zip(best.images, demo.images, TRUTH["images"], strict=True):
        strays = np.array([[s["x"], s["y"]] for s in truth["stray_spots"] if s["visible"]])
        u = np.column_stack([im.spots.x, im.spots.y])[fit.match.unexplained]
        assert len(u) == len(strays)
        for x, y in u:
            assert np.min(np.hypot(strays[:, 0] - x, strays[:, 1] - y)) < 1.5


def test_next_energy_map_lands_where_the_true_screen_puts_it(demo):
    from surfgeo.measure.calibrate import Calibration
    from surfgeo.measure.match import predict_spots
    from surfgeo.screen import screen_from_dict
    from surfgeo.slab.model import build_model

    true_screen = screen_from_dict(TRUTH["screen"]).with_params(shadow_radius=0.0)
    truth_slab = build_model(ROOT / "structures" / TRUTH["true_model"])
    truth_cal = Calibration(screen=true_screen, energy_offset=TRUTH["energy_offset_eV"])
    truth = predict_spots(truth_cal, demo.next_energy, truth_slab)
    true_px = truth.pixels[truth.visible]
    # compare where the demo's map can show spots: outside the gun shadow it found
    true_px = true_px[~demo.map_screen.in_shadow(true_px)]
    pred = demo.next_spots
    ours = pred.pixels[pred.visible]
    assert abs(len(ours) - len(true_px)) <= 2  # spots right at the rim may fall either side
    d = np.array([np.min(np.hypot(*(true_px - p).T)) for p in ours])
    assert np.median(d) < 0.7 and d.max() < 2.0


# ------------------------------------------------------------------------- the folder
class _Links(HTMLParser):
    def __init__(self):
        super().__init__()
        self.hrefs: list[str] = []
        self.images: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "a" and a.get("href"):
            self.hrefs.append(a["href"])
        if tag == "img" and a.get("src"):
            self.images.append(a["src"])

    def handle_data(self, data):
        self.text.append(data)


def test_report_and_figures_exist_and_are_not_trivial(folder):
    from PIL import Image

    assert set(folder.figures) == {"overlay_072eV.png", "overlay_118eV.png", "candidates.png",
                                   "spotmap_160eV.png", "slab.png"}
    for path in folder.figures.values():
        with Image.open(path) as img:
            img.load()
            arr = np.asarray(img.convert("L"), dtype=float)
        assert min(arr.shape) > 200
        assert arr.std() > 5.0  # not blank
    parser = _Links()
    parser.feed(folder.report.read_text(encoding="utf-8"))
    parser.close()
    for name in folder.figures:
        assert name in parser.hrefs
    embedded = [base64.b64decode(src.split(",", 1)[1]) for src in parser.images
                if src.startswith("data:image/png")]
    assert len(embedded) == len(folder.figures)
    assert {p.read_bytes() for p in folder.figures.values()} == set(embedded)
    text = " ".join(parser.text)
    assert SYNTHETIC_LABEL in text
    assert "R at 72 eV" in text and TRUTH["true_model"] in text


def test_results_json_and_files(folder):
    data = json.loads(folder.results.read_text(encoding="utf-8"))
    assert data["synthetic"] is True and data["label"] == SYNTHETIC_LABEL
    assert data["answer"]["model_file"] == TRUTH["true_model"]
    assert [c["rank"] for c in data["candidates"]] == [1, 2, 3]
    for p in folder.all_files():
        assert p.is_file() and p.stat().st_size > 0
    assert not [p for p in folder.folder.parent.iterdir() if p.name.startswith(".")]  # no temporary folders


def test_dft_input_reads_back_with_ase(folder, demo):
    import ase.io
    from ase.constraints import FixAtoms

    atoms = ase.io.read(folder.others["DFT input"], format="vasp")
    # Source: ASE's own POSCAR reader as an independent check of the export
    assert sorted(atoms.get_chemical_symbols()) == sorted(demo.best.slab.get_chemical_symbols())
    fixed = [c for c in atoms.constraints if isinstance(c, FixAtoms)]
    assert fixed and len(fixed[0].index) == 2 * 4  # two fixed Rh layers of the p(2x2) cell
    note = json.loads(folder.others["DFT note"].read_text(encoding="utf-8"))
    assert "starting point" in " ".join(note["caution"])


def test_failed_write_leaves_nothing(demo, tmp_path, monkeypatch):
    def broken(*args, **kwargs):
        raise RuntimeError("figure failed")

    monkeypatch.setattr(report_mod, "save_candidates", broken)  # after the overlays and spot lists
    with pytest.raises(RuntimeError):
        report_mod.write_demo_folder(demo, tmp_path / "out", dpi=40)
    assert list(tmp_path.iterdir()) == []


def test_output_folder_rules(tmp_path):
    existing = tmp_path / "taken"
    existing.mkdir()
    with pytest.raises(OutputExistsError):
        report_mod.check_output_folder(existing)
    with pytest.raises(InputError, match="not an earlier demo output"):
        report_mod.check_output_folder(existing, force=True)
    with pytest.raises(InputError, match="does not exist"):
        report_mod.check_output_folder(tmp_path / "missing" / "out")
    assert report_mod.default_folder(tmp_path).name == "surfgeo-demo"
    (tmp_path / "surfgeo-demo").mkdir()
    assert report_mod.default_folder(tmp_path).name == "surfgeo-demo-2"


# ------------------------------------------------------------------------- the command
def test_cli_writes_folder_and_summary(demo, tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(demo_mod, "run_demo", lambda **kw: demo)  # the pipeline itself ran in the fixture
    out = tmp_path / "run"
    assert main(["demo", "--fast", "--out", str(out), "--json", str(tmp_path / "r.json")]) == 0
    text = capsys.readouterr().out
    assert "answer" in text and TRUTH["true_model"] in text and "report.html" in text
    assert (out / "report.html").is_file()
    assert json.loads((tmp_path / "r.json").read_text())["answer"]["model_file"] == TRUTH["true_model"]
    # again without --force: refused in one sentence, exit 2, nothing changed
    before = sorted(p.name for p in out.iterdir())
    assert main(["demo", "--fast", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "already exists" in err and "Traceback" not in err and err.count("\n") == 1
    assert sorted(p.name for p in out.iterdir()) == before
    # with --force an earlier demo folder is replaced
    assert main(["demo", "--fast", "--out", str(out), "--force"]) == 0
    assert (out / "results.json").is_file()


def test_cli_default_folder_is_new_each_time(demo, tmp_path, monkeypatch, capsys):
    # Without --out the demo makes a new folder in the current directory and never reuses one.
    monkeypatch.setattr(demo_mod, "run_demo", lambda **kw: demo)
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--fast"]) == 0
    assert main(["demo", "--fast"]) == 0
    text = capsys.readouterr().out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["surfgeo-demo", "surfgeo-demo-2"]
    assert "files in surfgeo-demo/" in text and "files in surfgeo-demo-2/" in text
    # the screen line is the saved calibration (calibration.json), with its refined offset
    saved = json.loads((tmp_path / "surfgeo-demo" / "calibration.json").read_text())
    assert f"centre ({saved['centre_px'][0]:.1f}, {saved['centre_px'][1]:.1f}) px" in text
    assert f"energy offset {saved['energy_offset_eV']:+.2f} eV" in text


def test_cli_json_inside_the_folder_is_refused_before_running(tmp_path, monkeypatch, capsys):
    # '--json' naming the output folder (or a file in it) failed only after the whole run.
    def must_not_run(**kw):
        raise AssertionError("the demo ran")

    monkeypatch.setattr(demo_mod, "run_demo", must_not_run)
    out = tmp_path / "run"
    for target in (out, out / "extra.json"):
        assert main(["demo", "--fast", "--out", str(out), "--json", str(target)]) == 2
        err = capsys.readouterr().err
        assert "lies in the demo folder" in err and "Traceback" not in err and err.count("\n") == 1
    assert not out.exists()


def test_cli_refuses_to_replace_a_foreign_folder(tmp_path, capsys):
    other = tmp_path / "mine"
    other.mkdir()
    (other / "keep.txt").write_text("x")
    assert main(["demo", "--out", str(other), "--force"]) == 2
    err = capsys.readouterr().err
    assert "not an earlier demo output" in err and "Traceback" not in err
    assert (other / "keep.txt").read_text() == "x"


# ------------------------------------------------------------------------- the agreement factor
def test_amplitude_r_factor_definition():
    # Source: crystallographic R1 = sum |F_o - c F_c| / sum F_o on amplitudes F = sqrt(I)
    r, c = amplitude_r_factor([4.0, 1.0, 9.0], [1.0, 0.25, 2.25])
    assert r == pytest.approx(0.0, abs=1e-12) and c == pytest.approx(2.0)
    r, c = amplitude_r_factor([1.0, 0.0], [0.0, 1.0])  # nothing in common
    assert c == pytest.approx(0.0) and r == pytest.approx(1.0)
    # hand computation: F_m = (2, 1), F_p = (1, 1); c = 3/2; R = (0.5 + 0.5) / 3
    r, c = amplitude_r_factor([4.0, 1.0], [1.0, 1.0])
    assert c == pytest.approx(1.5) and r == pytest.approx(1.0 / 3.0)


def test_amplitude_r_factor_ignores_the_scale_and_negative_noise():
    rng = np.random.default_rng(5)
    m = rng.uniform(0.1, 10.0, 20)
    p = rng.uniform(0.1, 10.0, 20)
    r1, _ = amplitude_r_factor(m, p)
    r2, _ = amplitude_r_factor(37.0 * m, 0.01 * p)
    assert r1 == pytest.approx(r2)
    r3, _ = amplitude_r_factor(np.append(m, -5.0), np.append(p, 0.0))  # a slightly negative blank
    assert r3 == pytest.approx(r1)


def test_spot_map_carries_the_synthetic_label(demo, tmp_path, monkeypatch):
    import surfgeo.plot.spotmap as spotmap

    figures = []

    def keep(fig, path, force=False):
        figures.append(fig)

    monkeypatch.setattr(spotmap, "save_figure", keep)
    report_mod.save_spot_map(demo, tmp_path / "map.png")
    (fig,) = figures
    texts = [" ".join(t.get_text().split()) for t in fig.texts]
    assert any(t == " ".join(SYNTHETIC_LABEL.split()) for t in texts), texts
    # without a footer, the figure says nothing about synthetic data (the label comes from the demo)
    figures.clear()
    spotmap.plot_pattern(demo.next_pattern, tmp_path / "plain.png", screen=demo.map_screen)
    assert not any("SYNTHETIC" in t.get_text() for t in figures[0].texts)
