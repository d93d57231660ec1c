"""Export of slabs to the inputs of DFT and force-field codes, with a companion note.

The structure is written by ASE's writers; surfgeo adds what a slab calculation needs
around it and records it:

- fixed atoms (bottom layers, below a height, or the middle layers of a symmetric slab),
  written wherever the format can express them;
- a Monkhorst-Pack k-point mesh from a k-point spacing (written into the pw.x input, and
  into the note for every format);
- the vacuum thickness (optionally reset) and, for asymmetric slabs, a recommendation for
  a dipole correction in the middle of the vacuum;
- the model's provenance (``atoms.info["surfgeo"]``).

The note goes into a companion JSON file ``<output>.note.json`` and, in short, into the
structure file itself where the format has room for comments.

=========== ============ =================== ================================
format      ASE writer   fixed atoms         comments in the file
=========== ============ =================== ================================
vasp        vasp         selective dynamics  first line (POSCAR title)
espresso    espresso-in  if_pos flags        none (note file only)
aims        aims         constrain_relaxation ``#`` lines
cif         cif          cannot express      ``#`` lines
extxyz      extxyz       move_mask column    info keys on the comment line
lammps      lammps-data  cannot express      first line (title)
=========== ============ =================== ================================

Caution: the exported input is a starting point. Convergence (k-points, plane-wave cut-off
or basis, slab thickness, vacuum), the pseudopotentials and the exchange-correlation
functional are the user's responsibility; nothing here checks them.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.errors import InputError, StructureError
from surfgeo.io.atomic import atomic_output, check_writable
from surfgeo.io.jsonout import dump_json, to_jsonable

CAUTION = (
    "This input is a starting point: converge k-points, cut-off or basis, slab thickness and "
    "vacuum yourself, and choose pseudopotentials and the exchange-correlation functional; "
    "surfgeo checks none of these."
)


@dataclass(frozen=True)
class DFTFormat:
    """One export format: surfgeo's name, ASE's writer, and what the format can hold."""

    name: str
    ase_format: str
    description: str
    constraints: bool
    comments: str
    endings: tuple[str, ...]
    names: tuple[str, ...] = ()


FORMATS: dict[str, DFTFormat] = {
    f.name: f
    for f in (
        DFTFormat("vasp", "vasp", "VASP POSCAR (species grouped, selective dynamics)", True, "title line",
                  (".vasp", ".poscar"), ("poscar", "contcar")),
        DFTFormat("espresso", "espresso-in", "Quantum ESPRESSO pw.x input", True, "none",
                  (".pwi", ".pwin")),
        DFTFormat("aims", "aims", "FHI-aims geometry.in", True, "# lines", (".aims",), ("geometry.in",)),
        DFTFormat("cif", "cif", "CIF (no constraints)", False, "# lines", (".cif",)),
        DFTFormat("extxyz", "extxyz", "extended XYZ (move_mask column)", True, "info keys",
                  (".extxyz", ".xyz")),
        DFTFormat("lammps", "lammps-data",
                  "LAMMPS data file, atom_style atomic, metal units (no constraints)",
                  False, "title line", (".lmp", ".lammps", ".data")),
    )
}

_ALIASES = {f.ase_format: f.name for f in FORMATS.values()} | {
    "poscar": "vasp", "qe": "espresso", "pw": "espresso", "pwscf": "espresso", "fhi-aims": "aims",
    "xyz": "extxyz", "lammps-data": "lammps",
}


def format_names() -> str:
    """The accepted format names, for messages."""
    return ", ".join(FORMATS)


def format_for(path: str | os.PathLike, fmt: str | None = None) -> DFTFormat:
    """The export format from ``fmt`` (a surfgeo or ASE format name) or from the file name.

    File names: ``POSCAR*``/``CONTCAR*`` or ``*.vasp`` (VASP), ``*.pwi`` (pw.x),
    ``geometry.in`` or ``*.aims`` (FHI-aims), ``*.cif``, ``*.extxyz``/``*.xyz``,
    ``*.lmp``/``*.lammps``/``*.data`` (LAMMPS).
    """
    if fmt:
        key = fmt.strip().lower()
        key = _ALIASES.get(key, key)
        if key not in FORMATS:
            raise InputError(f"unknown export format {fmt!r}; use one of {format_names()}.")
        return FORMATS[key]
    name = Path(path).name.lower()
    for f in FORMATS.values():
        if any(name == n or name.startswith(n) and n in ("poscar", "contcar") for n in f.names):
            return f
        if any(name.endswith(e) for e in f.endings):
            return f
    raise InputError(
        f"cannot tell the export format from the file name {Path(path).name!r}; add --format "
        f"({format_names()}) or use an ending such as .vasp, .pwi, .cif, .extxyz, .lmp "
        "or the name geometry.in."
    )


def note_path(path: str | os.PathLike) -> Path:
    """The companion note of an output file: ``<output>.note.json``."""
    p = Path(path)
    return p.with_name(p.name + ".note.json")


# --------------------------------------------------------------------------- preparation
def set_vacuum(atoms, thickness: float):
    """A copy of the slab whose third cell vector leaves ``thickness`` Angstrom of vacuum.

    The atoms keep their positions (atoms wrapped across the cell along c are first moved
    back next to the slab); only the length of ``c`` changes, along its own direction.
    """
    from surfgeo.slab.dipole import slab_heights, surface_normal

    t = positive_number(thickness, "the vacuum thickness", "number")
    out = atoms.copy()
    cell = np.array(out.cell, dtype=float)
    n = surface_normal(cell)
    if np.linalg.norm(cell[2]) < 1e-9:
        cell[2] = n
    cn = float(cell[2] @ n)
    h = slab_heights(out)
    raw = out.positions @ n
    out.positions += np.round((h - raw) / cn)[:, None] * cell[2]
    new_extent = float(h.max() - h.min()) + t
    cell[2] *= new_extent / cn
    out.set_cell(cell, scale_atoms=False)
    out.pbc = (True, True, True) if out.pbc[2] else (True, True, False)
    return out


def prepare_export(atoms, *, bottom: int | None = None, below: float | None = None,
                   middle: int | None = None, kspacing: float | None = None,
                   vacuum: float | None = None, layer_tol: float | None = None,
                   symprec: float = 0.01, source: str | None = None):
    """Apply constraints (and a vacuum) to a slab and compute the contents of the note.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab (cell rows a1, a2 in the surface, c spanning slab and vacuum).
    bottom, below, middle
        At most one constraint rule; see :func:`surfgeo.slab.constraints.choose_fixed`.
        With none, constraints already on ``atoms`` are kept.
    kspacing : float, optional
        k-point spacing in 1/Angstrom (2 pi included); default
        :data:`surfgeo.slab.kpoints.DEFAULT_KSPACING`.
    vacuum : float, optional
        Reset the vacuum to this thickness (Angstrom).
    layer_tol : float, optional
        Layer height tolerance (Angstrom).
    symprec : float
        Tolerance (Angstrom) of the symmetric-slab detection.
    source : str, optional
        Where the slab came from (a file name), for the note.

    Returns
    -------
    atoms : ase.Atoms
        A constrained copy.
    note : dict
        k-points, vacuum, symmetry, dipole advice, constraints, provenance and the caution.
    """
    from surfgeo import __version__
    from surfgeo.slab.constraints import apply_fixed, choose_fixed, is_symmetric_slab
    from surfgeo.slab.dipole import dipole_advice, vacuum_gap
    from surfgeo.slab.kpoints import DEFAULT_KSPACING, kpoint_mesh

    if len(atoms) == 0:
        raise StructureError("the slab has no atoms.")
    cell = np.asarray(atoms.cell, dtype=float)
    if np.linalg.norm(np.cross(cell[0], cell[1])) < 1e-9:
        raise StructureError("the structure has no surface cell (a1, a2); DFT export needs a periodic slab.")
    if vacuum is not None:
        atoms = set_vacuum(atoms, vacuum)
    elif np.linalg.norm(cell[2]) < 1e-9 or abs(np.linalg.det(cell)) < 1e-9:
        raise StructureError("the slab has no third cell vector; give a vacuum thickness (--vacuum).")
    mask, choice = choose_fixed(atoms, bottom=bottom, below=below, middle=middle, tol=layer_tol,
                                symprec=symprec)
    out = apply_fixed(atoms, mask)
    out.pbc = True  # DFT codes treat the slab with its vacuum as a 3D periodic cell
    kp = kpoint_mesh(out.cell, DEFAULT_KSPACING if kspacing is None else kspacing)
    gap = vacuum_gap(out)
    symmetric = is_symmetric_slab(out, symprec=symprec)
    advice = dipole_advice(out, symmetric=symmetric)
    meta = atoms.info.get("surfgeo") if isinstance(atoms.info.get("surfgeo"), dict) else None
    cautions = [CAUTION]
    if gap.thickness < 10.0:
        cautions.append(f"the vacuum is only {gap.thickness:.1f} A thick; 10-20 A is common for slabs.")
    note = {
        "written_by": f"surfgeo {__version__}",
        "caution": cautions,
        "source": source,
        "atoms": len(out),
        "formula": out.get_chemical_formula(mode="metal"),
        "kpoints": kp.to_dict(),
        "vacuum": gap.to_dict(),
        "symmetric_slab": symmetric,
        "dipole_correction": advice.to_dict(),
        "constraints": choice.to_dict(),
        "provenance": (meta or {}).get("provenance"),
        "surface": meta,
    }
    return out, to_jsonable(note)


# --------------------------------------------------------------------------- writing
def grouped_order(symbols) -> np.ndarray:
    """Atom order that groups the species (in order of first appearance), stable within a species."""
    symbols = np.asarray(symbols)
    _, first = np.unique(symbols, return_index=True)
    rank = {s: r for r, s in enumerate(symbols[np.sort(first)])}
    key = np.array([rank[s] for s in symbols])
    return np.argsort(key, kind="stable")


def _summary_lines(note: dict) -> list[str]:
    kp = note["kpoints"]
    dip = note["dipole_correction"]
    lines = [
        f"surfgeo export ({note['written_by']}) of {note.get('source') or 'a slab'}: {note['formula']}",
        f"k-point mesh {'x'.join(map(str, kp['mesh']))} for spacing {kp['spacing']:g} 1/A (2 pi included)",
        f"vacuum {note['vacuum']['thickness']:.3f} A; {note['constraints']['rule']}",
    ]
    if dip["recommended"]:
        lines.append(f"asymmetric slab: dipole correction along c, plane at fractional c = "
                     f"{dip['plane_fraction']:.4f} (middle of the vacuum)")
    else:
        lines.append("symmetric slab: no dipole correction needed")
    prov = note.get("provenance")
    if prov:
        text = "; ".join(map(str, prov)) if isinstance(prov, list) else str(prov)
        lines.append(f"model: {' '.join(text.split())}"[:240])
    lines.append("starting point only: converge k-points, cut-off, thickness and vacuum; choose "
                 "pseudopotentials and functional yourself")
    return lines


def _write_with_ase(tmp: Path, atoms, fmt: DFTFormat, note: dict, pseudopotentials: dict | None) -> None:
    import ase.io

    kw: dict = {}
    if fmt.name == "vasp":
        kw = {"direct": True, "vasp5": True, "sort": False}
    elif fmt.name == "espresso":
        pseudo = {s: f"{s}.pseudopotential-to-choose.UPF" for s in set(atoms.get_chemical_symbols())}
        pseudo.update(pseudopotentials or {})
        kw = {"pseudopotentials": pseudo, "kpts": tuple(note["kpoints"]["mesh"]),
              "input_data": {"control": {"calculation": "relax"}}}
    elif fmt.name == "aims":
        kw = {"info_str": _summary_lines(note)}
    elif fmt.name == "lammps":
        species = list(dict.fromkeys(atoms.get_chemical_symbols()))
        kw = {"specorder": species, "masses": True, "atom_style": "atomic", "units": "metal"}
    elif fmt.name == "extxyz":
        atoms.info["surfgeo_export"] = {
            "kpoints": note["kpoints"]["mesh"], "kspacing": note["kpoints"]["spacing"],
            "vacuum": note["vacuum"]["thickness"],
            "dipole_plane_fraction": note["dipole_correction"]["plane_fraction"]
            if note["dipole_correction"]["recommended"] else None,
            "caution": CAUTION,
        }
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ase.io.write(tmp, atoms, format=fmt.ase_format, **kw)
    lines = _summary_lines(note)
    if fmt.name in ("vasp", "lammps"):
        text = tmp.read_text()
        first, _, rest = text.partition("\n")
        species = " ".join(dict.fromkeys(atoms.get_chemical_symbols()))
        title = f"{species} | " + "; ".join(lines[1:3]) if fmt.name == "vasp" else "; ".join(lines[:3])
        tmp.write_text(title.replace("\n", " ") + "\n" + rest)
    elif fmt.name == "cif":
        text = tmp.read_text()
        tmp.write_text("".join(f"# {line}\n" for line in lines) + text)


def write_dft_input(path: str | os.PathLike, atoms, note: dict, fmt: str | None = None, *,
                    pseudopotentials: dict | None = None, write_note: bool = True,
                    force: bool = False) -> dict:
    """Write a prepared slab (see :func:`prepare_export`) and its companion note.

    Parameters
    ----------
    path : str or path-like
        The structure file; the format follows ``fmt`` or the file name (:func:`format_for`).
    atoms : ase.Atoms
        The slab with its ``FixAtoms`` constraint.
    note : dict
        The note from :func:`prepare_export`; completed here with the format, the file
        names and (for VASP) the atom order, and returned.
    fmt : str, optional
        Format name (surfgeo's or ASE's).
    pseudopotentials : dict, optional
        Pseudopotential file per species for the pw.x input (``{"Pt": "Pt.UPF"}``);
        placeholders that pw.x will reject are written otherwise.
    write_note : bool
        Also write ``<path>.note.json``.
    force : bool
        Overwrite existing files.

    Returns
    -------
    dict
        The completed note.

    Notes
    -----
    Both outputs are checked before anything is written, and each is written atomically;
    an existing file is never replaced without ``force``.
    """
    f = format_for(path, fmt)
    target = check_writable(path, force)
    npath = note_path(target)
    if write_note:
        check_writable(npath, force)
    present = list(dict.fromkeys(atoms.get_chemical_symbols()))
    if pseudopotentials and f.name != "espresso":
        raise InputError(
            f"pseudopotential files are written only into a pw.x input (espresso), not into {f.name}; "
            "leave them out or export to a .pwi file."
        )
    unknown = sorted(set(pseudopotentials or {}) - set(present))
    if unknown:
        raise InputError(
            f"pseudopotentials were given for {', '.join(unknown)}, which the slab does not contain; "
            f"its species are {', '.join(present)}."
        )
    out = atoms.copy()
    order = np.arange(len(out))
    if f.name == "vasp":
        order = grouped_order(out.get_chemical_symbols())
        out = out[order]  # ASE carries FixAtoms through the indexing
    note = dict(note)
    fixed_in_file = bool(note.get("constraints", {}).get("fixed")) and f.constraints
    note.update({
        "file": str(target),
        "format": f.name,
        "format_description": f.description,
        "constraints_in_file": fixed_in_file,
        "species_order": list(dict.fromkeys(out.get_chemical_symbols())),
        "file_index_to_source_index": order.tolist() if f.name == "vasp" else None,
    })
    if note.get("constraints", {}).get("fixed") and not f.constraints:
        note.setdefault("caution", []).append(
            f"the {f.name} format cannot hold fixed atoms; fix them in the code's own input "
            "(see 'constraints')."
        )
    missing = [sp for sp in present if sp not in (pseudopotentials or {})]
    if f.name == "espresso" and missing:
        note.setdefault("caution", []).append(
            f"the pw.x input names placeholder pseudopotential files for {', '.join(missing)}; replace "
            "them, and set ecutwfc."
        )
    with atomic_output(target, force) as tmp:
        _write_with_ase(tmp, out, f, note, pseudopotentials)
    if write_note:
        note["note_file"] = str(npath)
        dump_json(note, npath, force)
    return note


def export_slab(atoms, path: str | os.PathLike, fmt: str | None = None, *, bottom: int | None = None,
                below: float | None = None, middle: int | None = None, kspacing: float | None = None,
                vacuum: float | None = None, layer_tol: float | None = None,
                pseudopotentials: dict | None = None, write_note: bool = True, force: bool = False,
                source: str | None = None) -> dict:
    """Prepare and write a slab for a DFT code in one call; returns the note.

    The format follows ``fmt`` or the file name (see :func:`format_for`). See
    :func:`prepare_export` for the parameters. The output is a starting point only:
    convergence and the choice of pseudopotentials and functional are the user's job.

    Examples
    --------
    >>> from ase.build import fcc111  # doctest: +SKIP
    >>> note = export_slab(fcc111("Pt", (1, 1, 6), vacuum=8), "POSCAR", bottom=3)  # doctest: +SKIP
    >>> note["kpoints"]["mesh"]  # doctest: +SKIP
    [11, 11, 1]
    """
    format_for(path, fmt)  # fail early on an unknown format
    check_writable(path, force)
    prepared, note = prepare_export(atoms, bottom=bottom, below=below, middle=middle, kspacing=kspacing,
                                    vacuum=vacuum, layer_tol=layer_tol, source=source)
    return write_dft_input(path, prepared, note, fmt, pseudopotentials=pseudopotentials,
                           write_note=write_note, force=force)


__all__ = [
    "CAUTION",
    "DFTFormat",
    "FORMATS",
    "export_slab",
    "format_for",
    "grouped_order",
    "note_path",
    "prepare_export",
    "set_vacuum",
    "write_dft_input",
]
