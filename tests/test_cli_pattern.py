"""The ``surfgeo pattern`` command, run in-process."""

from __future__ import annotations

import json
import math

import ase.io
import numpy as np
import pytest
from ase.build import add_adsorbate, fcc100
from PIL import Image

from surfgeo.cli.main import main
from surfgeo.diffraction.electron import HBAR2_2M


@pytest.fixture()
def slab_file(tmp_path):
    slab = fcc100("Cu", (2, 1, 4), vacuum=6.0)
    add_adsorbate(slab, "O", 1.0, (0.0, 0.0))
    slab.info["surfgeo"] = {
        "surface_cell": (np.diag([0.5, 1.0]) @ slab.cell[:2, :2]).tolist(),
        "supercell_matrix": [[2, 0], [0, 1]],
    }
    slab.info.pop("adsorbate_info", None)
    path = tmp_path / "slab.extxyz"
    ase.io.write(path, slab)
    return path


def _run(capsys, *argv):
    status = main(list(argv))
    out, err = capsys.readouterr()
    return status, out, err


def test_help_has_a_worked_example(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["pattern", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "examples:" in out and "surfgeo pattern --lattice hex:2.77" in out
    assert "qualitative" in out and "--animate" in out and "sphere" in out


def test_worked_example_json_keys(capsys):
    status, out, err = _run(
        capsys, "pattern", "--lattice", "hex:2.77", "--wood", "(2x1)", "--energy", "80", "--json", "-"
    )
    assert status == 0, err
    data = json.loads(out)
    # The JSON keys specified for the command in issue 5 (a specification, not a physical fact)
    assert {"energy_eV", "basis", "beams"} <= set(data)
    assert data["energy_eV"] == 80.0
    assert set(data["basis"]) == {"a1", "a2"} and data["basis"]["a1"] == pytest.approx([2.77, 0.0])
    beams = {tuple(b["hk"]): b for b in data["beams"]}
    for b in data["beams"]:
        assert {"hk", "k_parallel", "theta_deg", "phi_deg", "order", "domains", "intensity"} <= set(b)
        assert all(isinstance(x, str) for x in b["hk"]) and len(b["hk"]) == 2
        assert b["intensity"] is None
        assert b["order"] in ("integer", "fractional")
    half = beams[("1/2", "0")]
    assert half["order"] == "fractional" and len(half["domains"]) == 1
    assert beams[("1", "0")]["domains"] == [0, 1, 2]
    # Common practice, no source: sin(theta) = |k_par| / k at normal incidence
    k = math.sqrt(80.0 / HBAR2_2M)
    assert math.sin(math.radians(half["theta_deg"])) == pytest.approx(np.linalg.norm(half["k_parallel"]) / k)
    assert len(data["domains"]) == 3


def test_text_output_states_the_caveats(capsys, slab_file):
    status, out, err = _run(capsys, "pattern", str(slab_file), "--energy", "120", "--incidence", "6,0")
    assert status == 0, err
    assert "qualitative" in out and "off-normal incidence is not a prediction" in out
    assert "intensity" in out and "domains     2" in out
    status, out, _ = _run(
        capsys, "pattern", "--lattice", "square:2.55", "--matrix", "2", "0", "0", "1", "--energy", "100"
    )
    assert status == 0 and "No atoms" in out


def test_slab_outputs(capsys, tmp_path, slab_file):
    js, csv, png = tmp_path / "p.json", tmp_path / "p.csv", tmp_path / "p.png"
    status, _, err = _run(
        capsys,
        "pattern",
        str(slab_file),
        "--energy",
        "100",
        "--json",
        str(js),
        "--csv",
        str(csv),
        "--plot",
        str(png),
        "--screen",
        "flat:size=400x300,shadow=10,holder=270",
    )
    assert status == 0, err
    data = json.loads(js.read_text())
    assert all(isinstance(b["intensity"], float) for b in data["beams"])
    assert {b["extinct"] for b in data["beams"]} <= {True, False}
    assert all("screen_xy" in b and "on_screen" in b for b in data["beams"])
    assert data["screen"]["model"] == "flat"
    lines = csv.read_text().splitlines()
    assert lines[0].startswith("energy_eV,h,k,order")
    assert len(lines) == len(data["beams"]) + 1
    with Image.open(png) as im:
        assert im.format == "PNG" and im.size[0] > 400
    svg = tmp_path / "p.svg"
    status, _, err = _run(
        capsys, "pattern", str(slab_file), "--energy", "100", "--plot", str(svg), "--view", "kspace"
    )
    assert status == 0, err
    assert svg.read_text().lstrip().startswith("<?xml")


def test_energy_sweep_outputs(capsys, tmp_path, slab_file):
    js, csv, png, gif = (tmp_path / n for n in ("s.json", "s.csv", "t.png", "a.gif"))
    status, out, err = _run(
        capsys,
        "pattern",
        str(slab_file),
        "--energy",
        "40:80:10",
        "--json",
        str(js),
        "--csv",
        str(csv),
        "--plot",
        str(png),
        "--animate",
        str(gif),
    )
    assert status == 0, err
    assert "onset_eV" in out
    data = json.loads(js.read_text())
    assert data["energy_eV"] == [40.0, 50.0, 60.0, 70.0, 80.0]
    b0 = data["beams"][0]
    assert len(b0["theta_deg"]) == 5 and len(b0["intensity"]) == 5 and "onset_eV" in b0
    assert csv.read_text().splitlines()[0].startswith("energy_eV,")
    with Image.open(gif) as im:
        assert im.format == "GIF" and im.n_frames == 5
    with Image.open(png) as im:
        assert im.format == "PNG"


def test_screen_from_a_calibration_file(capsys, tmp_path):
    cal = tmp_path / "cal.json"
    cal.write_text(
        json.dumps(
            {
                "model": "sphere",
                "centre_x": 100.0,
                "centre_y": 120.0,
                "scale": 150.0,
                "width": 200,
                "height": 240,
            }
        )
    )
    status, out, err = _run(
        capsys, "pattern", "--lattice", "square:2.55", "--energy", "90", "--screen", str(cal), "--json", "-"
    )
    assert status == 0, err
    data = json.loads(out)
    spec = [b for b in data["beams"] if b["hk"] == ["0", "0"]][0]
    assert spec["screen_xy"] == pytest.approx([100.0, 120.0])


@pytest.mark.parametrize(
    "argv, words",
    [
        (["--lattice", "hex:2.77", "--energy", "abc"], "energy"),
        (["--lattice", "hex:2.77", "--energy", "40:30:1"], "STOP"),
        (["--lattice", "hex:2.77", "--energy", "30000"], "at most 2000 eV"),
        (["--lattice", "hex:2.77", "--energy", "80", "--incidence", "95,0"], "polar angle"),
        (["--lattice", "hex:2.77", "--energy", "80", "--incidence", "10"], "THETA,PHI"),
        (["--energy", "80"], "--lattice"),
        (["--lattice", "hex:2.77", "--energy", "80", "--screen", "dome"], "screen model"),
        (["--lattice", "hex:2.77", "--energy", "80", "--screen", "sphere:accept=0"], "acceptance"),
        (["--lattice", "hex:2.77", "--energy", "80", "--animate", "OUT.gif"], "energy range"),
        (["--lattice", "hex:2.77", "--energy", "80", "--plot", "OUT.jpg"], ".png or .svg"),
        (
            ["--lattice", "hex:2.77", "--matrix", "2", "0", "0", "1", "--energy", "80", "--weights", "1,2"],
            "domain",
        ),
        (["--lattice", "hex:2.77", "--matrix", "1", "0", "0", "0", "--energy", "80"], "singular"),
        (["--lattice", "hex:2.77", "--wood", "(2x", "--energy", "80"], "Wood"),
        (["--lattice", "hex:2.77", "--energy", "80", "--theta-max", "0"], "theta-max"),
        (["--lattice", "cube:3", "--energy", "80"], "lattice"),
        (["MISSING.extxyz", "--energy", "80"], "does not exist"),
        (["MISSING.extxyz", "--lattice", "hex:2.77", "--energy", "80"], "not both"),
    ],
)
def test_bad_input_one_sentence_exit_2(capsys, tmp_path, argv, words):
    argv = [
        a.replace("OUT", str(tmp_path / "out")).replace("MISSING", str(tmp_path / "missing")) for a in argv
    ]
    status, out, err = _run(capsys, "pattern", *argv, "--json", str(tmp_path / "out.json"))
    assert status == 2
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1 and words.lower() in err.lower()
    assert not any(p.name.startswith("out") or p.name.startswith(".out") for p in tmp_path.iterdir())


def test_structure_without_record_or_cell(capsys, tmp_path):
    from ase import Atoms

    bare = tmp_path / "bare.xyz"
    ase.io.write(bare, Atoms("Cu2", positions=[[0, 0, 0], [1.2, 1.2, 1.5]]))
    out_json = str(tmp_path / "o.json")
    status, out, err = _run(capsys, "pattern", str(bare), "--energy", "100", "--json", out_json)
    # a regression: a note and then an error about "surface_cell rows" that did not name the file
    assert status == 2 and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1 and "bare.xyz" in err and "in-plane cell" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bare.xyz"]
    # a slab without the record but with a cell is taken as its own 1x1 cell, with a note
    slab = tmp_path / "cu.extxyz"
    cu = fcc100("Cu", (1, 1, 3), vacuum=5.0)
    cu.info.pop("adsorbate_info", None)
    ase.io.write(slab, cu)
    status, out, err = _run(capsys, "pattern", str(slab), "--energy", "100")
    assert status == 0 and "no surfgeo surface record" in err


def test_existing_output_needs_force(capsys, tmp_path):
    target = tmp_path / "beams.csv"
    target.write_text("keep me\n")
    status, _, err = _run(
        capsys, "pattern", "--lattice", "square:2.55", "--energy", "90", "--csv", str(target)
    )
    assert status == 2 and "--force" in err and "Traceback" not in err
    assert target.read_text() == "keep me\n"
    status, _, err = _run(
        capsys, "pattern", "--lattice", "square:2.55", "--energy", "90", "--csv", str(target), "--force"
    )
    assert status == 0, err
    assert target.read_text().startswith("energy_eV")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["beams.csv"]


def test_model_file_p4g_glide_extinctions(capsys):
    from pathlib import Path

    model = Path(__file__).resolve().parents[1] / "structures" / "ni100_c_p4g.toml"
    status, out, err = _run(
        capsys, "pattern", str(model), "--energy", "120", "--theta-max", "60", "--json", "-"
    )
    assert status == 0, err
    beams = {tuple(b["hk"]): b for b in json.loads(out)["beams"]}
    # Source: International Tables for Crystallography Vol. A, plane group p4g: h0 with h = 2n and 0k with
    # k = 2n in the (2x2) cell, i.e. (1/2, 0), (0, 1/2), (3/2, 0) ... absent at normal incidence
    for hk in [("1/2", "0"), ("0", "1/2"), ("-1/2", "0"), ("3/2", "0"), ("0", "-3/2")]:
        assert (
            beams[hk]["extinct"] is True and beams[hk]["intensity"] < 1e-10 * beams[("0", "0")]["intensity"]
        )
    for hk in [("1/2", "1/2"), ("1", "1/2"), ("1", "0")]:
        assert beams[hk]["extinct"] is False


def test_help_documents_the_reference_comparison(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["pattern", "--help"])
    assert exc.value.code == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "--reference IDEAL" in out and "surfgeo pattern CONTCAR --reference" in out
    # every key of the JSON reference block is named in the help
    for key in ("relaxed_file", "matching", "largest_changes", "relative_change", "status", "mean_ratio",
                "correlation", "peak_eV_relaxed", "peak_eV_ideal", "strongest", "intensity_reference"):
        assert key in out, key
    assert "qualitative for LEED" in out


def test_hidden_beams_say_why(capsys):
    # a regression: beams beyond the screen (here behind it, at 89 degrees incidence) were marked
    # "(shadow)", and "--theta-max 90" was reported as "within 90 deg of the screen axis"
    status, out, err = _run(capsys, "pattern", "--lattice", "hex:2.77", "--energy", "50",
                            "--incidence", "89,0", "--theta-max", "90")
    assert status == 0, err
    assert "emerge from the surface" in out and "within 90 deg" not in out
    spec = next(line for line in out.splitlines() if line.split()[:2] == ["0", "0"])
    assert spec.endswith("(off screen)")  # Common practice, no source: the specular beam leaves at 2 x 89 deg
    status, out, err = _run(capsys, "pattern", "--lattice", "hex:2.77", "--energy", "150", "--screen",
                            "sphere:shadow=30,holder=0")
    assert status == 0, err
    spec = next(line for line in out.splitlines() if line.split()[:2] == ["0", "0"])
    assert spec.endswith("(shadow)") and "(off screen)" not in out


def test_kspace_screen_edge_follows_the_gun_axis():
    # a regression: the spot map drew the acceptance as a circle about k_par = 0, which is right at
    # normal incidence only
    from surfgeo.plot.spotmap import acceptance_edge
    from surfgeo.screen import FarScreen

    for inc in [(0.0, 0.0), (25.0, 20.0), (60.0, 200.0)]:
        edge = acceptance_edge(120.0, 40.0, inc)
        ok = np.isfinite(edge[:, 0])
        assert ok.sum() > 100
        # Common practice, no source: every edge point is a beam 40 degrees from the screen (gun) axis
        ang = FarScreen().angle_from_axis(edge[ok], 120.0, inc)
        assert np.allclose(ang, 40.0, atol=1e-9)
        r = np.hypot(edge[ok, 0], edge[ok, 1])
        if inc[0] == 0:
            assert np.allclose(r, math.sqrt(120.0 / HBAR2_2M) * math.sin(math.radians(40.0)))
        else:
            assert r.max() - r.min() > 0.2 * r.max()


def test_csv_to_standard_output(capsys, tmp_path, monkeypatch):
    # a regression: "--csv -" wrote a file named "-"
    monkeypatch.chdir(tmp_path)
    status, out, err = _run(capsys, "pattern", "--lattice", "square:2.55", "--energy", "90", "--csv", "-")
    assert status == 0, err
    assert out.startswith("energy_eV,h,k,") and not (tmp_path / "-").exists()
    assert len(out.splitlines()) == 1 + sum(1 for line in out.splitlines()[1:] if line.startswith("90,"))
    status, _, err = _run(capsys, "pattern", "--lattice", "square:2.55", "--energy", "90", "--csv", "-",
                          "--json", "-")
    assert status == 2 and "standard output" in err and "Traceback" not in err
