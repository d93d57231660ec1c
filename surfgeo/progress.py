"""Progress reporting for long computations: shown on a terminal, silent otherwise."""

from __future__ import annotations

import sys
import time
from collections.abc import Iterable, Iterator
from typing import TextIO, TypeVar

T = TypeVar("T")


def progress(
    items: Iterable[T],
    total: int | None = None,
    desc: str = "",
    stream: TextIO | None = None,
    enabled: bool | None = None,
) -> Iterator[T]:
    """Iterate over ``items``, drawing a one-line progress bar on ``stream`` (stderr).

    The bar is drawn only when ``stream`` is a terminal (or ``enabled=True``), so that
    output redirected to files and pipes stays clean.
    """
    stream = stream or sys.stderr
    if enabled is None:
        enabled = hasattr(stream, "isatty") and stream.isatty()
    if total is None and hasattr(items, "__len__"):
        total = len(items)  # type: ignore[arg-type]
    if not enabled:
        yield from items
        return
    start = time.monotonic()
    last = 0.0
    n = 0
    for n, item in enumerate(items, 1):  # noqa: B007
        yield item
        now = time.monotonic()
        if now - last > 0.1 or (total is not None and n == total):
            last = now
            if total:
                frac = n / total
                bar = "#" * int(30 * frac)
                stream.write(f"\r{desc} [{bar:<30}] {n}/{total} {now - start:5.1f} s")
            else:
                stream.write(f"\r{desc} {n} {now - start:5.1f} s")
            stream.flush()
    stream.write("\n")
    stream.flush()
