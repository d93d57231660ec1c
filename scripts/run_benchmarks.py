#!/usr/bin/env python
"""Run every benchmark under scripts/ and print one table of ratios.

Each ``scripts/bench_*.py`` exposes ``main(quick: bool = False) -> list[dict]`` returning rows
with the keys ``benchmark``, ``measured``, ``baseline``, ``ratio`` and ``goal``; the ratio is
always measured against a baseline timed in the same run, so the numbers do not depend on how
fast the machine is.

Usage::

    python scripts/run_benchmarks.py            # full sizes
    python scripts/run_benchmarks.py --quick    # small sizes, a smoke run
    python scripts/run_benchmarks.py --only detect,notation
"""

from __future__ import annotations

import argparse
import importlib.util
import sys
import time
import traceback
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:  # the benchmarks import their shared helpers from benchtools.py
    sys.path.insert(0, str(HERE))


def load(path: Path):
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


def run(quick: bool = False, only: set[str] | None = None) -> tuple[list[dict], list[str]]:
    """Run the benchmarks; return the rows and the names of scripts that failed."""
    rows: list[dict] = []
    failed: list[str] = []
    for path in sorted(HERE.glob("bench_*.py")):
        name = path.stem.removeprefix("bench_")
        if only and name not in only:
            continue
        start = time.perf_counter()
        try:
            module = load(path)
            result = module.main(quick=quick)
        except Exception:  # report and carry on with the others
            traceback.print_exc()
            failed.append(name)
            continue
        for row in result:
            rows.append({"script": name, **row})
        print(f"[{name}: {time.perf_counter() - start:.1f} s]", file=sys.stderr)
    return rows, failed


def format_table(rows: list[dict]) -> str:
    cols = ["script", "benchmark", "measured", "baseline", "ratio", "goal"]
    cells = [[str(r.get(c, "")) if c != "ratio" else f"{r.get('ratio', float('nan')):.3g}" for c in cols]
             for r in rows]
    widths = [max(len(c), *(len(row[i]) for row in cells)) if cells else len(c) for i, c in enumerate(cols)]
    line = "  ".join(c.ljust(w) for c, w in zip(cols, widths, strict=True))
    out = [line, "  ".join("-" * w for w in widths)]
    out += ["  ".join(v.ljust(w) for v, w in zip(row, widths, strict=True)) for row in cells]
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (a smoke run)")
    parser.add_argument("--only", help="comma-separated benchmark names, e.g. detect,notation")
    args = parser.parse_args(argv)
    only = set(args.only.split(",")) if args.only else None
    known = {p.stem.removeprefix("bench_") for p in HERE.glob("bench_*.py")}
    if only and only - known:
        parser.error(
            f"no benchmark named {', '.join(sorted(only - known))}; "
            f"the benchmarks are {', '.join(sorted(known))}."
        )
    rows, failed = run(args.quick, only)
    print(format_table(rows))
    if failed:
        print(f"failed: {', '.join(failed)}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
