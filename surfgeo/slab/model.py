"""Surface model files (TOML): read, validate strictly, build the slab reproducibly.

A model file states a substrate and face, its layers and relaxation, an optional
superstructure cell, reconstructions, adsorbates and overlayer films, and free-text
provenance. Every field is checked; a wrong type, an impossible value or an unknown field
stops the build with one sentence that names the file, the field and what would be valid.
``docs/model-file.md`` documents every field; ``structures/`` holds examples.

Building is deterministic: the same file gives the same atoms in the same order, so written
output is byte-identical. The result records the model it came from in
``info["surfgeo"]["model"]`` (file name, SHA-256 of the file's bytes, name, description,
provenance).

Order of the build: substrate (bulk crystal, face or step notation, layers, vacuum,
relaxation) -> ``[cell]`` superstructure -> ``[[reconstruction]]`` in file order ->
``[[adsorbate]]`` in file order -> ``[[overlayer]]`` in file order -> ``[checks]`` (no two
atoms closer than a sane minimum distance).
"""

from __future__ import annotations

import hashlib
import math
import os
import tomllib
from collections.abc import Callable
from pathlib import Path

import numpy as np

from surfgeo.errors import FileFormatError, InputError

#: The model file format version this module reads.
FORMAT_VERSION = 1

#: Reconstruction kinds and the functions of surfgeo.slab.reconstruct they call.
RECONSTRUCTION_KINDS = (
    "missing-row", "added-row", "clock-rotation", "row-pairing", "displacement", "substitution",
)


class _Bad(Exception):
    """A field problem: ``where`` (dotted field name) and ``what`` (the rest of the sentence)."""

    def __init__(self, where: str, what: str):
        super().__init__(what)
        self.where = where
        self.what = what


# ---------------------------------------------------------------------------- value checkers
def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _is_num(v) -> bool:
    return (isinstance(v, (int, float)) and not isinstance(v, bool)) and math.isfinite(float(v))


def _show(v) -> str:
    text = repr(v)
    return text if len(text) <= 40 else text[:37] + "..."


def c_str(where, v):
    if not isinstance(v, str) or not v.strip():
        raise _Bad(where, f"must be a non-empty text string, got {_show(v)}")
    return v


def c_bool(where, v):
    if not isinstance(v, bool):
        raise _Bad(where, f"must be true or false, got {_show(v)}")
    return v


def c_int_min(lo: int) -> Callable:
    def check(where, v):
        if not _is_int(v) or v < lo:
            raise _Bad(where, f"must be a whole number of at least {lo}, got {_show(v)}")
        return v
    return check


def c_num(where, v):
    if not _is_num(v):
        raise _Bad(where, f"must be a number, got {_show(v)}")
    return float(v)


def c_pos(where, v):
    if not _is_num(v) or v <= 0:
        raise _Bad(where, f"must be a positive number, got {_show(v)}")
    return float(v)


def c_nonneg(where, v):
    if not _is_num(v) or v < 0:
        raise _Bad(where, f"must be a number of at least 0, got {_show(v)}")
    return float(v)


def c_choice(*options: str) -> Callable:
    def check(where, v):
        if v not in options:
            raise _Bad(where, f"must be one of {', '.join(repr(o) for o in options)}, got {_show(v)}")
        return v
    return check


def c_miller(where, v):
    if not isinstance(v, list) or len(v) not in (3, 4) or not all(_is_int(x) for x in v) or not any(v):
        raise _Bad(where, f"must be 3 or 4 whole numbers such as [1, 1, 1] or [1, 0, -1, 0], got {_show(v)}")
    return v


def c_matrix(where, v):
    if (not isinstance(v, list) or len(v) != 2
            or not all(isinstance(r, list) and len(r) == 2 and all(_is_int(x) for x in r) for r in v)):
        raise _Bad(where, f"must be a 2x2 list of whole numbers such as [[2, 0], [0, 2]], got {_show(v)}")
    return v


def c_pair(where, v):
    if not isinstance(v, list) or len(v) != 2 or not all(_is_num(x) for x in v):
        raise _Bad(where, f"must be two numbers such as [0.5, 0.0], got {_show(v)}")
    return [float(x) for x in v]


def c_pairs(where, v):
    """One pair or a list of pairs of numbers."""
    if isinstance(v, list) and v and all(isinstance(p, list) for p in v):
        return [c_pair(f"{where}[{i}]", p) for i, p in enumerate(v)]
    return [c_pair(where, v)]


