"""Lists of measured spots: on the image (pixels) or in momentum space (1/Angstrom).

:class:`SpotList` holds positions in image pixels (x right, y down, the centre of the
top-left pixel at (0, 0)) with what the detector knows about each spot; quantities that are
not known (for a list read from a file without them) are NaN. :class:`MomentumSpotList` holds
parallel momenta ``kx, ky`` in 1/Angstrom (including the 2 pi), e.g. after a screen
calibration or typed in by hand.

Reading and writing these lists as CSV lives at the edge of the package, in
:mod:`surfgeo.io.spots`.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

import numpy as np

from surfgeo.errors import InputError

#: Columns of a pixel spot list, in the order they are written.
SPOT_COLUMNS: tuple[str, ...] = (
    "x", "y", "intensity", "intensity_error", "sigma", "snr", "uncertainty", "saturated", "edge",
)

#: Columns of a momentum-space spot list, in the order they are written.
MOMENTUM_COLUMNS: tuple[str, ...] = ("kx", "ky", "intensity")

#: Meaning and unit of every column (used in help texts and JSON output).
COLUMN_HELP: dict[str, str] = {
    "x": "column position, px (x to the right, centre of the top-left pixel at 0)",
    "y": "row position, px (y downwards, centre of the top-left pixel at 0)",
    "intensity": "integrated intensity above the local background, image units (ADU)",
    "intensity_error": "standard error of the integrated intensity, ADU",
    "sigma": "Gaussian width (standard deviation) of the spot, px",
    "snr": "signal-to-noise ratio of the spot (PSF-weighted intensity over its standard error)",
    "uncertainty": "standard error of x and of y, px",
    "saturated": "1 if the spot contains saturated pixels (its intensity is then a lower bound)",
    "edge": "1 if the spot touches a masked region or the image border",
    "kx": "parallel momentum along x, 1/Angstrom (with 2 pi)",
    "ky": "parallel momentum along y, 1/Angstrom (with 2 pi)",
}


def _column(name: str, value, n: int | None, default: float = np.nan, kind=float) -> np.ndarray:
    if value is None:
        if n is None:
            raise InputError(f"spot list column {name!r} is required.")
        return np.full(n, default, dtype=kind)
    arr = np.asarray(value, dtype=kind).reshape(-1)
    if n is not None and arr.shape[0] != n:
        raise InputError(f"spot list column {name!r} has {arr.shape[0]} values, expected {n}.")
    return arr


@dataclass(frozen=True, eq=False)
class SpotList:
    """Spots on an image, in pixels.

    All attributes are 1D arrays of equal length (one entry per spot); see
    :data:`COLUMN_HELP` for meanings and units. Unknown values are NaN (floats) or False.
    """

    x: np.ndarray
    y: np.ndarray
    intensity: np.ndarray
    intensity_error: np.ndarray
    sigma: np.ndarray
    snr: np.ndarray
    uncertainty: np.ndarray
    saturated: np.ndarray
    edge: np.ndarray

    @classmethod
    def from_columns(
        cls,
        x,
        y,
        intensity=None,
        intensity_error=None,
        sigma=None,
        snr=None,
        uncertainty=None,
        saturated=None,
        edge=None,
    ) -> SpotList:
        """Build a list from columns; omitted columns are unknown (NaN / False).

        Raises
        ------
        InputError
            If the columns differ in length or a position is not finite.
        """
        xs = _column("x", x, None)
        n = xs.shape[0]
        ys = _column("y", y, n)
        if not (np.isfinite(xs).all() and np.isfinite(ys).all()):
            raise InputError("spot positions x and y must be finite numbers.")
        return cls(
            x=xs,
            y=ys,
            intensity=_column("intensity", intensity, n),
            intensity_error=_column("intensity_error", intensity_error, n),
            sigma=_column("sigma", sigma, n),
            snr=_column("snr", snr, n),
            uncertainty=_column("uncertainty", uncertainty, n),
            saturated=_column("saturated", saturated, n, False, bool),
            edge=_column("edge", edge, n, False, bool),
        )

    @classmethod
    def empty(cls) -> SpotList:
        """A list without spots."""
        return cls.from_columns(np.zeros(0), np.zeros(0))

    def __len__(self) -> int:
        return int(self.x.shape[0])

    @property
    def positions(self) -> np.ndarray:
        """Positions as an (N, 2) array of [x, y] rows, px."""
        return np.column_stack([self.x, self.y])

    def __getitem__(self, index) -> SpotList:
        """A sub-list selected by a boolean mask, an index array or a slice."""
        return SpotList(**{f.name: getattr(self, f.name)[index] for f in fields(self)})

    def sorted_by(self, column: str = "snr", descending: bool = True) -> SpotList:
        """The list sorted by one column (NaN last)."""
        if column not in SPOT_COLUMNS:
            raise InputError(f"cannot sort spots by {column!r}; use one of {', '.join(SPOT_COLUMNS)}.")
        v = getattr(self, column).astype(float)
        key = np.where(np.isnan(v), -np.inf if descending else np.inf, v)
        order = np.argsort(-key if descending else key, kind="stable")
        return self[order]

    def records(self) -> list[dict[str, Any]]:
        """One dict per spot with every column (plain Python numbers, None for unknown)."""
        cols = {name: getattr(self, name) for name in SPOT_COLUMNS}
        out = []
        for i in range(len(self)):
            row: dict[str, Any] = {}
            for name, arr in cols.items():
                v = arr[i]
                if arr.dtype == bool:
                    row[name] = bool(v)
                else:
                    row[name] = float(v) if np.isfinite(v) else None
            out.append(row)
        return out

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form: the frame convention and the spots."""
        return {
            "frame": "image pixels: x right, y down, centre of the top-left pixel at (0, 0)",
            "count": len(self),
            "spots": self.records(),
        }


