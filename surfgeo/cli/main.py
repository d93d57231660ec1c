"""Entry point of the ``surfgeo`` command.

Each subcommand lives in its own module ``surfgeo/cli/<name>.py`` that defines
``ORDER`` (an integer: where ``surfgeo --help`` lists it) and ``register(subparsers,
common)``. Modules are discovered automatically; names starting with ``_`` and ``main`` are
skipped. A command module must stay cheap to import (import numerical and plotting code
inside the function that runs the command).
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
import traceback
from collections.abc import Sequence

from surfgeo import __version__
from surfgeo.errors import InputError, SurfgeoError


def command_modules() -> list:
    """The subcommand modules of ``surfgeo.cli``, sorted by their ``ORDER``."""
    import surfgeo.cli as pkg

    mods = []
    for info in pkgutil.iter_modules(pkg.__path__):
        if info.name.startswith("_") or info.name == "main":
            continue
        mods.append(importlib.import_module(f"surfgeo.cli.{info.name}"))
    return sorted(mods, key=lambda m: (getattr(m, "ORDER", 100), m.__name__))

EPILOG = """\
examples:
  surfgeo demo
      the whole job on built-in synthetic data: spots, calibration, indexing, model ranking,
      DFT input and an expected-spot map, with an HTML report in ./surfgeo-demo

  surfgeo notation --lattice hex:2.77 "(sqrt3 x sqrt3)R30"
      matrix, Wood forms and domain count of a (\u221a3\u00d7\u221a3)R30\u00b0 superstructure on a
      hexagonal substrate with a = 2.77 \u00c5

Run 'surfgeo COMMAND --help' for the options and a worked example of each command.
"""


class _Formatter(argparse.RawDescriptionHelpFormatter):
    pass


def build_parser() -> argparse.ArgumentParser:
    """The full argument parser with every registered subcommand."""
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS,
        help="show the full traceback when something goes wrong",
    )
    parser = argparse.ArgumentParser(
        prog="surfgeo",
        description="Surface crystallography and LEED: from surface models to diffraction "
        "patterns and back.",
        epilog=EPILOG,
        formatter_class=_Formatter,
        parents=[common],
    )
    parser.add_argument("--version", action="version", version=f"surfgeo {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in command_modules():
        module.register(sub, common)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (0 success, 2 user error, 1 bug)."""
    parser = build_parser()
    args = parser.parse_args(argv)
    debug = getattr(args, "debug", False)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        status = args.func(args)
    except InputError as exc:
        if debug:
            traceback.print_exc()
        print(f"surfgeo {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except SurfgeoError as exc:
        if debug:
            traceback.print_exc()
        print(f"surfgeo {args.command}: failed: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("surfgeo: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # a bug: keep it to one line unless --debug
        if debug:
            raise
        print(
            f"surfgeo {args.command}: internal error ({type(exc).__name__}: {exc}); "
            "rerun with --debug and report the traceback.",
            file=sys.stderr,
        )
        return 1
    return int(status or 0)


def run() -> None:  # pragma: no cover - console script wrapper
    sys.exit(main())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
