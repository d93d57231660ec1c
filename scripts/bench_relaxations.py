#!/usr/bin/env python
"""Benchmark: reading and analysing a 5,000-atom relaxed slab with shuffled atom order.

A synthetic Pt(111) slab (25 x 25 x 8 = 5,000 Pt atoms, plus 169 O atoms of a p(2x2)
overlayer) is "relaxed" with known layer
displacements plus noise, shuffled, wrapped into the cell and written as a VASP CONTCAR;
the reference goes to an extended XYZ file. The measured time covers what
``surfgeo relaxations CONTCAR --reference ref.extxyz`` does: reading both files and the
analysis (matching by minimum-distance assignment, layers, spacings). The baseline is the
time ASE alone needs to read the relaxed file, measured in the same run.

A second row times the hard case where displacements reach about half the
nearest-neighbour distance, so that the assignment problem has to be solved (sparse
minimum-weight matching) instead of the nearest-neighbour shortcut.

Goal: a few seconds in total (the issue's target).
"""

from __future__ import annotations

import sys
import tempfile
import warnings
from pathlib import Path

import numpy as np
from benchtools import best_time, print_rows


def _case(tmp: Path, size: tuple[int, int, int], amplitude: float, noise: float, tag: str):
    import ase.io
    from ase import Atoms
    from ase.build import fcc111

    rng = np.random.default_rng(1)
    ref = fcc111("Pt", size, a=3.92, vacuum=8.0)
    # a quarter monolayer of O in fcc hollows, p(2x2): ASE's fcc111 puts the fcc hollow at
    # (1/3, 1/3) of the 1x1 cell (its 60 degree basis)
    a1, a2 = np.array(ref.cell[0]) / size[0], np.array(ref.cell[1]) / size[1]
    top = ref.positions[ref.get_tags() == 1]
    ij = np.rint(np.linalg.solve(np.array([a1[:2], a2[:2]]).T, top[:, :2].T).T).astype(int)
    pick = (ij[:, 0] % 2 == 0) & (ij[:, 1] % 2 == 0)
    ref += Atoms(f"O{int(pick.sum())}", positions=top[pick] + (a1 + a2) / 3 + [0.0, 0.0, 1.2])
    cell = np.array(ref.cell)
    cell[1] -= cell[0]  # surfgeo convention: 120 degrees
    ref.set_cell(cell, scale_atoms=False)
    ref.wrap()
    tags = ref.get_tags()
    d = rng.normal(0.0, noise, (len(ref), 3))
    d[tags == 1, 2] -= 0.04
    d[tags == 2, 2] += 0.01
    if amplitude:
        d += rng.uniform(-amplitude, amplitude, d.shape)
    rel = ref.copy()
    rel.positions += d
    rel = rel[rng.permutation(len(rel))]
    rel.pbc = True
    rel.wrap()
    ref_path, rel_path = tmp / f"ref_{tag}.extxyz", tmp / f"CONTCAR_{tag}"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ase.io.write(ref_path, ref)
        ase.io.write(rel_path, rel, format="vasp", direct=True)
    return ref_path, rel_path, d


def main(quick: bool = False) -> list[dict]:
    import ase.io

    from surfgeo.io.structures import read_structure
    from surfgeo.slab.relaxations import analyse_relaxation

    size = (10, 10, 5) if quick else (25, 25, 8)
    repeat = 1 if quick else 3
    rows = []
    with tempfile.TemporaryDirectory() as tmpdir:
        tmp = Path(tmpdir)
        for tag, amplitude, noise, label in (
            ("typical", 0.0, 0.02, "typical relaxation (0.02 A noise + layer shifts)"),
            ("hard", 1.3, 0.0, "displacements up to 1.3 A (assignment solved)"),
        ):
            ref_path, rel_path, d = _case(tmp, size, amplitude, noise, tag)
            n_o = len(d) - int(np.prod(size))
            n = int(np.prod(size))

            def ase_read(path=rel_path):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    ase.io.read(path, format="vasp")

            result: dict = {}

            def ours(ref_path=ref_path, rel_path=rel_path, result=result):
                ref = read_structure(ref_path)
                rel = read_structure(rel_path)
                result["report"] = analyse_relaxation(ref, rel, max_displacement=4.0)

            t_ase = best_time(ase_read, repeat)
            t_ours = best_time(ours, repeat)
            if amplitude:
                # beyond half the neighbour distance the optimal matching need not be the applied
                # displacement field, so report its mean squared displacement against the applied one
                got = float((result["report"].displacements ** 2).sum(axis=1).mean())
                check = f"msd {got:.3f} A^2 vs applied {float((d ** 2).sum(axis=1).mean()):.3f} A^2"
            else:
                err = float(np.abs(result["report"].displacements - d).max())
                check = f"max displacement error {err:.1e} A"
            rows.append({
                "benchmark": f"read + analyse shuffled slab of {n} Pt + {n_o} O, {label}",
                "measured": f"{t_ours:.3f} s ({check})",
                "baseline": f"ASE reads the relaxed file: {t_ase:.3f} s",
                "ratio": t_ours / t_ase,
                "goal": "a few seconds in total (< 3 s)",
            })
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
