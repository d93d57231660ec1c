"""Predicted diffraction patterns: which beams, where, from which domains, how strong.

Two sources of beams:

* a bare superstructure (substrate lattice plus matrix ``M``, ``B = M A``) gives beam positions
  only (:func:`superstructure_pattern`);
* a slab (``ase.Atoms`` with the ``atoms.info["surfgeo"]`` record) or a model file gives
  positions and kinematic intensities (:func:`slab_pattern`).

A relaxed structure (from a DFT code, say) is compared with its ideal reference by
:func:`compare_slab_patterns` (one energy) and :func:`compare_slab_sweeps` (I(V) curves): the
atoms are matched (:func:`align_to_reference`), and both patterns use the same beams, energy,
incidence, domains and kinematic settings.

Symmetry domains (rotated and mirrored copies of the superstructure that the substrate allows)
are superposed incoherently: ``I(g) = sum_d w_d I_d(g)``, equal weights ``w_d`` by default.
Every beam lists the domains that produce it.

A superstructure matrix with non-integer entries is treated as an overlayer with its own
lattice (coincidence when rational, incommensurate otherwise): the pattern holds the substrate
beams, the overlayer beams, and optionally the double-diffraction combinations
``g_substrate + g_overlayer`` up to a chosen order, labelled as such. The order ``n`` combines
the ``n`` shortest shells (stars) of non-zero vectors of each lattice, so it does not depend on
the choice of basis.

Beam labels are exact fractions in the substrate 1x1 reciprocal basis when the matrix is
rational (see :mod:`surfgeo.diffraction.beams`), floats for incommensurate overlayers.

.. note::

   Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam
   positions and symmetry extinctions at normal incidence are exact. A kinematic extinction at
   off-normal incidence is not a prediction: multiple scattering lifts it once the plane of
   incidence leaves the glide line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from surfgeo.diffraction.beams import (
    float_matrix,
    format_index,
    label_numerators,
    rational_matrix,
    reciprocal_points_in_disc,
    terrace_indices,
)
from surfgeo.diffraction.electron import (
    check_incidence,
    exit_angles,
    exit_directions,
    incident_k_parallel,
    to_gun_frame,
    wavenumber,
)
from surfgeo.diffraction.kinematic import QUALITATIVE_NOTE
from surfgeo.errors import InputError, StructureError
from surfgeo.lattice import Lattice2D, basis_note

#: Kinds of beam sources, simplest first (a beam produced in several ways keeps the first).
SOURCES = ("substrate", "superstructure", "overlayer", "double")

#: Intensities below this fraction of the reference intensity count as extinct (numerical
#: zero); the reference is the strongest beam listed or the specular (00) beam at the same
#: energy, whichever is larger (see :attr:`Pattern.extinct`).
EXTINCTION_RTOL = 1e-10

POSITIONS_NOTE = "Beam positions are exact (kinematic conservation of parallel momentum)."


# =============================================================================== domains
@dataclass(frozen=True)
class DomainRecord:
    """One lattice domain of the pattern.

    Attributes
    ----------
    index : int
        Position in the pattern's domain list (0 is the superstructure as given).
    matrix : ndarray, shape (2, 2)
        Its superstructure matrix ``M W`` (Fractions when rational, else floats).
    operations : tuple
        The substrate point operations (:class:`surfgeo.lattice.PointOperation`) producing it.
    weight : float
        Its weight in the incoherent sum (the weights add up to 1).
    structures : int
        Number of distinct structural domains averaged inside it (slabs; 1 otherwise).
    """

    index: int
    matrix: np.ndarray
    operations: tuple
    weight: float
    structures: int = 1

    def to_dict(self) -> dict:
        return {
            "index": self.index,
            "matrix": [[_matrix_entry(x) for x in row] for row in self.matrix],
            "operations": [op.symbol for op in self.operations],
            "weight": self.weight,
            "structures": self.structures,
        }


def _matrix_entry(x):
    if isinstance(x, Fraction):
        return int(x) if x.denominator == 1 else str(x)
    return float(x)


def lattice_domains(lattice: Lattice2D, matrix, use_domains: bool = True) -> list[tuple[np.ndarray, list]]:
    """The domains of a superstructure as (matrix, producing operations) pairs.

    Uses :func:`surfgeo.lattice.symmetry_domains`; with ``use_domains=False`` only the
    superstructure as given (produced by the identity).
    """
    if not use_domains:
        ident = lattice.point_group()[0]
        return [(_exact_or_float(matrix), [ident])]
    from surfgeo.lattice import symmetry_domains

    doms = symmetry_domains(lattice, matrix)
    return [(_exact_or_float(d.matrix), list(d.operations)) for d in doms]


def _exact_or_float(matrix) -> np.ndarray:
    exact = rational_matrix(matrix)
    return exact if exact is not None else float_matrix(matrix)


def _normalise_weights(weights, n: int) -> np.ndarray:
    if weights is None:
        return np.full(n, 1.0 / n)
    try:
        w = np.asarray(weights, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError(f"domain weights must be numbers, got {weights!r}.") from None
    if w.size != n:
        raise InputError(f"domain weights: {w.size} given, but this superstructure has {n} domain(s).")
    if np.any(~np.isfinite(w)) or np.any(w < 0) or w.sum() <= 0:
        raise InputError("domain weights must be zero or positive numbers, not all zero.")
    return w / w.sum()


# =============================================================================== beams
@dataclass
class _BeamSet:
    """Beams before angles and intensities: keys, labels, sources and domain membership."""

    exact: bool
    den: int  # common denominator of exact keys (1 for floats)
    keys: np.ndarray  # (n, 2) int64 numerators (exact) or float labels
    source: np.ndarray  # (n,) int, index into SOURCES
    member: np.ndarray  # (n, nd) bool
    via: list  # per beam: None or dict describing a double-diffraction combination

    @property
    def hk_float(self) -> np.ndarray:
        return self.keys / self.den if self.exact else np.asarray(self.keys, dtype=float)


def _shells(reciprocal: np.ndarray, n_shells: int) -> np.ndarray:
    """Integer indices of the ``n_shells`` shortest shells of non-zero reciprocal vectors."""
    if n_shells <= 0:
        return np.zeros((0, 2), dtype=np.int64)
    lengths = np.sort(np.linalg.norm(reciprocal, axis=1))
    radius = lengths[-1] * (n_shells + 1) * 1.01
    mn = reciprocal_points_in_disc(reciprocal, np.zeros(2), radius)
    mn = mn[np.any(mn != 0, axis=1)]
    r = np.linalg.norm(mn @ reciprocal, axis=1)
    shell_r = np.unique(np.round(r / r.min(), 6))[:n_shells]
    return mn[np.isin(np.round(r / r.min(), 6), shell_r)]


def _build_beams(lattice: Lattice2D, domains: list, kin: np.ndarray, k: float, double_order: int) -> _BeamSet:
    """Enumerate all emerging beams of the substrate and of every domain."""
    A_rec = lattice.reciprocal
    exact_all = all(not np.issubdtype(np.asarray(m).dtype, np.floating) for m, _ in domains)
    integer_M = exact_all and all(all(x.denominator == 1 for x in np.asarray(m).ravel()) for m, _ in domains)
    nd = len(domains)
    keys_list, src_list, dom_list, via_list = [], [], [], []

    # substrate (integer-order) beams: every domain
    sub = reciprocal_points_in_disc(A_rec, kin, k)
    if exact_all:
        dets = [label_numerators(np.zeros((1, 2), dtype=np.int64), m)[1] for m, _ in domains]
        den = 1
        for d in dets:
            den = den * d // math.gcd(den, d)
    else:
        den = 1

    def add(keys, source, dom, via=None):
        keys_list.append(keys)
        src_list.append(np.full(len(keys), source))
        dom_list.append(np.full(len(keys), dom))
        via_list.extend(via if via is not None else [None] * len(keys))

    add(sub * den if exact_all else sub.astype(float), 0, -1)

    for d, (Md, _) in enumerate(domains):
        Mf = np.array(Md, dtype=float)
        B_rec = np.linalg.inv(Mf).T @ A_rec  # superlattice reciprocal basis, rows
        mn = reciprocal_points_in_disc(B_rec, kin, k)
        if exact_all:
            num, det = label_numerators(mn, Md)
            keys = num * (den // det)
        else:
            keys = mn @ np.linalg.inv(Mf).T
        add(keys, 1 if integer_M else 2, d)
        if not integer_M and double_order > 0:
            gs_idx = _shells(A_rec, double_order)
            go_idx = _shells(B_rec, double_order)
            if len(gs_idx) and len(go_idx):
                gs = gs_idx @ A_rec
                go = go_idx @ B_rec
                tot = gs[:, None, :] + go[None, :, :]
                kp = kin + tot
                ok = np.einsum("ijk,ijk->ij", kp, kp) < k * k
                i_s, i_o = np.nonzero(ok)
                if exact_all:
                    o_num, o_det = label_numerators(go_idx[i_o], Md)
                    keys = gs_idx[i_s] * den + o_num * (den // o_det)
                else:
                    keys = gs_idx[i_s] + go_idx[i_o] @ np.linalg.inv(Mf).T
                via = [
                    {
                        "substrate": [str(int(a)), str(int(b))],
                        "overlayer": [str(int(c)), str(int(e))],
                        "domain": d,
                    }
                    for (a, b), (c, e) in zip(gs_idx[i_s], go_idx[i_o], strict=True)
                ]
                add(keys, 3, d, via)

    keys = np.concatenate(keys_list) if keys_list else np.zeros((0, 2))
    src = np.concatenate(src_list)
    dom = np.concatenate(dom_list)
    # integer labels are substrate beams whatever produced them
    if exact_all:
        is_int = np.all(keys % den == 0, axis=1)
        src = np.where(is_int, 0, src)
        ukeys, inverse = np.unique(keys, axis=0, return_inverse=True)
    else:
        rounded = np.round(keys, 7)
        _, first, inverse = np.unique(rounded, axis=0, return_index=True, return_inverse=True)
        ukeys = keys[first]
    inverse = inverse.ravel()
    nu = len(ukeys)
    source = np.full(nu, len(SOURCES), dtype=int)
    np.minimum.at(source, inverse, src)
    member = np.zeros((nu, nd), dtype=bool)
    all_dom = dom < 0
    member[inverse[all_dom]] = True
    member[inverse[~all_dom], dom[~all_dom]] = True
    via: list = [None] * nu
    for i in np.flatnonzero(src == 3):
        u = inverse[i]
        if source[u] == 3 and via[u] is None:
            via[u] = via_list[i]
    return _BeamSet(exact_all, den if exact_all else 1, ukeys, source, member, via)


# =============================================================================== pattern
@dataclass
class Pattern:
    """A predicted diffraction pattern at one energy.

    Arrays run over the beams (sorted by |g|, then by the azimuth of g). Angles in degrees,
    ``k_parallel`` and ``g`` in 1/Angstrom in the frame of the substrate basis ``lattice``;
    exit azimuths are measured from a1, like the incidence azimuth.

    Attributes
    ----------
    energy : float
        Beam energy, eV.
    incidence : (float, float)
        Polar angle and azimuth (from a1) of the incident beam, degrees.
    lattice : Lattice2D
        The substrate 1x1 lattice (labels refer to its reciprocal basis).
    hk : list of (Fraction, Fraction) or (float, float)
        Beam labels (exact for rational superstructures).
    g, k_parallel : ndarray, shape (n, 2)
        Reciprocal vector and parallel momentum ``k_par_in + g`` of each beam.
    theta, phi : ndarray, shape (n,)
        Exit polar angle from the surface normal and azimuth from a1.
    source : list of str
        One of :data:`SOURCES` per beam.
    domains : list of tuple of int
        Indices (into ``domain_records``) of the domains producing each beam.
    domain_records : list of DomainRecord
    via : list
        For double-diffraction beams: the substrate and overlayer indices combined.
    intensity : ndarray or None
        Weighted incoherent sum of the domain intensities (kinematic), None without atoms.
    domain_intensity : ndarray or None, shape (n, ndomains)
        Intensity of each domain (0 where a domain does not produce the beam).
    intensity_scale : float or None
        Intensity of the specular (00) beam at this energy (computed even when the beam is
        not listed); with the strongest listed beam it sets the scale of :attr:`extinct`.
    terrace_hk : ndarray or None, shape (n, 2)
        Beam indices relative to the terrace lattice of a stepped face (energy dependent).
    theta_max : float
        Largest angle from the screen axis kept (degrees; 90 keeps every emerging beam).
    notes : list of str
        Caveats to print with the pattern.
    """

    energy: float
    incidence: tuple[float, float]
    lattice: Lattice2D
    hk: list
    g: np.ndarray
    k_parallel: np.ndarray
    theta: np.ndarray
    phi: np.ndarray
    source: list
    domains: list
    domain_records: list
    via: list
    intensity: np.ndarray | None = None
    domain_intensity: np.ndarray | None = None
    terrace_hk: np.ndarray | None = None
    theta_max: float = 90.0
    notes: list = field(default_factory=list)
    description: dict = field(default_factory=dict)
    intensity_scale: float | None = None
    # integer-order flags, computed once per label list (output loops index them per beam)
    _integer_cache: tuple | None = field(default=None, init=False, repr=False, compare=False)

    def __len__(self) -> int:
        return len(self.hk)

    @property
    def exact(self) -> bool:
        """True when the labels are exact fractions."""
        return not self.hk or isinstance(self.hk[0][0], Fraction)

    @property
    def integer(self) -> np.ndarray:
        """True for integer-order beams (exactly, for exact labels); a read-only array.

        Computed once for the current label list, so that loops over the beams that index it
        (``pattern.integer[i]``) stay linear in the number of beams.
        """
        key = (id(self.hk), len(self.hk), id(self.source))
        if self._integer_cache is None or self._integer_cache[0] != key:
            if self.exact:
                flags = np.array([h.denominator == 1 and k.denominator == 1 for h, k in self.hk], dtype=bool)
            else:
                flags = np.array([s == "substrate" for s in self.source], dtype=bool)
            flags.flags.writeable = False
            order = tuple("integer" if i else "fractional" for i in flags)
            self._integer_cache = (key, flags, order)
        return self._integer_cache[1]

    @property
    def order(self) -> tuple[str, ...]:
        """``"integer"`` or ``"fractional"`` per beam (computed once, like :attr:`integer`)."""
        self.integer  # noqa: B018 - fills the cache
        return self._integer_cache[2]

    @property
    def extinct(self) -> np.ndarray | None:
        """True for beams whose kinematic intensity vanishes.

        Vanishing means at most :data:`EXTINCTION_RTOL` times the larger of the strongest
        listed beam and :attr:`intensity_scale` (the specular beam), so that a beam is not
        called present just because every stronger beam fell outside the screen.
        """
        if self.intensity is None:
            return None
        return self.intensity <= EXTINCTION_RTOL * _reference_intensity(self.intensity, self.intensity_scale)

    @property
    def incidence_xy(self) -> tuple[float, float]:
        """The incidence with its azimuth measured from +x of the Cartesian frame."""
        return _incidence_xy(self.lattice, self.incidence)

    def index_of(self, h, k) -> int:
        """Position of the beam labelled ``(h, k)`` (Fractions, ints or strings such as "1/2")."""
        target = (Fraction(str(h)), Fraction(str(k)))
        for i, lab in enumerate(self.hk):
            if self.exact and lab == target:
                return i
            if (
                not self.exact
                and abs(lab[0] - float(target[0])) < 1e-6
                and abs(lab[1] - float(target[1])) < 1e-6
            ):
                return i
        raise KeyError(f"no beam ({h}, {k}) in this pattern")

    def screen_positions(self, screen) -> tuple[np.ndarray, np.ndarray]:
        """Image positions (n, 2) and visibility (n,) of the beams on a screen model."""
        inc = self.incidence_xy
        px = screen.to_pixels(self.k_parallel, self.energy, inc)
        vis = screen.visible(self.k_parallel, self.energy, inc)
        return px, vis

    def to_dict(self, screen=None) -> dict:
        """The JSON form: ``energy_eV``, ``basis`` {a1, a2}, ``beams`` [...] and context."""
        px = vis = None
        if screen is not None:
            px, vis = self.screen_positions(screen)
        ext = self.extinct
        # plain Python lists first: indexing numpy arrays element by element is slow
        kp, theta, phi, order = self.k_parallel.tolist(), self.theta.tolist(), self.phi.tolist(), self.order
        inten = None if self.intensity is None else self.intensity.tolist()
        ext = None if ext is None else ext.tolist()
        terr = None if self.terrace_hk is None else self.terrace_hk.tolist()
        if px is not None:
            px, vis = px.tolist(), vis.tolist()
        beams = []
        for i, (h, k) in enumerate(self.hk):
            b = {
                "hk": [format_index(h), format_index(k)],
                "k_parallel": kp[i],
                "theta_deg": theta[i],
                "phi_deg": phi[i],
                "order": order[i],
                "domains": list(self.domains[i]),
                "intensity": None if inten is None else inten[i],
                "source": self.source[i],
            }
            if ext is not None:
                b["extinct"] = ext[i]
            if self.via[i] is not None:
                b["via"] = self.via[i]
            if terr is not None:
                b["terrace_hk"] = terr[i]
            if px is not None:
                b["screen_xy"] = px[i]
                b["on_screen"] = vis[i]
            beams.append(b)
        return self.json_frame(float(self.energy), self.theta_max, beams, screen)

    def json_frame(self, energy_eV, theta_max: float, beams: list, screen=None) -> dict:
        """The JSON object around ``beams``: energy, incidence, basis, acceptance, domains, notes,
        source, basis note and screen (shared by single patterns and sweeps)."""
        out = {
            "energy_eV": energy_eV,
            "incidence_deg": [float(self.incidence[0]), float(self.incidence[1])],
            "basis": {"a1": self.lattice.a1.tolist(), "a2": self.lattice.a2.tolist()},
            "theta_max_deg": float(theta_max),
            "domains": [d.to_dict() for d in self.domain_records],
            "beams": beams,
            "notes": list(self.notes),
        }
        if self.description:
            out["source"] = self.description
        if basis_note(self.lattice):
            out["basis_note"] = basis_note(self.lattice)
        if screen is not None:
            out["screen"] = screen.to_dict()
        return out


def _incidence_xy(lattice: Lattice2D, incidence) -> tuple[float, float]:
    theta, phi = check_incidence(incidence)
    a1_angle = math.degrees(math.atan2(lattice.a1[1], lattice.a1[0]))
    return theta, phi + a1_angle


def _assemble(lattice, beams: _BeamSet, energy, incidence, theta_max, records, description, notes) -> Pattern:
    """Angles, filtering by ``theta_max`` and sorting; returns a Pattern without intensities."""
    inc_xy = _incidence_xy(lattice, incidence)
    hkf = beams.hk_float
    g = hkf @ lattice.reciprocal
    kin = incident_k_parallel(energy, inc_xy)
    kp = kin + g
    d = exit_directions(kp, energy)
    keep = np.isfinite(d[:, 2])
    if theta_max < 90.0:
        lab = to_gun_frame(d, inc_xy)
        with np.errstate(invalid="ignore"):
            keep &= np.degrees(np.arccos(np.clip(lab[:, 2], -1, 1))) <= theta_max + 1e-9
    idx = np.flatnonzero(keep)
    gn = np.linalg.norm(g[idx], axis=1)
    ga = np.degrees(np.arctan2(g[idx, 1], g[idx, 0])) % 360.0
    idx = idx[np.lexsort((ga.round(6), gn.round(9)))]
    theta, phi = exit_angles(kp[idx], energy)
    a1_angle = math.degrees(math.atan2(lattice.a1[1], lattice.a1[0]))
    if beams.exact:
        hk = [(Fraction(int(a), beams.den), Fraction(int(b), beams.den)) for a, b in beams.keys[idx]]
    else:
        hk = [(float(a), float(b)) for a, b in beams.keys[idx]]
    doms = [tuple(int(j) for j in np.flatnonzero(beams.member[i])) for i in idx]
    return Pattern(
        energy=float(energy),
        incidence=tuple(float(v) for v in check_incidence(incidence)),
        lattice=lattice,
        hk=hk,
        g=g[idx],
        k_parallel=kp[idx],
        theta=theta,
        phi=(phi - a1_angle) % 360.0,
        source=[SOURCES[s] for s in beams.source[idx]],
        domains=doms,
        domain_records=records,
        via=[beams.via[i] for i in idx],
        theta_max=float(theta_max),
        notes=list(notes),
        description=description,
    )


def _check_theta_max(theta_max) -> float:
    try:
        t = float(theta_max)
    except (TypeError, ValueError):
        raise InputError(f"theta_max must be an angle in degrees, got {theta_max!r}.") from None
    if not (0.0 < t <= 90.0):
        raise InputError(f"theta_max must be in (0, 90] degrees, got {theta_max!r}.")
    return t


def _check_energy(energy) -> float:
    from surfgeo.diffraction.electron import check_pattern_energies

    if isinstance(energy, (list, tuple, np.ndarray)) and np.size(energy) != 1:
        raise InputError(f"the energy must be one positive number of eV, got {energy!r}.")
    return float(check_pattern_energies(energy).ravel()[0])


def superstructure_pattern(
    lattice: Lattice2D,
    matrix=None,
    energy: float = 100.0,
    incidence=(0.0, 0.0),
    *,
    domains: bool = True,
    weights=None,
    theta_max: float = 90.0,
    double_order: int = 0,
) -> Pattern:
    """Beam positions of a bare superstructure (no atoms, so no intensities).

    Parameters
    ----------
    lattice : Lattice2D
        Substrate 1x1 surface lattice, or a :class:`surfgeo.lattice.Superstructure` (then
        ``matrix`` is taken from it).
    matrix : array_like (2, 2) or None
        Superstructure matrix (``B = M A``); ``None`` for the bare substrate. Integer matrices
        are commensurate superstructures; non-integer ones are overlayers (coincidence when
        rational, incommensurate otherwise).
    energy : float
        Beam energy, eV.
    incidence : (float, float)
        Polar angle from the surface normal and azimuth from a1, degrees.
    domains : bool
        Superpose all symmetry domains (default) or only the superstructure as given.
    weights : sequence of float, optional
        Domain weights (normalised to 1); equal by default.
    theta_max : float
        Keep beams within this angle (degrees) of the screen axis; 90 keeps every emerging beam.
    double_order : int
        For overlayers: add double-diffraction beams ``g_s + g_o`` combining the
        ``double_order`` shortest shells of each lattice (0: none).

    Returns
    -------
    Pattern

    Examples
    --------
    >>> from surfgeo.lattice import Lattice2D
    >>> p = superstructure_pattern(Lattice2D.square(2.55), [[2, 0], [0, 1]], 100.0)
    >>> len(p.domain_records)
    2
    """
    if hasattr(lattice, "lattice") and hasattr(lattice, "matrix") and matrix is None:
        lattice, matrix = lattice.lattice, lattice.matrix  # a surfgeo.lattice.Superstructure
    if not isinstance(lattice, Lattice2D):
        raise InputError("lattice must be a surfgeo Lattice2D (or a Superstructure).")
    energy = _check_energy(energy)
    theta_max = _check_theta_max(theta_max)
    try:
        order = int(double_order)
    except (TypeError, ValueError):
        raise InputError(f"double-diffraction order must be a whole number, got {double_order!r}.") from None
    if order < 0 or order != double_order:
        raise InputError(
            f"double-diffraction order must be 0 or a positive whole number, got {double_order!r}."
        )
    if matrix is None:
        matrix = [[1, 0], [0, 1]]
    float_matrix(matrix)  # validates shape and singularity
    doms = lattice_domains(lattice, matrix, domains)
    w = _normalise_weights(weights, len(doms))
    records = [DomainRecord(i, m, tuple(ops), float(w[i])) for i, (m, ops) in enumerate(doms)]
    inc_xy = _incidence_xy(lattice, incidence)
    kin = incident_k_parallel(energy, inc_xy)
    beams = _build_beams(lattice, doms, kin, wavenumber(energy), order)
    exact = rational_matrix(matrix)
    kind = (
        "commensurate"
        if exact is not None and all(x.denominator == 1 for x in exact.ravel())
        else ("coincidence" if exact is not None else "incommensurate")
    )
    description = {
        "kind": "superstructure",
        "superstructure": kind,
        "matrix": [[_matrix_entry(x) for x in row] for row in _exact_or_float(matrix)],
    }
    notes = [POSITIONS_NOTE, "No atoms were given, so there are no intensities."]
    if kind != "commensurate" and order == 0:
        notes.append(
            "Overlayer: substrate and overlayer beams only; ask for a double-diffraction order "
            "to add the combinations g_substrate + g_overlayer."
        )
    return _assemble(lattice, beams, energy, incidence, theta_max, records, description, notes)


# =============================================================================== slabs
def slab_context(atoms, use_domains: bool = True, weights=None, symprec: float | None = None):
    """Lattice, matrix, domain records and structural representatives of a slab.

    Returns
    -------
    lattice : Lattice2D
    matrix : ndarray of Fraction
    records : list of DomainRecord
    reps : list of list of PointOperation
        For each lattice domain the operations whose images of the slab are the distinct
        structural domains inside it (empty when the substrate does not allow the domain).
    notes : list of str
    """
    from surfgeo.diffraction.slab_domains import (
        SYMPREC,
        coset_representatives,
        maps_onto_itself,
        substrate_operations,
    )
    from surfgeo.slab.info import surface_info

    info = surface_info(atoms)
    lattice = info.lattice
    M = info.supercell_matrix
    tol = SYMPREC if symprec is None else float(symprec)
    pos = atoms.get_positions()
    num = atoms.get_atomic_numbers()
    doms = lattice_domains(lattice, M, use_domains)
    notes = _film_notes(info.extra.get("overlayers"), lattice)
    reps: list[list] = []
    n_struct = []
    if use_domains:
        all_ops = [op for _, ops in doms for op in ops]
        sub_ok = substrate_operations(pos, num, all_ops, lattice.vectors, tol)
        allowed = {id(op) for op, ok in zip(all_ops, sub_ok, strict=True) if ok}
        cell2d = np.asarray(M, dtype=float) @ lattice.vectors
        stab = [
            op
            for op in doms[0][1]
            if id(op) in allowed and maps_onto_itself(pos, num, op.cartesian, cell2d, tol)
        ]
        for _, ops in doms:
            ok_ops = [op for op in ops if id(op) in allowed]
            groups = coset_representatives(ok_ops, stab) if ok_ops else []
            reps.append([ok_ops[g[0]] for g in groups])
            n_struct.append(len(groups))
        if len(allowed) < len(all_ops):
            notes.append(
                f"The deepest layers of the slab keep {len(allowed)} of the {len(all_ops)} operations of the "
                "lattice point group; only those produce domains."
            )
        if any(n == 0 for n in n_struct):
            missing = [i for i, n in enumerate(n_struct) if n == 0]
            notes.append(f"Lattice domain(s) {missing} cannot form on this substrate and get weight 0.")
    else:
        reps = [[doms[0][1][0]]]
        n_struct = [1]
    present = np.array([n > 0 for n in n_struct], dtype=float)
    if weights is None:
        w = present / present.sum()
    else:
        w = _normalise_weights(weights, len(doms)) * present
        if w.sum() <= 0:
            raise InputError("domain weights put all weight on domains this substrate does not allow.")
        w = w / w.sum()
    records = [DomainRecord(i, m, tuple(ops), float(w[i]), n_struct[i]) for i, (m, ops) in enumerate(doms)]
    return lattice, _exact_or_float(M), records, reps, notes


def _film_notes(overlayers, lattice: Lattice2D) -> list[str]:
    """Notes on films that the surface record holds but the atoms do not (incommensurate films).

    Their beams are missing from a slab's pattern; the note gives the film's matrix in the
    substrate basis, so that its beam positions can be had from :func:`superstructure_pattern`
    (``surfgeo pattern --lattice ... --matrix ...``).
    """
    notes = []
    for film in overlayers or []:
        if not isinstance(film, dict) or film.get("atoms_added") or film.get("rotated_vectors") is None:
            continue
        try:
            F = np.asarray(film["rotated_vectors"], dtype=float).reshape(2, 2)
            M = F @ np.linalg.inv(lattice.vectors)
        except (TypeError, ValueError, np.linalg.LinAlgError):
            continue
        text = " ".join(f"{x:.6g}" for x in M.ravel())
        basis = f" ({basis_note(lattice)})" if basis_note(lattice) else ""
        notes.append(
            f"The {film.get('outcome', 'incommensurate')} film {film.get('name', '')!r} is in the surface "
            f"record but not among the atoms, so its beams are not in this pattern; their positions: "
            f"surfgeo pattern --lattice ... --matrix {text} in this substrate basis{basis}."
        )
    return notes


def terrace_normal(step: dict) -> np.ndarray:
    """Unit normal (3,) of the terraces of a vicinal face in the slab frame.

    From the step record of the slab (``miscut_deg`` and ``step_down``, the in-plane direction
    down the staircase): the terrace normal is tilted from +z by the miscut angle, away from the
    step-down direction.
    """
    theta = math.radians(float(step["miscut_deg"]))
    down = np.asarray(step["step_down"], dtype=float)
    down = down / np.linalg.norm(down)
    return np.array([-math.sin(theta) * down[0], -math.sin(theta) * down[1], math.cos(theta)])


def terrace_lattice(atoms, step: dict | None = None, tol: float = 0.1) -> np.ndarray | None:
    """Lattice vectors (2, 3) of the terraces of a stepped slab, Angstrom, slab frame.

    The terrace plane comes from the step record (:func:`terrace_normal`); its lattice is read
    from the atoms: the in-plane differences (within ``tol`` Angstrom of the plane, periodic
    images included) between an atom of the most common element deep in the slab and the
    other atoms of that element. The two shortest independent ones form the basis; the one
    along the step edge (when there is one) comes second and the first points down the steps.
    Assumes the atoms of one terrace plane of that element form a single Bravais lattice (true
    for the elemental fcc, bcc and hcp crystals). Returns None for a slab without a step record
    or when no such lattice is found.
    """
    if step is None:
        rec = atoms.info.get("surfgeo", {}) if hasattr(atoms, "info") else {}
        step = rec.get("step") if isinstance(rec, dict) else None
    if not isinstance(step, dict) or step.get("miscut_deg") is None or step.get("step_down") is None:
        return None
    from surfgeo.slab.info import surface_info

    n_t = terrace_normal(step)
    info = surface_info(atoms)
    cell2d = info.cell2d
    pos = atoms.get_positions()
    num = atoms.get_atomic_numbers()
    elements, counts = np.unique(num, return_counts=True)
    species = elements[np.argmax(counts)]
    sel = pos[num == species]
    mid = 0.5 * (pos[:, 2].min() + pos[:, 2].max())
    ref = sel[np.argmin(np.abs(sel[:, 2] - mid))]
    shifts = np.array([(i, j) for i in range(-3, 4) for j in range(-3, 4)], dtype=float) @ cell2d
    d = sel[None, :, :] - ref[None, None, :]
    d = d + np.concatenate([shifts, np.zeros((len(shifts), 1))], axis=1)[:, None, :]
    d = d.reshape(-1, 3)
    length = np.linalg.norm(d, axis=1)
    d = d[(np.abs(d @ n_t) < tol) & (length > 1e-3)]
    if len(d) < 2:
        return None
    d = d[np.argsort(np.linalg.norm(d, axis=1), kind="stable")]
    lengths = np.linalg.norm(d, axis=1)
    edge = np.append(np.asarray(step.get("step_edge", [1.0, 0.0]), dtype=float), 0.0)
    down3 = np.append(np.asarray(step["step_down"], dtype=float), 0.0)
    along = np.linalg.norm(np.cross(d, edge), axis=1) <= 1e-3 * lengths * np.linalg.norm(edge)
    shortest = lengths <= lengths[0] * (1 + 1e-6)
    # second vector: a shortest one along the step edge if there is one, else the shortest
    t2 = d[np.flatnonzero(shortest & along)[0]] if np.any(shortest & along) else d[0]
    cross = np.linalg.norm(np.cross(d, t2), axis=1)
    other = d[cross > 1e-3 * np.linalg.norm(t2) ** 2]
    if len(other) == 0:
        return None
    t1 = other[0]
    if t1 @ down3 < 0:
        t1 = -t1
    if t2 @ edge < 0:
        t2 = -t2
    return np.array([t1, t2])


def domain_intensities(
    atoms, g_parallel_by_domain, energies, incidence_xy, reps, **kinematic
) -> list[np.ndarray]:
    """Kinematic intensities (NE, Nb_d) of each lattice domain, averaged over its structural domains.

    ``g_parallel_by_domain[d]`` holds the beams of domain ``d``; the slab is rotated (or
    mirrored) by each representative operation of ``reps[d]`` at the same incidence.
    """
    from surfgeo.diffraction.kinematic import kinematic_iv

    pos = atoms.get_positions()
    num = atoms.get_atomic_numbers()
    out = []
    for g, ops in zip(g_parallel_by_domain, reps, strict=True):
        acc = np.zeros((len(np.atleast_1d(energies)), len(g)))
        if len(g) == 0 or not ops:
            out.append(acc)
            continue
        for op in ops:
            p = pos.copy()
            p[:, :2] = pos[:, :2] @ np.asarray(op.cartesian).T
            acc += kinematic_iv(p, num, g, energies, incidence_xy, **kinematic)
        out.append(acc / len(ops))
    return out


def slab_pattern(
    atoms,
    energy: float,
    incidence=(0.0, 0.0),
    *,
    domains: bool = True,
    weights=None,
    theta_max: float = 90.0,
    symprec: float | None = None,
    terrace=None,
    intensities: bool = True,
    **kinematic,
) -> Pattern:
    """Beam positions and kinematic intensities of a slab, with all its domains.

    Parameters
    ----------
    atoms : ase.Atoms
        The slab; ``atoms.info["surfgeo"]`` gives the 1x1 surface cell and the supercell
        matrix (a slab without it is taken as its own 1x1 cell). The positions of one cell of
        the slab enter the kinematic sum.
    energy : float
        Beam energy, eV.
    incidence : (float, float)
        Polar angle from the surface normal and azimuth from a1, degrees.
    domains : bool
        Superpose all domains the substrate allows (default) or only the slab as given.
    weights : sequence of float, optional
        Weights of the lattice domains (normalised; domains the substrate does not allow get 0).
    theta_max : float
        Keep beams within this angle (degrees) of the screen axis.
    symprec : float, optional
        Tolerance (Angstrom) of the structural symmetry checks.
    terrace : array_like (2, 3), optional
        Terrace lattice vectors of a stepped face (default: :func:`terrace_lattice` from the
        slab's step record and its atoms).
    intensities : bool
        Compute the kinematic intensities (default); False gives positions and domains only.
    **kinematic
        Options of :func:`surfgeo.diffraction.kinematic.kinematic_iv` (``inner_potential``,
        ``temperature``, ``debye_temperatures``, ``amplitudes``, ``attenuation``, ...).

    Returns
    -------
    Pattern
        With ``intensity`` (weighted incoherent domain sum) and ``domain_intensity``.

    Notes
    -----
    Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam
    positions and symmetry extinctions at normal incidence are exact. A kinematic extinction at
    off-normal incidence is not a prediction.
    """
    energy = _check_energy(energy)
    theta_max = _check_theta_max(theta_max)
    if not hasattr(atoms, "get_positions"):
        raise StructureError("a slab must be an ase.Atoms object.")
    if len(atoms) == 0:
        raise StructureError("the slab has no atoms.")
    lattice, M, records, reps, notes = slab_context(atoms, domains, weights, symprec)
    doms = [(r.matrix, list(r.operations)) for r in records]
    inc_xy = _incidence_xy(lattice, incidence)
    kin = incident_k_parallel(energy, inc_xy)
    beams = _build_beams(lattice, doms, kin, wavenumber(energy), 0)
    description = {
        "kind": "slab",
        "atoms": len(atoms),
        "formula": atoms.get_chemical_formula(),
        "matrix": [[_matrix_entry(x) for x in row] for row in M],
    }
    pat = _assemble(
        lattice, beams, energy, incidence, theta_max, records, description, [QUALITATIVE_NOTE, *notes]
    )
    if intensities:
        _add_intensities(pat, atoms, reps, **kinematic)
    t = np.asarray(terrace, dtype=float) if terrace is not None else terrace_lattice(atoms)
    if t is not None:
        pat.terrace_hk = terrace_indices(pat.k_parallel, energy, pat.incidence_xy, t)
    return pat


def _reference_intensity(intensity, scale=None):
    """The scale of extinctions: the strongest finite intensity (last axis) or ``scale`` if larger."""
    a = np.asarray(intensity, dtype=float)
    finite = np.where(np.isfinite(a), a, 0.0)
    top = finite.max(axis=-1, keepdims=a.ndim > 1, initial=0.0) if a.ndim else finite
    return top if scale is None else np.maximum(top, float(scale))


def _add_intensities(pat: Pattern, atoms, reps, **kinematic) -> None:
    nd = len(pat.domain_records)
    member = np.zeros((len(pat), nd), dtype=bool)
    for i, ds in enumerate(pat.domains):
        member[i, list(ds)] = True
    gs = [pat.g[member[:, d]] for d in range(nd)]
    per = domain_intensities(atoms, gs, [pat.energy], pat.incidence_xy, reps, **kinematic)
    dom_int = np.zeros((len(pat), nd))
    for d in range(nd):
        dom_int[member[:, d], d] = per[d][0]
    w = np.array([r.weight for r in pat.domain_records])
    pat.domain_intensity = dom_int
    pat.intensity = dom_int @ w
    # the specular beam sets the scale of extinctions; in-plane operations leave it unchanged
    # (q_parallel = 0), so one structural domain is enough when it is not listed
    spec = np.flatnonzero(np.all(pat.g == 0.0, axis=1))
    if spec.size:
        pat.intensity_scale = float(pat.intensity[spec[0]])
    else:
        first = next((ops[:1] for ops in reps if ops), [])
        i00 = domain_intensities(atoms, [np.zeros((1, 2))], [pat.energy], pat.incidence_xy, [first],
                                 **kinematic)[0]
        pat.intensity_scale = float(i00[0, 0]) if i00.size and np.isfinite(i00[0, 0]) else None


# =============================================================================== relaxed versus ideal
#: The note printed with every comparison of a relaxed and an ideal structure.
COMPARISON_NOTE = (
    "Relaxed and ideal structure share the beams, energy, incidence, domains and kinematic settings; "
    "their intensities are in the same units (no rescaling). Kinematic intensity changes are "
    "qualitative for LEED: multiple scattering changes real intensities differently."
)

#: Status of a beam in a comparison: extinct (kinematically) in one structure only, or in both.
APPEARS, VANISHES, BOTH_EXTINCT = "appears", "vanishes", "extinct in both"


def align_to_reference(relaxed, reference, *, method: str = "auto", max_displacement: float | None = None,
                       cell_tol: float | None = None):
    """The relaxed structure in the frame, atom order and surface record of its reference.

    The atoms are matched with :func:`surfgeo.slab.relaxations.match_atoms` (by index when
    the file kept the order, otherwise by a minimum-distance assignment under periodic
    boundaries), which refuses structures that are not the same system (atom count, species,
    surface cell). Each reference atom is then moved by its minimum-image displacement, so
    that the relaxed copy has the reference's cell, order and ``info["surfgeo"]`` record
    (surface cell, supercell matrix, steps): both structures then give the same beams.

    Parameters
    ----------
    relaxed, reference : ase.Atoms
        The relaxed structure (any order, possibly wrapped or in a rotated frame) and the
        ideal one it started from.
    method : {"auto", "index", "distance"}
        How to pair the atoms (see :func:`~surfgeo.slab.relaxations.match_atoms`).
    max_displacement : float, optional
        Refuse when an atom moved further than this (Angstrom); default
        :data:`surfgeo.slab.relaxations.MAX_DISPLACEMENT`.
    cell_tol : float, optional
        Tolerance (Angstrom) on the lengths of the in-plane cell vectors.

    Returns
    -------
    aligned : ase.Atoms
        A copy of ``reference`` with the relaxed positions (Angstrom).
    matching : dict
        ``method`` (index or distance), ``max_displacement_A``, ``max_displacement_atom``
        (index in the reference), ``rms_displacement_A`` and ``note``.

    Raises
    ------
    StructureError
        Not the same system, or an atom moved further than ``max_displacement``.
    """
    from surfgeo.slab.relaxations import CELL_TOL, MAX_DISPLACEMENT, SurfaceFrame, match_atoms

    limit = MAX_DISPLACEMENT if max_displacement is None else float(max_displacement)
    if not (math.isfinite(limit) and limit > 0):
        raise InputError(f"the largest allowed displacement must be a positive length in Angstrom, got "
                         f"{max_displacement!r}.")
    m = match_atoms(reference, relaxed, method, CELL_TOL if cell_tol is None else float(cell_tol))
    d = m.displacements
    norms = np.linalg.norm(d, axis=1)
    worst = int(np.argmax(norms))
    if norms[worst] > limit:
        raise StructureError(
            f"atom {worst} ({reference[worst].symbol}) of the reference moved {norms[worst]:.2f} A in the "
            f"relaxed structure, more than the {limit:g} A allowed; they are probably not the same system "
            "(raise the limit if the surface really changed that much)."
        )
    axes = SurfaceFrame.of(reference.cell).axes
    aligned = reference.copy()
    aligned.positions = reference.get_positions() + d @ axes
    matching = {
        "method": m.method,
        "max_displacement_A": float(norms[worst]),
        "max_displacement_atom": worst,
        "rms_displacement_A": float(np.sqrt(np.mean(norms**2))),
        "note": m.note,
    }
    return aligned, matching


def _domain_notes(ideal_records, relaxed_records) -> list[str]:
    a = [(round(r.weight, 9), r.structures) for r in ideal_records]
    b = [(round(r.weight, 9), r.structures) for r in relaxed_records]
    if a == b:
        return []
    return [
        "The relaxed structure has other structural domains or domain weights than the ideal one "
        f"(structures per domain: ideal {[r.structures for r in ideal_records]}, relaxed "
        f"{[r.structures for r in relaxed_records]}): the relaxation changed its symmetry."
    ]


def _check_same_beams(a: list, b: list) -> None:
    from surfgeo.errors import ComputationError

    if len(a) != len(b) or any(x != y for x, y in zip(a, b, strict=True)):
        raise ComputationError("the relaxed and the ideal structure gave different beam sets; this is a bug.")


def _equal_groups(order, *curves, rtol: float = 1e-7) -> list[list[int]]:
    """Beams of ``order`` grouped by equal values in every array of ``curves`` (shape (NE, Nb),
    NaN equal to NaN, relative tolerance ``rtol``), groups in order of their first beam."""
    groups: list[list[int]] = []
    reps: list[int] = []
    for i in order:
        i = int(i)
        same = np.ones(len(reps), dtype=bool)
        for c in curves:
            if not same.any():
                break
            close = np.isclose(c[:, reps], c[:, i : i + 1], rtol=rtol, atol=0.0, equal_nan=True)
            same &= np.all(close, axis=0)
        hit = np.flatnonzero(same)
        if hit.size:
            groups[int(hit[0])].append(i)
        else:
            reps.append(i)
            groups.append([i])
    return [sorted(g) for g in groups]


def intensity_ratio(relaxed, ideal, scale_relaxed=None, scale_ideal=None) -> np.ndarray:
    """``I_relaxed / I_ideal`` of beams (last axis), e.g. of shape (Nb,) or (NE, Nb).

    A beam is extinct in a structure when its intensity is at most :data:`EXTINCTION_RTOL`
    of that structure's strongest beam (in the same row), or of its ``scale_*`` (the specular
    intensity, :attr:`Pattern.intensity_scale`) when that is larger. The ratio is ``inf`` where
    the beam is extinct only in the ideal structure (it appears), ``0`` where only in the
    relaxed one, and NaN where it is extinct in both or does not emerge (NaN intensity).
    """
    r = np.asarray(relaxed, dtype=float)
    i = np.asarray(ideal, dtype=float)
    ok = np.isfinite(r) & np.isfinite(i)
    top_r = _reference_intensity(r[None] if r.ndim == 1 else r, scale_relaxed)
    top_i = _reference_intensity(i[None] if i.ndim == 1 else i, scale_ideal)
    if r.ndim == 1:
        top_r, top_i = top_r[0], top_i[0]
    with np.errstate(invalid="ignore", divide="ignore"):
        er = r <= EXTINCTION_RTOL * top_r
        ei = i <= EXTINCTION_RTOL * top_i
        out = np.where(er & ei, np.nan, np.where(ei, np.inf, np.where(er, 0.0, r / np.where(ei, 1.0, i))))
    return np.where(ok, out, np.nan)


@dataclass
class PatternComparison:
    """Kinematic patterns of a relaxed structure and of its ideal reference at one energy.

    Both patterns hold the same beams in the same order (same surface record after
    :func:`align_to_reference`).

    Attributes
    ----------
    relaxed, ideal : Pattern
        The two patterns (``relaxed`` carries the positions, domains and notes shown).
    matching : dict
        How the atoms were paired and how far they moved (see :func:`align_to_reference`).
    notes : list of str
        Caveats of the comparison.
    """

    relaxed: Pattern
    ideal: Pattern
    matching: dict
    notes: list = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.relaxed)

    @property
    def status(self) -> list[str]:
        """Per beam: ``"appears"`` (extinct only in the ideal structure), ``"vanishes"``
        (extinct only in the relaxed one), ``"extinct in both"``, or ``""``."""
        er, ei = self.relaxed.extinct, self.ideal.extinct
        out = []
        for a, b in zip(er, ei, strict=True):
            out.append(BOTH_EXTINCT if a and b else APPEARS if b else VANISHES if a else "")
        return out

    @property
    def ratio(self) -> np.ndarray:
        """``I_relaxed / I_ideal`` per beam: inf where the beam appears, 0 where it vanishes, NaN
        where it is extinct in both (see :func:`intensity_ratio`)."""
        return intensity_ratio(self.relaxed.intensity, self.ideal.intensity, self.relaxed.intensity_scale,
                               self.ideal.intensity_scale)

    @property
    def relative_change(self) -> np.ndarray:
        """``(I_relaxed - I_ideal) / I_ideal`` per beam (inf, -1 and NaN as for :attr:`ratio`)."""
        return self.ratio - 1.0

    def ranking(self) -> np.ndarray:
        """Beam indices, largest change first: beams that appear or vanish, then by
        ``|ln(I_relaxed / I_ideal)|``; beams extinct in both are left out. Ties keep the beam order."""
        r = self.ratio
        with np.errstate(divide="ignore"):
            key = np.abs(np.log(r))
        keep = np.flatnonzero(~np.isnan(r))
        return keep[np.argsort(-key[keep], kind="stable")]

    def change_groups(self, limit: int | None = None) -> list[list[int]]:
        """:meth:`ranking` with beams of equal intensities in both structures (symmetry-equivalent
        beams) grouped together; at most ``limit`` groups."""
        groups = _equal_groups(self.ranking(), self.relaxed.intensity[None], self.ideal.intensity[None])
        return groups if limit is None else groups[: max(0, int(limit))]

    def to_dict(self, screen=None, top: int = 8) -> dict:
        """JSON form: :meth:`Pattern.to_dict` of the relaxed structure plus a ``reference`` block.

        ``reference`` holds ``matching``, ``domains`` (of the ideal structure), ``beams`` (in the
        order of the top-level beams: ``hk``, ``intensity``, ``extinct``, ``ratio``,
        ``relative_change`` (null where undefined), ``status``), ``largest_changes`` (at most
        ``top`` groups: ``beams``, ``ratio``, ``relative_change``, ``status``) and ``notes``.
        """
        out = self.relaxed.to_dict(screen)
        ratio = self.ratio
        st = self.status
        ext = self.ideal.extinct

        def num(x):
            return float(x) if np.isfinite(x) else None

        beams = [
            {
                "hk": [format_index(h), format_index(k)],
                "intensity": float(self.ideal.intensity[i]),
                "extinct": bool(ext[i]),
                "ratio": num(ratio[i]),
                "relative_change": num(ratio[i] - 1.0),
                "status": st[i],
            }
            for i, (h, k) in enumerate(self.ideal.hk)
        ]
        largest = [
            {
                "beams": [[format_index(h), format_index(k)] for h, k in (self.relaxed.hk[i] for i in g)],
                "ratio": num(ratio[g[0]]),
                "relative_change": num(ratio[g[0]] - 1.0),
                "status": st[g[0]],
            }
            for g in self.change_groups(top)
        ]
        out["reference"] = {
            "matching": dict(self.matching),
            "domains": [d.to_dict() for d in self.ideal.domain_records],
            "beams": beams,
            "largest_changes": largest,
            "notes": list(self.notes),
        }
        return out


def compare_slab_patterns(
    relaxed,
    reference,
    energy: float,
    incidence=(0.0, 0.0),
    *,
    domains: bool = True,
    weights=None,
    theta_max: float = 90.0,
    symprec: float | None = None,
    match: str = "auto",
    max_displacement: float | None = None,
    **kinematic,
) -> PatternComparison:
    """Kinematic pattern of a relaxed structure next to that of its ideal reference.

    The relaxed structure is first aligned with the reference (:func:`align_to_reference`:
    same system, atoms matched, reference frame and surface record), then both patterns are
    computed with :func:`slab_pattern` with the same energy, incidence, domain options and
    kinematic settings.

    Parameters
    ----------
    relaxed, reference : ase.Atoms
        The relaxed structure (e.g. from a DFT code; no surface record needed) and the ideal
        slab or model it started from (its ``info["surfgeo"]`` record gives the surface cell).
    energy : float
        Beam energy, eV.
    incidence : (float, float)
        Polar angle from the surface normal and azimuth from a1, degrees.
    domains, weights, theta_max, symprec
        As for :func:`slab_pattern`.
    match : {"auto", "index", "distance"}
        How to pair the atoms.
    max_displacement : float, optional
        Refuse when an atom moved further (Angstrom).
    **kinematic
        Options of :func:`surfgeo.diffraction.kinematic.kinematic_iv`, used for both.

    Returns
    -------
    PatternComparison

    Notes
    -----
    Kinematic intensities are qualitative for LEED (multiple scattering is strong); so are
    their changes on relaxation. Positions do not change (same surface cell).

    References
    ----------
    .. [1] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
       Springer (1986): the kinematic sum, whose layer phases ``exp(i q_z z)`` carry the
       sensitivity of the intensities to interlayer spacings.
    """
    aligned, matching = align_to_reference(
        relaxed, reference, method=match, max_displacement=max_displacement
    )
    opts = dict(domains=domains, weights=weights, theta_max=theta_max, symprec=symprec, **kinematic)
    ideal = slab_pattern(reference, energy, incidence, **opts)
    rel = slab_pattern(aligned, energy, incidence, **opts)
    _check_same_beams(ideal.hk, rel.hk)
    notes = [COMPARISON_NOTE] + ([matching["note"]] if matching["note"] else [])
    notes += _domain_notes(ideal.domain_records, rel.domain_records)
    return PatternComparison(rel, ideal, matching, notes)


@dataclass
class SweepComparison:
    """Kinematic I(V) curves of a relaxed structure and of its ideal reference.

    Attributes
    ----------
    relaxed, ideal : surfgeo.diffraction.sweep.PatternSweep
        The two sweeps, with the same energies and beams.
    matching : dict
        How the atoms were paired (see :func:`align_to_reference`).
    notes : list of str
    """

    relaxed: object
    ideal: object
    matching: dict
    notes: list = field(default_factory=list)

    def _mean(self, intensity) -> np.ndarray:
        with np.errstate(invalid="ignore"):
            ok = np.isfinite(intensity)
            n = ok.sum(axis=0)
            return np.where(n > 0, np.where(ok, intensity, 0.0).sum(axis=0) / np.maximum(n, 1), np.nan)

    @property
    def mean_relaxed(self) -> np.ndarray:
        """Mean intensity of each beam over the energies where it emerges (relaxed)."""
        return self._mean(self.relaxed.intensity)

    @property
    def mean_ideal(self) -> np.ndarray:
        """Mean intensity of each beam over the energies where it emerges (ideal)."""
        return self._mean(self.ideal.intensity)

    @property
    def mean_ratio(self) -> np.ndarray:
        """Ratio of the mean intensities, relaxed over ideal (NaN where the ideal mean is 0)."""
        mi = self.mean_ideal
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(mi > 0, self.mean_relaxed / np.where(mi > 0, mi, 1.0), np.nan)

    def peak_energies(self) -> tuple[np.ndarray, np.ndarray]:
        """Energy (eV) of the strongest maximum of each beam's curve: (relaxed, ideal)."""
        e = self.relaxed.energies

        def peak(inten):
            out = np.full(inten.shape[1], np.nan)
            ok = np.isfinite(inten).any(axis=0)
            out[ok] = e[np.nanargmax(inten[:, ok], axis=0)]
            return out

        return peak(self.relaxed.intensity), peak(self.ideal.intensity)

    def correlation(self) -> np.ndarray:
        """Pearson correlation coefficient of the relaxed and ideal curve of each beam (shape
        only, insensitive to scale) over the energies where it emerges; NaN with fewer than
        three energies or a flat curve."""
        a, b = self.relaxed.intensity, self.ideal.intensity
        out = np.full(a.shape[1], np.nan)
        for j in range(a.shape[1]):
            ok = np.isfinite(a[:, j]) & np.isfinite(b[:, j])
            if ok.sum() < 3:
                continue
            x, y = a[ok, j] - a[ok, j].mean(), b[ok, j] - b[ok, j].mean()
            den = math.sqrt(float(x @ x) * float(y @ y))
            if den > 0:
                out[j] = float(x @ y) / den
        return out

    def strongest(self, n: int | None = None) -> list[list[int]]:
        """Beams (indices into the sweep's beams) by decreasing mean intensity (the larger of the
        two structures'), with beams of equal curves in both structures (symmetry-equivalent
        beams) grouped together; at most ``n`` groups."""
        key = np.fmax(self.mean_relaxed, self.mean_ideal)
        key = np.where(np.isfinite(key), key, -np.inf)
        order = np.argsort(-key, kind="stable")
        groups = _equal_groups(order, self.relaxed.intensity, self.ideal.intensity)
        return groups if n is None else groups[: max(0, int(n))]

    def to_dict(self, screen=None, top: int = 8) -> dict:
        """JSON form: the relaxed sweep's ``to_dict`` plus a ``reference`` block.

        ``reference`` holds ``matching``, ``domains`` (of the ideal structure), ``beams`` (in
        the order of the top-level beams: ``hk``, ``intensity`` per energy (null where the beam
        does not emerge), ``mean_ratio``, ``correlation``, ``peak_eV_relaxed``,
        ``peak_eV_ideal``), ``strongest`` (the ``top`` strongest groups of equivalent beams, each a
        list of labels) and ``notes``.
        """
        out = self.relaxed.to_dict(screen)
        inten = self.ideal.intensity
        mr = self.mean_ratio
        corr = self.correlation()
        pr, pi = self.peak_energies()

        def num(x):
            return float(x) if np.isfinite(x) else None

        beams = []
        for j, (h, k) in enumerate(self.ideal.hk):
            beams.append({
                "hk": [format_index(h), format_index(k)],
                "intensity": [num(v) for v in inten[:, j]],
                "mean_ratio": num(mr[j]),
                "correlation": num(corr[j]),
                "peak_eV_relaxed": num(pr[j]),
                "peak_eV_ideal": num(pi[j]),
            })
        hk = self.ideal.hk
        out["reference"] = {
            "matching": dict(self.matching),
            "domains": [d.to_dict() for d in self.ideal.base.domain_records],
            "beams": beams,
            "strongest": [
                [[format_index(hk[j][0]), format_index(hk[j][1])] for j in g] for g in self.strongest(top)
            ],
            "notes": list(self.notes),
        }
        return out


