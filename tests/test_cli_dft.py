"""The `export` and `relaxations` commands, and reading structure files (surfgeo.io.structures)."""

from __future__ import annotations

import json

import ase.io
import numpy as np
import pytest
from ase.build import add_adsorbate, fcc111

from surfgeo.cli.main import main
from surfgeo.errors import FileFormatError
from surfgeo.io.structures import parse_frame, read_structure
from surfgeo.slab.relaxations import analyse_relaxation


def _slab(with_o=True):
    slab = fcc111("Pt", (2, 2, 4), a=3.92, vacuum=7.5)
    if with_o:
        add_adsorbate(slab, "O", 1.2, "fcc")
    slab.info.pop("adsorbate_info", None)
    return slab


@pytest.fixture
def files(tmp_path):
    ref = _slab()
    ref.info["surfgeo"] = {"provenance": ["synthetic Pt(111)-O test model"], "bulk": {"formula": "Pt"}}
    ase.io.write(tmp_path / "ref.extxyz", ref)
    rel = ref.copy()
    rel.positions[ref.get_tags() == 1, 2] += 0.03
    rel.positions[-1, 2] -= 0.1
    rel = rel[np.random.default_rng(2).permutation(len(rel))]
    rel.pbc = True
    rel.wrap()
    ase.io.write(tmp_path / "CONTCAR", rel, format="vasp", direct=True)
    return tmp_path


def _one_sentence_error(err: str) -> None:
    assert "Traceback" not in err
    lines = [line for line in err.strip().splitlines() if line]
    assert len(lines) == 1 and "error:" in lines[0]


# ----------------------------------------------------------------------------- export
def test_export_writes_input_and_note(files, capsys):
    out = files / "POSCAR"
    argv = ["export", str(files / "ref.extxyz"), str(out), "--fix-bottom", "2", "--kspacing", "0.2"]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "k-point mesh" in text and "dipole correction advised" in text and "starting point" in text
    back = ase.io.read(out)
    assert len(back.constraints[0].get_indices()) == 8
    note = json.loads((files / "POSCAR.note.json").read_text())
    assert note["provenance"] == ["synthetic Pt(111)-O test model"]
    assert note["kpoints"]["spacing"] == 0.2


def test_export_json_to_stdout(files, capsys):
    assert main(["export", str(files / "ref.extxyz"), str(files / "s.cif"), "--no-note", "--json", "-"]) == 0
    captured = capsys.readouterr()
    note = json.loads(captured.out)
    assert note["format"] == "cif" and "k-point mesh" in captured.err
    assert not (files / "s.cif.note.json").exists()


def test_export_refuses_to_overwrite(files, capsys):
    out = files / "POSCAR"
    out.write_text("previous run")
    assert main(["export", str(files / "ref.extxyz"), str(out)]) == 2
    _one_sentence_error(capsys.readouterr().err)
    assert out.read_text() == "previous run"
    assert not (files / "POSCAR.note.json").exists()
    assert main(["export", str(files / "ref.extxyz"), str(out), "--force"]) == 0
    assert len(ase.io.read(out)) == 17


