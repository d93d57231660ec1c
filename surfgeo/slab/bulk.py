"""Bulk crystals in their conventional cells: from an element, a structure prototype or a file.

Every bulk crystal made here is an :class:`ase.Atoms` in its *conventional* cell (cubic for
fcc, bcc, diamond and the cubic compounds; hexagonal with a1, a2 at 120 degrees for hcp and
wurtzite), because Miller indices refer to that cell. Its ``info["surfgeo_bulk"]`` holds a
JSON-able description (formula, structure, a, c, space group, where the lattice constants
came from). spglib confirms the space group of every crystal; structure files are
standardised by spglib to their conventional cell.

Default lattice constants of the elements come from ASE's reference data
(``ase.data.reference_states``), which carries the structure and room-temperature lattice
constants collected by ASE from C. Kittel, *Introduction to Solid State Physics* and
similar tables.
"""

from __future__ import annotations

import math
import os
import re
from pathlib import Path

import numpy as np
from ase import Atoms

from surfgeo.checks import positive_number
from surfgeo.errors import FileFormatError, StructureError
from surfgeo.lattice.rational import closest_denominators

#: Key of the bulk description in ``atoms.info``.
BULK_KEY = "surfgeo_bulk"

#: Two atoms closer than this fraction of the sum of their covalent radii overlap: bulks, slabs,
#: adsorbates and model files all refuse such structures (``surfgeo.slab.adsorbates`` uses the
#: same value).
CONTACT_FACTOR = 0.5

_FCC = [(0, 0, 0), (0, 0.5, 0.5), (0.5, 0, 0.5), (0.5, 0.5, 0)]


def _shift(points, d):
    return [tuple((np.array(p) + d) % 1.0) for p in points]


# name -> (lattice family, [(species index, fractional position)], space group number, species count,
#          stoichiometry per species)
_PROTOTYPES: dict[str, dict] = {
    "sc": {"family": "cubic", "sites": [(0, (0, 0, 0))], "sg": 221, "stoich": (1,)},
    "fcc": {"family": "cubic", "sites": [(0, p) for p in _FCC], "sg": 225, "stoich": (1,)},
    "bcc": {"family": "cubic", "sites": [(0, (0, 0, 0)), (0, (0.5, 0.5, 0.5))], "sg": 229, "stoich": (1,)},
    "hcp": {
        "family": "hexagonal",
        "sites": [(0, (1 / 3, 2 / 3, 0.25)), (0, (2 / 3, 1 / 3, 0.75))],
        "sg": 194,
        "stoich": (1,),
    },
    "diamond": {
        "family": "cubic",
        "sites": [(0, p) for p in _FCC] + [(0, p) for p in _shift(_FCC, 0.25)],
        "sg": 227,
        "stoich": (1,),
    },
    "zincblende": {
        "family": "cubic",
        "sites": [(0, p) for p in _FCC] + [(1, p) for p in _shift(_FCC, 0.25)],
        "sg": 216,
        "stoich": (1, 1),
    },
    "rocksalt": {
        "family": "cubic",
        "sites": [(0, p) for p in _FCC] + [(1, p) for p in _shift(_FCC, np.array([0.5, 0, 0]))],
        "sg": 225,
        "stoich": (1, 1),
    },
    "cesiumchloride": {
        "family": "cubic", "sites": [(0, (0, 0, 0)), (1, (0.5, 0.5, 0.5))], "sg": 221, "stoich": (1, 1),
    },
    "fluorite": {
        "family": "cubic",
        "sites": [(0, p) for p in _FCC] + [(1, p) for p in _shift(_FCC, 0.25)]
        + [(1, p) for p in _shift(_FCC, 0.75)],
        "sg": 225,
        "stoich": (1, 2),
    },
    "perovskite": {
        "family": "cubic",
        "sites": [(0, (0, 0, 0)), (1, (0.5, 0.5, 0.5)), (2, (0.5, 0.5, 0)), (2, (0.5, 0, 0.5)),
                  (2, (0, 0.5, 0.5))],
        "sg": 221,
        "stoich": (1, 1, 3),
    },
    "wurtzite": {
        "family": "hexagonal",
        "sites": [(0, (1 / 3, 2 / 3, 0)), (0, (2 / 3, 1 / 3, 0.5)), (1, (1 / 3, 2 / 3, 0.375)),
                  (1, (2 / 3, 1 / 3, 0.875))],
        "sg": 186,
        "stoich": (1, 1),
    },
}