def c_vec3(where, v):
    if not isinstance(v, list) or len(v) != 3 or not all(_is_num(x) for x in v):
        raise _Bad(where, f"must be three numbers [dx, dy, dz] in Angstrom, got {_show(v)}")
    return [float(x) for x in v]


def c_int_list(where, v):
    if not isinstance(v, list) or not all(_is_int(x) for x in v):
        raise _Bad(where, f"must be a list of whole numbers such as [0], got {_show(v)}")
    return v


def c_int_lists(where, v):
    if not isinstance(v, list) or not v:
        raise _Bad(where, f"must be a list of row lists, one per layer, such as [[0]], got {_show(v)}")
    return [c_int_list(f"{where}[{i}]", r) for i, r in enumerate(v)]


def c_num_list(where, v):
    if not isinstance(v, list) or not all(_is_num(x) for x in v):
        raise _Bad(where, f"must be a list of numbers, got {_show(v)}")
    return [float(x) for x in v]


def c_shift_rows(where, v):
    if not isinstance(v, list):
        raise _Bad(where, f"must be a list of [layer, row, d_perp, d_z] entries, got {_show(v)}")
    out = []
    for i, e in enumerate(v):
        if (not isinstance(e, list) or len(e) != 4 or not _is_int(e[0]) or not _is_int(e[1])
                or not _is_num(e[2]) or not _is_num(e[3])):
            raise _Bad(f"{where}[{i}]", f"must be [layer, row, d_perp, d_z], got {_show(e)}")
        out.append((e[0], e[1], float(e[2]), float(e[3])))
    return out


def c_centres(where, v):
    if not isinstance(v, list) or not v:
        raise _Bad(where, f"must be a list of [f1, f2, sense] entries, got {_show(v)}")
    out = []
    for i, e in enumerate(v):
        if (not isinstance(e, list) or len(e) != 3 or not _is_num(e[0]) or not _is_num(e[1])
                or e[2] not in (1, -1) or isinstance(e[2], bool)):
            raise _Bad(f"{where}[{i}]", f"must be [f1, f2, sense] with sense 1 or -1, got {_show(e)}")
        out.append((float(e[0]), float(e[1]), int(e[2])))
    return out


def c_which(where, v):
    if v in ("first", "all"):
        return v
    if _is_int(v) and v >= 0:
        return v
    if isinstance(v, list) and v and all(_is_int(x) and x >= 0 for x in v):
        return v
    raise _Bad(where, f"must be 'first', 'all', a site number (0, 1, ...) or a list of them, got {_show(v)}")


def c_anchor(where, v):
    if (_is_int(v) and v >= 0) or (isinstance(v, str) and v.strip()):
        return v
    raise _Bad(where, f"must be an atom index (0, 1, ...) or an element symbol, got {_show(v)}")


def c_relax(where, v):
    if isinstance(v, str) and v.strip():
        return v
    if isinstance(v, dict) and v and all(isinstance(x, (str, int, float)) and not isinstance(x, bool)
                                         for x in v.values()):
        return dict(v)
    raise _Bad(where, f"must be text such as \"d12=-2.5%,d23=1%\" or a table {{d12 = \"-2.5%\"}}, "
               f"got {_show(v)}")


def c_species_list(where, v):
    if not isinstance(v, list) or not v or not all(isinstance(x, str) and x for x in v):
        raise _Bad(where, f"must be a list of element symbols such as [\"Sr\", \"Ti\", \"O\"], "
                   f"got {_show(v)}")
    return v


def c_element(where, v):
    from ase.data import chemical_symbols

    if not isinstance(v, str) or v not in chemical_symbols[1:]:
        raise _Bad(where, f"must be a chemical symbol such as \"O\" or \"Cu\", got {_show(v)}")
    return v


def c_vectors(where, v):
    if (not isinstance(v, list) or len(v) != 2
            or not all(isinstance(r, list) and len(r) == 2 and all(_is_num(x) for x in r) for r in v)):
        raise _Bad(where, f"must be two vectors [[x1, y1], [x2, y2]] in Angstrom, got {_show(v)}")
    return [[float(x) for x in r] for r in v]


