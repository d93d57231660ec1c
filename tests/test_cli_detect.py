"""``surfgeo detect`` run in-process: outputs, --force, masks given, and bad input."""

import json

import numpy as np
import pytest
from PIL import Image

from surfgeo.cli.main import main
from surfgeo.io import write_bytes
from surfgeo.io.spots import read_spot_csv
from surfgeo.measure.images import encode_image
from surfgeo.measure.masks import GunShadow, ScreenDisc, disc_mask, gun_mask
from surfgeo.measure.render import random_positions, render_pattern

SCREEN = ScreenDisc(151.0, 146.0, 135.0)
GUN = GunShadow(153.0, 150.0, 14.0, 80.0, 9.0)


@pytest.fixture(scope="module")
def scene(tmp_path_factory):
    """A synthetic 16-bit LEED image with 25 spots, and its truth."""
    rng = np.random.default_rng(77)
    shape = (290, 300)
    allowed = disc_mask(shape, SCREEN, margin=14) & ~gun_mask(shape, GUN, margin=14)
    pos = random_positions(rng, 25, shape, 16, allowed=allowed)
    syn = render_pattern(shape, pos, np.exp(rng.uniform(np.log(3e3), np.log(1e5), len(pos))), 2.0,
                         screen=SCREEN, gun=GUN, seed=5)
    folder = tmp_path_factory.mktemp("detect")
    png = folder / "pattern.png"
    write_bytes(png, encode_image(syn.image, "png", "uint16"))
    tif = folder / "pattern.tif"
    write_bytes(tif, encode_image(syn.image.astype(np.float32) / 7.0, "tiff", "float32"))
    return syn, png, tif