@pytest.mark.parametrize("argv, phrase", [
    (["OUT.weird"], "cannot tell the export format"),
    (["OUT.vasp", "--fix-middle", "1"], "not symmetric"),
    (["OUT.vasp", "--fix-bottom", "9"], "cannot fix the bottom 9 layers"),
    (["OUT.vasp", "--kspacing", "-1"], "spacing"),
    (["OUT.pwi", "--pseudo", "Pt"], "SYMBOL=FILE"),
])
def test_export_bad_input(files, capsys, argv, phrase):
    argv = [str(files / argv[0]), *argv[1:]]
    assert main(["export", str(files / "ref.extxyz"), *argv]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert phrase in err
    assert not list(files.glob("OUT*"))  # nothing written


@pytest.mark.parametrize("json_name", ["OUT.vasp", "OUT.vasp.note.json"])
def test_export_json_on_the_output_or_the_note_leaves_nothing(files, capsys, json_name):
    # Regression: the structure and the note were written before --json was refused.
    argv = ["export", str(files / "ref.extxyz"), str(files / "OUT.vasp"), "--json", str(files / json_name)]
    assert main(argv) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "name the same file" in err
    assert not list(files.glob("OUT*"))


def test_relaxations_json_and_plot_on_the_same_file_leave_nothing(files, capsys):
    # Regression: the JSON was written into r.png and then the figure was refused.
    same = files / "r.png"
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--json", str(same), "--plot", str(same)]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "--json and --plot name the same file" in err
    assert not same.exists()


# ----------------------------------------------------------------------------- relaxations
def test_relaxations_table_json_and_figure(files, capsys):
    js, png = files / "r.json", files / "r.png"
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--json", str(js), "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    assert "d12" in out and "fcc hollow" in out
    data = json.loads(js.read_text())
    # the command line gives the same numbers as the Python API
    api = analyse_relaxation(ase.io.read(files / "ref.extxyz"), ase.io.read(files / "CONTCAR"))
    assert data["spacings"][0]["delta"] == pytest.approx(api.spacings[0].delta, abs=1e-12)
    # Source: the applied displacements (top layer +0.03 A, O -0.1 A).
    assert data["spacings"][0]["delta"] == pytest.approx(0.03, abs=1e-6)
    assert data["adsorbates"][0]["height"] == pytest.approx(1.2 - 0.13, abs=1e-6)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_relaxations_json_to_stdout_and_svg(files, capsys):
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--json", "-", "--plot", str(files / "r.svg"), "--adsorbates", "O"]) == 0
    captured = capsys.readouterr()
    assert json.loads(captured.out)["matching"] == "distance"
    assert (files / "r.svg").read_text().lstrip().startswith("<?xml")


def test_relaxations_wrong_system_leaves_nothing(files, capsys):
    small = _slab(with_o=False)
    ase.io.write(files / "small.extxyz", small)
    js, png = files / "r.json", files / "r.png"
    assert main(["relaxations", str(files / "small.extxyz"), "--reference", str(files / "ref.extxyz"),
                 "--json", str(js), "--plot", str(png)]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "16 atoms but the reference has 17" in err
    assert not js.exists() and not png.exists()
    other = _slab()
    other.symbols[-1] = "C"
    ase.io.write(files / "other.extxyz", other)
    assert main(["relaxations", str(files / "other.extxyz"), "--reference", str(files / "ref.extxyz")]) == 2
    assert "not the same system" in capsys.readouterr().err


@pytest.mark.parametrize("extra, phrase", [
    (["--layer-tol", "-1"], "layer tolerance must be a positive height"),
    (["--layer-tol", "0"], "layer tolerance must be a positive height"),
    (["--max-shift", "-1"], "largest allowed displacement must be a positive distance"),
])
def test_relaxations_bad_tolerances_are_user_errors(files, capsys, extra, phrase):
    # Regression: --layer-tol -1 ended in an internal error (ZeroDivisionError, exit 1) and a
    # negative --max-shift was accepted and then quoted as "more than the -1 A allowed".
    js = files / "r.json"
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--json", str(js), *extra]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert phrase in err
    assert not js.exists()


def test_export_negative_layer_tolerance_is_refused(files, capsys):
    # Regression: --layer-tol -1 put every atom in a layer of its own, so --fix-bottom 1 quietly
    # fixed a single atom instead of the bottom layer.
    out = files / "OUT.vasp"
    argv = ["export", str(files / "ref.extxyz"), str(out), "--fix-bottom", "1", "--layer-tol", "-1"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "layer tolerance must be a positive height" in err
    assert not list(files.glob("OUT*"))


def test_relaxations_unreadable_and_missing_files(files, capsys):
    (files / "notes.txt").write_text("this is not a structure\n")
    assert main(["relaxations", str(files / "notes.txt"), "--reference", str(files / "ref.extxyz")]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "notes.txt" in err
    (files / "broken.vasp").write_text("title\n1.0\n1 0 0\n")
    assert main(["relaxations", str(files / "broken.vasp"), "--reference", str(files / "ref.extxyz")]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "cannot read" in err and "broken.vasp" in err
    assert main(["relaxations", str(files / "nope"), "--reference", str(files / "ref.extxyz")]) == 2
    assert "does not exist" in capsys.readouterr().err
    # Regression: an unknown --format was answered with "cannot tell the format ...; name the ASE
    # format with --format", as if none had been given.
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--format", "bogus"]) == 2
    err = capsys.readouterr().err
    _one_sentence_error(err)
    assert "'bogus' is not a format ASE can read" in err


def test_relaxations_refuses_existing_outputs(files, capsys):
    js = files / "r.json"
    js.write_text("{}")
    assert main(["relaxations", str(files / "CONTCAR"), "--reference", str(files / "ref.extxyz"),
                 "--json", str(js)]) == 2
    _one_sentence_error(capsys.readouterr().err)
    assert js.read_text() == "{}"


def test_frames_of_a_trajectory(files, capsys):
    ref = ase.io.read(files / "ref.extxyz")
    frames = []
    for k in range(3):
        f = ref.copy()
        f.positions[ref.get_tags() == 1, 2] += 0.01 * (k + 1)
        frames.append(f)
    ase.io.write(files / "traj.extxyz", frames)
    traj = files / "traj.extxyz"
    # Regression (test honesty): atom 0 is a bottom-layer atom, equal in every frame, so comparing
    # it could not tell the frames apart; compare a top-layer atom, which moves 0.01 A per frame.
    top = int(np.nonzero(ref.get_tags() == 1)[0][0])
    heights = [f.positions[top, 2] for f in frames]
    assert min(np.diff(heights)) > 0.009
    assert read_structure(traj).positions[top, 2] == pytest.approx(heights[2], abs=1e-9)
    assert read_structure(traj, 0).positions[top, 2] == pytest.approx(heights[0], abs=1e-9)
    assert read_structure(traj, -2).positions[top, 2] == pytest.approx(heights[1], abs=1e-9)
    for bad in (3, -4):
        with pytest.raises(FileFormatError, match="holds 3 frame"):
            read_structure(files / "traj.extxyz", bad)
    assert main(["relaxations", str(files / "traj.extxyz"), "--frame", "0", "--reference",
                 str(files / "ref.extxyz"), "--json", "-"]) == 0
    data = json.loads(capsys.readouterr().out)
    # Source: the displacement applied to frame 0 (top layer up by 0.01 A)
    assert data["spacings"][0]["delta"] == pytest.approx(0.01, abs=1e-6)
    assert main(["relaxations", str(files / "traj.extxyz"), "--frame", "7", "--reference",
                 str(files / "ref.extxyz")]) == 2
    _one_sentence_error(capsys.readouterr().err)


def test_parse_frame_and_empty_files(tmp_path):
    assert parse_frame("last") == -1 and parse_frame("first") == 0 and parse_frame("3") == 3
    with pytest.raises(Exception, match="whole number"):
        parse_frame("x")
    (tmp_path / "empty.xyz").write_text("")
    with pytest.raises(FileFormatError, match="is empty"):
        read_structure(tmp_path / "empty.xyz")
    with pytest.raises(FileFormatError, match="is a folder"):
        read_structure(tmp_path)


def test_export_then_relaxations_round_trip(files, capsys):
    """The theorist's loop without the DFT run: export, 'relax' the exported file, read it back."""
    assert main(["export", str(files / "ref.extxyz"), str(files / "POSCAR"), "--fix-bottom", "2"]) == 0
    capsys.readouterr()
    start = ase.io.read(files / "POSCAR")
    relaxed = start.copy()
    free = ~np.isin(np.arange(len(start)), start.constraints[0].get_indices())
    relaxed.positions[free, 2] -= 0.02
    ase.io.write(files / "CONTCAR2", relaxed, format="vasp", direct=True)
    assert main(["relaxations", str(files / "CONTCAR2"), "--reference", str(files / "ref.extxyz"),
                 "--json", "-"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["fixed_atoms"] == 8 and data["fixed_max_displacement"] == pytest.approx(0.0, abs=1e-9)
    dz = {x["number"]: x["dz"] for x in data["layers"]}
    # Source: the displacement applied above (free atoms down by 0.02 A, fixed layers unmoved)
    assert dz[1] == pytest.approx(-0.02, abs=1e-9) and dz[4] == pytest.approx(0.0, abs=1e-9)
