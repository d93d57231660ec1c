"""Reading images (PNG, TIFF) into float arrays, and spot lists as CSV."""

import io
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from PIL import Image

from surfgeo.errors import FileFormatError, InputError
from surfgeo.io import write_bytes
from surfgeo.io.spots import parse_spot_csv, read_spot_csv, spot_csv_text, write_spot_csv
from surfgeo.measure.images import LUMA_WEIGHTS, encode_image, image_from_array, read_image
from surfgeo.measure.spotlist import MomentumSpotList, SpotList

RNG = np.random.default_rng(20240611)


def _ramp(dtype, shape=(7, 11)):
    info = np.iinfo(dtype) if np.dtype(dtype).kind in "iu" else None
    top = float(info.max) if info else 1.0e6
    vals = np.linspace(0, top, shape[0] * shape[1]).reshape(shape)
    vals[0, 0], vals[-1, -1] = 0, top
    return vals.astype(dtype)


# --------------------------------------------------------------------------------------
# round trips through our own encoder


@pytest.mark.parametrize(
    "fmt, sample_type",
    [("png", "uint8"), ("png", "uint16"), ("tiff", "uint8"), ("tiff", "uint16"), ("tiff", "uint32"),
     ("tiff", "float32"), ("tiff", "float64")],
)
def test_round_trip_own_encoder(tmp_path, fmt, sample_type):
    arr = _ramp(sample_type)
    path = tmp_path / f"img.{fmt}"
    write_bytes(path, encode_image(arr, fmt, sample_type))
    img = read_image(path)
    assert img.shape == arr.shape
    assert img.sample_type == sample_type
    assert np.array_equal(img.data, arr.astype(np.float64))
    if np.dtype(sample_type).kind == "u":
        assert img.saturation == float(np.iinfo(sample_type).max)
    else:
        assert img.saturation is None
    # exact in the float type chosen: 8/16-bit and float32 fit float32, the rest float64
    expect = np.float32 if sample_type in ("uint8", "uint16", "float32") else np.float64
    assert img.data.dtype == expect


# --------------------------------------------------------------------------------------
# files written by the libraries themselves (independent writers)


def test_pillow_written_png_8_and_16_bit(tmp_path):
    a8 = RNG.integers(0, 256, size=(5, 9), dtype=np.uint8)
    Image.fromarray(a8, mode="L").save(tmp_path / "a8.png")
    a16 = RNG.integers(0, 65536, size=(6, 4), dtype=np.uint16)
    Image.fromarray(a16).save(tmp_path / "a16.png")
    assert np.array_equal(read_image(tmp_path / "a8.png").data, a8)
    img16 = read_image(tmp_path / "a16.png")
    assert np.array_equal(img16.data, a16)
    assert img16.saturation == 65535


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.uint32, np.int16, np.float32, np.float64])
def test_tifffile_written_tiff(tmp_path, dtype):
    import tifffile

    arr = _ramp(dtype, (9, 6))
    tifffile.imwrite(tmp_path / "t.tif", arr)
    img = read_image(tmp_path / "t.tif")
    assert np.array_equal(img.data, arr.astype(np.float64))


def test_array_index_is_row_y_column_x(tmp_path):
    # A bright pixel at x = 5 (column), y = 2 (row).
    a = np.zeros((4, 8), dtype=np.uint8)
    pil = Image.fromarray(a, mode="L")
    pil.putpixel((5, 2), 200)  # Source: Pillow Image.putpixel takes (x, y), x the column
    pil.save(tmp_path / "one.png")
    data = read_image(tmp_path / "one.png").data
    assert data[2, 5] == 200 and data.sum() == 200  # Common practice, no source: data[y, x]


def test_colour_png_becomes_luma(tmp_path):
    rgb = RNG.integers(0, 256, size=(3, 4, 3), dtype=np.uint8)
    Image.fromarray(rgb, mode="RGB").save(tmp_path / "c.png")
    grey = read_image(tmp_path / "c.png").data
    # Source: ITU-R BT.601 luma Y = 0.299 R + 0.587 G + 0.114 B
    expect = 0.299 * rgb[..., 0] + 0.587 * rgb[..., 1] + 0.114 * rgb[..., 2]
    assert LUMA_WEIGHTS == (0.299, 0.587, 0.114)
    assert np.allclose(grey, expect, atol=1e-3)


def test_saturation_override_and_float_images():
    img = image_from_array(np.zeros((3, 3), dtype=np.uint16), saturation=4095)
    assert img.saturation == 4095
    assert image_from_array(np.zeros((3, 3), dtype=np.float32)).saturation is None


# --------------------------------------------------------------------------------------
# bad images: one clear sentence