#: Structure prototypes :func:`bulk_crystal` can build.
STRUCTURES: tuple[str, ...] = tuple(_PROTOTYPES)

_ALIASES = {
    "sc": "sc", "simple-cubic": "sc", "simplecubic": "sc",
    "fcc": "fcc", "bcc": "bcc", "hcp": "hcp", "diamond": "diamond",
    "zincblende": "zincblende", "zinc-blende": "zincblende", "sphalerite": "zincblende", "b3": "zincblende",
    "rocksalt": "rocksalt", "rock-salt": "rocksalt", "nacl": "rocksalt", "b1": "rocksalt",
    "cesiumchloride": "cesiumchloride", "caesiumchloride": "cesiumchloride", "cscl": "cesiumchloride",
    "b2": "cesiumchloride",
    "fluorite": "fluorite", "caf2": "fluorite", "c1": "fluorite",
    "perovskite": "perovskite", "abo3": "perovskite",
    "wurtzite": "wurtzite", "b4": "wurtzite",
}


def normalise_structure(name: str) -> str:
    """The canonical prototype name for ``name`` (case, spaces, hyphens and aliases ignored)."""
    key = re.sub(r"[\s_]+", "", str(name).strip().lower())
    key2 = key.replace("-", "")
    for k in (key, key2):
        if k in _ALIASES:
            return _ALIASES[k]
    raise StructureError(
        f"unknown structure {name!r}; use one of {', '.join(STRUCTURES)} or give a structure file."
    )


def parse_formula(formula: str) -> list[tuple[str, int]]:
    """Split a chemical formula into (element, count) pairs in the order written.

    Examples
    --------
    >>> parse_formula("SrTiO3")
    [('Sr', 1), ('Ti', 1), ('O', 3)]
    """
    from ase.data import atomic_numbers

    text = str(formula).strip()
    if not text or not re.fullmatch(r"([A-Z][a-z]?\d*)+", text):
        raise StructureError(
            f"{formula!r} is not a chemical symbol or formula such as 'Pt', 'NaCl' or 'SrTiO3'."
        )
    out: list[tuple[str, int]] = []
    for sym, num in re.findall(r"([A-Z][a-z]?)(\d*)", text):
        if sym not in atomic_numbers:
            raise StructureError(f"unknown chemical element {sym!r} in {formula!r}.")
        out.append((sym, int(num) if num else 1))
    return out


def spglib_call(name: str, *args, **kwargs):
    """Call ``spglib.<name>`` quietly: its errors and deprecation notices become ``None``."""
    import warnings

    import spglib

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        try:
            return getattr(spglib, name)(*args, **kwargs)
        except Exception:  # spglib raises its own SpglibError on failure
            return None


def closest_contact(atoms: Atoms, factor: float = CONTACT_FACTOR) -> tuple[int, int, float, float] | None:
    """The closest pair of atoms that overlap in a fully periodic cell, or None.

    Two atoms i, j overlap when they are closer than ``factor * (r_i + r_j)`` with the
    covalent radii of ``ase.data.covalent_radii`` (B. Cordero et al., Dalton Trans. 2832
    (2008)); an atom may also overlap its own periodic image (a cell that is too small).

    Returns
    -------
    (i, j, distance, minimum) or None
        Atom indices, their distance and the smallest allowed distance (Angstrom).
    """
    from ase.data import covalent_radii
    from ase.neighborlist import neighbor_list

    if len(atoms) == 0:
        return None
    radii = factor * covalent_radii[atoms.numbers]
    i, j, d = neighbor_list("ijd", atoms, radii.tolist(), self_interaction=False)
    if len(d) == 0:
        return None
    limit = radii[i] + radii[j]
    bad = np.nonzero(d < limit - 1e-9)[0]
    if len(bad) == 0:
        return None
    k = int(bad[np.argmin(d[bad])])
    return int(i[k]), int(j[k]), float(d[k]), float(limit[k])


