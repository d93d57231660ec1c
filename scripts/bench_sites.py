"""Benchmark: site finding and overlayer placement on a 20x20 supercell of a stepped face.

Rows printed (and returned by ``main``):

* ``find_sites`` on a 20x20 supercell of Pt(533) = 4(111)x(100) (12 layers, 4800 atoms),
  with the time per site and per atom, against ASE's ``neighbor_list`` on the same slab with
  the same neighbour cut-off (the least work any geometric analysis of it must do), measured
  in the same run. Goal: under 1 s in absolute terms.
* The same on a 5x5 supercell: time per atom at 20x20 relative to 5x5 (goal: linear
  scaling, ratio <= 1.5).
* ``add_overlayer``: a film commensurate with the terrace cell filled into the 20x20 stepped
  supercell (1200 film atoms), time per atom, against placing the same atoms one by one with
  ``ase.build.add_adsorbate``. Goal: under 1 s.
* ``add_adsorbate`` with ``which="all"``: CO on all 400 step-edge top sites (site finding
  included), against 400 calls of ``ase.build.add_adsorbate`` at known positions. Goal:
  under 1 s.

Timings are the median of several repetitions after one warm-up call (both sides).
"""

from __future__ import annotations

import sys

from benchtools import median_time, print_rows


def main(quick: bool = False) -> list[dict]:
    from ase.build import add_adsorbate as ase_add_adsorbate
    from ase.build import molecule
    from ase.neighborlist import neighbor_list

    from surfgeo.slab.adsorbates import add_adsorbate
    from surfgeo.slab.overlayer import Film, add_overlayer
    from surfgeo.slab.sites import find_sites
    from surfgeo.slab.steps import stepped_slab
    from surfgeo.slab.supercell import make_supercell

    repeat = 2 if quick else 5
    n = 10 if quick else 20
    base = stepped_slab("Pt", "4(111)x(100)", layers=12, vacuum=12.0)
    big = make_supercell(base, [[n, 0], [0, n]])
    small = make_supercell(base, [[5, 0], [0, 5]])
    rows: list[dict] = []

    sites = find_sites(big)
    nsites = sum(c.multiplicity for c in sites)
    t_sites = median_time(lambda: find_sites(big), repeat)
    cutoff = 1.25 * sites.nn_distance
    t_nl = median_time(lambda: neighbor_list("ij", big, cutoff), repeat)
    rows.append({
        "benchmark": f"find_sites Pt(533) {n}x{n} ({len(big)} atoms, {nsites} sites) vs ASE neighbor_list",
        "measured": f"{t_sites * 1e3:.1f} ms ({t_sites / nsites * 1e6:.1f} us/site, "
                    f"{t_sites / len(big) * 1e6:.1f} us/atom)",
        "baseline": f"{t_nl * 1e3:.1f} ms (ase.neighborlist.neighbor_list, cutoff {cutoff:.2f} A)",
        "ratio": t_sites / t_nl,
        "goal": "< 1 s absolute",
    })
    t_small = median_time(lambda: find_sites(small), repeat)
    per_big, per_small = t_sites / len(big), t_small / len(small)
    rows.append({
        "benchmark": f"find_sites time per atom, {n}x{n} vs 5x5 supercell of Pt(533)",
        "measured": f"{per_big * 1e6:.1f} us/atom ({len(big)} atoms)",
        "baseline": f"{per_small * 1e6:.1f} us/atom ({len(small)} atoms)",
        "ratio": per_big / per_small,
        "goal": "<= 1.5 (linear scaling)",
    })

    # a film that fits the terrace cell: three atoms per 1x1 cell along a2
    A = base.cell[:2, :2]
    film = Film([A[0], A[1] / 3], (("O", 0.0, 0.0, 0.0),), "test film")
    layer, report = add_overlayer(big, film, height=2.5)
    assert report.outcome == "commensurate"
    t_film = median_time(lambda: add_overlayer(big, film, height=2.5), repeat)
    film_pos = layer.positions[len(big):]

    def ase_one_by_one():
        s = big.copy()
        z0 = s.positions[:, 2].max()
        for p in film_pos:
            ase_add_adsorbate(s, "O", p[2] - z0, position=(p[0], p[1]))
        return s

    t_ase_film = median_time(ase_one_by_one, 1 if quick else 2)
    rows.append({
        "benchmark": f"add_overlayer {report.atoms_added} film atoms on Pt(533) {n}x{n} "
                     "vs ASE add_adsorbate loop",
        "measured": f"{t_film * 1e3:.1f} ms ({t_film / report.atoms_added * 1e6:.1f} us/atom)",
        "baseline": f"{t_ase_film * 1e3:.1f} ms ({t_ase_film / report.atoms_added * 1e6:.1f} us/atom)",
        "ratio": t_film / t_ase_film,
        "goal": "< 1 s absolute",
    })

    edge = sites.get("step-edge-top")

    def ours_co():
        return add_adsorbate(big, "CO", "step-edge-top", which="all", height=1.85)  # finds the sites too

    t_co = median_time(ours_co, repeat)

    def ase_co():
        s = big.copy()
        z0 = s.positions[:, 2].max()
        co = molecule("CO")
        co.rotate(180, "x")  # C down
        for p in edge.positions:
            ase_add_adsorbate(s, co, p[2] + 1.85 - z0, position=(p[0], p[1]), mol_index=1)
        return s

    t_ase_co = median_time(ase_co, 1 if quick else 2)
    rows.append({
        "benchmark": f"add_adsorbate CO on all {edge.multiplicity} step-edge tops of Pt(533) {n}x{n} "
                     "vs ASE add_adsorbate loop",
        "measured": f"{t_co * 1e3:.1f} ms ({t_co / edge.multiplicity * 1e6:.1f} us/site)",
        "baseline": f"{t_ase_co * 1e3:.1f} ms",
        "ratio": t_co / t_ase_co,
        "goal": "< 1 s absolute",
    })
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
