"""Argument helpers shared by several subcommands."""

from __future__ import annotations

import argparse
import re

from surfgeo.errors import LatticeError
from surfgeo.lattice import SPEC_HELP, Lattice2D, parse_lattice

_SURFACE_NAME = re.compile(r"^\s*[A-Z][a-z]?\s*\(")


def add_command(subparsers, common: argparse.ArgumentParser, name: str, *, help: str, description: str,
                epilog: str) -> argparse.ArgumentParser:
    """Add the subcommand ``name`` in the house style and return its parser.

    The parser inherits the options shared by every command (``parents=[common]``: ``--debug``)
    and prints ``epilog`` (the worked example) as written.
    """
    return subparsers.add_parser(
        name, parents=[common], help=help, description=description, epilog=epilog,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )


def add_frame_option(parser: argparse.ArgumentParser, what: str) -> None:
    """``--frame N``: which frame of a multi-frame structure file ``what`` to use (default last)."""
    parser.add_argument("--frame", default="-1", metavar="N",
                        help=f"frame of {what} to use (default: the last; 0 = the first)")


def add_layer_tol_option(parser: argparse.ArgumentParser) -> None:
    """``--layer-tol T``: the height tolerance that groups atoms into layers."""
    parser.add_argument("--layer-tol", type=float, default=None, metavar="T",
                        help="atoms closer than T Angstrom in height share a layer (default 0.3, or half "
                        "the bulk layer spacing recorded in the model when that is smaller)")


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


FIGURE_SUFFIXES = (".png", ".svg")


def check_outputs(outputs: dict[str, str | None], force: bool = False, figure: str | None = None) -> None:
    """Refuse, before any work is done, outputs that cannot or must not be written.

    Parameters
    ----------
    outputs : dict
        Option name (``"--json"``, ``"-o"``, ``"OUTPUT"`` ...) to the file name given for it;
        ``None`` (not requested) and ``"-"`` (standard output) are not files and are skipped.
    force : bool
        ``--force``: existing files may be replaced.
    figure : str, optional
        The option among ``outputs`` that names a figure; its name must end in .png or .svg.

    Raises
    ------
    InputError
        When two options name the same file (the second write would replace or refuse the
        first after it was written), when the figure name has another ending, or when a
        folder does not exist.
    OutputExistsError
        When a file exists and ``force`` is false.
    """
    from pathlib import Path

    from surfgeo.errors import InputError
    from surfgeo.io import check_writable

    if figure and outputs.get(figure) and Path(outputs[figure]).suffix.lower() not in FIGURE_SUFFIXES:
        raise InputError(f"{figure} {outputs[figure]}: the figure must end in .png or .svg.")
    seen: dict[str, str] = {}
    for option, path in outputs.items():
        if not path or path == "-":
            continue
        key = str(Path(path).resolve())
        if key in seen:
            raise InputError(
                f"{seen[key]} and {option} name the same file {path}; give each output its own name."
            )
        seen[key] = option
    for path in outputs.values():
        if path and path != "-":
            check_writable(path, force)


def add_superstructure_options(parser: argparse.ArgumentParser, wood_positional: bool = True) -> None:
    """A superstructure given either as ``--matrix M11 M12 M21 M22`` or in Wood notation.

    The Wood form is a positional argument (``wood_positional=True``, quote it when it holds
    spaces: ``"(sqrt3 x sqrt3)R30"``) or the option ``--wood TEXT``. Both store into
    ``args.wood``; the matrix goes to ``args.matrix``. Use :func:`resolve_superstructure`.
    """
    parser.add_argument(
        "--matrix", nargs="+", metavar="M", default=None,
        help="superstructure matrix M11 M12 M21 M22 (b_i = sum_j M_ij a_j): integers, fractions "
        "such as 1/2, or decimals (write negative fractions as decimals, e.g. -0.5)",
    )
    wood_help = (
        "Wood notation, e.g. '(2x1)', 'c(4x2)', '(sqrt3 x sqrt3)R30' or '(√3×√3)R30°' "
        "(quote it; spaces inside are fine)"
    )
    if wood_positional:
        parser.add_argument("wood", nargs="?", default=None, metavar="WOOD", help=wood_help)
    else:
        parser.add_argument("--wood", default=None, metavar="WOOD", help=wood_help)


def resolve_superstructure(args: argparse.Namespace, lattice: Lattice2D, required: bool = True):
    """The :class:`~surfgeo.lattice.Superstructure` named by ``--matrix`` or the Wood argument.

    Returns None when neither was given and ``required`` is false.

    Raises
    ------
    NotationError
        When both or (if required) neither were given, when ``--matrix`` does not have four
        numbers, or when the matrix or the Wood notation is invalid.
    """
    from surfgeo.errors import NotationError
    from surfgeo.lattice import Superstructure

    matrix = getattr(args, "matrix", None)
    wood = getattr(args, "wood", None)
    if matrix is not None and wood is not None:
        raise NotationError(
            f"give the superstructure either as --matrix or as Wood notation, not both (got {wood!r} too)."
        )
    if matrix is not None:
        if len(matrix) != 4:
            raise NotationError(
                f"--matrix takes exactly four numbers M11 M12 M21 M22, got {len(matrix)}: "
                f"{' '.join(matrix)}."
            )
        return Superstructure(lattice, matrix)
    if wood is not None:
        return Superstructure.from_wood(lattice, wood)
    if required:
        raise NotationError(
            "give the superstructure as Wood notation such as \"(sqrt3 x sqrt3)R30\" or as "
            "--matrix M11 M12 M21 M22."
        )
    return None
