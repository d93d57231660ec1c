"""The ``surfgeo notation`` command, run in-process."""

import json

import pytest

from surfgeo.cli.main import main


def run(argv, capsys):
    rc = main(argv)
    out, err = capsys.readouterr()
    return rc, out, err


def test_readme_example(capsys):
    rc, out, err = run(["notation", "--lattice", "hex:2.77", "(sqrt3 x sqrt3)R30"], capsys)
    assert rc == 0 and err == ""
    # Source: shared/sources.md, [[2,1],[-1,1]] = (sqrt3 x sqrt3)R30 on the 120 degree basis
    assert "[[2, 1], [-1, 1]]" in out
    assert "(√3×√3)R30°" in out and "(sqrt3xsqrt3)R30" in out
    assert "120 degree hexagonal basis" in out
    assert "commensurate" in out
    assert "domains      1" in out


def test_json_to_stdout_has_exactly_the_keys(capsys):
    rc, out, err = run(["notation", "--lattice", "square:2.55", "--matrix", "1", "1", "-1", "1",
                        "--json", "-"], capsys)
    assert rc == 0
    data = json.loads(out)  # stdout holds only the JSON
    assert list(data) == ["matrix", "wood", "wood_all", "determinant", "kind", "domains"]
    # Source: shared/sources.md: [[1,1],[-1,1]] = c(2x2) = (sqrt2 x sqrt2)R45 on a square lattice
    assert data["matrix"] == [[1, 1], [-1, 1]]
    assert data["wood"] == "c(2×2)"
    assert "(√2×√2)R45°" in data["wood_all"]
    assert data["determinant"] == 2 and data["kind"] == "commensurate" and data["domains"] == 1


def test_json_file_and_domains(tmp_path, capsys):
    dest = tmp_path / "sqrt7.json"
    rc, out, err = run(["notation", "--lattice", "hex:2.77", "(√7×√7)R19.1°", "--json", str(dest)], capsys)
    assert rc == 0
    data = json.loads(dest.read_text(encoding="utf-8"))
    # Source: shared/sources.md: (sqrt7 x sqrt7)R19.1 = [[3,1],[-1,2]], two domains on 6mm
    assert data["matrix"] == [[3, 1], [-1, 2]] and data["domains"] == 2 and data["determinant"] == 7
    assert "(√7×√7)R19.1°" in out


def test_no_wood_form_and_incommensurate(capsys):
    rc, out, _ = run(["notation", "--lattice", "square:2.55", "--matrix", "2", "1", "-1", "3", "--json", "-"],
                     capsys)
    assert rc == 0 and json.loads(out)["wood"] is None and json.loads(out)["wood_all"] == []
    rc, out, _ = run(["notation", "--lattice", "square:2.55", "--matrix", "2", "1", "-1", "3"], capsys)
    assert "no Wood form" in out
    rc, out, _ = run(["notation", "--lattice", "hex:2.77", "(1.5x1.5)R15", "--json", "-"], capsys)
    data = json.loads(out)
    assert data["kind"] == "incommensurate" and data["wood"] == "(1.5×1.5)R15°"
    rc, out, _ = run(["notation", "--lattice", "hex:2.77", "--matrix", "1/2", "0", "0", "0.5", "--json", "-"],
                     capsys)
    assert json.loads(out)["kind"] == "coincidence" and json.loads(out)["matrix"] == [[0.5, 0], [0, 0.5]]


def test_hex60_basis_is_labelled(capsys):
    rc, out, _ = run(["notation", "--lattice", "hex60:2.77", "--matrix", "2", "0", "0", "1"], capsys)
    assert rc == 0
    assert out.count("60 degree hexagonal basis") >= 2  # substrate line and matrix line


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml")])
def test_plot(tmp_path, capsys, suffix, magic):
    dest = tmp_path / f"cell{suffix}"
    argv = ["notation", "--lattice", "hex:2.77", "--matrix", "3", "1", "-1", "2", "--plot", str(dest)]
    rc, _, err = run(argv, capsys)
    assert rc == 0, err
    assert dest.read_bytes().startswith(magic)


def test_help_has_a_worked_example(capsys):
    with pytest.raises(SystemExit) as info:
        main(["notation", "--help"])
    assert info.value.code == 0
    out = capsys.readouterr().out
    assert "examples:" in out and 'surfgeo notation --lattice hex:2.77 "(sqrt3 x sqrt3)R30"' in out


