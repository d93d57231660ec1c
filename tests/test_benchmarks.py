"""The benchmark runner (scripts/run_benchmarks.py): every scripts/bench_*.py keeps the contract
it relies on, and one quick benchmark runs through it into the table. No timing is asserted."""

import importlib.util
import inspect
import math
import sys
from pathlib import Path

SCRIPTS = Path(__file__).resolve().parent.parent / "scripts"
KEYS = {"benchmark", "measured", "baseline", "ratio", "goal"}


def load(path: Path):
    if str(SCRIPTS) not in sys.path:  # the benchmarks import their helpers from scripts/benchtools.py
        sys.path.insert(0, str(SCRIPTS))
    spec = importlib.util.spec_from_file_location(path.stem, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_every_benchmark_exposes_main_quick():
    paths = sorted(SCRIPTS.glob("bench_*.py"))
    assert paths
    for path in paths:
        main = load(path).main
        quick = inspect.signature(main).parameters.get("quick")
        assert quick is not None and quick.default is False, path.name


def test_runner_collects_rows_into_one_table(capsys):
    runner = load(SCRIPTS / "run_benchmarks.py")
    rows, failed = runner.run(quick=True, only={"index"})
    assert not failed and rows
    for row in rows:
        assert KEYS <= set(row) and row["script"] == "index"
        assert isinstance(row["ratio"], float) and math.isfinite(row["ratio"]) and row["ratio"] > 0
    table = runner.format_table(rows).splitlines()
    assert table[0].split() == ["script", "benchmark", "measured", "baseline", "ratio", "goal"]
    assert len(table) == len(rows) + 2
    # a misspelt name is refused, not answered with an empty table
    try:
        runner.main(["--quick", "--only", "idnex"])
    except SystemExit as exc:
        assert exc.code == 2
    else:
        raise AssertionError("an unknown benchmark name was accepted")
    assert "no benchmark named idnex" in capsys.readouterr().err
