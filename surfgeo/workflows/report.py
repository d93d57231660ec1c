"""The demo's output folder: a self-contained HTML report, figures, JSON results and a DFT input.

:func:`write_demo_folder` takes a :class:`surfgeo.workflows.demo.DemoResult` and writes, into a
new folder (built under a temporary name beside it and renamed at the end, so that a failure
never leaves a half-written folder):

=============================  ==============================================================
``report.html``                the report; every figure embedded as a base64 PNG, so the file
                               alone is enough (each figure is also linked by file name)
``results.json``               everything found (:meth:`DemoResult.to_dict`) plus the file list
``calibration.json``           the screen calibration, reusable for later images
``spots_<E>eV.csv``            the detected spots of each image
``overlay_<E>eV.png``          the image with the best model's predicted spots
``candidates.png``             measured against predicted intensities, per candidate model
``spotmap_<E>eV.png``          expected spots at the next energy (k-space and screen)
``slab.png``                   top and side view of the best model's slab
``best_model.vasp``            the best model's slab for a DFT code (VASP format), with its
                               note ``best_model.vasp.note.json``
=============================  ==============================================================

Figures use matplotlib (imported here, lazily from the command line); the numerical pipeline in
:mod:`surfgeo.workflows.demo` never imports it.
"""

from __future__ import annotations

import base64
import datetime
import hashlib
import html
import math
import os
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from surfgeo.errors import InputError, OutputExistsError

#: Name of the results file; also marks a folder as a demo output (for ``--force``).
RESULTS_FILE = "results.json"
REPORT_FILE = "report.html"
#: Default output folder name (numbered when it exists).
DEFAULT_FOLDER = "surfgeo-demo"

# our own figure style
_MEASURED = "#7fd1ff"
_INTEGER = "#ffb000"
_FRACTIONAL = "#ff4f9a"
_MISSING = "#ff3b30"
_UNEXPLAINED = "#b6ff3b"
_CANDIDATE_COLOURS = ("#1b7f79", "#c0392b", "#6c5ce7", "#d68910", "#2d3436")


@dataclass
class DemoFiles:
    """What :func:`write_demo_folder` wrote: the folder and each file by its role."""

    folder: Path
    report: Path
    results: Path
    figures: dict = field(default_factory=dict)  # name -> Path (PNG)
    others: dict = field(default_factory=dict)  # role -> Path

    def all_files(self) -> list[Path]:
        return [self.report, self.results, *self.figures.values(), *self.others.values()]


# =============================================================================== folder
def default_folder(parent: str | os.PathLike = ".") -> Path:
    """A folder name in ``parent`` that does not exist yet: ``surfgeo-demo``, ``surfgeo-demo-2``, ..."""
    parent = Path(parent)
    cand = parent / DEFAULT_FOLDER
    n = 2
    while cand.exists():
        cand = parent / f"{DEFAULT_FOLDER}-{n}"
        n += 1
    return cand


