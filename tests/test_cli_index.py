"""The calibrate, match and index commands, called in-process: results, JSON, figures, and bad
input (one sentence, exit 2, no traceback, no partial output).

The spot lists and images are synthetic, made by surfgeo's own forward model."""

import json

import numpy as np
import pytest

from surfgeo.cli.main import main
from surfgeo.io import write_bytes
from surfgeo.io.spots import write_spot_csv
from surfgeo.lattice import Lattice2D
from surfgeo.measure.images import encode_image
from surfgeo.measure.spotlist import MomentumSpotList
from surfgeo.measure.synthetic import positions_coincide, synthetic_measurement


@pytest.fixture(scope="module")
def sqrt3(tmp_path_factory):
    """A synthetic (sqrt3 x sqrt3)R30 pattern on a hexagonal substrate, as CSV and PNG."""
    d = tmp_path_factory.mktemp("sqrt3")
    m = synthetic_measurement(3, lattice=Lattice2D.hexagonal(2.77), matrix=[[2, 1], [-1, 1]], energy=120.0)
    write_spot_csv(d / "spots.csv", m.spots)
    write_bytes(d / "pattern.png", encode_image(m.render().image, "png", "uint16"))
    return d, m


def run(args, capsys):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def bad(args, capsys, *outputs):
    code, out, err = run(args, capsys)
    assert code == 2, err
    assert "Traceback" not in err and err.count("\n") == 1 and err.strip().endswith(".")
    for o in outputs:
        assert not o.exists()
    return err


