"""Argument helpers shared by several subcommands."""

from __future__ import annotations

import argparse
import re

from surfgeo.errors import LatticeError
from surfgeo.lattice import SPEC_HELP, Lattice2D, parse_lattice

_SURFACE_NAME = re.compile(r"^\s*[A-Z][a-z]?\s*\(")


def resolve_lattice(spec: str) -> Lattice2D:
    """A lattice from a spec string (``hex:2.77``) or a surface name (``Pt(111)``)."""
    if _SURFACE_NAME.match(spec or ""):
        try:
            from surfgeo.slab.names import surface_lattice
        except ImportError:  # pragma: no cover - until the slab package provides names
            raise LatticeError(
                f"surface names such as {spec!r} are not supported yet; use {SPEC_HELP}."
            ) from None
        return surface_lattice(spec)
    return parse_lattice(spec)


def add_lattice_option(parser: argparse.ArgumentParser, required: bool = True) -> None:
    """``--lattice SPEC``: a lattice spec or a surface name."""
    parser.add_argument(
        "--lattice", required=required, metavar="SPEC",
        help=f"substrate surface lattice: {SPEC_HELP}, or a surface name such as Pt(111)",
    )


def add_output_options(parser: argparse.ArgumentParser, plot: bool = False) -> None:
    """``--json FILE|-``, optionally ``--plot FILE``, and ``--force``."""
    parser.add_argument("--json", metavar="FILE", help="write the results as JSON to FILE ('-' for stdout)")
    if plot:
        parser.add_argument("--plot", metavar="FILE", help="write a figure (PNG or SVG, from the ending)")
    parser.add_argument("--force", action="store_true", help="overwrite existing output files")
