"""Kinematic (single-scattering) diffraction intensities of a surface model.

For a beam of surface reciprocal vector ``g`` at energy ``E`` the kinematic intensity is

.. math::

    I(g, E) = \\Big| \\sum_j f_j \\, e^{-M_j} \\, e^{i q \\cdot r_j} \\, a_j \\Big|^2

with the sum over the atoms of one surface unit cell of the model (positions ``r_j``), and

* ``q = k_out - k_in`` the scattering vector *inside* the crystal: the incident and the exit
  waves are refracted by the real inner potential ``V0r`` (``k_inside^2 = k^2 + 2 m V0r /
  hbar^2``; the parallel components are conserved, so ``q_parallel = g`` exactly);
* ``f_j`` the atomic scattering amplitude (:mod:`surfgeo.diffraction.scattering`; by default an
  isotropic per-element constant, a model choice);
* ``exp(-M_j)`` the Debye-Waller factor with ``M_j = |q|^2 <u_x^2>_j / 2`` from the Debye model
  (:mod:`surfgeo.diffraction.debye_waller`);
* ``a_j = exp(-kappa D_j)`` the attenuation of the waves on their way in to and out from an atom
  at depth ``D_j`` below the surface (:mod:`surfgeo.diffraction.attenuation`; Seah-Dench mean
  free path by default, or an imaginary inner potential).

The intensity is in units of ``|f|^2`` and carries no normalisation by cell area or incident
current; compare beams of one calculation with each other, or shapes of I(V) curves.

.. note::

   **Kinematic intensities are qualitative for LEED.** Low-energy electrons scatter strongly
   and repeatedly (multiple scattering), so measured intensities and I(V) curves differ
   substantially from these. What the kinematic sum gets exactly right are the beam
   *positions* and the *symmetry extinctions* at normal incidence. In the kinematic sum a
   glide-line extinction holds at any incidence (glide partners have the same height and the
   glide phase depends on ``q_parallel = g`` only); in real LEED multiple scattering lifts it
   once the plane of incidence leaves the glide line, so a kinematic extinction at off-normal
   incidence is not a prediction.

Beams that do not leave the surface (``|k_par_in + g| >= k`` in vacuum: evanescent) get NaN.

Frames and units: positions (Angstrom) and ``g`` (1/Angstrom) in the slab's Cartesian frame
with a1 along +x and +z pointing out of the crystal into the vacuum; the incidence is given as
the polar angle from the surface normal and the azimuth of the incident parallel momentum from
+x (= a1), in degrees, as in :mod:`surfgeo.diffraction.electron`: the incident parallel
momentum is ``k sin(theta) (cos phi, sin phi)``.

References
----------
.. [1] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
   Springer (1986): kinematic theory, inner potential, Debye-Waller factor.
.. [2] J. B. Pendry, *Low Energy Electron Diffraction*, Academic Press (1974).
.. [3] M. Henzler, Surf. Sci. 19, 159 (1970): kinematic diffraction by regular step arrays.
.. [4] G. W. Holland and D. P. Woodruff, Surf. Sci. 36, 488 (1973): glide-line extinctions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.diffraction.attenuation import resolve_attenuation
from surfgeo.diffraction.debye_waller import MODELS as VIBRATION_MODELS
from surfgeo.diffraction.debye_waller import atomic_mean_square_displacements
from surfgeo.diffraction.electron import HBAR2_2M, check_incidence, wavenumber
from surfgeo.diffraction.scattering import resolve_amplitudes
from surfgeo.errors import InputError, StructureError

#: Default number of complex elements held at once in the (atoms x beams) work arrays
#: (2**18 complex128 = 4 MiB): bounds memory for any number of atoms and beams.
CHUNK_ELEMENTS = 2**18

#: Largest number of complex elements of the per-layer in-plane sums (groups x beams) held at
#: once by the energy sweep (2**22 complex128 = 64 MiB); more beams are taken in blocks.
PLANE_ELEMENTS = 2**22

#: The note that every output of kinematic intensities should carry.
QUALITATIVE_NOTE = (
    "Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam "
    "positions and symmetry extinctions at normal incidence are exact. A kinematic extinction "
    "at off-normal incidence is not a prediction: multiple scattering lifts it once the plane "
    "of incidence leaves the glide line."
)


# ---------------------------------------------------------------------------- geometry
@dataclass(frozen=True)
class ScatteringGeometry:
    """Wave vectors inside the crystal for a set of beams and energies.

    Attributes
    ----------
    energy : ndarray, shape (NE,)
        Vacuum kinetic energies, eV.
    k_vacuum, k_inside : ndarray, shape (NE,)
        Wavenumbers in vacuum and inside the crystal (1/Angstrom).
    k_in : ndarray, shape (NE, 3)
        Incident wave vector inside the crystal (its z component is negative).
    k_out : ndarray, shape (NE, Nb, 3)
        Exit wave vectors inside the crystal (z > 0); NaN for beams that do not emerge.
    q : ndarray, shape (NE, Nb, 3)
        Scattering vectors ``k_out - k_in``; NaN for beams that do not emerge.
    emerges : ndarray of bool, shape (NE, Nb)
        True where ``|k_par_in + g| < k_vacuum``.
    """

    energy: np.ndarray
    k_vacuum: np.ndarray
    k_inside: np.ndarray
    k_in: np.ndarray
    k_out: np.ndarray
    q: np.ndarray
    emerges: np.ndarray


def _check_g(g_parallel) -> np.ndarray:
    try:
        g = np.asarray(g_parallel, dtype=float)
    except (TypeError, ValueError):
        raise InputError(
            "g_parallel must be an array of reciprocal vectors (kx, ky) in 1/Angstrom."
        ) from None
    if g.ndim == 1 and g.size == 2:
        g = g[None, :]
    if g.ndim != 2 or g.shape[1] != 2:
        raise InputError(f"g_parallel must have shape (number of beams, 2), got {g.shape}.")
    if not np.all(np.isfinite(g)):
        raise InputError("g_parallel must contain finite numbers.")
    return g


def _check_energies(energies) -> np.ndarray:
    try:
        e = np.asarray(energies, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"energy must be a positive number of eV, got {energies!r}.") from None
    if e.size == 0 or np.any(~np.isfinite(e)) or np.any(e <= 0):
        raise InputError(f"energy must be positive numbers of eV, got {energies!r}.")
    return e


def scattering_geometry(
    g_parallel, energies, incidence=(0.0, 0.0), inner_potential: float = 10.0
) -> ScatteringGeometry:
    """Incident, exit and scattering wave vectors inside the crystal.

    Parameters
    ----------
    g_parallel : array_like, shape (Nb, 2)
        Surface reciprocal vectors of the beams, 1/Angstrom, slab frame.
    energies : float or array_like, shape (NE,)
        Kinetic energies in vacuum, eV.
    incidence : (float, float)
        Polar angle from the surface normal and azimuth of the incident parallel momentum from
        +x, degrees.
    inner_potential : float
        Real inner potential V0r in eV (>= 0): ``k_inside^2 = k^2 + V0r / (hbar^2/2m)``.

    Returns
    -------
    ScatteringGeometry
    """
    g = _check_g(g_parallel)
    e = _check_energies(energies)
    theta, phi = (math.radians(v) for v in check_incidence(incidence))
    v0r = positive_number(inner_potential, "inner_potential", "number", "eV", zero_ok=True)
    k = np.asarray(wavenumber(e), dtype=float).reshape(-1)
    K2 = k**2 + v0r / HBAR2_2M
    kpi = (k * math.sin(theta))[:, None] * np.array([math.cos(phi), math.sin(phi)])  # (NE, 2)
    kz_in = -np.sqrt(K2 - np.einsum("ei,ei->e", kpi, kpi))
    kpo = kpi[:, None, :] + g[None, :, :]  # (NE, Nb, 2)
    kpo2 = np.einsum("ebi,ebi->eb", kpo, kpo)
    emerges = kpo2 < (k**2)[:, None]
    with np.errstate(invalid="ignore"):
        kz_out = np.where(emerges, np.sqrt(np.where(emerges, K2[:, None] - kpo2, 0.0)), np.nan)
    k_in = np.column_stack([kpi, kz_in])
    k_out = np.concatenate([kpo, kz_out[..., None]], axis=-1)
    k_out[~emerges] = np.nan
    q = k_out - k_in[:, None, :]
    return ScatteringGeometry(e, k, np.sqrt(K2), k_in, k_out, q, emerges)


# ---------------------------------------------------------------------------- atoms
def _check_atoms(positions, numbers) -> tuple[np.ndarray, np.ndarray]:
    try:
        r = np.asarray(positions, dtype=float)
    except (TypeError, ValueError):
        raise StructureError(
            "positions must be an (N, 3) array of Cartesian coordinates in Angstrom."
        ) from None
    if r.ndim != 2 or r.shape[1] != 3:
        raise StructureError(f"positions must have shape (number of atoms, 3), got {r.shape}.")
    if not np.all(np.isfinite(r)):
        raise StructureError("positions must contain finite coordinates.")
    z = np.asarray(numbers)
    if z.shape != (r.shape[0],):
        raise StructureError(
            f"numbers must hold one atomic number per atom ({r.shape[0]}), got shape {z.shape}."
        )
    if z.size:
        whole = np.issubdtype(z.dtype, np.integer) or (
            np.issubdtype(z.dtype, np.floating) and bool(np.all(z == np.round(z)))
        )
        if not whole or z.min() < 1 or z.max() > 118:
            raise StructureError("numbers must be atomic numbers between 1 and 118.")
    return r, z.astype(np.int64)


@dataclass(frozen=True)
class _AtomTerms:
    """Per-atom data, sorted by (species, height, depth, <u^2>) so that groups are contiguous."""

    r: np.ndarray  # (N, 3)
    depth: np.ndarray  # (N,)
    msd: np.ndarray  # (N,)
    species: np.ndarray  # (S,) atomic numbers
    species_id: np.ndarray  # (N,) index into species of each atom
    group_id: np.ndarray  # (N,) group of each atom (same species, height, depth, msd)
    group_start: np.ndarray  # (G,)
    group_species: np.ndarray  # (G,) index into species


def _atom_terms(r, z, surface_z, temperature, debye_temperatures, vibration_model) -> _AtomTerms:
    if surface_z is None:
        top = float(r[:, 2].max())
    else:
        try:
            top = float(surface_z)
        except (TypeError, ValueError):
            raise InputError(f"surface_z must be a height in Angstrom, got {surface_z!r}.") from None
        if not math.isfinite(top):
            raise InputError(f"surface_z must be a finite height in Angstrom, got {surface_z!r}.")
    depth = np.maximum(top - r[:, 2], 0.0)
    if vibration_model not in VIBRATION_MODELS:
        raise InputError(
            f"vibration_model must be one of {', '.join(VIBRATION_MODELS)}, got {vibration_model!r}."
        )
    if temperature is None:
        msd = np.zeros(len(z))
    else:
        msd = atomic_mean_square_displacements(z, temperature, debye_temperatures, vibration_model)
    order = np.lexsort((msd, depth, r[:, 2], z))
    r, z, depth, msd = r[order], z[order], depth[order], msd[order]
    species, species_id = np.unique(z, return_inverse=True)
    new = np.ones(len(z), dtype=bool)
    new[1:] = (z[1:] != z[:-1]) | (r[1:, 2] != r[:-1, 2]) | (depth[1:] != depth[:-1]) | (msd[1:] != msd[:-1])
    group_start = np.nonzero(new)[0]
    group_id = np.cumsum(new) - 1
    group_species = np.searchsorted(species, z[group_start])
    return _AtomTerms(r, depth, msd, species, species_id.reshape(-1), group_id, group_start, group_species)


def _add_segment_sums(out: np.ndarray, values: np.ndarray, ids: np.ndarray) -> None:
    """Add the rows of ``values`` into ``out[ids]``, ``ids`` sorted (rows of one id are summed)."""
    if len(ids) == 0:
        return
    starts = np.nonzero(np.r_[True, ids[1:] != ids[:-1]])[0]
    out[ids[starts]] += np.add.reduceat(values, starts, axis=0)


def _group_factors(atoms: _AtomTerms, kappa, q2) -> np.ndarray:
    """exp(-kappa D_G - q^2 <u^2>_G / 2) per group and beam; kappa, q2 of shape (..., Nb)."""
    dg = atoms.depth[atoms.group_start]
    ug = atoms.msd[atoms.group_start]
    return np.exp(-kappa[..., None, :] * dg[:, None] - 0.5 * q2[..., None, :] * ug[:, None])


def _weighted_species_sum(atoms: _AtomTerms, per_group: np.ndarray, f: np.ndarray) -> np.ndarray:
    """sum_G f[species(G)] per_group[..., G, b]; per_group (E, G, Nb), f (S, E, Nb) -> (E, Nb)."""
    sg = atoms.group_species
    starts = np.nonzero(np.r_[True, sg[1:] != sg[:-1]])[0]
    by_species = np.add.reduceat(per_group, starts, axis=-2)  # (E, S_present, Nb)
    return np.einsum("seb,esb->eb", f[sg[starts]], by_species)


# ---------------------------------------------------------------------------- the sums
def _beam_terms(geom: ScatteringGeometry, att_model, amp_model, species):
    """Per energy and beam: decay constant, |q|^2, amplitudes (S, NE, Nb)."""
    ne, nb = geom.emerges.shape
    kz_out = np.where(geom.emerges, geom.k_out[..., 2], 1.0)
    kappa = att_model.amplitude_decay(geom.energy, geom.k_inside, geom.k_in[:, 2], kz_out)
    kappa = np.asarray(kappa, dtype=float)
    kappa = np.where(geom.emerges, np.broadcast_to(kappa, (ne, nb)), 0.0)
    q = np.where(geom.emerges[..., None], geom.q, 0.0)
    q2 = np.einsum("ebi,ebi->eb", q, q)
    f = np.zeros((len(species), ne, nb), dtype=complex)
    for i in range(ne):
        sel = geom.emerges[i]
        if not sel.any():
            continue
        kin = geom.k_in[i]
        kout = geom.k_out[i, sel]
        cos_angle = np.clip(kout @ kin / geom.k_inside[i] ** 2, -1.0, 1.0)
        fi = amp_model(species, float(geom.energy[i]), float(geom.k_inside[i]), cos_angle)
        fi = np.asarray(fi, dtype=complex)
        try:
            f[:, i, sel] = np.broadcast_to(fi, (len(species), int(sel.sum())))
        except ValueError:
            raise InputError(
                f"the amplitude model returned shape {fi.shape}; expected ({len(species)}, {int(sel.sum())}) "
                "or something that broadcasts to it."
            ) from None
        if not np.all(np.isfinite(f[:, i, sel])):
            raise InputError(f"the amplitude model returned non-finite amplitudes at {geom.energy[i]:g} eV.")
    return q, q2, kappa, f


def _direct(atoms: _AtomTerms, q, q2, kappa, f, emerges, chunk: int) -> np.ndarray:
    """One energy at a time: the phases exp(i q . r_j) over atoms x beams in chunks, summed per
    group of atoms sharing species, height, depth and <u^2>; the real attenuation and
    Debye-Waller factors are then applied per group (groups x beams only)."""
    ne, nb = emerges.shape
    n = len(atoms.r)
    n_groups = len(atoms.group_start)
    amp = np.zeros((ne, nb), dtype=complex)
    for i in range(ne):
        sel = np.nonzero(emerges[i])[0]
        if sel.size == 0:
            continue
        qt = np.ascontiguousarray(q[i, sel].T)  # (3, nb)
        rows = max(1, chunk // sel.size)
        sums = np.zeros((n_groups, sel.size), dtype=complex)
        for a in range(0, n, rows):
            phase = atoms.r[a : a + rows] @ qt
            block = np.empty(phase.shape, dtype=complex)
            np.multiply(phase, 1j, out=block)
            np.exp(block, out=block)  # purely imaginary argument: cos + i sin
            _add_segment_sums(sums, block, atoms.group_id[a : a + rows])
        sums *= _group_factors(atoms, kappa[i, sel], q2[i, sel])
        amp[i, sel] = _weighted_species_sum(atoms, sums[None], f[:, i : i + 1, sel])[0]
    return amp


def _grouped(atoms: _AtomTerms, g, q, q2, kappa, f, emerges, chunk: int) -> np.ndarray:
    """Many energies: the in-plane phases are energy independent (q_par = g), so sum them once
    per group of atoms sharing species, height, depth and <u^2>, then loop over energies with
    groups x beams only."""
    ne, nb = emerges.shape
    n = len(atoms.r)
    n_groups = len(atoms.group_start)
    rows = max(1, chunk // max(nb, 1))
    plane = np.zeros((n_groups, nb), dtype=complex)
    rt = np.ascontiguousarray(atoms.r[:, :2])
    gt = np.ascontiguousarray(g.T)
    for a in range(0, n, rows):
        phase = rt[a : a + rows] @ gt
        block = np.empty(phase.shape, dtype=complex)
        np.multiply(phase, 1j, out=block)
        np.exp(block, out=block)
        _add_segment_sums(plane, block, atoms.group_id[a : a + rows])
    zg = atoms.r[atoms.group_start, 2]
    amp = np.zeros((ne, nb), dtype=complex)
    per_energy = max(1, chunk // max(n_groups * nb, 1))
    for a in range(0, ne, per_energy):
        s = slice(a, a + per_energy)
        expo = np.multiply.outer(q[s, :, 2], zg).transpose(0, 2, 1) * 1j  # (ne_block, G, Nb)
        np.exp(expo, out=expo)
        expo *= plane[None]
        expo *= _group_factors(atoms, kappa[s], q2[s])
        amp[s] = _weighted_species_sum(atoms, expo, f[:, s])
    return amp


def kinematic_iv(
    positions,
    numbers,
    g_parallel,
    energies,
    incidence=(0.0, 0.0),
    *,
    inner_potential: float = 10.0,
    temperature: float | None = 300.0,
    debye_temperatures=None,
    amplitudes=None,
    attenuation=None,
    surface_z: float | None = None,
    vibration_model: str = "debye",
    chunk_elements: int = CHUNK_ELEMENTS,
) -> np.ndarray:
    """Kinematic intensities of many beams at many energies (I(V) curves).

    The parameters are those of :func:`kinematic_intensities`, with ``energies`` an array of
    vacuum energies (eV). For many energies the sum is reorganised: ``q_parallel = g`` does not
    depend on the energy, so the in-plane phases ``exp(i g . r_j)`` are summed once over the
    atoms of each layer (same species, height, depth and vibration amplitude), and each energy
    costs only (layers x beams) work. For a relaxed model with every atom at its own height the
    work per energy is (atoms x beams), as in the direct sum.

    Returns
    -------
    ndarray, shape (NE, Nb)
        Intensities in units of ``|f|^2``; NaN where a beam does not emerge at that energy.

    Notes
    -----
    Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam
    positions and symmetry extinctions at normal incidence are exact. See the module docstring.
    """
    r, z = _check_atoms(positions, numbers)
    g = _check_g(g_parallel)
    geom = scattering_geometry(g, energies, incidence, inner_potential)
    ne, nb = geom.emerges.shape
    try:
        chunk = int(chunk_elements)
    except (TypeError, ValueError):
        raise InputError(f"chunk_elements must be a positive integer, got {chunk_elements!r}.") from None
    if chunk < 1:
        raise InputError(f"chunk_elements must be a positive integer, got {chunk_elements!r}.")
    if len(r) == 0 or nb == 0:
        out = np.zeros((ne, nb))
        out[~geom.emerges] = np.nan
        return out
    atoms = _atom_terms(r, z, surface_z, temperature, debye_temperatures, vibration_model)
    att_model = resolve_attenuation(attenuation).for_atoms(z)
    amp_model = resolve_amplitudes(amplitudes)
    q, q2, kappa, f = _beam_terms(geom, att_model, amp_model, atoms.species)
    n, n_groups = len(r), len(atoms.group_start)
    # direct: NE passes over atoms x beams; grouped: one pass plus NE passes over groups x beams
    grouped = n + ne * n_groups < ne * n
    # beams are independent: take them in blocks so that the per-group sums stay bounded
    amp = np.empty((ne, nb), dtype=complex)
    step = max(1, PLANE_ELEMENTS // n_groups)
    for a in range(0, nb, step):
        s = slice(a, a + step)
        if grouped:
            amp[:, s] = _grouped(
                atoms, g[s], q[:, s], q2[:, s], kappa[:, s], f[:, :, s], geom.emerges[:, s], chunk
            )
        else:
            amp[:, s] = _direct(atoms, q[:, s], q2[:, s], kappa[:, s], f[:, :, s], geom.emerges[:, s], chunk)
    intensity = amp.real**2 + amp.imag**2
    intensity[~geom.emerges] = np.nan
    return intensity


def kinematic_intensities(
    positions,
    numbers,
    g_parallel,
    energy: float,
    incidence=(0.0, 0.0),
    *,
    inner_potential: float = 10.0,
    temperature: float | None = 300.0,
    debye_temperatures=None,
    amplitudes=None,
    attenuation=None,
    surface_z: float | None = None,
    vibration_model: str = "debye",
    chunk_elements: int = CHUNK_ELEMENTS,
) -> np.ndarray:
    """Kinematic diffraction intensities of a surface model at one energy.

    ``I(g, E) = |sum_j f_j exp(-M_j) exp(i q . r_j) a_j|^2`` (see the module docstring).

    Parameters
    ----------
    positions : array_like, shape (N, 3)
        Cartesian positions (Angstrom) of the atoms of one surface unit cell, slab frame: a1 along
        +x, +z out of the crystal into the vacuum.
    numbers : array_like of int, shape (N,)
        Atomic numbers.
    g_parallel : array_like, shape (Nb, 2)
        Surface reciprocal vectors of the beams (1/Angstrom, same frame, 2 pi included).
    energy : float
        Kinetic energy in vacuum, eV.
    incidence : (float, float)
        Polar angle from the surface normal (0 <= theta < 90) and azimuth of the incident parallel
        momentum from +x, degrees.
    inner_potential : float
        Real inner potential V0r (eV, >= 0) that refracts the waves inside the crystal.
    temperature : float or None
        Sample temperature (K) for the Debye-Waller factors; ``None`` switches them off
        (``0`` keeps the zero-point vibrations).
    debye_temperatures : None, mapping or array_like
        Per-element overrides (symbol or Z -> K) or one value per atom; see
        :func:`surfgeo.diffraction.debye_waller.debye_temperatures_for`.
    amplitudes : None, mapping or amplitude model
        Atomic scattering amplitudes; see :func:`surfgeo.diffraction.scattering.resolve_amplitudes`.
        Default: isotropic ``sqrt(Z)`` per element (a model choice).
    attenuation : None, float or attenuation model
        ``None``: Seah-Dench mean free path with the monolayer thickness of the model's elements;
        a number: a fixed mean free path in Angstrom (``math.inf``: none); or a model such as
        :class:`surfgeo.diffraction.attenuation.ImaginaryInnerPotential`.
    surface_z : float, optional
        Height of the surface plane from which depths are measured (Angstrom); default the
        highest atom. Atoms above it are not attenuated.
    vibration_model : {"debye", "high-temperature"}
        Form of the Debye model for ``<u_x^2>``.
    chunk_elements : int
        Largest number of complex elements in one (atoms x beams) work array (memory bound).

    Returns
    -------
    ndarray, shape (Nb,)
        Intensities in units of ``|f|^2``; NaN for beams that do not emerge (``|k_par_in + g| >= k``).

    Notes
    -----
    Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam
    positions and symmetry extinctions at normal incidence are exact. A kinematic glide-line
    extinction also holds at off-normal incidence in this sum, but multiple scattering lifts it
    there in real LEED; do not read it as a prediction.

    Examples
    --------
    >>> import numpy as np
    >>> pos = np.array([[0.0, 0.0, 0.0], [1.8, 1.8, -1.8]])
    >>> I = kinematic_intensities(pos, [29, 29], [[0.0, 0.0], [50.0, 0.0]], 100.0)
    >>> bool(I[0] > 0), bool(np.isnan(I[1]))
    (True, True)
    """
    e = _check_energies(energy)
    if e.size != 1:
        raise InputError("energy must be a single number of eV here; use kinematic_iv for several energies.")
    return kinematic_iv(
        positions, numbers, g_parallel, e, incidence,
        inner_potential=inner_potential, temperature=temperature, debye_temperatures=debye_temperatures,
        amplitudes=amplitudes, attenuation=attenuation, surface_z=surface_z,
        vibration_model=vibration_model, chunk_elements=chunk_elements,
    )[0]


__all__ = [
    "CHUNK_ELEMENTS",
    "QUALITATIVE_NOTE",
    "ScatteringGeometry",
    "scattering_geometry",
    "kinematic_intensities",
    "kinematic_iv",
]