def test_index_spot_list_json(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    out = tmp_path / "index.json"
    code, text, err = run(
        [
            "index",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--screen",
            m.screen_spec(),
            "--json",
            out,
        ],
        capsys,
    )
    assert code == 0, err
    assert "(√3×√3)R30°" in text or "(sqrt3xsqrt3)R30" in text
    data = json.loads(out.read_text())
    cal = data["calibration"]
    for key in ("centre_px", "rotation_deg", "mirror", "scale_px_per_rad"):
        assert key in cal
    assert (
        abs(cal["centre_px"][0] - m.screen.centre_x) < 1.0
        and abs(cal["centre_px"][1] - m.screen.centre_y) < 1.0
    )
    best = data["candidates"][0]
    for key in (
        "matrix",
        "wood",
        "domains",
        "score",
        "matched",
        "unexplained",
        "absent",
        "rms_px",
        "predicted_px",
        "indistinguishable_from",
    ):
        assert key in best
    assert best["wood"] == "(√3×√3)R30°" and best["matrix"] == [[2, 1], [-1, 1]] and best["domains"] == 1
    assert positions_coincide(np.array(best["predicted_px"]), m.truth_px, m.screen)
    scores = [c["score"] for c in data["candidates"]]
    assert scores == sorted(scores)


def test_index_json_to_stdout_and_plot(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    plot = tmp_path / "overlay.svg"
    code, text, err = run(
        [
            "index",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--screen",
            m.screen_spec(),
            "--json",
            "-",
            "--plot",
            plot,
            "--top",
            "3",
        ],
        capsys,
    )
    assert code == 0, err
    data = json.loads(text)
    assert len(data["candidates"]) >= 3
    assert plot.read_text().lstrip().startswith(("<?xml", "<svg"))


def test_index_image(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    plot = tmp_path / "overlay.png"
    code, text, err = run(
        [
            "index",
            d / "pattern.png",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--json",
            "-",
            "--plot",
            plot,
            "--contrast",
            "1",
            "99.5",
            "8",
        ],
        capsys,
    )
    assert code == 0, err
    data = json.loads(text)
    best = data["candidates"][0]
    assert best["wood"] == "(√3×√3)R30°"
    assert positions_coincide(np.array(best["predicted_px"]), m.truth_px, m.screen)
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # the (00) spot lies in the gun's shadow found in the image: hidden, not merely unseen
    verdicts = {tuple(a["hk"]): a["verdict"] for a in data["best_match"]["absent"]}
    assert verdicts[("0", "0")] == "hidden"
    # a spot list carries no mask: there the same spot stays 'unknown'
    code, text, err = run(
        ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"]
        + ["--screen", "sphere:size=512x512", "--json", "-"],
        capsys,
    )
    verdicts = {tuple(a["hk"]): a["verdict"] for a in json.loads(text)["best_match"]["absent"]}
    assert verdicts[("0", "0")] == "unknown"


def test_calibrate_then_reuse(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    cal = tmp_path / "screen.json"
    fig = tmp_path / "cal.png"
    code, text, err = run(
        [
            "calibrate",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--screen",
            m.screen_spec(),
            "--json",
            cal,
            "--plot",
            fig,
        ],
        capsys,
    )
    assert code == 0, err
    assert "integer-order spots" in text and fig.exists()
    saved = json.loads(cal.read_text())
    assert saved["kind"] == "surfgeo screen calibration" and "screen" in saved
    code, text, err = run(
        [
            "index",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--calibration",
            cal,
            "--json",
            "-",
        ],
        capsys,
    )
    assert code == 0, err
    data = json.loads(text)
    assert data["calibration"]["centre_px"] == saved["centre_px"]
    code, text, err = run(
        [
            "match",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "120",
            "--wood",
            "(sqrt3 x sqrt3)R30",
            "--calibration",
            cal,
            "--json",
            "-",
        ],
        capsys,
    )
    assert code == 0, err
    res = json.loads(text)
    assert res["unexplained_count"] == int((m.origin < 0).sum())
    assert res["matched_count"] == len(m.spots) - int((m.origin < 0).sum())
    assert len(res["matched"][0]["residual_inv_angstrom"]) == 2


def test_calibrate_several_energies(capsys, tmp_path):
    lat = Lattice2D.square(2.55)
    files, energies = [], [90.0, 150.0, 210.0]
    base = synthetic_measurement(7, lattice=lat, matrix=[[1, 1], [-1, 1]], energy=90.0)
    for e in energies:
        m = synthetic_measurement(7, lattice=lat, matrix=[[1, 1], [-1, 1]], energy=e)
        f = tmp_path / f"e{int(e)}.csv"
        write_spot_csv(f, m.spots)
        files.append(f)
    # the same random screen for each energy: the generator draws it first from the same stream
    code, text, err = run(
        [
            "calibrate",
            *files,
            "--lattice",
            "square:2.55",
            "--energy",
            *energies,
            "--screen",
            base.screen_spec(),
            "--json",
            "-",
        ],
        capsys,
    )
    assert code == 0, err
    data = json.loads(text)
    # the spot lists were made without an energy offset: zero within three standard errors
    err = data["uncertainty"]["energy_offset"]
    assert data["energy_offset_fitted"] and 0 < err < 1.0 and abs(data["energy_offset_eV"]) < 3 * err
    assert abs(data["centre_px"][0] - base.screen.centre_x) < 0.5
    assert abs(data["centre_px"][1] - base.screen.centre_y) < 0.5


def test_match_model_file(capsys, tmp_path):
    from surfgeo.diffraction.electron import wavenumber
    from surfgeo.measure.calibrate import fast_pixels, on_screen
    from surfgeo.slab.info import surface_info
    from surfgeo.slab.model import build_model

    atoms = build_model("structures/ni100_c_p4g.toml")
    lat = surface_info(atoms).lattice
    m = synthetic_measurement(
        4, lattice=lat, matrix=[[2, 0], [0, 2]], energy=120.0, missing_fraction=0.0, strays=(0, 0)
    )
    from surfgeo.diffraction.pattern import slab_pattern

    pat = slab_pattern(atoms, 120.0)
    px = fast_pixels(m.screen, pat.k_parallel, 120.0)
    keep = on_screen(m.screen, px, pat.k_parallel, wavenumber(120.0)) & ~pat.extinct
    f = tmp_path / "p4g.csv"
    f.write_text("x,y\n" + "".join(f"{x:.4f},{y:.4f}\n" for x, y in px[keep]))
    spec = "vectors:" + ",".join(f"{v:.12g}" for v in lat.vectors.ravel())
    code, text, err = run(
        [
            "match",
            f,
            "--lattice",
            spec,
            "--energy",
            "120",
            "--model",
            "structures/ni100_c_p4g.toml",
            "--screen",
            m.screen_spec(),
            "--json",
            "-",
        ],
        capsys,
    )
    assert code == 0, err
    res = json.loads(text)
    assert res["unexplained_count"] == 0
    assert res["absent"] and all(a["verdict"] == "extinct" for a in res["absent"])


def test_momentum_spot_list(capsys, tmp_path):
    from surfgeo.diffraction.pattern import superstructure_pattern

    lat = Lattice2D.square(2.55)
    pat = superstructure_pattern(lat, [[1, 1], [-1, 1]], 100.0, theta_max=55.0)
    k = pat.k_parallel[np.any(pat.k_parallel != 0, axis=1)]
    f = tmp_path / "momenta.csv"
    from surfgeo.io.spots import write_spot_csv as w

    w(f, MomentumSpotList.from_columns(k[:, 0], k[:, 1]))
    code, text, err = run(["index", f, "--lattice", "square:2.55", "--energy", "100", "--json", "-"], capsys)
    assert code == 0, err
    # the preferred Wood form of [[1, 1], [-1, 1]] on a square lattice is the unrotated centred one
    # Source: sources.md (Wood notation: c(2x2) = (sqrt2 x sqrt2)R45 on a square lattice)
    assert json.loads(text)["candidates"][0]["wood"] == "c(2×2)"
    err = bad(["calibrate", f, "--lattice", "square:2.55", "--energy", "100"], capsys)
    assert "needs no calibration" in err
    # a saved calibration beside a momentum list is refused by both commands (match ignored it)
    from surfgeo.measure.calibrate import Calibration
    from surfgeo.screen import default_screen

    cal = tmp_path / "screen.json"
    cal.write_text(json.dumps(Calibration(screen=default_screen()).to_dict()))
    for command in (["index"], ["match", "--wood", "c(2x2)"]):
        args = [command[0], f, *command[1:], "--lattice", "square:2.55", "--energy", "100"]
        args += ["--calibration", cal]
        assert "needs no --calibration" in bad(args, capsys)


# --------------------------------------------------------------------------- bad input
def test_unreadable_and_empty_images(capsys, tmp_path):
    out = tmp_path / "out.json"
    junk = tmp_path / "junk.png"
    junk.write_bytes(b"this is not an image at all")
    err = bad(["index", junk, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys)
    assert "junk.png" in err
    empty = tmp_path / "empty.tif"
    empty.write_bytes(b"")
    err = bad(["index", empty, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys)
    assert "empty" in err
    missing = tmp_path / "none.png"
    bad(["calibrate", missing, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys, out)


def test_bad_csv_files(capsys, tmp_path):
    out = tmp_path / "out.json"
    cols = tmp_path / "cols.csv"
    cols.write_text("a,b\n1,2\n")
    err = bad(["index", cols, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys, out)
    assert "x,y" in err
    text = tmp_path / "text.csv"
    text.write_text("x,y\n10,20\n30,abc\n")
    err = bad(["index", text, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys, out)
    assert "line 3" in err and "not a number" in err
    short = tmp_path / "short.csv"
    short.write_text("x,y\n10\n")
    err = bad(
        ["match", short, "--lattice", "hex:2.77", "--energy", "100", "--wood", "(2x2)", "--json", out],
        capsys,
        out,
    )
    assert "missing" in err


def test_energy_too_low(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    out = tmp_path / "out.json"
    err = bad(
        [
            "index",
            d / "spots.csv",
            "--lattice",
            "hex:2.77",
            "--energy",
            "5",
            "--screen",
            m.screen_spec(),
            "--json",
            out,
        ],
        capsys,
        out,
    )
    assert "no integer-order beam" in err and "appear above" in err
    err = bad(
        ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "-3", "--json", out], capsys, out
    )
    assert "--energy" in err


def test_too_few_spots(capsys, tmp_path):
    out = tmp_path / "out.json"
    f = tmp_path / "two.csv"
    f.write_text("x,y\n100,120\n300,320\n")
    err = bad(["calibrate", f, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys, out)
    assert "two.csv holds 2 spot(s)" in err and "at least 3" in err and "--calibration" not in err
    err = bad(["index", f, "--lattice", "hex:2.77", "--energy", "100", "--json", out], capsys, out)
    assert "two.csv holds 2 spot(s)" in err and "--calibration" in err
    empty = tmp_path / "none.csv"
    empty.write_text("x,y\n")
    for command in (["index"], ["calibrate"], ["match", "--wood", "(2x2)"]):
        args = [command[0], empty, *command[1:], "--lattice", "hex:2.77", "--energy", "100", "--json", out]
        assert "none.csv holds no spots" in bad(args, capsys, out)


def test_spots_outside_the_stated_image(capsys, tmp_path):
    f = tmp_path / "big.csv"
    f.write_text("x,y\n100,120\n900,320\n50,50\n")
    err = bad(["index", f, "--lattice", "hex:2.77", "--energy", "100"], capsys)
    assert "size=WxH" in err


def test_outputs_are_not_overwritten(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    out = tmp_path / "exists.json"
    out.write_text("keep")
    err = bad(["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120", "--json", out], capsys)
    assert "--force" in err and out.read_text() == "keep"
    err = bad(
        ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120", "--plot", tmp_path / "x.jpg"],
        capsys,
    )
    assert ".png or .svg" in err
    same = tmp_path / "same.png"
    err = bad(
        ["calibrate", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"]
        + ["--json", same, "--plot", same],
        capsys,
        same,
    )
    assert "--json and --plot name the same file" in err


def test_bad_options(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    base = ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"]
    assert "--max-area" in bad([*base, "--max-area", "0"], capsys)
    assert "--contrast" in bad([*base, "--contrast", "50", "10"], capsys)
    assert "--gate" in bad([*base, "--gate", "-1"], capsys)
    assert "lattice" in bad(["index", d / "spots.csv", "--lattice", "hexx:2.77", "--energy", "120"], capsys)
    err = bad(["match", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"], capsys)
    assert "Wood notation" in err
    err = bad(
        ["calibrate", d / "spots.csv", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"], capsys
    )
    assert "one --energy per input" in err


def test_joint_calibration_of_images_of_different_sizes_is_refused(sqrt3, capsys, tmp_path):
    d, m = sqrt3
    small = tmp_path / "small.png"
    write_bytes(small, encode_image(m.render().image[:400, :380], "png", "uint16"))
    err = bad(
        ["calibrate", d / "pattern.png", small, "--lattice", "hex:2.77", "--energy", "120", "150"], capsys
    )
    assert "one camera frame" in err and "512x512 px" in err and "380x400 px" in err


def test_image_without_spots(capsys, tmp_path):
    blank = tmp_path / "blank.png"
    write_bytes(blank, encode_image(np.full((128, 128), 100.0), "png", "uint8"))
    err = bad(["index", blank, "--lattice", "hex:2.77", "--energy", "100"], capsys)
    assert "found only 0 spot(s)" in err


# --------------------------------------------------------------------------- regressions
def test_refitted_calibration_does_not_call_every_matched_spot_integer_order(sqrt3, capsys):
    # The indexing refits the screen to every spot its best candidate explains; the screen block
    # once printed that count as "N integer-order spots" (29 at 72 eV where 6 integer spots exist).
    d, m = sqrt3
    code, text, err = run(
        ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120", "--screen", m.screen_spec(),
         "--json", "-"],
        capsys,
    )
    assert code == 0, err
    data = json.loads(text)
    cal, best = data["calibration"], data["candidates"][0]
    integer_truth = sum(1 for lab, i in zip(m.truth_labels, m.truth_integer, strict=True) if i and any(lab))
    assert 3 <= cal["integer_spots"] <= integer_truth < cal["refit_spots"]
    assert cal["refit_spots"] >= best["matched"] - int((m.origin < 0).sum())
    code, text, err = run(
        ["index", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120", "--screen", m.screen_spec()],
        capsys,
    )
    assert f"{cal['integer_spots']} integer-order spots; refitted to all {cal['refit_spots']} matched" in text
    assert f"{cal['refit_spots']} integer-order spots" not in text


def test_a_wrong_energy_or_lattice_is_pointed_out(sqrt3, capsys):
    # 1500 eV instead of 120 eV: the spots still fit a dense integer lattice, but most of the
    # integer-order spots that lattice puts on the screen are missing; both commands say so.
    d, m = sqrt3
    base = [d / "spots.csv", "--lattice", "hex:2.77", "--energy", "1500", "--screen", m.screen_spec()]
    code, text, err = run(["calibrate", *base], capsys)
    assert code == 0, err
    assert "have no measured spot near them; check --energy and --lattice" in text
    code, text, err = run(["index", *base, "--top", "2"], capsys)
    assert code == 0, err
    assert "spots on the screen that were not seen, more than" in text
    # at the right energy neither note appears
    code, text, err = run(["calibrate", *base[:3], "--energy", "120", *base[5:]], capsys)
    assert code == 0 and "no measured spot near them" not in text
    # a wrong lattice: the best answer, whatever its kind, leaves most spots unexplained
    code, text, err = run(
        ["index", base[0], "--lattice", "square:2.55", "--energy", "120", "--screen", m.screen_spec()], capsys
    )
    assert code == 0, err
    assert "measured spots unexplained; check --lattice and --energy" in text


def test_saved_energy_offset_is_shown(sqrt3, capsys, tmp_path):
    # A calibration whose energy offset was set (e.g. refined on intensities by the demo) rather
    # than fitted was applied without a word in the screen block.
    d, m = sqrt3
    cal = tmp_path / "screen.json"
    code, _, err = run(
        ["calibrate", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"]
        + ["--screen", m.screen_spec(), "--json", cal],
        capsys,
    )
    assert code == 0, err
    record = json.loads(cal.read_text())
    record["energy_offset_eV"] = 1.5
    cal.write_text(json.dumps(record))
    code, text, err = run(
        ["match", d / "spots.csv", "--lattice", "hex:2.77", "--energy", "120"]
        + ["--wood", "(sqrt3 x sqrt3)R30", "--calibration", cal],
        capsys,
    )
    assert code == 0, err
    assert "energy offset +1.50 eV (set, not fitted)" in text and "(true = nominal +1.50 eV)" in text


def test_saved_calibration_gives_the_image_size(capsys, tmp_path):
    # Spots of a 1024 px image with a calibration saved for it were checked against the 512 px
    # default screen ("lies outside the 512x512 px image") unless --screen repeated the size.
    m = synthetic_measurement(5, lattice=Lattice2D.hexagonal(2.77), matrix=[[2, 1], [-1, 1]], energy=96.0,
                              size=1024)
    spots, cal = tmp_path / "spots.csv", tmp_path / "screen.json"
    write_spot_csv(spots, m.spots)
    base = ["--lattice", "hex:2.77", "--energy", "96"]
    code, _, err = run(["calibrate", spots, *base, "--screen", m.screen_spec(), "--json", cal], capsys)
    assert code == 0, err
    for command in (["index", spots], ["match", spots, "--wood", "(sqrt3 x sqrt3)R30"]):
        code, text, err = run([*command, *base, "--calibration", cal, "--json", "-"], capsys)
        assert code == 0, err
    # --screen beside --calibration is refused (both describe the screen) ...
    err = bad(["index", spots, *base, "--calibration", cal, "--screen", "sphere:size=1024"], capsys)
    assert "--screen and --calibration" in err
    # ... and so is an image of another size than the calibration's
    small = tmp_path / "small.png"
    s = synthetic_measurement(3, lattice=Lattice2D.hexagonal(2.77), matrix=[[2, 1], [-1, 1]], energy=96.0)
    write_bytes(small, encode_image(s.render().image, "png", "uint16"))
    err = bad(["match", small, *base, "--wood", "(sqrt3 x sqrt3)R30", "--calibration", cal], capsys)
    assert "512x512 px but the calibration was made for 1024x1024 px" in err


def test_match_refits_the_screen_to_the_matched_spots(capsys, tmp_path):
    # A calibration from the first shell of integer spots of a 1024 px image extrapolates badly to
    # the rim; 'match' refits the screen to every matched spot and pairs again (--no-refit: not).
    m = synthetic_measurement(5, lattice=Lattice2D.hexagonal(2.77), matrix=[[2, 1], [-1, 1]], energy=96.0,
                              size=1024)
    spots, cal = tmp_path / "spots.csv", tmp_path / "screen.json"
    write_spot_csv(spots, m.spots)
    base = [spots, "--lattice", "hex:2.77", "--energy", "96", "--wood", "(sqrt3 x sqrt3)R30"]
    code, _, err = run(["calibrate", *base[:5], "--screen", m.screen_spec(), "--json", cal], capsys)
    assert code == 0, err
    strays = int((m.origin < 0).sum())
    code, text, err = run(["match", *base, "--calibration", cal, "--json", "-"], capsys)
    assert code == 0, err
    data = json.loads(text)
    assert data["unexplained_count"] == strays
    assert data["calibration"]["refit_spots"] == data["matched_count"] == len(m.spots) - strays
    code, text, err = run(["match", *base, "--calibration", cal, "--json", "-", "--no-refit"], capsys)
    assert code == 0, err
    data = json.loads(text)
    assert data["unexplained_count"] > strays and data["calibration"]["refit_spots"] == 0
