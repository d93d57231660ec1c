#!/usr/bin/env python
"""Benchmark of the kinematic intensity sum (surfgeo.diffraction.kinematic).

Synthetic models only: a Cu(100)-like slab with a (5x5) cell whose top layer carries small
pseudo-random displacements (an invented low-symmetry reconstruction).

1. Intensities of a 10^4-atom slab for all beams emerging at 300 eV, for all eight symmetry
   domains of the square substrate (positions rotated/mirrored per domain), against the floor:
   one bare numpy evaluation of exp(i q . r) over the same atoms x beams array for every
   domain, timed in the same run. Goal: ratio <= 3.
2. An I(V) sweep 40-400 eV in 1 eV steps for a 500-atom model and all beams emerging at
   400 eV, against a floor of one bare exp(i q . r) evaluation over atoms x beams per energy.
   Goal: finishes in seconds.

Run ``python scripts/bench_kinematic.py [--quick]``; ``main(quick)`` returns the rows.
"""

from __future__ import annotations

import sys

import numpy as np
from benchtools import best_of_interleaved, print_rows

from surfgeo.diffraction.kinematic import kinematic_intensities, kinematic_iv, scattering_geometry

A_CU = 3.61
A_SURF = A_CU / np.sqrt(2.0)
LAYER = A_CU / 2.0


def synthetic_slab(n_cell: int, layers: int, random_state: int = 1):
    """(n_cell x n_cell) Cu(100)-like slab; the top layer displaced pseudo-randomly (synthetic)."""
    rng = np.random.default_rng(random_state)
    m, n = np.meshgrid(np.arange(n_cell), np.arange(n_cell), indexing="ij")
    base = np.column_stack([m.ravel(), n.ravel()]) * A_SURF
    pos = []
    for layer in range(layers):
        shift = 0.5 * A_SURF if layer % 2 else 0.0
        xy = base + shift
        z = np.full(len(xy), -layer * LAYER)
        if layer == 0:
            xy = xy + rng.normal(scale=0.1, size=xy.shape)
            z = z + rng.normal(scale=0.05, size=len(z))
        pos.append(np.column_stack([xy, z]))
    pos = np.concatenate(pos)
    cell = n_cell * A_SURF * np.eye(2)
    return pos, np.full(len(pos), 29), cell


def all_beams(cell: np.ndarray, energy: float) -> np.ndarray:
    """All reciprocal vectors of the cell that emerge at ``energy`` at normal incidence."""
    recip = 2 * np.pi * np.linalg.inv(cell).T
    k = np.sqrt(energy / 3.80998212)
    nmax = int(np.ceil(k / np.linalg.norm(recip, axis=1).min())) + 1
    hk = np.array([(h, kk) for h in range(-nmax, nmax + 1) for kk in range(-nmax, nmax + 1)])
    g = hk @ recip
    return g[np.sum(g**2, axis=1) < k * k * (1 - 1e-9)]


def square_domains() -> list[np.ndarray]:
    """The eight operations of point group 4mm as 2x2 Cartesian matrices."""
    ops = []
    for quarter in range(4):
        c, s = np.cos(quarter * np.pi / 2), np.sin(quarter * np.pi / 2)
        rot = np.round(np.array([[c, -s], [s, c]]))
        ops += [rot, rot @ np.diag([1.0, -1.0])]
    return ops


def rotated(pos: np.ndarray, op: np.ndarray) -> np.ndarray:
    out = pos.copy()
    out[:, :2] = pos[:, :2] @ op.T
    return out


def bench_domains(quick: bool) -> dict:
    layers = 80 if quick else 400  # 25 atoms per layer: 2000 or 10^4 atoms
    pos, num, cell = synthetic_slab(5, layers)
    energy = 300.0
    g = all_beams(cell, energy)
    ops = square_domains()
    q = scattering_geometry(g, energy, (0.0, 0.0), 10.0).q[0]
    domain_positions = [rotated(pos, op) for op in ops]

    def floor():
        for p in domain_positions:
            np.exp(1j * (p @ q.T))

    def ours():
        return [kinematic_intensities(p, num, g, energy) for p in domain_positions]

    ours()  # warm up (imports, caches)
    t_floor, t_ours = best_of_interleaved([floor, ours], 5 if quick else 3)
    return {
        "benchmark": f"{len(pos)} atoms x {len(g)} beams at 300 eV, {len(ops)} domains",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (bare exp(i q.r) over atoms x beams per domain)",
        "ratio": t_ours / t_floor,
        "goal": "<= 3",
    }


def bench_sweep(quick: bool) -> dict:
    pos, num, cell = synthetic_slab(5, 20)  # 500 atoms
    energies = np.arange(40.0, 401.0, 4.0 if quick else 1.0)
    g = all_beams(cell, energies.max())
    q_all = scattering_geometry(g, energies, (0.0, 0.0), 10.0).q

    def floor():
        for i in range(len(energies)):
            qi = q_all[i]
            ok = ~np.isnan(qi[:, 0])
            np.exp(1j * (pos @ qi[ok].T))

    def ours():
        return kinematic_iv(pos, num, g, energies)

    ours()
    t_floor, t_ours = best_of_interleaved([floor, ours], 2 if quick else 3)
    return {
        "benchmark": f"I(V) {energies[0]:g}-{energies[-1]:g} eV, {len(energies)} energies, "
        f"{len(pos)} atoms x {len(g)} beams",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (bare exp(i q.r) over atoms x beams per energy)",
        "ratio": t_ours / t_floor,
        "goal": "seconds",
    }


def main(quick: bool = False) -> list[dict]:
    rows = [bench_domains(quick), bench_sweep(quick)]
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