BAD = [
    (["(2x)"], "lacks scale factor q"),
    (["2x1"], "malformed"),
    (["(2x1)-O"], "adsorbate"),
    (["(2x1)R"], "malformed"),
    (["(0x1)"], "positive"),
    (["--matrix", "1", "2", "2", "4"], "singular"),
    (["--matrix", "1", "2", "3"], "four numbers"),
    (["--matrix", "1", "0", "0", "1", "(2x1)"], "four numbers"),
    (["--matrix", "a", "0", "0", "1"], "not a number"),
    (["--matrix", "1/0", "0", "0", "1"], "divides by zero"),
    ([], "give the superstructure"),
    (["--lattice", "hex:-2.77", "(2x1)"], "positive"),
    (["--lattice", "square:0", "(2x1)"], "positive"),
    (["--lattice", "cubic:3", "(2x1)"], "unknown lattice kind"),
    (["--lattice", "rect:2.5", "(2x1)"], "parameter"),
    (["--lattice", "hex2.77", "(2x1)"], "KIND:PARAMS"),
]


@pytest.mark.parametrize("extra, phrase", BAD)
def test_bad_input_is_one_sentence_and_exit_2(tmp_path, capsys, extra, phrase):
    dest = tmp_path / "out.json"
    argv = ["notation"]
    if "--lattice" not in extra:
        argv += ["--lattice", "hex:2.77"]
    argv += extra + ["--json", str(dest)]
    rc, out, err = run(argv, capsys)
    assert rc == 2
    assert err.startswith("surfgeo notation: error: ")
    assert err.strip().count("\n") == 0 and "Traceback" not in err
    assert phrase in err
    assert not dest.exists()
    assert list(tmp_path.iterdir()) == []


def test_existing_output_is_not_overwritten_without_force(tmp_path, capsys):
    dest = tmp_path / "out.json"
    dest.write_text("keep", encoding="utf-8")
    rc, _, err = run(["notation", "--lattice", "hex:2.77", "(2x1)", "--json", str(dest)], capsys)
    assert rc == 2 and "--force" in err and "Traceback" not in err
    assert dest.read_text(encoding="utf-8") == "keep"
    rc, _, _ = run(["notation", "--lattice", "hex:2.77", "(2x1)", "--json", str(dest), "--force"], capsys)
    assert rc == 0 and json.loads(dest.read_text(encoding="utf-8"))["domains"] == 3


def test_bad_plot_name_leaves_nothing(tmp_path, capsys):
    png = tmp_path / "cell.jpg"
    js = tmp_path / "out.json"
    rc, _, err = run(["notation", "--lattice", "hex:2.77", "(2x1)", "--plot", str(png), "--json", str(js)],
                     capsys)
    assert rc == 2 and ".png or .svg" in err and err.strip().count("\n") == 0
    assert list(tmp_path.iterdir()) == []


def test_json_and_plot_on_the_same_file_leave_nothing(tmp_path, capsys):
    # Regression: both names passed the existence check, the JSON was written into same.png and
    # the figure was then refused, leaving a half-done output behind.
    same = tmp_path / "same.png"
    argv = ["notation", "--lattice", "hex:2.77", "(2x1)", "--json", str(same), "--plot", str(same)]
    rc, out, err = run(argv, capsys)
    assert rc == 2 and "same file" in err and err.strip().count("\n") == 0 and "Traceback" not in err
    assert out == ""
    assert list(tmp_path.iterdir()) == []


def test_shared_superstructure_options_for_other_commands():
    import argparse

    from surfgeo.cli._common import add_superstructure_options, resolve_superstructure
    from surfgeo.errors import NotationError
    from surfgeo.lattice import parse_lattice

    lat = parse_lattice("square:2.55")
    parser = argparse.ArgumentParser()
    add_superstructure_options(parser, wood_positional=False)
    sup = resolve_superstructure(parser.parse_args(["--wood", "c(2x2)"]), lat)
    assert sup.matrix.tolist() == [[1, 1], [-1, 1]]
    sup = resolve_superstructure(parser.parse_args(["--matrix", "2", "0", "0", "-0.5"]), lat)
    assert sup.kind == "coincidence" and sup.determinant == -1
    assert resolve_superstructure(parser.parse_args([]), lat, required=False) is None
    with pytest.raises(NotationError):
        resolve_superstructure(parser.parse_args([]), lat)
    with pytest.raises(NotationError):
        resolve_superstructure(parser.parse_args(["--wood", "(2x1)", "--matrix", "1", "0", "0", "1"]), lat)


def test_debug_shows_the_traceback(tmp_path, capsys):
    rc, out, err = run(["notation", "--lattice", "hex:2.77", "(2x)", "--debug"], capsys)
    assert rc == 2
    assert "Traceback" in err and "NotationError" in err
    assert err.strip().splitlines()[-1].startswith("surfgeo notation: error: ")
    rc, out, err = run(["notation", "--lattice", "hex:2.77", "(2x)"], capsys)
    assert rc == 2 and "Traceback" not in err
