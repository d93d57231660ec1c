"""Model files: strict validation, reproducible builds, the record of the source file."""

from __future__ import annotations

import hashlib
import io
import shutil
from pathlib import Path

import ase.io
import numpy as np
import pytest

from surfgeo.errors import FileFormatError
from surfgeo.slab.adsorbates import coverage
from surfgeo.slab.model import build_model, load_model
from surfgeo.slab.sites import find_sites

GOOD = """\
# a synthetic test model
[model]
name = "test: O on Cu(100)"
synthetic = true

[provenance]
proposed_by = "tests"

[substrate]
crystal = "Cu"
face = [1, 0, 0]
layers = 4
vacuum = 10.0

[cell]
wood = "c(2x2)"

[[adsorbate]]
species = "O"
site = "fourfold-hollow"
height = 0.8
"""


def _write(tmp_path: Path, text: str, name: str = "model.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _extxyz_bytes(atoms) -> bytes:
    buf = io.StringIO()
    ase.io.write(buf, atoms, format="extxyz")
    return buf.getvalue().encode()


def test_build_records_the_model_and_is_byte_identical(tmp_path):
    p = _write(tmp_path, GOOD)
    a = build_model(p)
    b = build_model(p)
    assert _extxyz_bytes(a) == _extxyz_bytes(b)
    other = tmp_path / "elsewhere"
    other.mkdir()
    shutil.copy(p, other / p.name)
    assert _extxyz_bytes(build_model(other / p.name)) == _extxyz_bytes(a)
    rec = a.info["surfgeo"]["model"]
    assert rec["file"] == "model.toml"
    assert rec["sha256"] == hashlib.sha256(p.read_bytes()).hexdigest()
    assert rec["synthetic"] is True and rec["provenance"] == {"proposed_by": "tests"}
    assert coverage(a) == {"O": 1 / 2}
    # the record survives the extxyz file
    back = ase.io.read(io.StringIO(_extxyz_bytes(a).decode()), format="extxyz")
    assert back.info["surfgeo"]["model"]["sha256"] == rec["sha256"]
    assert "built from the model file model.toml" in back.info["surfgeo"]["provenance"][-1]


def test_changed_file_changes_the_record(tmp_path):
    a = build_model(_write(tmp_path, GOOD))
    b = build_model(_write(tmp_path, GOOD.replace("height = 0.8", "height = 0.9"), "m2.toml"))
    assert a.info["surfgeo"]["model"]["sha256"] != b.info["surfgeo"]["model"]["sha256"]
    assert not np.allclose(a.positions, b.positions)


BAD = [
    # (change to the good file, words the message must contain)
    (("[substrate]", "[substrate]\nlayer = 5"), ["substrate.layer", "not a known field", "layers"]),
    (('site = "fourfold-hollow"', 'site = "fourfold-hollow"\nheigth = 1.0'),
     ["adsorbate[0].heigth", "valid fields"]),
    (("layers = 4", 'layers = "four"'), ["substrate.layers", "whole number"]),
    (("layers = 4", "layers = 0"), ["substrate.layers", "at least 1"]),
    (("face = [1, 0, 0]", "face = [1, 0]"), ["substrate.face", "3 or 4 whole numbers"]),
    (("vacuum = 10.0", "vacuum = -1.0"), ["substrate.vacuum", "at least 0"]),
    (('site = "fourfold-hollow"', 'site = "fcc-hollow"'),
     ["adsorbate[0]", "no site 'fcc-hollow'", "fourfold-hollow"]),
    (("height = 0.8", "height = 0.8\nbond_length = 2.0"),
     ["adsorbate[0]", "exactly one of height, bond_length"]),
    (("height = 0.8", "height = -1.5"), ["adsorbate[0]", "apart"]),
    (('[cell]\nwood = "c(2x2)"', '[cell]\nwood = "c(2x2)"\nmatrix = [[1, 0], [0, 1]]'),
     ["cell", "exactly one of"]),
    (('wood = "c(2x2)"', 'wood = "(1.5 x 1.5)"'), ["cell.wood", "not commensurate"]),
    (('crystal = "Cu"', 'crystal = "Qx"'), ["substrate.crystal"]),
    (('[model]\nname = "test: O on Cu(100)"', '[model]\nname = "x"\nformat = 2'),
     ["model.format", "must be 1"]),
    (('[model]\nname = "test: O on Cu(100)"', "[model]"), ["model.name", "required"]),
    (("[[adsorbate]]", "[extra]\n[[adsorbate]]"), ["extra", "not a known field of the file"]),
    (("synthetic = true", "synthetic = 1"), ["model.synthetic", "true or false"]),
    (("face = [1, 0, 0]", "face = [1, 0, 0"), ["not valid TOML", "line"]),
]


@pytest.mark.parametrize("change,words", BAD, ids=[w[0] for _, w in BAD])
def test_bad_model_files_name_file_and_field(tmp_path, change, words):
    old, new = change
    assert old in GOOD
    p = _write(tmp_path, GOOD.replace(old, new, 1))
    with pytest.raises(FileFormatError) as info:
        build_model(p)
    msg = str(info.value)
    assert msg.startswith(str(p) + ":"), msg
    for w in words:
        assert w in msg, (w, msg)
    assert "\n" not in msg and msg.endswith(".")


def test_reconstruction_and_overlayer_validation(tmp_path):
    base = GOOD.split("[cell]")[0]
    cases = [
        ('[reconstruction]\nkind = "missing-row"\n', ["reconstruction", "[[reconstruction]]"]),
        ('[[reconstruction]]\nkind = "swirl"\n', ["reconstruction[0].kind", "missing-row"]),
        ('[[reconstruction]]\nkind = "clock-rotation"\n', ["reconstruction[0]", "angle, displacement"]),
        ('[[reconstruction]]\nkind = "clock-rotation"\nangle = 5\ncentres = [[0.5, 0.5, 2]]\n',
         ["reconstruction[0].centres[0]", "sense"]),
        ('[[reconstruction]]\nkind = "missing-row"\nremove = [[7]]\n', ["reconstruction[0]", "row 7"]),
        ('[[reconstruction]]\nkind = "substitution"\nelement = "Zz"\n', ["reconstruction[0].element"]),
        ('[[overlayer]]\nlattice = "hex:2.5"\n', ["overlayer[0].basis", "required"]),
        ('[[overlayer]]\nlattice = "hexa:2.5"\nbasis = [["C", 0, 0]]\n', ["overlayer[0].lattice"]),
        ('[[overlayer]]\nlattice = "square:2.55"\nbasis = [["C", 0, 0]]\nheight = 0.1\n',
         ["checks", "apart"]),
    ]
    for text, words in cases:
        p = _write(tmp_path, base + text)
        with pytest.raises(FileFormatError) as info:
            build_model(p)
        msg = str(info.value)
        for w in words:
            assert w in msg, (w, msg)


def test_min_distance_check(tmp_path):
    p = _write(tmp_path, GOOD + "\n[checks]\nmin_distance = 2.0\n")
    with pytest.raises(FileFormatError, match=r"checks.min_distance failed: atoms .* from adsorbate\[0\]"):
        build_model(p)


def test_adsorbate_from_a_structure_file(tmp_path):
    ase.io.write(tmp_path / "oh.xyz", ase.Atoms("OH", positions=[(0, 0, 0), (0, 0, 0.97)]))
    text = GOOD.replace('species = "O"', 'file = "oh.xyz"')
    s = build_model(_write(tmp_path, text))
    assert s.get_chemical_symbols()[-2:] == ["O", "H"]
    assert s.positions[-1, 2] > s.positions[-2, 2]  # upright: H above O
    p = _write(tmp_path, GOOD.replace('species = "O"', 'file = "missing.xyz"'), "m3.toml")
    with pytest.raises(FileFormatError, match=r"adsorbate\[0\].file names .*missing.xyz"):
        build_model(p)


def test_missing_and_unreadable_files(tmp_path):
    with pytest.raises(FileFormatError, match="does not exist"):
        build_model(tmp_path / "nope.toml")
    p = tmp_path / "bin.toml"
    p.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(FileFormatError, match="not UTF-8"):
        load_model(p)


def test_stepped_substrate_and_sites(tmp_path):
    text = """
[model]
name = "steps"
[substrate]
crystal = "Pt"
steps = "4(111)x(100)"
layers = 12
[[adsorbate]]
species = "O"
site = "step-edge-bridge"
which = "all"
bond_length = 2.0
"""
    s = build_model(_write(tmp_path, text))
    assert s.info["surfgeo"]["step"] is not None
    # the only step-edge bridge of the cell is taken: the class is gone unless asked for
    assert "step-edge-bridge" not in find_sites(s).names
    assert find_sites(s, include_occupied=True).get("step-edge-bridge").multiplicity == 1
    assert "step-edge-hcp-hollow" in find_sites(s).names
    bad = text.replace("layers = 12", "layers = 12\ntermination = 1")
    with pytest.raises(FileFormatError, match="substrate.termination cannot be used with substrate.steps"):
        build_model(_write(tmp_path, bad, "b.toml"))


# ---------------------------------------------------------------------------- command line
def test_cli_build_model(tmp_path, capsys):
    from surfgeo.cli.main import main

    p = _write(tmp_path, GOOD)
    out = tmp_path / "slab.extxyz"
    assert main(["build", str(p), "-o", str(out)]) == 0
    first = out.read_bytes()
    out2 = tmp_path / "slab2.extxyz"
    assert main(["build", str(p), "-o", str(out2)]) == 0
    assert out2.read_bytes() == first
    assert hashlib.sha256(p.read_bytes()).hexdigest().encode() in first


def test_cli_bad_model_exits_2_without_output(tmp_path, capsys):
    from surfgeo.cli.main import main

    p = _write(tmp_path, GOOD.replace('site = "fourfold-hollow"', 'site = "hcp-hollow"'))
    out = tmp_path / "slab.extxyz"
    capsys.readouterr()
    assert main(["build", str(p), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert str(p) in err and "adsorbate[0]" in err and "hcp-hollow" in err
    assert len(err.strip().splitlines()) == 1
    assert not out.exists()
    assert list(tmp_path.iterdir()) == [p]


# ---------------------------------------------------------------------------- documentation
DOC = Path(__file__).resolve().parent.parent / "docs" / "model-file.md"


def test_every_field_is_documented_and_the_example_builds(tmp_path):
    from surfgeo.slab import model as m

    doc = DOC.read_text(encoding="utf-8")
    tables = [m.MODEL_FIELDS, m.PROVENANCE_FIELDS, m.SUBSTRATE_FIELDS, m.CELL_FIELDS, m.CHECKS_FIELDS,
              m.ADSORBATE_FIELDS, m.OVERLAYER_FIELDS] + [f for f, _, _ in m.RECON_FIELDS.values()]
    for fields in tables:
        for name in fields:
            assert f"| `{name}` |" in doc or f"| `{name}`, " in doc or f", `{name}` |" in doc, name
    for kind in m.RECONSTRUCTION_KINDS:
        assert f'`kind = "{kind}"`' in doc
    example = doc.split("```toml\n")[-1].split("```")[0]
    s = build_model(_write(tmp_path, example, "example.toml"))
    assert s.info["surfgeo"]["reconstructions"][0]["plane_group"] == "p4g"


def test_documented_error_example(tmp_path):
    p = _write(tmp_path, GOOD.replace('site = "fourfold-hollow"', 'site = "fourfold-hollow"\nheigth = 1'))
    with pytest.raises(FileFormatError) as info:
        build_model(p)
    doc = DOC.read_text(encoding="utf-8")
    shown = ("adsorbate[0].heigth is not a known field of [adsorbate[0]]; valid fields are species, "
             "file, site,")
    assert shown in str(info.value) and shown in doc


def test_cli_model_refuses_face_options(tmp_path, capsys):
    from surfgeo.cli.main import main

    p = _write(tmp_path, GOOD)
    out = tmp_path / "slab.extxyz"
    assert main(["build", str(p), "--miller", "1", "1", "1", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "--miller cannot be combined with a MODEL file" in err and not out.exists()
