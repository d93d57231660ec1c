"""Reading measured LEED images into floating-point arrays.

Supported inputs: PNG (8- and 16-bit grey, or colour) read with Pillow; TIFF (8/16/32-bit
unsigned or signed integers, 32/64-bit floats, grey or colour, one frame) read with tifffile;
other single-frame formats Pillow can open (JPEG, BMP, ...) are accepted too. Colour images are
turned into grey with the ITU-R BT.601 luma weights.

Image coordinates (see DEVELOPERS.md): the array index is ``data[row, column] = data[y, x]``
with x to the right, y downwards and the centre of the top-left pixel at (0, 0).

This module only reads files. :func:`encode_image` returns the bytes of a PNG or TIFF so that
callers write them with :func:`surfgeo.io.write_bytes` (atomic, no silent overwrite).
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from surfgeo.errors import FileFormatError, InputError

#: ITU-R BT.601 luma weights for R, G, B.
LUMA_WEIGHTS = (0.299, 0.587, 0.114)

_TIFF_MAGIC = (b"II*\x00", b"MM\x00*", b"II+\x00", b"MM\x00+")
_PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


@dataclass(frozen=True, eq=False)
class MeasuredImage:
    """A grey image as floats, with what is known about its sample format.

    Attributes
    ----------
    data : ndarray, shape (H, W)
        Pixel values in the file's own units (ADU). float32 when the samples fit exactly
        in 24 bits (8/16-bit integers, float32), float64 otherwise. Non-finite values of
        float images are kept; the detector ignores them.
    source : str
        File name (or a description) for messages.
    sample_type : str
        The numpy name of the stored sample type, e.g. ``"uint16"``.
    saturation : float or None
        The largest value the sample type can hold (integer types); pixels at this value
        are treated as saturated. None for float images.
    """

    data: np.ndarray
    source: str
    sample_type: str
    saturation: float | None

    @property
    def shape(self) -> tuple[int, int]:
        """(height, width) in pixels."""
        return self.data.shape  # type: ignore[return-value]


def _float_data(arr: np.ndarray) -> np.ndarray:
    if arr.dtype in (np.uint8, np.int8, np.uint16, np.int16, np.float32, np.bool_):
        return arr.astype(np.float32)
    return arr.astype(np.float64)


def image_from_array(array, source: str = "image", saturation: float | None = None) -> MeasuredImage:
    """Wrap a 2D array (grey) or an (H, W, 3|4) colour array as a :class:`MeasuredImage`.

    Parameters
    ----------
    array : array_like
        Pixel values, ``array[y, x]``.
    source : str
        Name used in error messages.
    saturation : float, optional
        Saturation level; defaults to the maximum of an integer sample type.

    Raises
    ------
    FileFormatError
        If the array is not a non-empty 2D grey or 3D colour image with some finite values.
    """
    arr = np.asarray(array)
    sample = arr.dtype
    if arr.dtype.kind not in "biuf":
        raise FileFormatError(f"{source} does not hold numeric pixel values (found {arr.dtype}).")
    if arr.ndim == 3 and arr.shape[-1] in (3, 4):
        rgb = arr[..., :3].astype(np.float64)
        grey = rgb @ np.array(LUMA_WEIGHTS)
        data = grey.astype(np.float32) if arr.dtype.itemsize <= 2 else grey
    elif arr.ndim == 2:
        data = _float_data(arr)
    elif arr.ndim == 3:
        raise FileFormatError(
            f"{source} holds {arr.shape[0]} frames; give a single-frame grey or colour image."
        )
    else:
        raise FileFormatError(f"{source} is not a 2D image (array shape {arr.shape}).")
    if data.size == 0 or min(data.shape) == 0:
        raise FileFormatError(f"{source} holds no pixels; give an image at least 1 x 1 pixel large.")
    if not np.isfinite(data).any():
        raise FileFormatError(f"{source} has no finite pixel values.")
    if saturation is None and sample.kind in "biu" and sample != np.bool_:
        saturation = float(np.iinfo(sample).max)
    return MeasuredImage(data=data, source=source, sample_type=str(sample), saturation=saturation)


def _read_tiff(path: Path) -> np.ndarray:
    import tifffile

    try:
        with tifffile.TiffFile(path) as tif:
            npages = len(tif.pages)
            if npages == 0:
                raise FileFormatError(f"{path} is a TIFF file without any image.")
            if npages > 1:
                raise FileFormatError(
                    f"{path} holds {npages} frames; give a single-frame image (split the stack first)."
                )
            page = tif.pages[0]
            arr = page.asarray()
            axes = getattr(page, "axes", "")
            if arr.ndim == 3 and axes.startswith("S"):  # colour stored as separate planes
                arr = np.moveaxis(arr, 0, -1)
            return arr
    except FileFormatError:
        raise
    except Exception as exc:  # tifffile raises several types for damaged files
        raise FileFormatError(f"{path} is not a readable TIFF image ({exc}).") from None


def _read_pillow(path: Path) -> np.ndarray:
    from PIL import Image, UnidentifiedImageError

    try:
        with Image.open(path) as im:
            n_frames = getattr(im, "n_frames", 1)
            if n_frames > 1:
                raise FileFormatError(f"{path} holds {n_frames} frames; give a single-frame image.")
            if im.mode == "P":
                im = im.convert("RGBA" if "transparency" in im.info else "RGB")
            elif im.mode in ("LA", "La"):
                im = im.getchannel(0)
            elif im.mode in ("CMYK", "YCbCr", "LAB", "HSV"):
                im = im.convert("RGB")
            im.load()
            return np.asarray(im).copy()
    except FileFormatError:
        raise
    except UnidentifiedImageError:
        raise FileFormatError(
            f"{path} is not a PNG or TIFF image (or another format Pillow reads)."
        ) from None
    except (OSError, ValueError, SyntaxError) as exc:
        raise FileFormatError(f"{path} is not a readable image ({exc}).") from None


def read_image(path: str | os.PathLike, saturation: float | None = None) -> MeasuredImage:
    """Read a grey or colour image file into a :class:`MeasuredImage`.

    Parameters
    ----------
    path : str or path-like
        PNG, TIFF (one frame) or another format Pillow opens.
    saturation : float, optional
        Saturation level in the file's units (e.g. 4095 for a 12-bit camera stored in
        16-bit words); default: the largest value of an integer sample type.

    Raises
    ------
    FileFormatError
        If the file does not exist, is empty, cannot be decoded, or holds no pixels.
    """
    p = Path(path)
    if not p.exists():
        raise FileFormatError(f"{p} does not exist; give the path of a PNG or TIFF image.")
    if p.is_dir():
        raise FileFormatError(f"{p} is a folder; give the path of a PNG or TIFF image.")
    try:
        with open(p, "rb") as fh:
            head = fh.read(8)
    except OSError as exc:
        raise FileFormatError(f"{p} cannot be opened ({exc.strerror}).") from None
    if not head:
        raise FileFormatError(f"{p} is empty; give a PNG or TIFF image.")
    if head[:4] in _TIFF_MAGIC:
        arr = _read_tiff(p)
    else:
        arr = _read_pillow(p)
    return image_from_array(arr, source=str(p), saturation=saturation)


def encode_image(array, fmt: str = "png", sample_type: str = "uint16") -> bytes:
    """Encode a 2D array as PNG or TIFF bytes (write them with :func:`surfgeo.io.write_bytes`).

    Parameters
    ----------
    array : array_like, shape (H, W)
        Pixel values; they are rounded and clipped to the range of integer sample types.
    fmt : {"png", "tiff"}
        Container format.
    sample_type : str
        ``uint8`` or ``uint16`` for PNG; ``uint8``, ``uint16``, ``uint32``, ``float32`` or
        ``float64`` for TIFF.

    Raises
    ------
    InputError
        For an unsupported combination of format and sample type.
    """
    arr = np.asarray(array)
    if arr.ndim != 2:
        raise InputError(f"an image to encode must be 2D, got shape {arr.shape}.")
    fmt = fmt.lower().lstrip(".")
    fmt = "tiff" if fmt in ("tif", "tiff") else fmt
    allowed = {"png": ("uint8", "uint16"), "tiff": ("uint8", "uint16", "uint32", "float32", "float64")}
    if fmt not in allowed:
        raise InputError(f"image format {fmt!r} is not supported; use png or tiff.")
    if sample_type not in allowed[fmt]:
        raise InputError(f"{fmt} images can be written as {', '.join(allowed[fmt])}, not {sample_type}.")
    dt = np.dtype(sample_type)
    if dt.kind == "u":
        info = np.iinfo(dt)
        out = np.clip(np.rint(np.nan_to_num(arr.astype(np.float64))), info.min, info.max).astype(dt)
    else:
        out = arr.astype(dt)
    buf = io.BytesIO()
    if fmt == "png":
        from PIL import Image

        Image.fromarray(out).save(buf, format="PNG")
    else:
        import tifffile

        tifffile.imwrite(buf, out, photometric="minisblack")
    return buf.getvalue()


__all__ = ["MeasuredImage", "read_image", "image_from_array", "encode_image", "LUMA_WEIGHTS"]