def check_distances(atoms: Atoms, what: str, advice: str, factor: float = CONTACT_FACTOR) -> None:
    """Raise :class:`StructureError` if two atoms of a periodic structure overlap.

    ``what`` names the structure (``"the fcc Pt crystal with a = 0.5 A"``), ``advice`` says what to
    change (``"check the lattice constants"``); see :func:`closest_contact` for the rule.
    """
    hit = closest_contact(atoms, factor)
    if hit is None:
        return
    i, j, d, need = hit
    s = atoms.get_chemical_symbols()
    pair = f"two {s[i]} atoms" if s[i] == s[j] else f"{s[i]} and {s[j]} atoms"
    raise StructureError(
        f"{what} puts {pair} {d:.2f} A apart, closer than the sane minimum of {need:.2f} A "
        f"({factor:g} times the sum of their covalent radii); {advice}."
    )


def _spacegroup(atoms: Atoms, symprec: float = 1e-3) -> tuple[int, str]:
    cell = (np.asarray(atoms.cell[:]), atoms.get_scaled_positions(), atoms.numbers)
    data = spglib_call("get_symmetry_dataset", cell, symprec=symprec)
    if data is None:
        raise StructureError("spglib could not determine the space group of this crystal.")
    return int(data.number), str(data.international)


def _conventional_cell(family: str, a: float, c: float | None) -> np.ndarray:
    if family == "cubic":
        return np.diag([a, a, a])
    return np.array([[a, 0.0, 0.0], [-a / 2.0, a * math.sqrt(3.0) / 2.0, 0.0], [0.0, 0.0, float(c)]])


def _positive(name: str, value) -> float:
    return positive_number(value, f"lattice constant {name}", error=StructureError)


def _looks_like_path(symbol: str) -> bool:
    if os.sep in symbol or "/" in symbol or re.search(r"\.[A-Za-z0-9]+$", symbol):
        return True
    if Path(symbol).is_file():
        try:
            parse_formula(symbol)
        except StructureError:
            return True
    return False