def _run(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def _clean_error(err):
    assert "Traceback" not in err
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("surfgeo detect: error:")


def _found_all(spots, syn, sel=None):
    """Every true spot (of ``sel``) has a detection within 5 times its localisation bound."""
    sel = np.ones(len(syn.positions), dtype=bool) if sel is None else sel
    truth = syn.positions[sel]
    d = np.hypot(*(spots.positions[:, None, :] - truth[None, :, :]).transpose(2, 0, 1))
    # Source: Thompson, Larson and Webb, Biophys. J. 82, 2775 (2002), eq. 17 (per axis, with the
    # background term); a radial error of 5 of those is rare (the positions were within 0.5 px before)
    bound = np.sqrt(syn.thompson_variance[sel])
    return (d.min(axis=0) < 5 * bound).all()


def test_outputs_csv_json_png(scene, tmp_path, capsys):
    syn, png, _ = scene
    csv, js, fig = tmp_path / "s.csv", tmp_path / "s.json", tmp_path / "s.png"
    code, out, err = _run(["detect", str(png), "-o", str(csv), "--json", str(js), "--plot", str(fig)], capsys)
    assert code == 0, err
    assert "spots" in out and "x right, y down" in out
    spots = read_spot_csv(csv)
    assert len(spots) == len(syn.positions)
    assert _found_all(spots, syn)
    rec = json.loads(js.read_text())
    assert rec["count"] == len(spots) and len(rec["spots"]) == len(spots)
    assert rec["masks"]["screen"]["found"] is True
    assert {"x", "y", "intensity", "snr", "uncertainty", "sigma"} <= set(rec["spots"][0])
    with Image.open(fig) as im:
        assert im.format == "PNG" and im.size[0] > 200


def test_json_to_stdout_and_svg(scene, tmp_path, capsys):
    _, png, _ = scene
    fig = tmp_path / "s.svg"
    code, out, err = _run(["detect", str(png), "--json", "-", "--plot", str(fig)], capsys)
    assert code == 0, err
    rec = json.loads(out)  # nothing but JSON on stdout
    assert rec["width_px"] == 300 and rec["height_px"] == 290
    assert fig.read_text().lstrip().startswith(("<?xml", "<svg"))


def test_given_masks_width_and_float_tiff(scene, tmp_path, capsys):
    syn, _, tif = scene
    csv = tmp_path / "s.csv"
    code, out, err = _run([
        "detect", str(tif), "-o", str(csv), "--spot-sigma", "2", "--threshold", "6",
        "--screen", "151,146,135", "--gun", "153,150,14,80,9", "--gain", "auto",
    ], capsys)
    assert code == 0, err
    assert "(given)" in out
    spots = read_spot_csv(csv)
    assert _found_all(spots, syn, syn.snr > 8)


def test_no_masks_and_exclusion_image(scene, tmp_path, capsys):
    syn, png, _ = scene
    ex = np.zeros((290, 300), dtype=np.uint8)
    x0, y0 = np.rint(syn.positions[0]).astype(int)
    ex[y0 - 6:y0 + 7, x0 - 6:x0 + 7] = 1
    expath = tmp_path / "exclude.png"
    write_bytes(expath, encode_image(ex, "png", "uint8"))
    csv = tmp_path / "s.csv"
    code, _, err = _run(["detect", str(png), "--screen", "none", "--gun", "none", "--exclude", str(expath),
                         "-o", str(csv)], capsys)
    assert code == 0, err
    spots = read_spot_csv(csv)
    d = np.hypot(spots.x - syn.positions[0, 0], spots.y - syn.positions[0, 1])
    assert d.min() > 5  # the excluded spot is gone


def test_refuses_to_overwrite_without_force(scene, tmp_path, capsys):
    _, png, _ = scene
    csv = tmp_path / "s.csv"
    csv.write_text("keep me\n")
    code, _, err = _run(["detect", str(png), "-o", str(csv)], capsys)
    assert code == 2
    _clean_error(err)
    assert "already exists" in err and "--force" in err
    assert csv.read_text() == "keep me\n"
    code, _, err = _run(["detect", str(png), "-o", str(csv), "--force"], capsys)
    assert code == 0, err
    assert csv.read_text().startswith("x,y,")


@pytest.mark.parametrize(
    "content, words",
    [(b"", "empty"), (b"not an image", "not a PNG or TIFF"), (b"II*\x00\x08\x00\x00\x00\x00", "TIFF")],
)
def test_bad_images(tmp_path, capsys, content, words):
    bad = tmp_path / "bad.png"
    bad.write_bytes(content)
    csv, fig = tmp_path / "s.csv", tmp_path / "s.png"
    code, _, err = _run(["detect", str(bad), "-o", str(csv), "--plot", str(fig)], capsys)
    assert code == 2
    _clean_error(err)
    assert words in err
    assert not csv.exists() and not fig.exists()
    assert list(tmp_path.iterdir()) == [bad]  # no temporary files left behind


@pytest.mark.parametrize(
    "extra, words",
    [
        (["--screen", "1,2"], "--screen"),
        (["--screen", "10,10,-5"], "radius"),
        (["--gun", "1,2,3,4"], "--gun"),
        (["--gain", "-1"], "--gain"),
        (["--spot-sigma", "0"], "--spot-sigma"),
        (["--threshold", "-3"], "--threshold"),
        (["--plot", "out.jpg"], ".png or .svg"),
        (["--margin", "-1"], "--margin"),
        (["--saturation", "nan"], "--saturation"),  # was silently ignored
        (["--saturation", "-5"], "saturation level"),  # was "too few usable pixels ... check the masks"
    ],
)
def test_bad_options(scene, tmp_path, capsys, extra, words):
    _, png, _ = scene
    extra = [str(tmp_path / e) if e == "out.jpg" else e for e in extra]
    code, _, err = _run(["detect", str(png), *extra], capsys)
    assert code == 2
    _clean_error(err)
    assert words in err


def test_missing_image_and_wrong_exclusion_size(scene, tmp_path, capsys):
    _, png, _ = scene
    code, _, err = _run(["detect", str(tmp_path / "nope.png")], capsys)
    assert code == 2 and "does not exist" in err
    _clean_error(err)
    small = tmp_path / "small.png"
    Image.fromarray(np.zeros((5, 5), dtype=np.uint8)).save(small)
    code, _, err = _run(["detect", str(png), "--exclude", str(small)], capsys)
    assert code == 2 and "must match" in err
    _clean_error(err)


def test_figure_legend_names_only_what_is_drawn():
    from surfgeo.measure.spotlist import SpotList
    from surfgeo.plot.spots import spots_figure

    img = np.random.default_rng(1).normal(100, 3, (40, 50))
    spots = SpotList.from_columns([10.0], [20.0], sigma=[2.0])

    def labels(usable):
        fig = spots_figure(img, spots, usable=usable)
        return [t.get_text() for t in fig.axes[0].get_legend().get_texts()]

    # a regression: "edge of the usable region" was listed when every pixel was usable (no edge drawn)
    assert labels(np.ones(img.shape, dtype=bool)) == ["spots (1)"]
    part = np.ones(img.shape, dtype=bool)
    part[:, :10] = False
    assert labels(part) == ["spots (1)", "edge of the usable region"]


def test_csv_to_standard_output(scene, tmp_path, capsys, monkeypatch):
    # a regression: "-o -" wrote a file named "-" (and "surfgeo pattern --csv -" then refused it)
    syn, png, _ = scene
    monkeypatch.chdir(tmp_path)
    code, out, err = _run(["detect", str(png), "-o", "-"], capsys)
    assert code == 0, err
    assert not (tmp_path / "-").exists()
    assert out.startswith("x,y,")  # only the CSV, no report
    from surfgeo.io.spots import parse_spot_csv

    assert _found_all(parse_spot_csv(out), syn)
    code, _, err = _run(["detect", str(png), "-o", "-", "--json", "-"], capsys)
    assert code == 2 and "standard output" in err
    _clean_error(err)
