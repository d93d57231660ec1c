#!/usr/bin/env python
"""Benchmark: superstructure notation for every superlattice up to area 50 on a hexagonal
substrate (2,080 Hermite normal forms; area 12 with ``--quick``).

Rows (each timed against a baseline measured in the same run):

* enumeration of all superlattices with their symmetry domains (integer arithmetic) against a
  straightforward float implementation of the same (numpy matrix products and inverses per
  operation and per domain); goal: the whole enumeration with domains well under a second;
* matrix -> all Wood forms (the vectorised lattice-vector search) against a brute-force search
  over all bases K M with |K_ij| <= 3 (which is slower and can even miss forms);
* Wood text -> exact matrix (parsing, float matrix, snapping to the exact rational matrix and
  its verification) against parsing and the float matrix alone;
* the symmetry-distinct superlattices (orbits under 6mm) against the plain HNF enumeration.

Per-item costs are printed in microseconds.
"""

from __future__ import annotations

import itertools
import math
import sys
from pathlib import Path

import numpy as np
from benchtools import best_time, print_rows

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def _float_domains(A: np.ndarray, ops, M: np.ndarray) -> int:
    """Baseline: domains by float comparison of M W against the domains found so far."""
    found: list[np.ndarray] = []
    for op in ops:
        MW = M @ op.integer.astype(float)
        for D in found:
            U = MW @ np.linalg.inv(D)
            if np.allclose(U, np.rint(U), atol=1e-6):
                break
        else:
            found.append(MW)
    return len(found)


def _brute_wood(A: np.ndarray, M: np.ndarray, K: np.ndarray, detK: np.ndarray) -> int:
    """Baseline: Wood forms by trying every basis K M with small K (vectorised numpy);
    returns the number of distinct forms found."""
    forms = set()
    a1_ang = math.atan2(A[0, 1], A[0, 0])
    a2_ang = math.atan2(A[1, 1], A[1, 0])
    for want in (1, 2):
        sel = K[detK == want]
        if want == 2:
            sel = sel[np.all((sel[:, 0, :] + sel[:, 1, :]) % 2 == 0, axis=1)]
        Bp = sel @ M @ A
        phi1 = np.arctan2(Bp[:, 0, 1], Bp[:, 0, 0]) - a1_ang
        phi2 = np.arctan2(Bp[:, 1, 1], Bp[:, 1, 0]) - a2_ang
        d = (phi1 - phi2 + math.pi) % (2 * math.pi) - math.pi
        hit = np.abs(d) < 1e-9
        p = np.linalg.norm(Bp[hit, 0], axis=1)
        deg = np.round((np.degrees(phi1[hit]) + 90.0 - 1e-9) % 180.0, 6)
        forms.update(zip([want] * len(p), np.round(p, 6).tolist(), deg.tolist(), strict=True))
    return len(forms)


def main(quick: bool = False) -> list[dict]:
    from surfgeo.lattice import (
        distinct_superlattices,
        hermite_normal_forms,
        matrix_to_wood,
        parse_lattice,
        parse_wood,
        symmetry_domains,
    )
    from surfgeo.lattice.domains import point_group_of
    from surfgeo.lattice.wood import _basis, wood_to_matrix

    max_area = 12 if quick else 50
    repeat = 2 if quick else 3
    lattice = parse_lattice("hex:2.77")
    A = lattice.vectors
    ops = point_group_of(lattice)
    areas = range(1, max_area + 1)
    hnfs = [H for n in areas for H in hermite_normal_forms(n)]
    n_items = len(hnfs)
    rows = []

    # ---- enumeration with domains
    def ours_domains():
        total = 0
        for n in areas:
            for H in hermite_normal_forms(n):
                total += len(symmetry_domains(lattice, H))
        return total

    def float_domains():
        return sum(_float_domains(A, ops, H.astype(float)) for H in hnfs)

    assert ours_domains() == float_domains()
    t_ours = best_time(ours_domains, repeat)
    t_base = best_time(float_domains, repeat)
    rows.append({
        "benchmark": f"all {n_items} superlattices up to area {max_area} (hex) with domains",
        "measured": f"{t_ours * 1e3:.0f} ms total, {t_ours / n_items * 1e6:.0f} us/item",
        "baseline": f"{t_base * 1e3:.0f} ms float per-operation comparison",
        "ratio": t_ours / t_base,
        "goal": "well under 1 s in total; ratio < 1",
    })

    # ---- matrix -> Wood
    rng = range(-3, 4)
    K = np.array(list(itertools.product(rng, repeat=4)), dtype=float).reshape(-1, 2, 2)
    detK = np.rint(np.linalg.det(K)).astype(int)
    sample = hnfs if quick else hnfs[:: max(1, len(hnfs) // 400)]
    t_wood = best_time(lambda: [matrix_to_wood(lattice, H) for H in hnfs], 1 if not quick else repeat)
    t_brute = best_time(lambda: [_brute_wood(A, H.astype(float), K, detK) for H in sample], repeat)
    per_ours = t_wood / n_items
    per_brute = t_brute / len(sample)
    n_ours = sum(len(matrix_to_wood(lattice, H)) for H in sample)
    n_brute = sum(_brute_wood(A, H.astype(float), K, detK) for H in sample)
    rows.append({
        "benchmark": f"matrix -> all Wood forms ({n_items} HNFs, hex)",
        "measured": f"{per_ours * 1e6:.0f} us/item ({t_wood * 1e3:.0f} ms total; {n_ours} forms "
        f"in the {len(sample)}-item sample)",
        "baseline": f"{per_brute * 1e6:.0f} us/item brute force over |K_ij| <= 3 (finds only {n_brute})",
        "ratio": per_ours / per_brute,
        "goal": "< 1 ms per item (complete search; the baseline is incomplete)",
    })

    # ---- Wood text -> matrix
    texts = [f.ascii for H in sample for f in matrix_to_wood(lattice, H)[:1]]
    forms = [parse_wood(t) for t in texts]

    def ours_w2m():
        for t in texts:
            wood_to_matrix(lattice, t)

    def float_only():
        Ainv = np.linalg.inv(A)
        for t in texts:
            w = parse_wood(t)
            B, _ = _basis(A, float(w.p), float(w.q), math.radians(w.angle), w.centred)
            B @ Ainv

    t_w2m = best_time(ours_w2m, repeat)
    t_flt = best_time(float_only, repeat)
    n_rotated = sum(f.rotated for f in forms)
    rows.append({
        "benchmark": f"Wood text -> exact matrix with snapping ({len(texts)} forms, {n_rotated} rotated)",
        "measured": f"{t_w2m / len(texts) * 1e6:.0f} us/item",
        "baseline": f"{t_flt / len(texts) * 1e6:.0f} us/item parse + float matrix only",
        "ratio": t_w2m / t_flt,
        "goal": "< 1 ms per item",
    })

    # ---- symmetry-distinct superlattices
    def distinct():
        return sum(len(distinct_superlattices(lattice, n)) for n in areas)

    def plain():
        return sum(len(hermite_normal_forms(n)) for n in areas)

    t_dist = best_time(distinct, repeat)
    t_plain = best_time(plain, repeat)
    rows.append({
        "benchmark": f"superlattices up to area {max_area} modulo 6mm ({distinct()} orbits)",
        "measured": f"{t_dist * 1e3:.1f} ms",
        "baseline": f"{t_plain * 1e3:.1f} ms plain HNF enumeration ({plain()} HNFs)",
        "ratio": t_dist / t_plain,
        "goal": "well under 1 s",
    })
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
