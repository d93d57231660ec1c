#!/usr/bin/env python
"""Generate the shipped data of ``surfgeo demo`` (an invented scenario, synthetic throughout).

Run once from the repository root; the output is committed under ``surfgeo/data/demo/``::

    python scripts/make_demo_data.py            # refuses to overwrite
    python scripts/make_demo_data.py --force    # regenerate (same bytes: fixed random state)

The scenario (invented): a Rh(111) crystal after oxygen dosing shows a p(2x2) pattern. The truth
is candidate A, ``structures/demo_rh111_o_p2x2_fcc.toml`` (0.25 ML O in fcc hollows). Two LEED
images are made at nominal beam energies of 72 and 118 eV by surfgeo's own forward model:

1. the slab of the true model (:func:`surfgeo.slab.model.build_model`);
2. its kinematic pattern with all symmetry domains (:func:`surfgeo.diffraction.pattern.slab_pattern`)
   at the *true* energy, nominal plus a contact-potential offset;
3. spot positions on a hemispherical screen seen from afar, with mild distortion: off-centre,
   rotated, slightly elliptical (:class:`surfgeo.screen.FarScreen`);
4. a rendered 16-bit image (:func:`surfgeo.measure.render.render_pattern`): Gaussian spots with
   photons proportional to the kinematic intensity, background glow, the screen rim, the shadow
   of the electron gun and its holder, two faint stray reflections, shot and read noise.

Written files (a few hundred kB in all):

* ``surfgeo/data/demo/leed_072eV.png``, ``leed_118eV.png`` -- the images (16-bit grey PNG);
* ``surfgeo/data/demo/models/demo_*.toml`` -- copies of the three candidate models of
  ``structures/`` so that the demo also runs from an installed package;
* ``surfgeo/data/demo/scenario.json`` -- what the demo is told: energies, lattice, screen size,
  file names (everything a user would know before the analysis);
* ``surfgeo/data/demo/truth.json`` -- the invented truth, used only by the tests: the true model,
  screen geometry, energy offset and every rendered spot.
"""

from __future__ import annotations

import argparse
import hashlib
import math
import shutil
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "surfgeo" / "data" / "demo"
STRUCTURES = ROOT / "structures"

#: Candidate model files (structures/), in the order the report lists them.
CANDIDATES = (
    "demo_rh111_o_p2x2_fcc.toml",
    "demo_rh111_o_p2x2_hcp.toml",
    "demo_rh111_o_2x1_fcc.toml",
)
#: The invented truth.
TRUE_MODEL = "demo_rh111_o_p2x2_fcc.toml"
#: Nominal beam energies of the two images, eV.
ENERGIES = (72.0, 118.0)
#: Energy for the expected-spot map of the next measurement, eV.
NEXT_ENERGY = 160.0
#: True energy = nominal + offset (contact potential between cathode and sample), eV.
ENERGY_OFFSET = 1.5
#: Image side, px.
SIZE = 400
#: State of the random generator (same bytes on every run).
RANDOM_STATE = 2718
#: Screen geometry of the invented instrument: hemispherical screen seen from afar, distorted.
SCREEN = {
    "centre_x": 203.6,
    "centre_y": 194.2,
    "scale": 224.0,  # px per radian near the centre
    "rotation_deg": 7.5,
    "stretch": 0.025,
    "stretch_deg": 35.0,
    "mirror": False,
    "acceptance_deg": 56.0,
    "shadow_radius": 21.0,  # the gun body; its holder is GUN_HOLDER below
    "width": SIZE,
    "height": SIZE,
}
#: The gun holder's shadow: direction from the gun, degrees from +x towards +y (y down), and full width, px.
GUN_HOLDER = (62.0, 16.0)
#: Camera and screen rendering: spot widths per energy (px), photons of the brightest visible spot.
SPOT_SIGMA = {72.0: 2.0, 118.0: 1.7}
BRIGHTEST_PHOTONS = 1.6e6
RENDER = {
    "glow_level": 40.0,
    "glow_peak": 160.0,
    "gain": 0.5,
    "offset": 100.0,
    "read_noise": 2.5,
    "stray_light": 1.5,
    "shadow_transmission": 0.03,
}
#: Faint stray reflections per image: (x, y) px and photons.
STRAY = {72.0: [((96.0, 268.0), 9000.0)], 118.0: [((301.0, 122.0), 7000.0), ((150.0, 90.0), 5000.0)]}


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def image_name(energy: float) -> str:
    return f"leed_{int(round(energy)):03d}eV.png"