def c_basis(where, v):
    if not isinstance(v, list) or not v:
        raise _Bad(where, f"must be a list of [symbol, f1, f2] or [symbol, f1, f2, dz] entries, "
                   f"got {_show(v)}")
    out = []
    for i, e in enumerate(v):
        if not isinstance(e, list) or len(e) not in (3, 4) or not all(_is_num(x) for x in e[1:]):
            raise _Bad(f"{where}[{i}]", f"must be [symbol, f1, f2] or [symbol, f1, f2, dz], got {_show(e)}")
        c_element(f"{where}[{i}][0]", e[0])
        out.append((e[0], *[float(x) for x in e[1:]]))
    return out


# ---------------------------------------------------------------------------- table schemas
def _table(where: str, v, fields: dict, required: tuple = (), one_of: tuple = ()) -> dict:
    """Check a TOML table against ``fields`` {name: checker}; return the checked values."""
    if not isinstance(v, dict):
        raise _Bad(where, f"must be a table of fields, got {_show(v)}")
    unknown = [k for k in v if k not in fields]
    if unknown:
        raise _Bad(
            f"{where}.{unknown[0]}" if where else unknown[0],
            f"is not a known field of {('[' + where + ']') if where else 'the file'}; valid fields are "
            f"{', '.join(fields)}",
        )
    for r in required:
        if r not in v:
            raise _Bad(f"{where}.{r}" if where else r, "is required but missing")
    for group in one_of:
        present = [g for g in group if g in v]
        if len(present) != 1:
            raise _Bad(where, f"needs exactly one of {', '.join(group)}"
                       + (f" (found {', '.join(present)})" if present else ""))
    return {k: fields[k](f"{where}.{k}" if where else k, val) for k, val in v.items()}


def _table_list(where: str, v, check) -> list:
    if isinstance(v, dict):
        raise _Bad(where, f"must be written as [[{where}]] (one block per entry), not [{where}]")
    if not isinstance(v, list) or not all(isinstance(e, dict) for e in v):
        raise _Bad(where, f"must be a list of tables written as [[{where}]] blocks")
    return [check(f"{where}[{i}]", e) for i, e in enumerate(v)]


MODEL_FIELDS = {"name": c_str, "description": c_str, "synthetic": c_bool, "format": c_int_min(1)}
PROVENANCE_FIELDS = {"proposed_by": c_str, "data": c_str, "method": c_str, "reference": c_str, "notes": c_str}
SUBSTRATE_FIELDS = {
    "crystal": c_str, "structure": c_str, "a": c_pos, "c": c_pos, "species": c_species_list,
    "face": c_miller, "steps": c_str, "layers": c_int_min(1), "vacuum": c_nonneg,
    "termination": c_int_min(0), "rectangular": c_bool, "orthogonal": c_bool, "relax": c_relax,
}
CELL_FIELDS = {"matrix": c_matrix, "wood": c_str}
CHECKS_FIELDS = {"min_distance": c_pos, "contact_factor": c_pos}
ALONG = c_choice("auto", "a1", "a2")


def _decorate(where, v):
    if not isinstance(v, list):
        raise _Bad(where, "must be a list of tables written as [[reconstruction.decorate]] or "
                   "[{element = \"O\", offset = 0.5, dz = 0.0}]")
    return [_table(f"{where}[{i}]", e, {"element": c_element, "offset": c_num, "dz": c_num}, ("element",))
            for i, e in enumerate(v)]


def _displacements(where, v):
    if not isinstance(v, list) or not v:
        raise _Bad(where, "must be a list of {layer = 1, at = [f1, f2], shift = [dx, dy, dz]} tables")
    return [_table(f"{where}[{i}]", e, {"layer": c_int_min(1), "at": c_pair, "shift": c_vec3},
                   ("layer", "at", "shift")) for i, e in enumerate(v)]


RECON_FIELDS: dict[str, tuple[dict, tuple, tuple]] = {
    "missing-row": ({"period": c_int_min(1), "along": ALONG, "remove": c_int_lists, "relax": c_num_list,
                     "shifts": c_shift_rows}, (), ()),
    "added-row": ({"period": c_int_min(1), "along": ALONG, "rows": c_int_list, "element": c_element,
                   "height": c_pos, "decorate": _decorate}, (), ()),
    "clock-rotation": ({"angle": c_num, "displacement": c_num, "layer": c_int_min(1), "centres": c_centres},
                       (), (("angle", "displacement"),)),
    "row-pairing": ({"amount": c_num, "layer": c_int_min(1), "along": ALONG}, ("amount",), ()),
    "displacement": ({"shifts": _displacements}, ("shifts",), ()),
    "substitution": ({"element": c_element, "layer": c_int_min(1), "at": c_pairs}, ("element",), ()),
}


