"""Reading structures from any file ASE reads (with clear errors), and surface model files.

Relaxed slabs come back from DFT codes in many forms: VASP CONTCAR, OUTCAR or
vasprun.xml, Quantum ESPRESSO pw.x output, FHI-aims output, extended XYZ trajectories,
ASE trajectories ... :func:`read_structure` reads any of them through :func:`ase.io.read`,
taking the last frame of a trajectory unless another frame is asked for, and turns every
failure into a one-sentence :class:`~surfgeo.errors.FileFormatError`.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

from surfgeo.errors import FileFormatError, InputError, SurfgeoError


def parse_frame(text: str | int | None) -> int:
    """A frame number: an integer (negative counts from the end) or ``last``/``first``."""
    if text is None:
        return -1
    if isinstance(text, int):
        return text
    t = str(text).strip().lower()
    if t in ("last", "end"):
        return -1
    if t == "first":
        return 0
    try:
        return int(t)
    except ValueError:
        raise InputError(
            f"the frame must be a whole number (0 = first, -1 = last) or 'first'/'last', got {text!r}."
        ) from None


#: File endings that ASE does not recognise by itself but surfgeo writes.
_ENDINGS = {".lmp": "lammps-data", ".lammps": "lammps-data", ".pwi": "espresso-in", ".pwin": "espresso-in"}


def _short(exc: BaseException) -> str:
    msg = " ".join(str(exc).split())
    if len(msg) > 160:
        msg = msg[:157] + "..."
    return f"{type(exc).__name__}: {msg}" if msg else type(exc).__name__


def read_structure(path: str | os.PathLike, frame: int | str | None = -1, format: str | None = None):
    """Read one frame of a structure file with ASE.

    Parameters
    ----------
    path : str or path-like
        Any file :func:`ase.io.read` understands (the format is guessed from the name and
        contents, or given by ``format``). A ``.toml`` file is read as a surfgeo surface
        model (:func:`surfgeo.slab.model.build_model`) when that module is available.
    frame : int or str, optional
        Which frame of a trajectory or multi-image file: ``-1`` (default) the last,
        ``0`` the first; ``"last"``/``"first"`` are accepted.
    format : str, optional
        An ASE format name (``vasp``, ``vasp-out``, ``vasp-xml``, ``espresso-out``,
        ``extxyz``, ``aims``, ...) to use instead of guessing.

    Returns
    -------
    ase.Atoms

    Raises
    ------
    FileFormatError
        The file is missing, empty, not readable by ASE, has no such frame, or holds no atoms.
    """
    p = Path(path)
    index = parse_frame(frame)
    if not p.exists():
        raise FileFormatError(f"{p} does not exist.")
    if p.is_dir():
        raise FileFormatError(f"{p} is a folder; give a structure file.")
    if p.stat().st_size == 0:
        raise FileFormatError(f"{p} is empty.")
    if p.suffix.lower() == ".toml" and format is None:
        return _read_model(p)
    import ase.io
    from ase.io.formats import UnknownFileTypeError

    given = format
    if format is None:
        format = _ENDINGS.get(p.suffix.lower())
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if index in (0, -1):
                atoms = ase.io.read(p, index=index, format=format)
            else:
                # ASE does not check every index (a negative one may silently wrap): count first
                frames = ase.io.read(p, index=":", format=format)
                if not -len(frames) <= index < len(frames):
                    raise FileFormatError(
                        f"{p} holds {len(frames)} frame(s), so there is no frame {index}; "
                        f"use 0 to {len(frames) - 1}, or -1 for the last."
                    )
                atoms = frames[index]
    except SurfgeoError:
        raise
    except UnknownFileTypeError as exc:
        if given is not None:
            raise FileFormatError(
                f"{given!r} is not a format ASE can read; name one such as vasp, vasp-out, espresso-out, "
                "extxyz or aims."
            ) from None
        raise FileFormatError(
            f"cannot tell the format of {p} ({_short(exc)}); name the ASE format with --format "
            "(e.g. vasp, vasp-out, espresso-out, extxyz, aims)."
        ) from None
    except ValueError as exc:
        if "format" in str(exc).lower() and format is not None:
            raise FileFormatError(f"{format!r} is not a format ASE can read ({_short(exc)}).") from None
        raise FileFormatError(f"cannot read {p} as a structure ({_short(exc)}).") from None
    except Exception as exc:  # noqa: BLE001 - ASE readers raise anything on malformed input
        raise FileFormatError(f"cannot read {p} as a structure ({_short(exc)}).") from None
    if isinstance(atoms, list):  # some readers ignore a scalar index
        if not atoms:
            raise FileFormatError(f"{p} holds no structure.")
        atoms = atoms[index]
    if len(atoms) == 0:
        raise FileFormatError(f"{p} holds a structure without atoms.")
    return atoms


def _read_model(p: Path):
    try:
        from surfgeo.slab.model import build_model
    except ImportError:
        raise FileFormatError(
            f"{p} looks like a surface model file, but model files are not supported in this version; "
            "give a structure file (e.g. extended XYZ)."
        ) from None
    return build_model(p)


__all__ = ["parse_frame", "read_structure"]