def compare_slab_sweeps(
    relaxed,
    reference,
    energies,
    incidence=(0.0, 0.0),
    *,
    domains: bool = True,
    weights=None,
    theta_max: float = 90.0,
    symprec: float | None = None,
    match: str = "auto",
    max_displacement: float | None = None,
    show_progress: bool | None = None,
    **kinematic,
) -> SweepComparison:
    """Kinematic I(V) curves of a relaxed structure and of its ideal reference.

    Like :func:`compare_slab_patterns` over an energy range, with
    :func:`surfgeo.diffraction.sweep.pattern_sweep` for both structures.

    Notes
    -----
    Kinematic I(V) curves are qualitative for LEED (multiple scattering is strong).

    References
    ----------
    .. [1] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
       Springer (1986): kinematic I(V) curves.
    """
    from surfgeo.diffraction.sweep import pattern_sweep

    aligned, matching = align_to_reference(
        relaxed, reference, method=match, max_displacement=max_displacement
    )
    opts = dict(incidence=incidence, domains=domains, weights=weights, theta_max=theta_max, symprec=symprec,
                show_progress=show_progress, **kinematic)
    ideal = pattern_sweep(energies, atoms=reference, **opts)
    rel = pattern_sweep(energies, atoms=aligned, **opts)
    _check_same_beams(ideal.hk, rel.hk)
    notes = [COMPARISON_NOTE] + ([matching["note"]] if matching["note"] else [])
    notes += _domain_notes(ideal.base.domain_records, rel.base.domain_records)
    return SweepComparison(rel, ideal, matching, notes)