def _reconstruction(where, v):
    if not isinstance(v, dict):
        raise _Bad(where, "must be a table")
    kind = v.get("kind")
    if kind not in RECON_FIELDS:
        raise _Bad(f"{where}.kind", f"must be one of {', '.join(RECONSTRUCTION_KINDS)}, got {_show(kind)}")
    fields, req, one = RECON_FIELDS[kind]
    body = _table(where, v, {"kind": c_str, **fields}, req, one)
    return body


ADSORBATE_FIELDS = {
    "species": c_str, "file": c_str, "site": c_str, "position": c_pairs, "which": c_which,
    "height": c_num, "bond_length": c_pos, "tilt": c_num, "azimuth": c_num, "anchor": c_anchor,
}


def _adsorbate(where, v):
    return _table(where, v, ADSORBATE_FIELDS, (),
                  (("species", "file"), ("site", "position"), ("height", "bond_length")))


OVERLAYER_FIELDS = {
    "name": c_str, "lattice": c_str, "vectors": c_vectors, "basis": c_basis, "rotation": c_num,
    "height": c_num, "shift": c_pair, "max_strain": c_nonneg, "max_cells": c_int_min(1), "build": c_bool,
}


def _overlayer(where, v):
    return _table(where, v, OVERLAYER_FIELDS, ("basis",), (("lattice", "vectors"),))


TOP_FIELDS = {
    "model": lambda w, v: _table(w, v, MODEL_FIELDS, ("name",)),
    "provenance": lambda w, v: _table(w, v, PROVENANCE_FIELDS),
    "substrate": lambda w, v: _table(w, v, SUBSTRATE_FIELDS, ("crystal",), (("face", "steps"),)),
    "cell": lambda w, v: _table(w, v, CELL_FIELDS, (), (("matrix", "wood"),)),
    "reconstruction": lambda w, v: _table_list(w, v, _reconstruction),
    "adsorbate": lambda w, v: _table_list(w, v, _adsorbate),
    "overlayer": lambda w, v: _table_list(w, v, _overlayer),
    "checks": lambda w, v: _table(w, v, CHECKS_FIELDS),
}


