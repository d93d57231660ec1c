#!/usr/bin/env python
"""Benchmark of the whole pattern pipeline (surfgeo.diffraction.pattern and .sweep).

Synthetic models only: a Cu(100)-like slab with a (5x5) cell whose top layer carries small
pseudo-random displacements (an invented low-symmetry reconstruction, so that all eight
orientations allowed by the square substrate are distinct structural domains).

1. ``slab_pattern`` of a 10^4-atom slab at 300 eV: beam enumeration and labels, the symmetry
   analysis of the atoms (substrate group, stabiliser, structural domains) and the kinematic
   intensities of every beam for every domain. Floor: one bare numpy evaluation of
   exp(i q . r) over the same atoms x beams array for every structural domain, in the same run.
   Goal: ratio <= 3.
2. ``pattern_sweep`` 40-400 eV in 1 eV steps for a 500-atom model with all its domains.
   Floor: one bare exp(i q . r) over atoms x beams per energy and domain. Goal: seconds.
3. Screen mapping of 10^6 beam positions to pixels and back (the round trip), against the
   same round trip written as bare numpy without checks. Goal: ratio <= 2.
4. ``Pattern.to_dict`` (the command's JSON, with screen positions) of a pattern with about
   2500 beams, against the same beam records built by a bare Python loop. Goal: ratio <= 5,
   i.e. linear in the number of beams (it was quadratic: 70 s for 16000 beams).

Run ``python scripts/bench_pattern.py [--quick]``; ``main(quick)`` returns the rows.
"""

from __future__ import annotations

import sys

import numpy as np
from ase import Atoms
from benchtools import best_of_interleaved, print_rows

from surfgeo.diffraction.kinematic import scattering_geometry
from surfgeo.diffraction.pattern import slab_pattern
from surfgeo.diffraction.sweep import pattern_sweep
from surfgeo.screen import CameraScreen

A_CU = 3.61
A_SURF = A_CU / np.sqrt(2.0)
LAYER = A_CU / 2.0


def synthetic_slab(n_cell: int, layers: int, random_state: int = 1) -> Atoms:
    """(n_cell x n_cell) Cu(100)-like slab with a displaced top layer (synthetic), with its record."""
    rng = np.random.default_rng(random_state)
    m, n = np.meshgrid(np.arange(n_cell), np.arange(n_cell), indexing="ij")
    base = np.column_stack([m.ravel(), n.ravel()]) * A_SURF
    pos = []
    for layer in range(layers):
        xy = base + (0.5 * A_SURF if layer % 2 else 0.0)
        z = np.full(len(xy), -layer * LAYER)
        if layer == 0:
            xy = xy + rng.normal(scale=0.1, size=xy.shape)
            z = z + rng.normal(scale=0.05, size=len(z))
        pos.append(np.column_stack([xy, z]))
    pos = np.concatenate(pos)
    pos[:, 2] -= pos[:, 2].min() - 5.0
    cell = np.diag([n_cell * A_SURF, n_cell * A_SURF, pos[:, 2].max() + 10.0])
    atoms = Atoms(np.full(len(pos), 29), positions=pos, cell=cell, pbc=(True, True, False))
    atoms.info["surfgeo"] = {
        "surface_cell": [[A_SURF, 0.0], [0.0, A_SURF]],
        "supercell_matrix": [[n_cell, 0], [0, n_cell]],
        "provenance": ["synthetic benchmark slab"],
    }
    return atoms


def _rotated_positions(atoms, pattern, domain_index=0):
    from surfgeo.diffraction.pattern import slab_context

    _, _, _, reps, _ = slab_context(atoms)
    out = []
    for op in reps[domain_index]:
        p = atoms.positions.copy()
        p[:, :2] = p[:, :2] @ np.asarray(op.cartesian).T
        out.append(p)
    return out


def bench_pattern(quick: bool) -> dict:
    layers = 80 if quick else 400  # 25 atoms per layer: 2000 or 10^4 atoms
    atoms = synthetic_slab(5, layers)
    energy = 300.0
    probe = slab_pattern(atoms, energy, intensities=False)
    g = probe.g
    q = scattering_geometry(g, energy, (0.0, 0.0), 10.0).q[0]
    positions = _rotated_positions(atoms, probe)

    def floor():
        for p in positions:
            np.exp(1j * (p @ q.T))

    def ours():
        return slab_pattern(atoms, energy)

    ours()  # warm up (imports, caches)
    t_floor, t_ours = best_of_interleaved([floor, ours], 3 if quick else 2)
    return {
        "benchmark": f"slab_pattern: {len(atoms)} atoms x {len(g)} beams at 300 eV, "
        f"{len(positions)} structural domains",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (bare exp(i q.r) over atoms x beams per domain)",
        "ratio": t_ours / t_floor,
        "goal": "<= 3",
    }


