#!/usr/bin/env python
"""Benchmark of spot detection on synthetic 1024 x 1024 16-bit LEED images.

All timings are taken in the same run on the same images (rendered by
:func:`surfgeo.measure.render.render_pattern`, invented synthetic scenes: Gaussian spots of
log-uniform brightness over three decades, background glow, round screen, electron-gun
shadow and holder, shot and read noise). Baselines:

* ``skimage.feature.blob_log`` -- a general-purpose blob detector, given the spot-width range
  (0.6 to 1.6 spot widths, its default 10 scales) and the highest threshold of a list at
  which its recall on these images reaches ours; goal: ours >= 10x faster at equal or
  better recall;
* one ``scipy.ndimage.gaussian_filter`` pass over the image at the spot width -- the floor
  of any matched-filter detector; goal: ours <= 4x that.

Recall counts true spots with SNR >= 5 (SNR = N / sqrt(N + 4 pi s^2 b)) found within
max(1.5, s) px; precision counts detections (ours: those reporting snr >= 5) that are real.
Masks (screen, gun) are found once per image and timed separately.

Run ``python scripts/bench_detect.py [--quick]``.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
from benchtools import best_time_and_result as timed
from benchtools import print_rows

ROOT = Path(__file__).resolve().parents[1]


def _scenes(size: int, count: int, n_spots: int, sigma: float, seed: int = 12345):
    from surfgeo.measure.images import image_from_array
    from surfgeo.measure.masks import GunShadow, ScreenDisc, disc_mask, gun_mask
    from surfgeo.measure.render import random_positions, render_pattern

    rng = np.random.default_rng(seed)
    out = []
    for _ in range(count):
        sc = ScreenDisc(size / 2 + rng.uniform(-10, 10), size / 2 + rng.uniform(-10, 10), 0.46 * size)
        gun = GunShadow(sc.centre_x, sc.centre_y, 0.05 * size, rng.uniform(0, 360), 0.03 * size)
        allowed = disc_mask((size, size), sc, margin=4 * sigma + 6) & ~gun_mask((size, size), gun,
                                                                               margin=4 * sigma + 6)
        pos = random_positions(rng, n_spots, (size, size), 7 * sigma, allowed=allowed)
        photons = np.exp(rng.uniform(np.log(100.0), np.log(1e5), len(pos)))
        syn = render_pattern((size, size), pos, photons, sigma, screen=sc, gun=gun, gain=1.5, read_noise=3.0,
                             sample_type="uint16", seed=rng)
        out.append((syn, image_from_array(syn.image, source="synthetic")))
    return out


def _recall_precision(syn, positions, claimed, radius):
    from scipy.spatial import cKDTree

    strong = syn.snr >= 5
    if len(positions) == 0:
        return 0, int(strong.sum()), 0, 0
    d, _ = cKDTree(positions).query(syn.positions)
    hits = int((strong & (d <= radius)).sum())
    d2, _ = cKDTree(syn.positions).query(positions[claimed])
    return hits, int(strong.sum()), int((d2 <= radius).sum()), int(claimed.sum())


def _blob_log(data, usable, sigma, threshold):
    from skimage.feature import blob_log

    lo, hi = np.percentile(data[usable], [0.5, 99.99])
    norm = np.clip((data - lo) / (hi - lo), 0, 1)
    blobs = blob_log(norm, min_sigma=0.6 * sigma, max_sigma=1.6 * sigma, threshold=threshold)
    return blobs


def main(quick: bool = False) -> list[dict]:
    if str(ROOT) not in sys.path:
        sys.path.insert(0, str(ROOT))
    from scipy import ndimage as ndi

    from surfgeo.measure.detect import detect_spots
    from surfgeo.measure.masks import build_mask

    size, count, n_spots, sigma = (512, 2, 60, 2.0) if quick else (1024, 3, 250, 2.0)
    repeat = 2 if quick else 5
    scenes = _scenes(size, count, n_spots, sigma)
    radius = max(1.5, sigma)

    # masks, once per image (timed separately)
    t_mask = []
    masks = []
    for _, img in scenes:
        t, m = timed(lambda img=img: build_mask(img.data), max(1, repeat // 2))
        t_mask.append(t)
        masks.append(m.usable)

    # ours: default settings (width measured, gain estimated); and with the width given
    t_ours, t_given, t_floor = [], [], []
    hit = tot = good = claimed = 0
    for (syn, img), usable in zip(scenes, masks, strict=True):
        t, det = timed(lambda img=img, usable=usable: detect_spots(img, mask=usable), repeat)
        t_ours.append(t)
        t, _ = timed(lambda img=img, usable=usable: detect_spots(img, mask=usable, spot_sigma=sigma), repeat)
        t_given.append(t)
        t, _ = timed(lambda img=img: ndi.gaussian_filter(img.data, sigma), repeat)
        t_floor.append(t)
        h, n, g, c = _recall_precision(syn, det.spots.positions, det.spots.snr >= 5, radius)
        hit, tot, good, claimed = hit + h, tot + n, good + g, claimed + c
    recall = hit / tot
    precision = good / max(claimed, 1)

    # blob_log: the highest threshold whose recall on these images reaches ours (searched
    # from high to low; the masks are applied to its detections afterwards, untimed, to help it)
    def run_blob(thr):
        times, hits_, tot_, good_, claimed_ = [], 0, 0, 0, 0
        for (syn, img), usable in zip(scenes, masks, strict=True):
            t, blobs = timed(lambda img=img, usable=usable: _blob_log(img.data, usable, sigma, thr), 1)
            times.append(t)
            pos = blobs[:, [1, 0]] if len(blobs) else np.zeros((0, 2))
            iy = np.clip(np.rint(pos[:, 1]).astype(int), 0, size - 1)
            ix = np.clip(np.rint(pos[:, 0]).astype(int), 0, size - 1)
            h, n, g, c = _recall_precision(syn, pos, usable[iy, ix], radius)
            hits_, tot_, good_, claimed_ = hits_ + h, tot_ + n, good_ + g, claimed_ + c
        return times, hits_ / tot_, good_ / max(claimed_, 1)

    chosen, t_blob, brecall, bprecision = None, [], 0.0, 0.0
    for thr in (0.1, 0.05, 0.02, 0.01, 0.007, 0.005, 0.004, 0.003, 0.002, 0.0015, 0.001):
        t_blob, brecall, bprecision = run_blob(thr)
        chosen = thr
        if brecall >= recall:
            break
    if not quick:  # a second timing of the chosen setting; keep the faster of the two per image
        t2, _, _ = run_blob(chosen)
        t_blob = [min(a, b) for a, b in zip(t_blob, t2, strict=True)]

    ours = float(np.median(t_ours))
    given = float(np.median(t_given))
    floor = float(np.median(t_floor))
    blob = float(np.median(t_blob))
    mask_t = float(np.median(t_mask))
    label = f"{size}x{size} uint16, {n_spots} spots, s={sigma:g} px, {count} images"
    rows = [
        {
            "benchmark": f"detect_spots vs skimage blob_log ({label})",
            "measured": f"{ours * 1e3:.1f} ms, recall {recall:.3f}, precision {precision:.3f}",
            "baseline": f"{blob * 1e3:.0f} ms, recall {brecall:.3f}, precision {bprecision:.3f} "
            f"(threshold {chosen:g}" + (")" if brecall >= recall else "; the lowest tried: its recall "
                                        "never reached ours)"),
            "ratio": blob / ours,
            "goal": ">= 10 (times faster) at equal or better recall",
        },
        {
            "benchmark": f"detect_spots vs one gaussian_filter pass, the floor ({label})",
            "measured": f"{ours * 1e3:.1f} ms (width measured, gain estimated)",
            "baseline": f"{floor * 1e3:.1f} ms (gaussian_filter, sigma {sigma:g}, float32)",
            "ratio": ours / floor,
            "goal": "<= 4 (times the floor)",
        },
        {
            "benchmark": f"detect_spots with the width given vs one gaussian_filter pass ({label})",
            "measured": f"{given * 1e3:.1f} ms",
            "baseline": f"{floor * 1e3:.1f} ms",
            "ratio": given / floor,
            "goal": "<= 4 (times the floor)",
        },
        {
            "benchmark": f"build_mask (screen and gun found) vs one gaussian_filter pass ({label})",
            "measured": f"{mask_t * 1e3:.1f} ms",
            "baseline": f"{floor * 1e3:.1f} ms",
            "ratio": mask_t / floor,
            "goal": "information (once per image or instrument)",
        },
    ]
    return rows


if __name__ == "__main__":
    print_rows(main(quick="--quick" in sys.argv[1:]))
