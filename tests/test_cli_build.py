"""The ``surfgeo build`` command, called in-process."""

from __future__ import annotations

import json
import os

import ase.io
import numpy as np
import pytest

from surfgeo.cli.main import main


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def _one_sentence(err: str) -> None:
    assert "Traceback" not in err
    lines = [line for line in err.strip().splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("surfgeo build: error: ")


def test_build_extxyz_keeps_the_record(tmp_path, capsys):
    out = tmp_path / "pt111.extxyz"
    code, text, err = _run(capsys, "build", "--crystal", "Pt", "--miller", "1", "1", "1", "--layers", "5",
                           "--vacuum", "12", "-o", str(out))
    assert code == 0, err
    assert "hexagonal" in text and f"wrote {out}" in text
    atoms = ase.io.read(out)
    assert len(atoms) == 5
    rec = atoms.info["surfgeo"]
    assert rec["miller"] == [1, 1, 1] and rec["layers"] == 5
    assert np.allclose(rec["surface_cell"], atoms.cell[:2, :2])


def test_build_json_to_stdout_and_relaxation(tmp_path, capsys):
    out = tmp_path / "ru.extxyz"
    code, text, err = _run(capsys, "build", "--crystal", "Ru", "--miller", "1", "0", "-1", "0",
                           "--layers", "8", "--termination", "1", "--relax", "d12=-3%,d23=1.5%",
                           "-o", str(out), "--json", "-")
    assert code == 0, err
    data = json.loads(text)
    for key in ("surface_lattice", "layer_spacing", "atoms_per_layer", "layers", "step_notation",
                "terrace_width", "step_height", "miscut_deg"):
        assert key in data
    assert data["surface_lattice"]["kind"] == "rectangular"
    assert data["step_notation"] is None
    assert len(data["terminations"]) == 2 and data["termination"]["index"] == 1
    assert data["relaxations"][0]["changes"]["d12"]["value"] == -3.0


def test_build_steps_vasp_and_plot(tmp_path, capsys):
    out, png, js = tmp_path / "pt533.vasp", tmp_path / "pt533.png", tmp_path / "pt533.json"
    code, text, err = _run(capsys, "build", "--crystal", "Pt", "--steps", "4(111)x(100)", "--layers", "16",
                           "--size", "2", "1", "-o", str(out), "--plot", str(png), "--json", str(js))
    assert code == 0, err
    assert png.stat().st_size > 1000
    atoms = ase.io.read(out, format="vasp")
    assert len(atoms) == 32
    data = json.loads(js.read_text())
    assert data["step_notation"] == "4(111)×(100)"
    # Source: sources.md step notation; Common practice: miscut of (533) from (111) 14.42 degrees
    assert data["miscut_deg"] == pytest.approx(14.42, abs=0.01)
    assert data["terrace_width"] > 0 and data["step_height"] > 0


def test_build_compound_cif(tmp_path, capsys):
    out = tmp_path / "sto.cif"
    code, text, err = _run(capsys, "build", "--crystal", "SrTiO3", "--structure", "perovskite",
                           "--a", "3.905", "--miller", "1", "1", "0", "--symmetric", "-o", str(out))
    assert code == 0, err
    assert "polar" in text and "Tasker type 3" in text
    atoms = ase.io.read(out)
    assert sorted(set(atoms.get_chemical_symbols())) == ["O", "Sr", "Ti"]


def test_no_overwrite_without_force(tmp_path, capsys):
    out = tmp_path / "cu.extxyz"
    args = ["build", "--crystal", "Cu", "--miller", "1", "0", "0", "-o", str(out)]
    assert _run(capsys, *args)[0] == 0
    before = out.read_bytes()
    code, _, err = _run(capsys, *args, "--layers", "7")
    assert code == 2
    _one_sentence(err)
    assert "already exists" in err and "--force" in err
    assert out.read_bytes() == before
    assert _run(capsys, *args, "--layers", "7", "--force")[0] == 0
    assert len(ase.io.read(out)) == 7


BAD = [
    (["--crystal", "Cu", "--miller", "0", "0", "0"], "(0 0 0)"),
    (["--crystal", "Ru", "--miller", "1", "0", "1", "0"], "i = -(h + k)"),
    (["--crystal", "Xx", "--miller", "1", "1", "1"], "unknown chemical element"),
    (["--crystal", "Cu", "--miller", "1", "1", "1", "--relax", "d12=-120%"], "cross or touch"),
    (["--crystal", "Cu", "--miller", "1", "1", "1", "--relax", "d45=1%", "--layers", "3"], "only 3 layers"),
    (["--crystal", "Cu", "--miller", "1", "1"], "3 indices"),
    (["--crystal", "Cu"], "--miller"),
    (["--crystal", "Cu", "--miller", "1", "1", "1", "--steps", "4(111)x(100)"], "one of them"),
    (["--crystal", "Cu", "--steps", "4(111)x(123)"], "low-index microfacet"),
    (["--crystal", "NaCl", "--miller", "1", "0", "0"], "compound"),
    (["--miller", "1", "1", "1"], "--crystal"),
    (["--crystal", "Cu", "--miller", "1", "1", "1", "--layers", "0"], "layers"),
    (["--crystal", "Cu", "--miller", "3", "2", "1", "--rectangular"], "no rectangular cell"),
    (["--crystal", "Cu", "--miller", "1", "1", "1", "--charges", "Cu"], "--charges"),
    # Regression: --a 0.5 built Pt slabs with atoms 0.35 A apart (fcc nearest neighbours a/sqrt2)
    (["--crystal", "Pt", "--a", "0.5", "--miller", "1", "1", "1"], "two Pt atoms 0.35 A apart"),
    (["--crystal", "Pt", "--miller", "1", "1", "1", "--orthogonal", "--vacuum", "0.2"], "a vacuum of 0.2 A"),
]


@pytest.mark.parametrize("args,phrase", BAD, ids=[" ".join(a) for a, _ in BAD])
def test_bad_input_exit_2_one_sentence_no_output(tmp_path, capsys, args, phrase):
    out = tmp_path / "slab.extxyz"
    js = tmp_path / "slab.json"
    code, text, err = _run(capsys, "build", *args, "-o", str(out), "--json", str(js))
    assert code == 2
    _one_sentence(err)
    assert phrase in err
    assert os.listdir(tmp_path) == []  # nothing written, no temporary files left


def test_bad_structure_file(tmp_path, capsys):
    bad = tmp_path / "bad.cif"
    bad.write_text("garbage that is not a CIF\n")
    out = tmp_path / "slab.extxyz"
    code, _, err = _run(capsys, "build", "--crystal", str(bad), "--miller", "1", "1", "1", "-o", str(out))
    assert code == 2
    _one_sentence(err)
    assert "cannot read" in err and str(bad) in err
    assert sorted(os.listdir(tmp_path)) == ["bad.cif"]


def test_bad_output_names(tmp_path, capsys):
    code, _, err = _run(capsys, "build", "--crystal", "Cu", "--miller", "1", "1", "1",
                        "-o", str(tmp_path / "slab.unknownext"))
    assert code == 2
    _one_sentence(err)
    assert "format" in err
    code, _, err = _run(capsys, "build", "--crystal", "Cu", "--miller", "1", "1", "1",
                        "-o", str(tmp_path / "s.extxyz"), "--plot", str(tmp_path / "s.jpg"))
    assert code == 2 and ".png or .svg" in err
    code, _, err = _run(capsys, "build", "--crystal", "Cu", "--miller", "1", "1", "1",
                        "-o", str(tmp_path / "nodir" / "s.extxyz"))
    assert code == 2 and "does not exist" in err
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("name", ["slab.png", "slab.SVG", "slab.jpg", "slab.pdf", "slab.pov", "slab.html",
                                  "slab.gif"])
def test_picture_endings_are_refused_for_the_structure(tmp_path, capsys, name):
    # Regression: -o slab.png wrote ASE's picture of the slab as the "structure" output.
    code, _, err = _run(capsys, "build", "--crystal", "Cu", "--miller", "1", "1", "1",
                        "-o", str(tmp_path / name))
    assert code == 2
    _one_sentence(err)
    assert "not a structure file" in err and "--plot slab.png" in err
    assert os.listdir(tmp_path) == []


def test_colliding_output_names_leave_nothing(tmp_path, capsys):
    out = tmp_path / "s.extxyz"
    code, _, err = _run(capsys, "build", "--crystal", "Cu", "--miller", "1", "1", "1", "-o", str(out),
                        "--json", str(out))
    assert code == 2
    _one_sentence(err)
    assert "-o and --json name the same file" in err
    assert os.listdir(tmp_path) == []


def test_help_has_a_worked_example(capsys):
    with pytest.raises(SystemExit):
        main(["build", "--help"])
    out = capsys.readouterr().out
    assert "examples:" in out and "surfgeo build --crystal Pt" in out


def test_model_file_or_crystal_not_both(tmp_path, capsys):
    code, _, err = _run(capsys, "build", str(tmp_path / "m.toml"), "--crystal", "Cu",
                        "--miller", "1", "1", "1", "-o", str(tmp_path / "s.extxyz"))
    assert code == 2
    _one_sentence(err)
    assert "not both" in err


def test_model_file_refuses_a_vacuum_it_would_ignore(tmp_path, capsys):
    # Regression: --vacuum had the default 10, so a --vacuum given with a MODEL file could not be
    # told from the default and was silently ignored (the model's own vacuum was used).
    from pathlib import Path

    model = Path(__file__).resolve().parent.parent / "structures" / "pt111_o_p2x2.toml"
    out = tmp_path / "m.extxyz"
    code, _, err = _run(capsys, "build", str(model), "-o", str(out), "--vacuum", "20")
    assert code == 2
    _one_sentence(err)
    assert "--vacuum cannot be combined with a MODEL file" in err
    assert os.listdir(tmp_path) == []


def test_model_file_builds_when_supported(tmp_path, capsys):
    pytest.importorskip("surfgeo.slab.model")
    from pathlib import Path

    models = sorted((Path(__file__).resolve().parent.parent / "structures").glob("*.toml"))
    if not models:
        pytest.skip("no model files in structures/")
    out = tmp_path / "m.extxyz"
    code, text, err = _run(capsys, "build", str(models[0]), "-o", str(out), "--relax", "d12=-1%")
    assert code == 0, err
    assert ase.io.read(out).info["surfgeo"]["relaxations"][-1]["changes"]["d12"]["value"] == -1.0


def test_slab_figure_marks_adsorbates_by_element():
    # Regression: adsorbates were drawn like substrate atoms (shaded by depth only), so CO on the
    # step edge of Pt(533) could not be told from Pt in the picture.
    from pathlib import Path

    from surfgeo.plot.slab import slab_figure
    from surfgeo.slab.model import build_model

    model = Path(__file__).resolve().parent.parent / "structures" / "pt533_co_step_edge.toml"
    fig = slab_figure(build_model(model), title="test")
    top, side = fig.axes[0], fig.axes[1]
    labels = [t.get_text() for t in top.get_legend().get_texts()]
    assert "adsorbate C" in labels and "adsorbate O" in labels
    assert [t.get_text() for t in side.get_legend().get_texts()] == ["adsorbate C", "adsorbate O"]
    import matplotlib.pyplot as plt

    plt.close(fig)