def bench_sweep(quick: bool) -> dict:
    atoms = synthetic_slab(5, 20)  # 500 atoms
    energies = np.arange(40.0, 401.0, 10.0 if quick else 1.0)
    probe = slab_pattern(atoms, energies.max(), intensities=False)
    q_all = scattering_geometry(probe.g, energies, (0.0, 0.0), 10.0).q
    positions = _rotated_positions(atoms, probe)

    def floor():
        for p in positions:
            for i in range(len(energies)):
                qi = q_all[i]
                ok = ~np.isnan(qi[:, 0])
                np.exp(1j * (p @ qi[ok].T))

    def ours():
        return pattern_sweep(energies, atoms=atoms, theta_max=90.0, show_progress=False)

    ours()
    t_floor, t_ours = best_of_interleaved([floor, ours], 1)
    return {
        "benchmark": f"pattern_sweep {energies[0]:g}-{energies[-1]:g} eV, {len(energies)} energies, "
        f"{len(atoms)} atoms x {len(probe.g)} beams, {len(positions)} domains",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (bare exp(i q.r) over atoms x beams per energy and domain)",
        "ratio": t_ours / t_floor,
        "goal": "seconds",
    }


def bench_screen(quick: bool) -> dict:
    from surfgeo.diffraction.electron import HBAR2_2M, gun_frame_rotation

    n = 10**5 if quick else 10**6
    rng = np.random.default_rng(0)
    screen = CameraScreen(centre_x=320.0, centre_y=240.0, scale=300.0, rotation_deg=12.0, stretch=0.03,
                          camera_distance=3.0, acceptance_deg=60.0)
    kp = rng.uniform(-2.5, 2.5, size=(n, 2))
    energy, inc = 100.0, (5.0, 30.0)
    Rg = gun_frame_rotation(inc)
    L = screen._linear()
    Linv = np.linalg.inv(L)
    D, s, cx, cy = screen.camera_distance, screen.scale, screen.centre_x, screen.centre_y

    def floor():
        # the same round trip written as bare numpy: no checks, no NaN handling, one branch
        k = np.sqrt(energy / HBAR2_2M)
        p = kp / k
        d = np.column_stack([p, np.sqrt(1.0 - np.einsum("ij,ij->i", p, p))])
        d = np.einsum("nj,ij->ni", d, Rg)
        t, psi = np.arccos(d[:, 2]), np.arctan2(d[:, 1], d[:, 0])
        rho = (D - 1.0) * np.sin(t) / (D - np.cos(t))
        v = np.einsum("nj,ij->ni", rho[:, None] * np.column_stack([np.cos(psi), np.sin(psi)]), L)
        px = np.column_stack([cx + s * v[:, 0], cy - s * v[:, 1]])
        v = np.column_stack([(px[:, 0] - cx) / s, (cy - px[:, 1]) / s])
        w = np.einsum("nj,ij->ni", v, Linv)
        rho, psi = np.hypot(w[:, 0], w[:, 1]), np.arctan2(w[:, 1], w[:, 0])
        t = np.arcsin(rho * D / np.hypot(D - 1.0, rho)) - np.arctan2(rho, D - 1.0)
        d = np.column_stack([np.sin(t) * np.cos(psi), np.sin(t) * np.sin(psi), np.cos(t)])
        return k * np.einsum("nj,ji->ni", d, Rg)[:, :2]

    def ours():
        px = screen.to_pixels(kp, energy, inc)
        return screen.to_k_parallel(px, energy, inc)

    assert np.allclose(floor(), ours(), atol=1e-9)  # the floor does the same job
    t_floor, t_ours = best_of_interleaved([floor, ours], 3)
    return {
        "benchmark": f"screen round trip of {n} beams (camera model, oblique incidence)",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (the same round trip as bare numpy, no checks)",
        "ratio": t_ours / t_floor,
        "goal": "<= 2",
    }


def bench_outputs(quick: bool) -> dict:
    """JSON records of a pattern with many beams against the same records built by a bare loop."""
    from surfgeo.diffraction.pattern import superstructure_pattern
    from surfgeo.lattice import Lattice2D
    from surfgeo.screen import default_screen

    energy = 1000.0 if quick else 2000.0
    pattern = superstructure_pattern(Lattice2D.hexagonal(2.77), [[3, 0], [0, 3]], energy)
    screen = default_screen()

    def floor():
        # the same beam records from the arrays, with no checks and no screen positions
        hk, kp, th, ph, doms, src = (pattern.hk, pattern.k_parallel.tolist(), pattern.theta.tolist(),
                                     pattern.phi.tolist(), pattern.domains, pattern.source)
        return [
            {"hk": [str(h), str(k)], "k_parallel": kp[i], "theta_deg": th[i], "phi_deg": ph[i],
             "order": "integer" if h.denominator == 1 and k.denominator == 1 else "fractional",
             "domains": list(doms[i]), "intensity": None, "source": src[i]}
            for i, (h, k) in enumerate(hk)
        ]

    def ours():
        return pattern.to_dict(screen)

    assert len(ours()["beams"]) == len(floor())
    t_floor, t_ours = best_of_interleaved([floor, ours], 3)
    return {
        "benchmark": f"Pattern.to_dict with screen positions, {len(pattern)} beams (p(3x3) at {energy:g} eV)",
        "measured": f"{t_ours:.3f} s",
        "baseline": f"{t_floor:.3f} s (the same beam records built by a bare loop, no screen)",
        "ratio": t_ours / t_floor,
        "goal": "<= 5 (linear in the beams; quadratic before)",
    }


def main(quick: bool = False) -> list[dict]:
    rows = [bench_pattern(quick), bench_sweep(quick), bench_screen(quick), bench_outputs(quick)]
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