def render(energy: float, slab, screen, rng):
    """Render one image; return the SyntheticImage and the per-spot truth records."""
    from surfgeo.diffraction.pattern import slab_pattern
    from surfgeo.measure.masks import GunShadow, ScreenDisc, gun_mask
    from surfgeo.measure.render import render_pattern

    e_true = energy + ENERGY_OFFSET
    pat = slab_pattern(slab, e_true)
    px = screen.to_pixels(pat.k_parallel, e_true)
    angle = screen.angle_from_axis(pat.k_parallel, e_true)
    # beams within the gun's disc go back into the gun (the (00) beam at normal incidence)
    inside = np.isfinite(px).all(axis=1) & (angle <= screen.acceptance_deg) & ~screen.in_shadow(px)
    gun = GunShadow(screen.centre_x, screen.centre_y, screen.shadow_radius, *GUN_HOLDER)
    iy = np.clip(np.rint(px[:, 1]), 0, SIZE - 1).astype(int)
    ix = np.clip(np.rint(px[:, 0]), 0, SIZE - 1).astype(int)
    shadowed = gun_mask((SIZE, SIZE), gun)[iy, ix]
    bright = pat.intensity[inside & ~shadowed].max()
    photons = BRIGHTEST_PHOTONS * pat.intensity / bright
    # small random displacements (stray fields, screen unevenness), 0.3 px rms
    jitter = rng.normal(0.0, 0.3, size=px.shape)
    pos = px + jitter
    stray_pos = np.array([p for p, _ in STRAY[energy]])
    stray_ph = np.array([n for _, n in STRAY[energy]])
    all_pos = np.vstack([pos[inside], stray_pos])
    all_ph = np.concatenate([photons[inside], stray_ph])
    rim = screen.scale * math.sin(math.radians(screen.acceptance_deg))
    disc = ScreenDisc(screen.centre_x, screen.centre_y, rim * (1 + 0.5 * screen.stretch) + 6.0)
    img = render_pattern((SIZE, SIZE), all_pos, all_ph, SPOT_SIGMA[energy], screen=disc, gun=gun,
                         sample_type="uint16", **RENDER)
    records = []
    idx = np.flatnonzero(inside)
    for n, i in enumerate(idx):
        records.append({
            "hk": [str(pat.hk[i][0]), str(pat.hk[i][1])],
            "order": pat.order[i],
            "x": float(all_pos[n, 0]), "y": float(all_pos[n, 1]),
            "kinematic_intensity": float(pat.intensity[i]),
            "photons": float(img.photons[n]),
            "snr": float(img.snr[n]),
            "visible": bool(img.visible[n]),
            "behind_gun_holder": bool(shadowed[i]),
        })
    strays = [{"x": float(p[0]), "y": float(p[1]), "photons": float(img.photons[len(idx) + k]),
               "visible": bool(img.visible[len(idx) + k])} for k, p in enumerate(stray_pos)]
    return img, records, strays, disc, gun


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--force", action="store_true", help="overwrite the existing demo data")
    args = parser.parse_args(argv)

    sys.path.insert(0, str(ROOT))
    from surfgeo.io import dump_json, write_bytes
    from surfgeo.measure.images import encode_image
    from surfgeo.screen import FarScreen
    from surfgeo.slab.info import surface_info
    from surfgeo.slab.model import build_model

    OUT.mkdir(parents=True, exist_ok=True)
    (OUT / "models").mkdir(exist_ok=True)
    for name in CANDIDATES:
        target = OUT / "models" / name
        if target.exists() and not args.force:
            raise SystemExit(f"{target} exists; pass --force to regenerate the demo data.")
        shutil.copyfile(STRUCTURES / name, target)

    slab = build_model(STRUCTURES / TRUE_MODEL)
    lattice = surface_info(slab).lattice
    screen = FarScreen(**SCREEN)
    rng = np.random.default_rng(RANDOM_STATE)
    images = []
    for energy in ENERGIES:
        img, records, strays, disc, gun = render(energy, slab, screen, rng)
        name = image_name(energy)
        write_bytes(OUT / name, encode_image(img.image, "png", "uint16"), force=args.force)
        images.append({
            "file": name,
            "nominal_energy_eV": energy,
            "true_energy_eV": energy + ENERGY_OFFSET,
            "spot_sigma_px": SPOT_SIGMA[energy],
            "spots": records,
            "stray_spots": strays,
            "screen_disc": disc.to_dict(),
            "gun_shadow": gun.to_dict(),
        })
        print(f"{name}: {len(records)} beams inside the acceptance, "
              f"{sum(r['visible'] for r in records)} visible, {(OUT / name).stat().st_size / 1024:.0f} kB")

    label = ("SYNTHETIC: an invented scenario generated by surfgeo's own kinematic forward model "
             "(scripts/make_demo_data.py); not a measurement and not a claim about real O/Rh(111).")
    scenario = {
        "title": "Rh(111) after oxygen dosing (invented scenario)",
        "synthetic": True,
        "label": label,
        "story": ("A Rh(111) crystal was dosed with oxygen and imaged with a rear-view LEED optics "
                  "(hemispherical screen) at two beam energies. Which of three proposed oxygen models "
                  "explains the pattern, and what should the next image at a higher energy show?"),
        "substrate": "Rh(111)",
        "lattice": {"a1": lattice.a1.tolist(), "a2": lattice.a2.tolist()},
        "images": [{"file": im["file"], "energy_eV": im["nominal_energy_eV"]} for im in images],
        "screen": {"model": "sphere", "width": SIZE, "height": SIZE,
                   "acceptance_deg": SCREEN["acceptance_deg"]},
        "candidates": list(CANDIDATES),
        "next_energy_eV": NEXT_ENERGY,
    }
    truth = {
        "synthetic": True,
        "label": label,
        "generator": "scripts/make_demo_data.py",
        "random_state": RANDOM_STATE,
        "true_model": TRUE_MODEL,
        "true_model_sha256": _sha256(STRUCTURES / TRUE_MODEL),
        "superstructure": {"wood": "p(2x2)", "matrix": [[2, 0], [0, 2]]},
        "energy_offset_eV": ENERGY_OFFSET,
        "screen": screen.to_dict(),
        "render": {**RENDER, "brightest_photons": BRIGHTEST_PHOTONS, "position_jitter_px": 0.3},
        "images": images,
    }
    dump_json(scenario, OUT / "scenario.json", force=args.force)
    dump_json(truth, OUT / "truth.json", force=args.force)
    total = sum(p.stat().st_size for p in OUT.rglob("*") if p.is_file())
    print(f"wrote {OUT.relative_to(ROOT)}: {total / 1024:.0f} kB in all")
    return 0


if __name__ == "__main__":
    sys.exit(main())