# ---------------------------------------------------------------------------- reading
def _read_bytes(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise FileFormatError(f"{path}: the model file does not exist.") from None
    except IsADirectoryError:
        raise FileFormatError(f"{path}: is a folder; give the model file (.toml).") from None
    except OSError as exc:
        raise FileFormatError(f"{path}: cannot read the model file ({exc.strerror}).") from None


def parse_model(data: bytes, name: str = "model") -> dict:
    """Parse and validate the text of a model file; return the checked spec.

    Raises
    ------
    FileFormatError
        Not TOML, or a field that is unknown, of the wrong type or out of range. The message
        names ``name`` (the file) and the field.
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise FileFormatError(f"{name}: the model file is not UTF-8 text.") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise FileFormatError(f"{name}: not valid TOML: {exc}.") from None
    try:
        spec = _table("", raw, TOP_FIELDS, ("model", "substrate"))
        fmt = spec["model"].get("format", FORMAT_VERSION)
        if fmt != FORMAT_VERSION:
            raise _Bad("model.format", f"must be {FORMAT_VERSION} (the version this surfgeo reads), "
                       f"got {fmt}")
    except _Bad as bad:
        raise FileFormatError(f"{name}: {bad.where} {bad.what}.") from None
    return spec


def load_model(path: str | os.PathLike) -> dict:
    """Read and validate a model file; return the checked spec (see :func:`parse_model`)."""
    p = Path(path)
    return parse_model(_read_bytes(p), str(p))


# ---------------------------------------------------------------------------- building
def _resolve(base: Path, value: str) -> str:
    """A path relative to the model file's folder if such a file exists, else the text."""
    cand = base / value
    return str(cand) if cand.is_file() else value


def _substrate(sub: dict, base: Path):
    from surfgeo.slab.bulk import bulk_crystal
    from surfgeo.slab.cut import surface_slab
    from surfgeo.slab.relax import relax_layers
    from surfgeo.slab.steps import stepped_slab

    crystal = _resolve(base, sub["crystal"])
    bulk = _step("substrate.crystal", lambda: bulk_crystal(
        crystal, sub.get("structure"), a=sub.get("a"), c=sub.get("c"), species=sub.get("species")))
    vac = sub.get("vacuum", 10.0)
    if "steps" in sub:
        for k in ("rectangular", "termination"):
            if k in sub:
                raise _Bad(f"substrate.{k}",
                           "cannot be used with substrate.steps (the cell runs along the step edge)")
        atoms = _step("substrate.steps", lambda: stepped_slab(
            bulk, sub["steps"], layers=sub.get("layers", 12), vacuum=vac,
            orthogonal=sub.get("orthogonal", False)))
    else:
        atoms = _step("substrate.face", lambda: surface_slab(
            bulk, sub["face"], layers=sub.get("layers", 4), vacuum=vac,
            orthogonal=sub.get("orthogonal", False), rectangular=sub.get("rectangular", False),
            termination=sub.get("termination", 0)))
    if "relax" in sub:
        atoms = _step("substrate.relax", lambda: relax_layers(atoms, sub["relax"]))
    return atoms


def _step(where: str, fn):
    """Run one build step; a user error becomes a _Bad naming the field."""
    try:
        return fn()
    except InputError as exc:
        msg = str(exc).rstrip(".")
        raise _Bad(where, f"failed: {msg}") from None


def _reconstruct(atoms, where: str, r: dict):
    from surfgeo.slab import reconstruct as rc

    kind = r["kind"]
    if kind == "missing-row":
        return _step(where, lambda: rc.missing_row(
            atoms, period=r.get("period", 2), along=r.get("along", "auto"), remove=r.get("remove", [[0]]),
            relax=r.get("relax", []), shifts=r.get("shifts", [])))
    if kind == "added-row":
        return _step(where, lambda: rc.added_row(
            atoms, period=r.get("period", 2), along=r.get("along", "auto"), rows=r.get("rows", [0]),
            element=r.get("element"), height=r.get("height"), decorate=r.get("decorate")))
    if kind == "clock-rotation":
        return _step(where, lambda: rc.clock_rotation(
            atoms, angle=r.get("angle"), displacement=r.get("displacement"), layer=r.get("layer", 1),
            centres=r.get("centres")))
    if kind == "row-pairing":
        return _step(where, lambda: rc.pair_rows(
            atoms, r["amount"], layer=r.get("layer", 1), along=r.get("along", "auto")))
    if kind == "displacement":
        return _step(where, lambda: rc.displace(atoms, r["shifts"]))
    return _step(where, lambda: rc.substitute(atoms, r["element"], layer=r.get("layer", 1), at=r.get("at")))


def _adsorb(atoms, where: str, a: dict, base: Path, factor: float):
    from surfgeo.slab.adsorbates import add_adsorbate

    if "file" in a:
        import ase.io

        path = base / a["file"]
        try:
            species = ase.io.read(str(path))
        except FileNotFoundError:
            raise _Bad(f"{where}.file", f"names {path}, which does not exist") from None
        except Exception as exc:  # ASE raises many kinds of errors for unreadable files
            raise _Bad(f"{where}.file",
                       f"cannot be read as a structure ({type(exc).__name__}: {exc})") from None
    else:
        species = a["species"]
    pos = a.get("position")
    return _step(where, lambda: add_adsorbate(
        atoms, species, a.get("site"), pos, which=a.get("which", "first"), height=a.get("height"),
        bond_length=a.get("bond_length"), tilt=a.get("tilt", 0.0), azimuth=a.get("azimuth", 0.0),
        anchor=a.get("anchor"), contact_factor=factor))


def _overlay(atoms, where: str, o: dict):
    from surfgeo.lattice import parse_lattice
    from surfgeo.slab.overlayer import MAX_CELLS, MAX_STRAIN, Film, add_overlayer

    if "lattice" in o:
        vec = _step(f"{where}.lattice", lambda: parse_lattice(o["lattice"]).vectors)
    else:
        vec = np.array(o["vectors"])
    film = _step(where, lambda: Film(vec, tuple(o["basis"]), o.get("name", "film")))
    new, _report = _step(where, lambda: add_overlayer(
        atoms, film, rotation=o.get("rotation", 0.0), height=o.get("height", 2.5),
        shift=o.get("shift", (0, 0)),
        max_strain=o.get("max_strain", MAX_STRAIN), max_cells=o.get("max_cells", MAX_CELLS),
        build=o.get("build", True)))
    return new


def build_model(path: str | os.PathLike):
    """Build the slab that a model file describes.

    Parameters
    ----------
    path : str or path-like
        The TOML model file (format documented in ``docs/model-file.md``).

    Returns
    -------
    ase.Atoms
        The slab. ``info["surfgeo"]["model"]`` records the file name, the SHA-256 of its
        bytes, the model name, description, ``synthetic`` flag and provenance.

    Raises
    ------
    FileFormatError
        Unreadable file, bad TOML, unknown or malformed fields, or a step that fails (an
        unknown site on this face, overlapping atoms ...). The one-sentence message names
        the file and the field.

    Examples
    --------
    >>> s = build_model("structures/pt111_o_p2x2.toml")  # doctest: +SKIP
    >>> s.info["surfgeo"]["model"]["file"]  # doctest: +SKIP
    'pt111_o_p2x2.toml'
    """
    p = Path(path)
    data = _read_bytes(p)
    spec = parse_model(data, str(p))
    base = p.parent
    try:
        return _build(spec, data, p, base)
    except _Bad as bad:
        raise FileFormatError(f"{p}: {bad.where} {bad.what}.") from None


_STEP_KEY = "_surfgeo_model_step"


def _build(spec: dict, data: bytes, p: Path, base: Path):
    from surfgeo.slab.adsorbates import CONTACT_FACTOR, close_contacts
    from surfgeo.slab.info import update_surface_info
    from surfgeo.slab.supercell import make_supercell

    checks = spec.get("checks", {})
    factor = checks.get("contact_factor", CONTACT_FACTOR)
    labels = ["?"]  # step number -> field that added the atoms (a temporary per-atom array)

    def mark(atoms, label):
        if _STEP_KEY not in atoms.arrays:
            atoms.arrays[_STEP_KEY] = np.zeros(len(atoms), dtype=int)
        new = atoms.arrays[_STEP_KEY] == 0
        if np.any(new):
            labels.append(label)
            atoms.arrays[_STEP_KEY][new] = len(labels) - 1
        return atoms

    atoms = mark(_substrate(spec["substrate"], base), "substrate")
    cell = spec.get("cell")
    if cell:
        key = "matrix" if "matrix" in cell else "wood"
        atoms = _step(f"cell.{key}", lambda: make_supercell(atoms, cell[key]))
    for i, r in enumerate(spec.get("reconstruction", [])):
        atoms = mark(_reconstruct(atoms, f"reconstruction[{i}]", r), f"reconstruction[{i}]")
    for i, a in enumerate(spec.get("adsorbate", [])):
        atoms = mark(_adsorb(atoms, f"adsorbate[{i}]", a, base, factor), f"adsorbate[{i}]")
    for i, o in enumerate(spec.get("overlayer", [])):
        atoms = mark(_overlay(atoms, f"overlayer[{i}]", o), f"overlayer[{i}]")
    step = atoms.arrays.pop(_STEP_KEY)
    bad = close_contacts(atoms, factor=factor, minimum=checks.get("min_distance"))
    if bad:
        i, j, d = bad[0]
        s = atoms.get_chemical_symbols()
        where = "checks.min_distance" if "min_distance" in checks else "checks"
        limit = (f"the minimum {checks['min_distance']} A" if "min_distance" in checks
                 else f"{factor} times the sum of their covalent radii")
        raise _Bad(where, f"failed: atoms {i} ({s[i]}, from {labels[step[i]]}) and {j} ({s[j]}, from "
                   f"{labels[step[j]]}) are {d:.2f} A apart, closer than {limit}")
    model = spec["model"]
    record = {
        "file": p.name,
        "sha256": hashlib.sha256(data).hexdigest(),
        "name": model["name"],
        "description": model.get("description"),
        "synthetic": model.get("synthetic"),
        "format": FORMAT_VERSION,
        "provenance": spec.get("provenance", {}),
    }
    update_surface_info(atoms, provenance=f"built from the model file {p.name} ({record['sha256'][:12]})",
                        model=record)
    return atoms


__all__ = ["FORMAT_VERSION", "RECONSTRUCTION_KINDS", "build_model", "load_model", "parse_model"]