def bulk_crystal(
    symbol: str,
    structure: str | None = None,
    a: float | None = None,
    c: float | None = None,
    species: list[str] | tuple[str, ...] | None = None,
) -> Atoms:
    """A bulk crystal in its conventional cell.

    Parameters
    ----------
    symbol : str
        An element (``"Pt"``: structure and lattice constants from ASE's reference data), a
        formula for a compound prototype (``"NaCl"``, ``"GaAs"``, ``"CaF2"``, ``"SrTiO3"``),
        or the path of a structure file that ASE reads (CIF, POSCAR, extxyz, ...; see
        :func:`read_bulk`).
    structure : str, optional
        Prototype: ``sc``, ``fcc``, ``bcc``, ``hcp``, ``diamond``, ``zincblende``,
        ``rocksalt``, ``cesiumchloride``, ``fluorite``, ``perovskite`` (ABX3, species in the
        order A, B, X) or ``wurtzite``. Defaults to the element's reference structure.
    a, c : float, optional
        Lattice constants in Angstrom (``c`` for hcp and wurtzite). For an element in its
        reference structure they default to ASE's reference values; compounds need ``a``.
    species : sequence of str, optional
        Elements of the prototype's sites, overriding those read from ``symbol``.

    Returns
    -------
    ase.Atoms
        Conventional cell, pbc True, with ``info["surfgeo_bulk"]`` = {formula, structure,
        a, c, spacegroup, spacegroup_symbol, source}.

    Raises
    ------
    StructureError
        Unknown element or structure, missing or non-positive lattice constants, a formula
        whose stoichiometry does not fit the prototype, or a space group that is not the
        prototype's.

    Examples
    --------
    >>> b = bulk_crystal("Cu")
    >>> b.info["surfgeo_bulk"]["structure"], b.info["surfgeo_bulk"]["a"], len(b)
    ('fcc', 3.61, 4)

    References
    ----------
    .. [1] ASE reference data ``ase.data.reference_states`` (structures and lattice
       constants of the elements, compiled from C. Kittel, Introduction to Solid State
       Physics).
    """
    from ase.data import atomic_numbers, reference_states

    if not isinstance(symbol, str) or not symbol.strip():
        raise StructureError("the crystal must be given as an element, a formula or a structure file.")
    symbol = symbol.strip()
    if _looks_like_path(symbol):
        if structure is not None or species is not None:
            raise StructureError("give either a structure file or a symbol with --structure, not both.")
        return read_bulk(symbol, a=a, c=c)

    parts = parse_formula(symbol)
    source = "user"
    if structure is None:
        if len(parts) != 1 or parts[0][1] != 1:
            raise StructureError(
                f"{symbol!r} is a compound; give its structure (e.g. rocksalt, zincblende, fluorite, "
                "perovskite) and lattice constant a."
            )
        ref = reference_states[atomic_numbers[parts[0][0]]]
        if ref is None or ref.get("symmetry") not in _PROTOTYPES:
            kind = None if ref is None else ref.get("symmetry")
            raise StructureError(
                f"ASE's reference data gives {symbol} the structure {kind!r}, which surfgeo cannot "
                "build from a symbol; give a structure (fcc, bcc, hcp, ...) with a, or a structure file."
            )
        structure = ref["symmetry"]
    proto_name = normalise_structure(structure)
    proto = _PROTOTYPES[proto_name]

    # species and stoichiometry
    if species is not None:
        names = [str(s).strip() for s in species]
        for s in names:
            if s not in atomic_numbers:
                raise StructureError(f"unknown chemical element {s!r} in species.")
    else:
        names = [p[0] for p in parts]
        counts = [p[1] for p in parts]
        stoich = proto["stoich"]
        if len(names) == 1 and len(stoich) > 1:
            raise StructureError(
                f"the {proto_name} structure has {len(stoich)} species; give a formula such as "
                f"{_example(proto_name)} or the species."
            )
        if len(names) != len(stoich):
            raise StructureError(
                f"the {proto_name} structure needs {len(stoich)} species, the formula {symbol!r} has "
                f"{len(names)}."
            )
        g = math.gcd(*counts)
        if tuple(cnt // g for cnt in counts) != stoich and len(stoich) > 1:
            raise StructureError(
                f"the formula {symbol!r} does not have the {proto_name} stoichiometry "
                f"{_example(proto_name)}."
            )
    if len(names) != len(proto["stoich"]):
        raise StructureError(
            f"the {proto_name} structure needs {len(proto['stoich'])} species, got {len(names)}."
        )

    # lattice constants
    ref = reference_states[atomic_numbers[names[0]]] if len(names) == 1 else None
    ref_ok = ref is not None and ref.get("symmetry") == proto_name
    if a is None:
        if not ref_ok:
            raise StructureError(
                f"no reference lattice constant for {symbol} as {proto_name}; give the lattice constant a "
                "in Angstrom."
            )
        a = ref["a"]
        source = "ASE reference_states"
    a = _positive("a", a)
    if proto["family"] == "hexagonal":
        if c is None:
            if not ref_ok or "c/a" not in ref:
                raise StructureError(f"give the lattice constant c (Angstrom) for {symbol} as {proto_name}.")
            c = ref["c/a"] * a
            source = (
                "ASE reference_states" if source != "user" else "a from user, c/a from ASE reference_states"
            )
        c = _positive("c", c)
    elif c is not None:
        raise StructureError(f"the {proto_name} structure is cubic; it takes only a, not c.")

    cell = _conventional_cell(proto["family"], a, c)
    sites = proto["sites"]
    frac = np.array([p for _, p in sites], dtype=float)
    syms = [names[i] for i, _ in sites]
    atoms = Atoms(syms, scaled_positions=frac, cell=cell, pbc=True)
    consts = f"a = {a:g} A" + (f", c = {c:g} A" if proto["family"] == "hexagonal" else "")
    check_distances(atoms, f"the {proto_name} {symbol} crystal with {consts}",
                    "check the lattice constants (Angstrom)")
    sg, sg_symbol = _spacegroup(atoms)
    if sg != proto["sg"] and not (len(set(names)) < len(names)):
        raise StructureError(
            f"spglib finds space group {sg} for this {proto_name} crystal instead of {proto['sg']}; "
            "check the lattice constants."
        )
    formula = _formula_unit(atoms) if len(names) > 1 else names[0]
    atoms.info[BULK_KEY] = {
        "formula": formula,
        "structure": proto_name,
        "a": a,
        "c": c,
        "spacegroup": sg,
        "spacegroup_symbol": sg_symbol,
        "source": source,
        "species": names,
    }
    return atoms


def _formula_unit(atoms: Atoms) -> str:
    """The formula unit of a crystal (NaCl, not the Na4Cl4 of its conventional cell)."""
    return str(atoms.symbols.formula.reduce()[0])


def _example(proto: str) -> str:
    return {
        "zincblende": "GaAs (1:1)", "rocksalt": "NaCl (1:1)", "cesiumchloride": "CsCl (1:1)",
        "fluorite": "CaF2 (1:2)", "perovskite": "SrTiO3 (1:1:3)", "wurtzite": "ZnO (1:1)",
    }.get(proto, "Pt")


def read_bulk(path: str | os.PathLike, a: float | None = None, c: float | None = None,
              symprec: float = 1e-3) -> Atoms:
    """A bulk crystal from any structure file ASE reads, standardised to its conventional cell.

    spglib's ``standardize_cell`` gives the conventional cell in spglib's standard
    orientation (for hexagonal crystals a1, a2 at 120 degrees), so that Miller indices refer
    to it.

    Parameters
    ----------
    path : str or path-like
        The file (format from the ending, as ASE decides).
    a, c : float, optional
        Must not be given (a crystal from a file has its own lattice); present so that a
        file can be passed wherever :func:`bulk_crystal` is called.
    symprec : float
        spglib tolerance (Angstrom).

    Raises
    ------
    FileFormatError
        If the file does not exist or ASE cannot read it.
    StructureError
        If it holds no atoms or no periodic 3D cell.
    """
    import ase.io

    p = Path(path)
    if a is not None or c is not None:
        raise StructureError(f"the crystal from {p} has its own lattice constants; do not give a or c.")
    if not p.is_file():
        raise FileFormatError(f"structure file {p} does not exist.")
    try:
        atoms = ase.io.read(p)
    except Exception as exc:  # ASE raises many kinds; all mean "cannot read"
        raise FileFormatError(
            f"cannot read {p} as a crystal structure ({type(exc).__name__}); give a CIF, POSCAR, "
            "extxyz or another format ASE reads."
        ) from None
    if isinstance(atoms, list):  # pragma: no cover - ase.io.read returns the last frame
        atoms = atoms[-1]
    if len(atoms) == 0:
        raise StructureError(f"the structure file {p} holds no atoms.")
    cell = np.asarray(atoms.cell[:], dtype=float)
    if abs(np.linalg.det(cell)) < 1e-6 or not all(atoms.pbc):
        raise StructureError(f"the structure in {p} is not a periodic 3D crystal (it needs a full cell).")
    check_distances(atoms, f"the crystal in {p}",
                    "check the file for overlapping or partly occupied sites and its cell")
    spg_cell = (cell, atoms.get_scaled_positions(), atoms.numbers)
    std = spglib_call("standardize_cell", spg_cell, to_primitive=False, no_idealize=False, symprec=symprec)
    data = spglib_call("get_symmetry_dataset", spg_cell, symprec=symprec)
    if std is None or data is None:
        raise StructureError(f"spglib cannot determine the symmetry of the crystal in {p}.")
    lattice, frac, numbers = std
    out = Atoms(numbers=numbers, scaled_positions=frac, cell=lattice, pbc=True)
    lengths = out.cell.lengths()
    angles = out.cell.angles()
    hexagonal = abs(lengths[0] - lengths[1]) < 1e-6 * lengths[0] and abs(angles[2] - 120) < 1e-4
    out.info[BULK_KEY] = {
        "formula": _formula_unit(out),
        "structure": f"from file {p.name} ({data.international})",
        "a": float(lengths[0]),
        "c": float(lengths[2]),
        "b": float(lengths[1]),
        "angles": [float(x) for x in angles],
        "hexagonal": bool(hexagonal),
        "spacegroup": int(data.number),
        "spacegroup_symbol": str(data.international),
        "source": str(p),
        "species": sorted(set(out.get_chemical_symbols())),
    }
    return out


def bulk_description(bulk: Atoms) -> dict:
    """The ``info["surfgeo_bulk"]`` record of a bulk crystal, made up if ASE built it.

    A crystal without the record (an ``ase.Atoms`` built elsewhere) is first checked for
    overlapping atoms (:func:`check_distances`), as :func:`bulk_crystal` and
    :func:`read_bulk` check theirs.
    """
    rec = bulk.info.get(BULK_KEY)
    if rec is not None:
        return dict(rec)
    check_distances(bulk, f"the bulk crystal {_formula_unit(bulk)} given as ase.Atoms",
                    "check its cell and positions (Angstrom)")
    lengths = bulk.cell.lengths()
    sg, sg_symbol = _spacegroup(bulk)
    return {
        "formula": bulk.get_chemical_formula(mode="reduce"),
        "structure": f"user cell ({sg_symbol})",
        "a": float(lengths[0]),
        "c": float(lengths[2]),
        "spacegroup": sg,
        "spacegroup_symbol": sg_symbol,
        "source": "ase.Atoms given by the caller",
        "species": sorted(set(bulk.get_chemical_symbols())),
    }


def is_hexagonal_cell(bulk: Atoms, tol: float = 1e-4) -> bool:
    """True when the cell has |a1| = |a2|, a3 perpendicular to both, and 120 degrees between a1, a2."""
    a, b, c = np.asarray(bulk.cell[:], dtype=float).tolist()

    def dot(u, v):
        return u[0] * v[0] + u[1] * v[1] + u[2] * v[2]

    lengths = [math.sqrt(dot(u, u)) for u in (a, b, c)]
    if min(lengths) <= 0:
        return False
    # alpha (b, c), beta (a, c), gamma (a, b), in degrees, as ASE's Cell.angles orders them
    angles = [math.degrees(math.acos(max(-1.0, min(1.0, dot(u, v) / (lu * lv)))))
              for u, v, lu, lv in ((b, c, lengths[1], lengths[2]), (a, c, lengths[0], lengths[2]),
                                   (a, b, lengths[0], lengths[1]))]
    return bool(
        abs(lengths[0] - lengths[1]) <= tol * lengths[0]
        and abs(angles[2] - 120.0) <= 1e-2
        and abs(angles[0] - 90.0) <= 1e-2
        and abs(angles[1] - 90.0) <= 1e-2
    )


def translation_lattice(bulk: Atoms, symprec: float = 1e-3) -> np.ndarray:
    """A primitive basis (rows, Cartesian, Angstrom) of the translation lattice of ``bulk``.

    The lattice is generated by the cell vectors and the pure translations of the crystal
    (the centring vectors of fcc, bcc, ... conventional cells). Those are found directly:
    every pure translation takes one atom of the rarest element onto another atom of that
    element, so the differences of their positions are the only candidates, and each is
    kept if it maps every atom onto an atom of the same element within ``symprec``
    (Angstrom). Cells of more than 256 atoms ask spglib instead. The basis is returned as
    rational combinations of the cell vectors with small denominators, so it is exact.
    """
    cell = np.asarray(bulk.cell[:], dtype=float)
    pos = np.asarray(bulk.positions, dtype=float)
    key = (cell.tobytes(), pos.tobytes(), np.asarray(bulk.numbers).tobytes(), float(symprec))
    if key in _TL_CACHE:
        return _TL_CACHE[key].copy()
    frac = np.linalg.solve(cell.T, pos.T).T % 1.0
    if len(bulk) <= 256:
        trans = _pure_translations(cell, frac, np.asarray(bulk.numbers), symprec)
    else:
        sym = spglib_call("get_symmetry", (cell, frac, bulk.numbers), symprec=symprec)
        if sym is None:
            raise StructureError("spglib could not find the symmetry of the bulk crystal.")
        eye = np.eye(3, dtype=int)
        trans = [t for W, t in zip(sym["rotations"], sym["translations"], strict=True)
                 if np.array_equal(W, eye)]
    gens = np.concatenate([np.eye(3), np.reshape(np.asarray(trans, dtype=float), (-1, 3)) % 1.0])
    # rational generators (denominators up to 48, the closest fractions) with a common denominator
    den = math.lcm(*(int(q) for q in np.unique(closest_denominators(gens, 48))))
    rows = np.rint(gens * den).astype(np.int64)
    basis = _integer_row_basis(rows)
    out = (basis / den) @ cell
    if len(_TL_CACHE) > 64:
        _TL_CACHE.clear()
    _TL_CACHE[key] = out
    return out.copy()


_TL_CACHE: dict[tuple, np.ndarray] = {}


def _pure_translations(cell: np.ndarray, frac: np.ndarray, numbers: np.ndarray, tol: float) -> list:
    """Fractional translations t (not lattice vectors) with crystal + t = crystal."""
    frac = frac % 1.0
    counts = np.bincount(numbers)
    present = np.nonzero(counts)[0]
    rare = present[np.argmin(counts[present])]  # the rarest element (the lowest Z on ties)
    idx = np.nonzero(numbers == rare)[0]
    same = numbers[:, None] == numbers[None, :]
    cands = (frac[idx[1:]] - frac[idx[0]]) % 1.0  # (k, 3)
    n = len(frac)
    out = []
    # candidates in blocks of about 10^5 atom pairs: (block, n, n, 3) differences at once
    block = max(1, 100_000 // max(1, n * n))
    for s in range(0, len(cands), block):
        t = cands[s:s + block]
        d = (frac[None, :, :] + t[:, None, :])[:, :, None, :] - frac[None, None, :, :]
        d -= np.rint(d)
        dist = np.linalg.norm(d @ cell, axis=3)
        dist = np.where(same[None], dist, np.inf)
        ok = np.all(dist.min(axis=2) <= tol, axis=1)
        out.extend(t[ok])
    return out


def _integer_row_basis(rows: np.ndarray) -> np.ndarray:
    """A basis (3 rows) of the integer lattice spanned by ``rows`` (Hermite normal form)."""
    M = [list(map(int, r)) for r in rows if any(r)]
    basis = []
    col = 0
    while M and col < 3:
        # gcd elimination on column `col`
        while True:
            nz = [r for r in M if r[col] != 0]
            if len(nz) <= 1:
                break
            nz.sort(key=lambda r: abs(r[col]))
            piv = nz[0]
            new = [piv]
            for r in M:
                if r is piv:
                    continue
                if r[col] != 0:
                    q = r[col] // piv[col]
                    r = [x - q * y for x, y in zip(r, piv, strict=True)]
                if any(r):
                    new.append(r)
            M = new
        nz = [r for r in M if r[col] != 0]
        if nz:
            piv = nz[0]
            basis.append(piv)
            M = [r for r in M if r is not piv]
        col += 1
    if len(basis) != 3:  # pragma: no cover - the cell vectors always give rank 3
        raise StructureError("the translations of the crystal do not span three dimensions.")
    return np.array(basis, dtype=float)


__all__ = [
    "BULK_KEY",
    "CONTACT_FACTOR",
    "check_distances",
    "closest_contact",
    "STRUCTURES",
    "bulk_crystal",
    "read_bulk",
    "bulk_description",
    "normalise_structure",
    "parse_formula",
    "is_hexagonal_cell",
    "translation_lattice",
]