@dataclass(frozen=True, eq=False)
class MomentumSpotList:
    """Spots in momentum space: parallel momentum ``kx, ky`` in 1/Angstrom (with 2 pi)."""

    kx: np.ndarray
    ky: np.ndarray
    intensity: np.ndarray

    @classmethod
    def from_columns(cls, kx, ky, intensity=None) -> MomentumSpotList:
        """Build a list from columns; ``intensity`` may be omitted (NaN).

        Raises
        ------
        InputError
            If the columns differ in length or a momentum is not finite.
        """
        a = _column("kx", kx, None)
        b = _column("ky", ky, a.shape[0])
        if not (np.isfinite(a).all() and np.isfinite(b).all()):
            raise InputError("spot momenta kx and ky must be finite numbers.")
        return cls(kx=a, ky=b, intensity=_column("intensity", intensity, a.shape[0]))

    def __len__(self) -> int:
        return int(self.kx.shape[0])

    @property
    def momenta(self) -> np.ndarray:
        """Momenta as an (N, 2) array of [kx, ky] rows, 1/Angstrom."""
        return np.column_stack([self.kx, self.ky])

    def __getitem__(self, index) -> MomentumSpotList:
        return MomentumSpotList(kx=self.kx[index], ky=self.ky[index], intensity=self.intensity[index])

    def records(self) -> list[dict[str, Any]]:
        """One dict per spot (None for an unknown intensity)."""
        return [
            {"kx": float(a), "ky": float(b), "intensity": float(c) if np.isfinite(c) else None}
            for a, b, c in zip(self.kx, self.ky, self.intensity, strict=True)
        ]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"frame": "parallel momentum, 1/Angstrom (with 2 pi)", "count": len(self),
                "spots": self.records()}


__all__ = ["SpotList", "MomentumSpotList", "SPOT_COLUMNS", "MOMENTUM_COLUMNS", "COLUMN_HELP"]
