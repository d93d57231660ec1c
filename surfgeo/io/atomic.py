"""Atomic file output: write to a temporary file beside the target, then rename.

Nothing half-written is ever left at the target path, and an existing file is only
replaced when ``force=True``.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from surfgeo.errors import InputError, OutputExistsError


def check_writable(path: str | os.PathLike, force: bool = False) -> Path:
    """Check that ``path`` may be written and return it as a :class:`~pathlib.Path`.

    Parameters
    ----------
    path : str or path-like
        The output file.
    force : bool
        Allow replacing an existing file.

    Raises
    ------
    OutputExistsError
        If the file exists and ``force`` is false.
    InputError
        If the path is a directory or its parent directory does not exist.
    """
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{p} is a directory; give a file name for the output.")
    if p.exists() and not force:
        raise OutputExistsError(f"{p} already exists; pass --force to overwrite it.")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"cannot write {p}: the folder {parent} does not exist.")
    return p


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, force: bool = False) -> Iterator[Path]:
    """Yield a temporary path to write to; on success it is renamed to ``path``.

    The temporary file lives in the same folder and keeps the target's suffix, so that
    writers which choose a format from the file ending (ASE, matplotlib) still work.
    On any exception the temporary file is removed and ``path`` is untouched.

    Examples
    --------
    >>> with atomic_output("slab.extxyz", force=True) as tmp:  # doctest: +SKIP
    ...     ase.io.write(tmp, atoms)
    """
    target = check_writable(path, force)
    fd, tmp_name = tempfile.mkstemp(
        prefix=f".{target.name}.", suffix="".join(target.suffixes) or ".tmp",
        dir=target.parent if str(target.parent) else ".",
    )
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        if not force and target.exists():  # appeared while we were writing
            raise OutputExistsError(f"{target} already exists; pass --force to overwrite it.")
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual permissions
        os.replace(tmp, target)
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_bytes(path: str | os.PathLike, data: bytes, force: bool = False) -> Path:
    """Write ``data`` to ``path`` atomically; see :func:`atomic_output`."""
    with atomic_output(path, force) as tmp:
        tmp.write_bytes(data)
    return Path(path)


def write_text(path: str | os.PathLike, text: str, force: bool = False) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically; see :func:`atomic_output`."""
    return write_bytes(path, text.encode("utf-8"), force)
