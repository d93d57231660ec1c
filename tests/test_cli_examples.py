"""The worked examples of the commands' --help: every one parses, and those of calibrate, match
and index run as written on files made for them (synthetic, from surfgeo's own forward model).

A worked example that does not run teaches the wrong command: 'surfgeo match --help' once showed
the Wood notation as a positional argument, which the command refuses.
"""

import json
import re
import shlex
import shutil
from pathlib import Path

import pytest

from surfgeo.cli._common import resolve_lattice
from surfgeo.cli.main import build_parser, main
from surfgeo.io import dump_json, write_bytes
from surfgeo.io.spots import write_spot_csv
from surfgeo.lattice import Lattice2D
from surfgeo.measure.calibrate import calibrate
from surfgeo.measure.images import encode_image
from surfgeo.measure.synthetic import positions_coincide, synthetic_measurement

ROOT = Path(__file__).resolve().parent.parent
PARSER = build_parser()
COMMANDS = next(a for a in PARSER._actions if a.__class__.__name__ == "_SubParsersAction").choices


def worked_examples(name: str) -> list[list[str]]:
    """The example command lines of ``surfgeo NAME --help`` (continuation lines joined)."""
    text = re.sub(r"\\\n\s*", " ", COMMANDS[name].epilog or "")
    lines = [line.strip() for line in text.splitlines()]
    return [shlex.split(line)[1:] for line in lines if line.startswith("surfgeo ")]


ALL = [(name, argv) for name in sorted(COMMANDS) for argv in worked_examples(name)]


@pytest.mark.parametrize("argv", [argv for _, argv in ALL], ids=[" ".join(a)[:60] for _, a in ALL])
def test_every_worked_example_parses(argv):
    PARSER.parse_args(argv)  # argparse exits (and the test fails) on an unknown or missing option


# --------------------------------------------------------------------------- the files they name
HEX = Lattice2D.hexagonal(2.77)


def sqrt3_at_96ev():
    return synthetic_measurement(5, lattice=HEX, matrix=[[2, 1], [-1, 1]], energy=96.0, size=1024)


def spot_list(m, folder):
    write_spot_csv(folder / "spots.csv", m.spots)


def image(m, path):
    write_bytes(path, encode_image(m.render().image, "png", "uint16"))


def saved_calibration(m, lattice, folder):
    dump_json(calibrate(m.spots, lattice, m.energy, m.nominal_screen).to_dict(), folder / "screen.json")


def run_here(argv, folder, monkeypatch, capsys):
    monkeypatch.chdir(folder)
    code = main(argv)
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


def example(name: str, number: int, *files: str) -> list[str]:
    """Example ``number`` (from 0) of a command; it must name ``files`` (made by the test)."""
    argv = worked_examples(name)[number]
    assert all(f in argv for f in files), (argv, files)
    return argv


# --------------------------------------------------------------------------- calibrate
def test_calibrate_examples_run(tmp_path, monkeypatch, capsys):
    m = sqrt3_at_96ev()
    spot_list(m, tmp_path)
    run_here(example("calibrate", 0, "spots.csv"), tmp_path, monkeypatch, capsys)
    saved = json.loads((tmp_path / "screen.json").read_text())
    assert abs(saved["centre_px"][0] - m.screen.centre_x) < 1.0
    assert abs(saved["centre_px"][1] - m.screen.centre_y) < 1.0
    assert (tmp_path / "calibration.png").read_bytes()[:4] == b"\x89PNG"

    pt = resolve_lattice("Pt(111)")
    first = None
    for e in (80, 120, 160):  # one screen: the generator draws it first from the same seed
        mi = synthetic_measurement(7, lattice=pt, matrix=[[2, 0], [0, 2]], energy=float(e))
        image(mi, tmp_path / f"e{e}.png")
        first = first or mi
    out = run_here(example("calibrate", 1, "e80.png", "e120.png", "e160.png"), tmp_path, monkeypatch, capsys)
    data = json.loads(out)
    assert data["energy_offset_fitted"] is True
    # the images were made without an offset
    assert abs(data["energy_offset_eV"]) < 3 * data["uncertainty"]["energy_offset"] + 0.2
    assert abs(data["centre_px"][0] - first.screen.centre_x) < 1.0
    assert abs(data["centre_px"][1] - first.screen.centre_y) < 1.0


# --------------------------------------------------------------------------- match
def test_match_examples_run(tmp_path, monkeypatch, capsys):
    m = sqrt3_at_96ev()
    spot_list(m, tmp_path)
    saved_calibration(m, HEX, tmp_path)
    argv = example("match", 0, "spots.csv", "screen.json")
    data = json.loads(run_here(argv, tmp_path, monkeypatch, capsys))
    strays = int((m.origin < 0).sum())
    assert data["unexplained_count"] == strays and data["matched_count"] == len(m.spots) - strays

    (tmp_path / "structures").mkdir()
    shutil.copy(ROOT / "structures" / "ni100_s_c2x2.toml", tmp_path / "structures")
    ni = synthetic_measurement(4, lattice=resolve_lattice("Ni(100)"), matrix=[[1, 1], [-1, 1]], energy=110.0)
    image(ni, tmp_path / "pattern.png")
    argv = example("match", 1, "pattern.png", "structures/ni100_s_c2x2.toml")
    out = run_here(argv, tmp_path, monkeypatch, capsys)
    assert "candidate    slab" in out and "matched" in out
    assert (tmp_path / "match.png").read_bytes()[:4] == b"\x89PNG"


# --------------------------------------------------------------------------- index
def test_index_examples_run(tmp_path, monkeypatch, capsys):
    m = sqrt3_at_96ev()
    spot_list(m, tmp_path)
    data = json.loads(run_here(example("index", 0, "spots.csv"), tmp_path, monkeypatch, capsys))
    best = data["candidates"][0]
    assert best["wood"] == "(√3×√3)R30°"
    assert positions_coincide(best["predicted_px"], m.truth_px, m.screen)

    pt = synthetic_measurement(9, lattice=resolve_lattice("Pt(111)"), matrix=[[2, 1], [-1, 1]], energy=120.0)
    image(pt, tmp_path / "pattern.png")
    out = run_here(example("index", 1, "pattern.png"), tmp_path, monkeypatch, capsys)
    rank1 = next(line for line in out.splitlines() if line.strip().startswith("1 "))
    assert "(√3×√3)R30°" in rank1 or "(sqrt3xsqrt3)R30" in rank1
    assert (tmp_path / "overlay.png").read_bytes()[:4] == b"\x89PNG"

    tmp_path = tmp_path / "square"  # a new spot list for the third example
    tmp_path.mkdir()
    sq = Lattice2D.square(2.55)
    c2 = synthetic_measurement(6, lattice=sq, matrix=[[1, 1], [-1, 1]], energy=80.0, min_integer=4)
    spot_list(c2, tmp_path)
    saved_calibration(c2, sq, tmp_path)
    out = run_here(example("index", 2, "spots.csv", "screen.json"), tmp_path, monkeypatch, capsys)
    rank1 = next(line for line in out.splitlines() if line.strip().startswith("1 "))
    assert "c(2×2)" in rank1 or "c(2x2)" in rank1
