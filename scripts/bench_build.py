"""Benchmark of the slab builder against ase.build.surface, and a 10^5-atom slab.

Rows printed (and returned by ``main``):

* (533), (997), (110) Pt slabs of 20 layers as 10x10 supercells: surfgeo's
  ``surface_slab`` (primitive reduced cell, layer analysis, terminations, step
  description, surface record) against ``ase.build.surface`` for the same face with the
  same ``layers`` argument followed by ``.repeat((10, 10, 1))``, measured in the same run.
  ASE's ``layers`` counts its own (non-primitive) repeat units, so its slabs hold more atoms;
  a second row per face compares against ASE with as many atoms as surfgeo's slab.
  Goal: ratio <= 1.5.
* A Pt(111) slab of about 10^5 atoms: time and peak memory (tracemalloc) against ASE's own
  ``fcc111`` builder for the same atoms, and the time per atom against a slab 10 times smaller
  (goal: linear in the atom count, a few seconds).

Timings are the median of several repetitions after one warm-up call (both sides). surfgeo
keeps a few pure results between calls (translation lattice of the bulk, plane lattices, step
decompositions, microfacet member lists); a second row per face clears all of them before every
call (``surfgeo.slab.cut.clear_caches``: a first build of the face in a fresh process, apart from
imports).
"""

from __future__ import annotations

import sys
import time
import tracemalloc

from benchtools import median_time, print_rows


def main(quick: bool = False) -> list[dict]:
    from ase.build import bulk, fcc111, surface

    from surfgeo.slab.bulk import bulk_crystal
    from surfgeo.slab.cut import clear_caches, surface_slab

    repeat = 3 if quick else 9
    pt = bulk_crystal("Pt")
    pt_ase = bulk("Pt", "fcc", a=pt.info["surfgeo_bulk"]["a"], cubic=True)
    rows: list[dict] = []
    for hkl in [(5, 3, 3), (9, 9, 7), (1, 1, 0)]:
        ours = surface_slab(pt, hkl, layers=20, size=(10, 10))
        t_ours = median_time(lambda h=hkl: surface_slab(pt, h, layers=20, size=(10, 10)), repeat)
        ref = surface(pt_ase, hkl, 20, vacuum=5.0).repeat((10, 10, 1))
        t_ase = median_time(lambda h=hkl: surface(pt_ase, h, 20, vacuum=5.0).repeat((10, 10, 1)), repeat)
        face = "".join(str(v) for v in hkl)
        rows.append({
            "benchmark": f"build Pt({face}) 20 layers 10x10 vs ase.build.surface(layers=20)",
            "measured": f"{t_ours * 1e3:.2f} ms ({len(ours)} atoms)",
            "baseline": f"{t_ase * 1e3:.2f} ms ({len(ref)} atoms)",
            "ratio": t_ours / t_ase,
            "goal": "<= 1.5",
        })
        # a first build of the face: cached pure results (translation lattice, plane lattices,
        # step decompositions, microfacet lists) cleared before every call
        def cold(h=hkl):
            clear_caches()
            surface_slab(pt, h, layers=20, size=(10, 10))

        t_cold = median_time(cold, repeat)
        rows.append({
            "benchmark": f"first build of Pt({face}) 20 layers 10x10 (caches cleared) vs ase.build.surface",
            "measured": f"{t_cold * 1e3:.2f} ms ({len(ours)} atoms)",
            "baseline": f"{t_ase * 1e3:.2f} ms ({len(ref)} atoms)",
            "ratio": t_cold / t_ase,
            "goal": "<= 1.5",
        })
        # ASE with as many atoms as ours: its unit holds n_unit atoms per layer argument
        n_unit = len(surface(pt_ase, hkl, 1, vacuum=5.0))
        ase_layers = max(1, round(len(ours) / 100 / n_unit))
        ref2 = surface(pt_ase, hkl, ase_layers, vacuum=5.0).repeat((10, 10, 1))
        t_ase2 = median_time(
            lambda h=hkl, n=ase_layers: surface(pt_ase, h, n, vacuum=5.0).repeat((10, 10, 1)), repeat
        )
        rows.append({
            "benchmark": f"build Pt({face}) 20 layers 10x10 vs ase.build.surface with the same atom count",
            "measured": f"{t_ours * 1e3:.2f} ms ({len(ours)} atoms)",
            "baseline": f"{t_ase2 * 1e3:.2f} ms ({len(ref2)} atoms, layers={ase_layers})",
            "ratio": t_ours / t_ase2,
            "goal": "<= 1.5",
        })

    # large slab: linear scaling and memory
    side = 32 if quick else 100
    small_side = max(1, round(side / 10 ** 0.5))
    layers = 10
    t_small = median_time(
        lambda: surface_slab(pt, (1, 1, 1), layers=layers, size=(small_side, small_side)), 3
    )
    n_small = layers * small_side * small_side
    tracemalloc.start()
    t0 = time.perf_counter()
    big = surface_slab(pt, (1, 1, 1), layers=layers, size=(side, side))
    t_big = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    t_big_clean = median_time(lambda: surface_slab(pt, (1, 1, 1), layers=layers, size=(side, side)), 1)
    a_pt = pt.info["surfgeo_bulk"]["a"]
    t_ase_big = median_time(lambda: fcc111("Pt", (side, side, layers), a=a_pt, vacuum=5.0), 1)
    rows.append({
        "benchmark": f"build Pt(111) {len(big)} atoms ({side}x{side}, {layers} layers): time and peak memory "
                     "vs ase.build.fcc111 with the same atoms",
        "measured": f"{t_big_clean:.3f} s, peak {peak / 2**20:.1f} MiB (under tracemalloc {t_big:.3f} s)",
        "baseline": f"{t_ase_big:.3f} s (ase.build.fcc111, no layer analysis)",
        "ratio": t_big_clean / t_ase_big,
        "goal": "<= 1.5, and a few seconds at most",
    })
    per_big = t_big_clean / len(big)
    per_small = t_small / n_small
    rows.append({
        "benchmark": f"build time per atom, {len(big)} atoms vs {n_small} atoms (linear scaling)",
        "measured": f"{per_big * 1e9:.0f} ns/atom",
        "baseline": f"{per_small * 1e9:.0f} ns/atom",
        "ratio": per_big / per_small,
        "goal": "<= 1.5 (linear or better)",
    })
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