def _is_demo_folder(path: Path) -> bool:
    import json

    try:
        data = json.loads((path / RESULTS_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    return isinstance(data, dict) and data.get("synthetic") is True and "answer" in data


def check_output_folder(out: str | os.PathLike, force: bool = False) -> Path:
    """Check that the demo may write the folder ``out``; return it as a Path.

    Raises
    ------
    OutputExistsError
        ``out`` exists and ``force`` is false.
    InputError
        ``out`` is a file, its parent folder does not exist, or ``force`` would replace a folder
        that is not an earlier demo output (one with a demo ``results.json``).
    """
    out = Path(out)
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"cannot write the demo folder {out}: the folder {parent} does not exist.")
    if out.exists():
        if not out.is_dir():
            raise InputError(f"{out} is a file; give --out a folder name for the demo output.")
        if not force:
            raise OutputExistsError(f"{out} already exists; pass --force to replace it or choose another "
                                    "--out.")
        if not _is_demo_folder(out):
            raise InputError(f"{out} exists and is not an earlier demo output (no demo {RESULTS_FILE}); "
                             "--force only replaces demo folders, so choose another --out.")
    return out


def write_demo_folder(result, out: str | os.PathLike, force: bool = False, dpi: int = 110,
                      show_progress: bool | None = None) -> DemoFiles:
    """Write the report, figures, JSON results and DFT input of a demo run into the folder ``out``.

    Everything is written into a temporary folder beside ``out`` first and renamed at the end;
    with ``force`` an earlier demo folder at ``out`` is replaced, anything else is refused
    (:func:`check_output_folder`).

    Parameters
    ----------
    result : surfgeo.workflows.demo.DemoResult
    out : str or path-like
        The folder to create.
    force : bool
        Replace an earlier demo folder.
    dpi : int
        Resolution of the PNG figures.
    show_progress : bool, optional
        Draw a progress line (default: only when stderr is a terminal).

    Returns
    -------
    DemoFiles
        Paths inside the final folder.
    """
    out = check_output_folder(out, force)
    parent = out.parent if str(out.parent) else Path(".")
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=parent))
    try:
        os.chmod(tmp, 0o777 & ~_umask())  # mkdtemp makes it private; the final folder is an ordinary one
        files = _write_into(result, tmp, dpi, show_progress)
        if out.exists():
            check_output_folder(out, force)
            old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old.", dir=parent))
            os.replace(out, old / out.name)
            os.replace(tmp, out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.rename(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return _relocate(files, tmp, out)


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _relocate(files: DemoFiles, old: Path, new: Path) -> DemoFiles:
    def move(p: Path) -> Path:
        return new / p.relative_to(old)

    return DemoFiles(
        folder=new,
        report=move(files.report),
        results=move(files.results),
        figures={k: move(v) for k, v in files.figures.items()},
        others={k: move(v) for k, v in files.others.items()},
    )


def _energy_tag(energy: float) -> str:
    return f"{int(round(energy)):03d}eV"


def _write_into(result, folder: Path, dpi: int, show_progress: bool | None = None) -> DemoFiles:
    from surfgeo.io import dump_json, write_text
    from surfgeo.io.dft import export_slab, note_path
    from surfgeo.io.spots import write_spot_csv
    from surfgeo.progress import progress
    from surfgeo.workflows.demo import DFT_FILE, DFT_FIXED_LAYERS, DFT_VACUUM

    figures: dict[str, Path] = {}
    others: dict[str, Path] = {}
    best = result.best
    dft = folder / DFT_FILE
    notes: dict = {}

    def overlay(im):
        def task():
            tag = _energy_tag(im.energy)
            p = folder / f"overlay_{tag}.png"
            save_overlay(result, im, p, dpi)
            figures[p.name] = p
            c = folder / f"spots_{tag}.csv"
            write_spot_csv(c, im.spots)
            others[f"spots {im.energy:g} eV"] = c
        return task

    def figure_task(name: str, fn):
        def task():
            p = folder / name
            fn(result, p, dpi)
            figures[p.name] = p
        return task

    def dft_task():
        notes["dft"] = export_slab(best.slab, dft, bottom=DFT_FIXED_LAYERS, vacuum=DFT_VACUUM,
                                   source=best.file)
        others["DFT input"] = dft
        others["DFT note"] = note_path(dft)
        cal = folder / "calibration.json"
        dump_json(best.calibration.to_dict(), cal)
        others["calibration"] = cal

    tasks = [overlay(im) for im in result.images] + [
        figure_task("candidates.png", save_candidates),
        figure_task(f"spotmap_{_energy_tag(result.next_energy)}.png", save_spot_map),
        figure_task("slab.png", save_slab),
        dft_task,
    ]
    for task in progress(tasks, desc="writing the report", enabled=show_progress):
        task()
    note = notes["dft"]
    data = result.to_dict()
    data["dft_export"] = {"file": dft.name, "note": note_path(dft).name, "kpoints": note.get("kpoints"),
                          "constraints": note.get("constraints"),
                          "dipole_correction": note.get("dipole_correction"), "caution": note.get("caution")}
    data["files"] = {"report": REPORT_FILE, "results": RESULTS_FILE,
                     "figures": sorted(figures), "others": {k: v.name for k, v in others.items()}}
    results = folder / RESULTS_FILE
    dump_json(data, results)
    report = folder / REPORT_FILE
    write_text(report, render_html(result, figures, others, data))
    return DemoFiles(folder, report, results, figures, others)


# =============================================================================== figures
def _display(data: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """Square-root contrast between the 1st percentile and the 99.7th of the usable pixels."""
    vals = data[usable] if usable.any() else data.ravel()
    lo, hi = np.percentile(vals, [1.0, 99.7])
    x = np.clip((data - lo) / max(hi - lo, 1e-9), 0.0, 1.0)
    return np.sqrt(x)


def overlay_figure(result, image):
    """The image with the detected spots and the best model's predicted spots and labels."""
    from surfgeo.plot import figure

    best = result.best
    k = result.images.index(image)
    fit = best.images[k]
    m = fit.match
    pred = m.predicted
    fig = figure(figsize=(9.4, 7.0))
    ax = fig.add_subplot(1, 1, 1)
    h, w = image.data.shape
    ax.imshow(_display(image.data, image.usable), cmap="gray", origin="upper",
              extent=(-0.5, w - 0.5, h - 0.5, -0.5), interpolation="nearest")
    P = np.column_stack([image.spots.x, image.spots.y])
    ax.scatter(P[:, 0], P[:, 1], s=90, facecolors="none", edgecolors=_MEASURED, linewidths=0.9,
               label=f"detected spots ({len(P)})")
    hidden = set(fit.hidden.tolist())
    shown = np.array([j for j in range(len(pred)) if pred.visible[j] and j not in hidden], dtype=int)
    integer = pred.integer[shown] if len(shown) else np.zeros(0, bool)
    xy = pred.pixels[shown]
    ax.scatter(xy[integer, 0], xy[integer, 1], marker="s", s=22, facecolors="none", edgecolors=_INTEGER,
               linewidths=1.1, label="predicted, integer order")
    ax.scatter(xy[~integer, 0], xy[~integer, 1], marker="D", s=16, facecolors="none", edgecolors=_FRACTIONAL,
               linewidths=1.0, label="predicted, fractional order")
    missing = fit.absent_visible
    if len(missing):
        ax.scatter(pred.pixels[missing, 0], pred.pixels[missing, 1], marker="x", s=50, color=_MISSING,
                   label="predicted but not seen")
    if len(m.unexplained):
        u = P[m.unexplained]
        ax.scatter(u[:, 0], u[:, 1], marker="^", s=70, facecolors="none", edgecolors=_UNEXPLAINED,
                   linewidths=1.2, label="not explained by the model")
    for j in shown:
        x, y = pred.pixels[j]
        ax.annotate(pred.label_text(j), (x, y), xytext=(5, -9), textcoords="offset points", fontsize=6.5,
                    color=_INTEGER if pred.integer[j] else _FRACTIONAL)
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_xlabel("x (px)")
    ax.set_ylabel("y (px)")
    ax.set_title(f"{image.file}: {image.energy:g} eV nominal ({pred.energy:.2f} eV fitted) \u2014 "
                 f"{best.name}", fontsize=9)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7, frameon=False)
    fig.text(0.01, 0.005, "SYNTHETIC image (surfgeo forward model); labels in the substrate reciprocal basis",
             fontsize=7, color="#555555")
    return fig


def save_overlay(result, image, path, dpi: int = 110) -> None:
    _save(overlay_figure(result, image), path, dpi)


def _save(fig, path, dpi: int) -> None:
    """Save atomically at ``dpi`` (PNG) and close."""
    import matplotlib.pyplot as plt

    from surfgeo.io import atomic_output

    try:
        with atomic_output(path) as tmp:
            fig.savefig(tmp, dpi=dpi, bbox_inches="tight", format="png")
    finally:
        plt.close(fig)


def candidates_figure(result):
    """Measured against predicted spot amplitudes for each candidate, and R against the energy offset."""
    from surfgeo.plot import figure

    cands = result.candidates
    n = len(cands)
    fig = figure(figsize=(3.3 * (n + 1), 3.6))
    axes = fig.subplots(1, n + 1, squeeze=False)[0]
    markers = ("o", "s", "^", "D")
    for ax, c in zip(axes[:n], cands, strict=True):
        top = 0.0
        for k, f in enumerate(c.images):
            fm = np.sqrt(np.clip(f.measured, 0, None))
            fp = f.scale * np.sqrt(np.clip(f.predicted, 0, None))
            frac = np.array([o == "fractional" for o in f.order], dtype=bool)
            mk = markers[k % len(markers)]
            ax.scatter(fp[~frac], fm[~frac], marker=mk, s=22, color="#2c3e50",
                       label=f"{f.match.predicted.energy:.1f} eV, integer")
            ax.scatter(fp[frac], fm[frac], marker=mk, s=18, facecolors="none", edgecolors="#c0392b",
                       label=f"{f.match.predicted.energy:.1f} eV, fractional")
            if len(fm):
                top = max(top, float(np.nanmax(fm)), float(np.nanmax(fp)))
        top = top * 1.08 or 1.0
        ax.plot([0, top], [0, top], color="#999999", lw=0.8, ls="--")
        ax.set_xlim(0, top)
        ax.set_ylim(0, top)
        ax.set_aspect("equal")
        ax.set_xlabel("predicted amplitude (scaled)", fontsize=8)
        ax.set_ylabel("measured amplitude \u221aI", fontsize=8)
        ax.set_title(f"#{c.rank} {c.file}\nR = {c.r_factor:.3f}", fontsize=8)
        ax.tick_params(labelsize=7)
    axes[0].legend(fontsize=6, loc="upper left")
    ax = axes[n]
    for c, col in zip(cands, _CANDIDATE_COLOURS, strict=False):
        if c.offset_scan:
            o, r = np.array(c.offset_scan).T
            ax.plot(o, r, marker=".", color=col, lw=1.0, label=f"#{c.rank}")
            ax.axvline(c.energy_offset, color=col, lw=0.6, ls=":")
    cal = result.calibration
    ax.axvspan(cal.energy_offset - cal.uncertainties.get("energy_offset", 0.0),
               cal.energy_offset + cal.uncertainties.get("energy_offset", 0.0), color="#dddddd", zorder=0,
               label="positions: \u00b11\u03c3")
    ax.set_xlabel("energy offset (eV)", fontsize=8)
    ax.set_ylabel("R (amplitudes)", fontsize=8)
    ax.set_title("agreement against energy offset", fontsize=8)
    ax.tick_params(labelsize=7)
    ax.legend(fontsize=6)
    fig.suptitle("Candidate models: kinematic intensities against the SYNTHETIC images", fontsize=10)
    fig.tight_layout()
    return fig


def save_candidates(result, path, dpi: int = 110) -> None:
    _save(candidates_figure(result), path, dpi)


def save_spot_map(result, path, dpi: int = 110) -> None:
    """The expected-spot map at the next energy (k-space and the calibrated screen).

    Drawn by :func:`surfgeo.plot.spotmap.plot_pattern`; its title gives the energy after the
    fitted offset, and its footer the scenario's synthetic label.
    """
    from surfgeo.plot.spotmap import plot_pattern
    from surfgeo.workflows.demo import SYNTHETIC_LABEL

    plot_pattern(result.next_pattern, path, screen=result.map_screen, footer=SYNTHETIC_LABEL)


def slab_picture(result, repeat: int = 3):
    """Top and side views of the best model's slab, atoms in element colours (ASE's ``plot_atoms``)."""
    from ase.data import atomic_numbers, covalent_radii
    from ase.data.colors import jmol_colors
    from ase.visualize.plot import plot_atoms
    from matplotlib.lines import Line2D

    from surfgeo.plot import figure

    slab = result.best.slab
    big = slab.repeat((repeat, repeat, 1))
    fig = figure(figsize=(11.0, 4.8))
    ax_top, ax_side = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.25, 1.0]})
    plot_atoms(big, ax_top, rotation="0x,0y,0z", radii=0.9)
    ax_top.set_title(f"top view ({repeat} x {repeat} cells)", fontsize=9)
    plot_atoms(big, ax_side, rotation="-90x,0y,0z", radii=0.9)
    ax_side.set_title("side view (+z up, into the vacuum)", fontsize=9)
    for ax in (ax_top, ax_side):
        ax.set_xlabel("Å", fontsize=8)
        ax.tick_params(labelsize=7)
    symbols = sorted(set(slab.get_chemical_symbols()), key=lambda s: -covalent_radii[atomic_numbers[s]])
    handles = [Line2D([], [], marker="o", ls="", markersize=9, markerfacecolor=jmol_colors[atomic_numbers[s]],
                      markeredgecolor="black", label=s) for s in symbols]
    fig.legend(handles=handles, loc="upper right", fontsize=8, frameon=False)
    fig.suptitle(f"{result.best.name}: {len(slab)} atoms per cell (synthetic demo model)", fontsize=10)
    return fig


