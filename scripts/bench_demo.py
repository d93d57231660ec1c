#!/usr/bin/env python
"""Benchmark of ``surfgeo demo`` (the whole job on the shipped synthetic data).

Goal: the demo finishes within about a minute on a 2-core machine. The baseline, timed in the
same run, is the least any analysis of the two demo images must do: reading them and one
Gaussian filter pass over each (``scipy.ndimage.gaussian_filter`` at the spot width), so the
ratio says how many such passes the whole job costs.

Rows:

1. the pipeline (:func:`surfgeo.workflows.demo.run_demo`: spots, calibration, indexing, three
   candidate models with refined energy offsets, next-energy map), against the baseline;
2. writing the folder (:func:`surfgeo.workflows.report.write_demo_folder`: five figures, the
   HTML report, JSON, CSV and the DFT input), against the same baseline.

``--quick`` runs the fast (test) mode. Run ``python scripts/bench_demo.py [--quick]``;
``main(quick)`` returns the rows.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
import time
from pathlib import Path

from benchtools import print_rows


def _baseline() -> float:
    from scipy.ndimage import gaussian_filter

    from surfgeo.measure.images import read_image
    from surfgeo.workflows.demo import DEMO_DATA, load_scenario

    scenario, _ = load_scenario()
    t0 = time.perf_counter()
    for im in scenario["images"]:
        data = read_image(DEMO_DATA / im["file"]).data
        gaussian_filter(data, 2.0)
    return time.perf_counter() - t0


def _best(fn, repeat: int) -> float:
    return min(fn() for _ in range(repeat))


def main(quick: bool = False) -> list[dict]:
    from surfgeo.workflows.demo import run_demo
    from surfgeo.workflows.report import write_demo_folder

    run_demo(fast=True, show_progress=False)  # imports and caches warm
    base = _best(_baseline, 5)
    t0 = time.perf_counter()
    result = run_demo(fast=quick, show_progress=False)
    t_run = time.perf_counter() - t0
    tmp = Path(tempfile.mkdtemp(prefix="surfgeo-bench-demo-"))
    try:
        t0 = time.perf_counter()
        write_demo_folder(result, tmp / "out", dpi=60 if quick else 110)
        t_write = time.perf_counter() - t0
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    import json

    from surfgeo.workflows.demo import DEMO_DATA

    truth = json.loads((DEMO_DATA / "truth.json").read_text(encoding="utf-8"))
    right = result.answer()["model_file"] == truth["true_model"]
    mode = ("fast mode" if quick else "full mode") + f"; right answer: {right}"
    baseline = f"read + 1 Gaussian filter pass over both images: {base * 1e3:.1f} ms"
    steps = ", ".join(f"{k} {v:.2f} s" for k, v in result.timings.items())
    return [
        {"benchmark": f"demo pipeline ({mode})", "measured": f"{t_run:.2f} s ({steps})", "baseline": baseline,
         "ratio": t_run / base, "goal": "pipeline + report within about 60 s on 2 cores"},
        {"benchmark": f"demo report folder ({mode})", "measured": f"{t_write:.2f} s", "baseline": baseline,
         "ratio": t_write / base, "goal": "pipeline + report within about 60 s on 2 cores"},
    ]


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