def _one_sentence(msg: str) -> None:
    assert msg.count("\n") == 0 and msg.rstrip().endswith((".", ")")) and len(msg) < 300


def test_empty_file(tmp_path):
    p = tmp_path / "empty.png"
    p.write_bytes(b"")
    with pytest.raises(FileFormatError) as exc:
        read_image(p)
    assert "empty" in str(exc.value)
    _one_sentence(str(exc.value))


def test_missing_and_folder(tmp_path):
    with pytest.raises(FileFormatError, match="does not exist"):
        read_image(tmp_path / "nope.png")
    with pytest.raises(FileFormatError, match="folder"):
        read_image(tmp_path)


@pytest.mark.parametrize("payload", [b"this is not an image at all", b"\x89PNG\r\n\x1a\n" + b"\x00" * 40])
def test_garbage_and_truncated(tmp_path, payload):
    p = tmp_path / "bad.png"
    p.write_bytes(payload)
    with pytest.raises(FileFormatError) as exc:
        read_image(p)
    _one_sentence(str(exc.value))
    assert str(p) in str(exc.value)


def test_truncated_real_png(tmp_path):
    good = encode_image(_ramp(np.uint16, (40, 40)), "png", "uint16")
    p = tmp_path / "cut.png"
    p.write_bytes(good[: len(good) // 2])
    with pytest.raises(FileFormatError):
        read_image(p)


def test_damaged_tiff(tmp_path):
    p = tmp_path / "bad.tif"
    p.write_bytes(b"II*\x00" + b"\xff" * 20)
    with pytest.raises(FileFormatError) as exc:
        read_image(p)
    _one_sentence(str(exc.value))


def test_multi_frame_tiff_refused(tmp_path):
    import tifffile

    tifffile.imwrite(tmp_path / "stack.tif", np.zeros((3, 5, 5), dtype=np.uint16), photometric="minisblack")
    with pytest.raises(FileFormatError, match="3 frames"):
        read_image(tmp_path / "stack.tif")


@pytest.mark.parametrize("planar", ["contig", "separate"])
def test_colour_tiff_both_layouts(tmp_path, planar):
    import tifffile

    rgb = RNG.integers(0, 65536, size=(4, 6, 3), dtype=np.uint16)
    data = rgb if planar == "contig" else np.moveaxis(rgb, -1, 0)
    tifffile.imwrite(tmp_path / "c.tif", data, photometric="rgb", planarconfig=planar)
    grey = read_image(tmp_path / "c.tif").data
    # Source: ITU-R BT.601 luma weights
    assert np.allclose(grey, rgb.astype(float) @ np.array([0.299, 0.587, 0.114]), rtol=1e-6)


def test_arrays_without_pixels_or_finite_values():
    with pytest.raises(FileFormatError, match="no pixels"):
        image_from_array(np.zeros((0, 5)))
    with pytest.raises(FileFormatError, match="finite"):
        image_from_array(np.full((3, 3), np.nan))
    with pytest.raises(FileFormatError, match="2D"):
        image_from_array(np.zeros(5))


def test_encode_image_refuses_bad_combinations():
    with pytest.raises(InputError, match="png images"):
        encode_image(np.zeros((2, 2)), "png", "float32")
    with pytest.raises(InputError, match="not supported"):
        encode_image(np.zeros((2, 2)), "jpeg", "uint8")
    with pytest.raises(InputError, match="2D"):
        encode_image(np.zeros((2, 2, 2)), "tiff", "uint8")


# --------------------------------------------------------------------------------------
# spot lists as CSV


def _spots(n=5):
    return SpotList.from_columns(
        x=RNG.uniform(0, 500, n), y=RNG.uniform(0, 500, n), intensity=RNG.uniform(1, 1e5, n),
        intensity_error=RNG.uniform(1, 100, n), sigma=RNG.uniform(1, 4, n), snr=RNG.uniform(1, 300, n),
        uncertainty=RNG.uniform(0.001, 0.5, n), saturated=RNG.random(n) < 0.3, edge=RNG.random(n) < 0.3,
    )


def test_spot_csv_round_trip(tmp_path):
    sp = _spots(7)
    path = tmp_path / "spots.csv"
    write_spot_csv(path, sp)
    back = read_spot_csv(path)
    assert isinstance(back, SpotList) and len(back) == 7
    assert np.allclose(back.x, sp.x, atol=1e-4) and np.allclose(back.y, sp.y, atol=1e-4)
    assert np.allclose(back.intensity, sp.intensity, atol=1e-3)
    assert np.array_equal(back.saturated, sp.saturated) and np.array_equal(back.edge, sp.edge)
    # the file is written atomically and only replaced with force
    from surfgeo.errors import OutputExistsError

    with pytest.raises(OutputExistsError):
        write_spot_csv(path, sp)
    write_spot_csv(path, sp[:2], force=True)
    assert len(read_spot_csv(path)) == 2


def test_minimal_and_optional_columns():
    sp = parse_spot_csv("x,y\n1.5,2\n3,4.25\n")
    assert isinstance(sp, SpotList)
    assert sp.positions.tolist() == [[1.5, 2.0], [3.0, 4.25]]
    assert np.isnan(sp.intensity).all() and not sp.saturated.any()
    sp = parse_spot_csv("# comment\n\n Y , X , Intensity, other\n 2, 1, 10, zzz\n4,3,,\n")
    assert sp.x.tolist() == [1.0, 3.0] and sp.y.tolist() == [2.0, 4.0]
    assert sp.intensity[0] == 10 and math.isnan(sp.intensity[1])
    sp = parse_spot_csv("x;y;sigma\n1;2;3\n")
    assert sp.sigma.tolist() == [3.0]
    assert len(parse_spot_csv("x,y,intensity\n")) == 0


def test_momentum_list():
    sp = parse_spot_csv("kx,ky,intensity\n0.5,-1.25,3\n1,2,\n")
    assert isinstance(sp, MomentumSpotList)
    assert sp.momenta.tolist() == [[0.5, -1.25], [1.0, 2.0]]
    back = parse_spot_csv(spot_csv_text(sp))
    assert np.allclose(back.momenta, sp.momenta) and back.intensity[0] == 3


@pytest.mark.parametrize(
    "text, words",
    [
        ("", ["empty"]),
        ("a,b\n1,2\n", ["x,y", "kx,ky", "a, b"]),
        ("x,intensity\n1,2\n", ["x,y"]),
        ("x,y\n1,2\n3,oops\n", ["line 3", "'y'", "oops", "not a number"]),
        ("x,y\n1,\n", ["line 2", "'y'", "empty"]),
        ("x,y,intensity\n1\n", ["line 2", "'y'", "missing"]),
        ("x,y\nnan,1\n", ["line 2", "finite"]),
        ("x,y,kx,ky\n1,2,3,4\n", ["both"]),
        ("x,x,y\n1,2,3\n", ["twice"]),
        ("x,y,saturated\n1,2,maybe\n", ["line 2", "0 or 1"]),
    ],
)
def test_bad_spot_csv_one_sentence(text, words):
    with pytest.raises(FileFormatError) as exc:
        parse_spot_csv(text, source="spots.csv")
    msg = str(exc.value)
    _one_sentence(msg)
    assert msg.startswith("spots.csv")
    for w in words:
        assert w in msg


def test_spot_csv_file_errors(tmp_path):
    with pytest.raises(FileFormatError, match="does not exist"):
        read_spot_csv(tmp_path / "none.csv")
    p = tmp_path / "bin.csv"
    p.write_bytes(b"\xff\xfe\x00\x81\x82")
    with pytest.raises(FileFormatError, match="not a text file"):
        read_spot_csv(p)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(-1e4, 1e4), st.floats(-1e4, 1e4),
                          st.one_of(st.none(), st.floats(-1e6, 1e6))), min_size=0, max_size=20))