def save_slab(result, path, dpi: int = 110) -> None:
    _save(slab_picture(result, repeat=2 if result.fast else 3), path, dpi)


# =============================================================================== HTML
_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; max-width: 1100px; margin: 2em auto;
       padding: 0 1em; color: #1d2731; line-height: 1.45; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; } h2 { border-bottom: 1px solid #d0d7de; padding-bottom: 0.2em; }
.synthetic { background: #fff3cd; border: 2px solid #e0a800; padding: 0.6em 1em; font-weight: 600; }
.answer { background: #e8f4f1; border-left: 6px solid #1b7f79; padding: 0.6em 1em; font-size: 1.1em; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.9em; }
th, td { border: 1px solid #d0d7de; padding: 0.25em 0.55em; text-align: right; }
th { background: #f3f5f7; } td.l, th.l { text-align: left; }
tr.best td { background: #eef8f6; font-weight: 600; }
figure { margin: 1em 0; } figure img { max-width: 100%; border: 1px solid #d0d7de; }
figcaption { font-size: 0.85em; color: #4a5560; }
code { background: #f3f5f7; padding: 0 0.25em; } .small { font-size: 0.85em; color: #4a5560; }
"""


def _e(x) -> str:
    return html.escape(str(x), quote=True)


def _num(x, fmt: str = ".3f") -> str:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return "\u2013"
    return format(v, fmt) if math.isfinite(v) else "\u2013"


def _figure(name: str, path: Path, caption: str) -> str:
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    return (f'<figure id="fig-{_e(Path(name).stem)}">'
            f'<img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
            f'<figcaption>{_e(caption)} <span class="small">(file: <a href="{_e(name)}">{_e(name)}</a>)'
            "</span></figcaption></figure>")


def _sha256(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def render_html(result, figures: dict, others: dict, data: dict) -> str:
    """The report as one self-contained HTML page (figures embedded as base64 PNG)."""
    from surfgeo import __version__
    from surfgeo.measure.match import orientation_label
    from surfgeo.workflows.demo import CAVEATS, SYNTHETIC_LABEL

    sc = result.scenario
    best = result.best
    cal = result.calibration
    ans = result.answer()
    parts: list[str] = []
    add = parts.append
    add("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>")
    add(f"<title>surfgeo demo report \u2014 {_e(sc.get('title', 'synthetic scenario'))} (SYNTHETIC)</title>")
    add(f"<style>{_CSS}</style></head><body>")
    add(f"<h1>surfgeo demo: {_e(sc.get('title', ''))}</h1>")
    add(f"<p class='synthetic'>{_e(SYNTHETIC_LABEL)} {_e(sc.get('label', ''))}</p>")
    add(f"<p>{_e(sc.get('story', ''))}</p>")

    # the answer
    add("<h2>The answer</h2>")
    add(f"<p class='answer'>{_e(ans['sentence'])}</p>")
    add("<p class='small'>An R close to zero is what synthetic data made by the same kinematic model give; "
        "with measured data kinematic intensities agree only qualitatively, R stays large for every model, "
        "and only clear differences between candidates mean anything.</p>")
    groups = [g for g in result.position_groups if len(g) > 1]
    if groups:
        names = "; ".join(", ".join(g) for g in groups)
        add(f"<p>Spot positions alone cannot separate {_e(names)}: they predict the same spots at both "
            "energies. The decision rests on the kinematic intensities.</p>")
    add(f"<p>Best model: <b>{_e(best.name)}</b> (<code>{_e(best.file)}</code>), superstructure "
        f"{_e(best.wood or best.matrix)} with {best.n_domains} domain(s); energy offset "
        f"{best.energy_offset:+.2f} eV; crystal azimuth on the screen: "
        f"{_e(orientation_label(best.orientation))} "
        "(orientations that differ by a symmetry of the substrate give the same pattern; the spot "
        "positions cannot tell the crystal from its copy turned by 60\u00b0, the intensities can).</p>")

    # step 1
    add("<h2>1. Spots found</h2><table><tr><th class='l'>image</th><th>energy (eV)</th><th>spots</th>"
        "<th>spot width (px)</th><th>usable pixels</th><th>screen rim found</th>"
        "<th>gun shadow found</th></tr>")
    for im in result.images:
        md = im.masks.to_dict()
        add(f"<tr><td class='l'>{_e(im.file)}</td><td>{im.energy:g}</td><td>{len(im.spots)}</td>"
            f"<td>{im.detection.spot_sigma:.2f}</td><td>{100 * md['usable_fraction']:.0f} %</td>"
            f"<td>{'yes' if md['screen'] and md['screen'].get('found') else 'no'}</td>"
            f"<td>{'yes' if md['shadow_found'] else 'no'}</td></tr>")
    add("</table>")

    # step 2
    add("<h2>2. Screen calibration</h2>")
    add("<p>From the substrate's integer-order spots of both images jointly (hemispherical screen seen "
        "from afar; centre, scale, rotation, mirror, ellipticity and an energy offset):</p>")
    add("<pre>" + _e(cal.describe()) + "</pre>")
    add(f"<p>The energy offset was then refined on the intensities of each candidate (positions give "
        f"{cal.energy_offset:+.2f} \u00b1 {cal.uncertainties.get('energy_offset', float('nan')):.2f} eV; "
        f"the best model gives {best.energy_offset:+.2f} eV), the screen being re-calibrated at each trial "
        "offset. The saved calibration (<a href='calibration.json'>calibration.json</a>) uses the best "
        "model's offset.</p>")

    # step 3
    add("<h2>3. Indexing the superstructure</h2>")
    for im, ix in zip(result.images, result.indexing or [], strict=False):
        add(f"<p><b>{_e(im.file)}</b> ({im.energy:g} eV): {ix.searched} superlattice classes up to area "
            f"{ix.max_area} scored (lower score is better).</p>")
        add("<table><tr><th class='l'>superstructure</th><th>score</th><th>probability</th><th>matched</th>"
            "<th>unexplained</th><th>absent</th><th class='l'>same positions as</th></tr>")
        for c in ix.candidates:
            same = ", ".join(f"{d.get('wood') or d.get('matrix')} ({d.get('domains')} domain(s))"
                             for d in c.indistinguishable_from)
            add(f"<tr><td class='l'>{_e(c.name())}</td><td>{_num(c.score, '.1f')}</td>"
                f"<td>{_num(c.relative_probability, '.2f')}</td><td>{c.matched}</td><td>{c.unexplained}</td>"
                f"<td>{c.absent}</td><td class='l'>{_e(same)}</td></tr>")
        add("</table>")
        tells = [d.get("how_to_tell") for c in ix.candidates[:1] for d in c.indistinguishable_from
                 if d.get("how_to_tell")]
        if tells:
            add(f"<p class='small'>What would tell them apart: {_e(tells[0])}</p>")

    # step 4
    add("<h2>4. Candidate models</h2>")
    add("<p>Each model's kinematic pattern (all domains) is put on the calibrated screen in every "
        "orientation the substrate lattice allows (positions do not fix the crystal's azimuth modulo the "
        "lattice symmetry), the spots are assigned (Hungarian method with a gate), and the intensities are "
        "compared by R = \u03a3|F<sub>m</sub> \u2212 cF<sub>p</sub>| / \u03a3F<sub>m</sub> on amplitudes "
        "F = \u221aI (one scale c per image; predicted spots that were not seen count with "
        "F<sub>m</sub> = 0, saturated spots and spots touching a mask are left out). Ranking: position "
        "misfits first (unexplained spots plus clearly predicted spots not seen), then R.</p>")
    energies = [im.energy for im in result.images]
    add("<table><tr><th>rank</th><th class='l'>model</th><th class='l'>superstructure</th><th>domains</th>"
        "<th>matched</th><th>unexplained</th><th>not seen (expected / weak or extinct)</th><th>rms (px)</th>"
        "<th>energy offset (eV)</th>"
        + "".join(f"<th>R at {e:g} eV</th>" for e in energies) + "<th>R (all)</th></tr>")
    for c in result.candidates:
        cls = " class='best'" if c is best else ""
        add(f"<tr{cls}><td>{c.rank}</td><td class='l'>{_e(c.name)}<br><code>{_e(c.file)}</code></td>"
            f"<td class='l'>{_e(c.wood or c.matrix)}</td><td>{c.n_domains}</td><td>{c.matched}</td>"
            f"<td>{c.unexplained}</td><td>{c.absent_expected} / {c.absent_weak_or_extinct}</td>"
            f"<td>{_num(c.rms_px, '.2f')}</td><td>{c.energy_offset:+.2f}</td>"
            + "".join(f"<td>{_num(f.r_factor)}</td>" for f in c.images)
            + f"<td>{_num(c.r_factor)}</td></tr>")
    add("</table>")
    add(_figure("candidates.png", figures["candidates.png"],
                "Measured spot amplitudes against each candidate's scaled kinematic amplitudes (dots on the "
                "diagonal agree), and R against the energy offset."))
    for im in result.images:
        name = f"overlay_{_energy_tag(im.energy)}.png"
        add(_figure(name, figures[name],
                    f"{im.file}: detected spots (circles) and the best model's predicted spots "
                    "(squares: integer order, diamonds: fractional order) with their labels."))

    # step 5
    add("<h2>5. The best model's slab and a DFT input</h2>")
    nat = len(best.slab)
    add(f"<p>{_e(best.name)}: {nat} atoms ({_e(best.slab.get_chemical_formula())}). Exported for a DFT code "
        f"as <a href='{_e(others['DFT input'].name)}'>{_e(others['DFT input'].name)}</a> (VASP format) with "
        f"its note <a href='{_e(others['DFT note'].name)}'>{_e(others['DFT note'].name)}</a>.</p>")
    dft = data.get("dft_export", {})
    kp = (dft.get("kpoints") or {}).get("mesh")
    con = dft.get("constraints") or {}
    items = []
    if kp:
        items.append(f"suggested k-point mesh {' x '.join(str(v) for v in kp)}")
    if con.get("rule"):
        items.append(f"{con['rule']} ({con.get('fixed', '?')} atoms)")
    dip = dft.get("dipole_correction") or {}
    if dip.get("recommended"):
        items.append(f"dipole correction recommended: {dip.get('reason', '')}")
    if items:
        add("<ul>" + "".join(f"<li>{_e(t)}</li>" for t in items) + "</ul>")
    add(_figure("slab.png", figures["slab.png"], f"Top and side view of {best.name}."))

    # step 6
    add(f"<h2>6. The next measurement: expected spots at {result.next_energy:g} eV</h2>")
    pat = result.next_pattern
    pred = result.next_spots
    frac = [j for j in range(len(pred)) if pred.visible[j] and not pred.integer[j]]
    ext = pat.extinct
    n_ext = int(np.sum(ext)) if ext is not None else 0
    add(f"<p>On the calibrated screen at {result.next_energy:g} eV nominal ({pat.energy:.2f} eV with the "
        "offset) "
        f"the best model predicts {int(np.sum(pred.visible))} spots within the acceptance, "
        f"{len(frac)} of them fractional order; {n_ext} beam(s) kinematically extinct.</p>")
    add("<table><tr><th class='l'>beam</th><th class='l'>order</th><th>x (px)</th><th>y (px)</th>"
        "<th>polar angle (deg)</th><th>kinematic intensity (rel.)</th></tr>")
    inten = pred.intensity if pred.intensity is not None else np.full(len(pred), np.nan)
    top = np.nanmax(inten) if len(inten) else 1.0
    theta = np.degrees(np.arcsin(np.clip(np.linalg.norm(pred.k_parallel, axis=1)
                                         / max(_wavenumber(pred.energy), 1e-12), 0, 1)))
    for j in np.flatnonzero(pred.visible):
        add(f"<tr><td class='l'>({_e(pred.label_text(j))})</td><td class='l'>"
            f"{'integer' if pred.integer[j] else 'fractional'}</td><td>{pred.pixels[j, 0]:.1f}</td>"
            f"<td>{pred.pixels[j, 1]:.1f}</td><td>{theta[j]:.1f}</td>"
            f"<td>{_num(inten[j] / top, '.4f')}</td></tr>")
    add("</table>")
    name = f"spotmap_{_energy_tag(result.next_energy)}.png"
    add(_figure(name, figures[name], f"Expected-spot map at {result.next_energy:g} eV: parallel momentum and "
                "the calibrated screen."))

    # caveats and provenance
    add("<h2>Cautions</h2><ul>" + "".join(f"<li>{_e(c)}</li>" for c in CAVEATS) + "</ul>")
    add("<h2>Provenance</h2><table>")
    now = datetime.datetime.now().astimezone().isoformat(timespec="seconds")
    rows = [("surfgeo", __version__), ("written", now),
            ("mode", "fast (tests)" if result.fast else "full"),
            ("data folder", str(result.data_dir)), ("generator", "scripts/make_demo_data.py (synthetic)")]
    for im in result.images:
        rows.append((im.file, "sha256 " + _sha256(result.data_dir / im.file)))
    for c in result.candidates:
        rec = (c.slab.info.get("surfgeo") or {}).get("model") or {}
        rows.append((c.file, "sha256 " + str(rec.get("sha256", ""))))
    rows.append(("steps (s)", ", ".join(f"{k} {v:.2f}" for k, v in result.timings.items())))
    for k, v in rows:
        add(f"<tr><td class='l'>{_e(k)}</td><td class='l'>{_e(v)}</td></tr>")
    add("</table>")
    add("<h2>Files</h2><ul>")
    add(f"<li><a href='{RESULTS_FILE}'>{RESULTS_FILE}</a> \u2014 every number of this report as JSON</li>")
    for role, p in others.items():
        add(f"<li><a href='{_e(p.name)}'>{_e(p.name)}</a> \u2014 {_e(role)}</li>")
    for name in sorted(figures):
        add(f"<li><a href='{_e(name)}'>{_e(name)}</a> \u2014 figure</li>")
    add("</ul>")
    add(f"<p class='synthetic'>{_e(SYNTHETIC_LABEL)}</p>")
    add("</body></html>\n")
    return "\n".join(parts)


def _wavenumber(energy: float) -> float:
    from surfgeo.diffraction.electron import wavenumber

    return float(wavenumber(energy))


__all__ = [
    "DEFAULT_FOLDER",
    "REPORT_FILE",
    "RESULTS_FILE",
    "DemoFiles",
    "candidates_figure",
    "check_output_folder",
    "default_folder",
    "overlay_figure",
    "render_html",
    "write_demo_folder",
]