def test_csv_round_trip_property(rows):
    x = [r[0] for r in rows]
    y = [r[1] for r in rows]
    inten = [np.nan if r[2] is None else r[2] for r in rows]
    sp = SpotList.from_columns(x, y, intensity=inten)
    back = parse_spot_csv(spot_csv_text(sp))
    assert len(back) == len(sp)
    assert np.allclose(back.x, sp.x, atol=5e-5) and np.allclose(back.y, sp.y, atol=5e-5)
    assert np.array_equal(np.isnan(back.intensity), np.isnan(sp.intensity))
    ok = ~np.isnan(sp.intensity)
    assert np.allclose(back.intensity[ok], sp.intensity[ok], atol=5e-4)


def test_spotlist_helpers():
    sp = _spots(6)
    s2 = sp.sorted_by("intensity")
    assert np.all(np.diff(s2.intensity) <= 0)
    assert len(sp[sp.x > 250]) == int((sp.x > 250).sum())
    rec = sp.records()[0]
    assert set(rec) >= {"x", "y", "intensity", "snr", "uncertainty", "saturated", "edge"}
    with pytest.raises(InputError):
        SpotList.from_columns([1, 2], [1])
    with pytest.raises(InputError):
        sp.sorted_by("colour")
    buf = io.StringIO(spot_csv_text(SpotList.empty()))
    assert buf.read().strip() == "x,y,intensity,intensity_error,sigma,snr,uncertainty,saturated,edge"
