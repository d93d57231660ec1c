"""Electron kinematics for diffraction: wavenumber, wavelength, incidence, exit directions.

All constants come from :mod:`scipy.constants` (CODATA); energies are kinetic energies in
vacuum in eV, lengths in Angstrom, wave vectors in 1/Angstrom (k = 2 pi / lambda), angles in
degrees at the interface and radians inside.

Frames
------
*Sample frame*: the surface frame of the lattice or slab, +z along the outward surface normal
(into the vacuum). The incident beam is described by its polar angle ``theta_i`` from the
surface normal and its azimuth ``phi_i`` from +x; its parallel momentum is
``k sin(theta_i) (cos phi_i, sin phi_i)``, i.e. the electrons travel along +u where
``u = (cos phi_i, sin phi_i)``, and the specular beam leaves towards +u.

*Gun frame*: the frame of the diffraction optics, +z along the axis of the electron gun, which
is also the axis of the screen (the direction *towards* the gun, seen from the sample). It is
obtained from the sample frame by the rotation about ``z x u`` that takes the gun direction
``(-sin(theta_i) u, cos(theta_i))`` to +z; at normal incidence both frames coincide. The
specular beam appears at ``2 theta_i`` from the screen centre, as it does on a real screen when
the sample is tilted.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import constants as _c

#: hbar^2 / (2 m_e) in eV Angstrom^2 (about 3.80998), from CODATA via scipy.constants.
HBAR2_2M: float = _c.hbar**2 / (2.0 * _c.m_e) / _c.e * 1e20

#: Highest beam energy (eV) the pattern functions accept. The wavenumber here is the
#: non-relativistic one; the true wavelength is shorter by the factor 1 / sqrt(1 + E / (2 m c^2)),
#: i.e. by about E / (4 m c^2) = 0.1 % at 2 keV (1.5 % at 30 keV). Above LEED energies the
#: number of beams (proportional to E) also grows beyond what a spot map can show.
MAX_ENERGY_EV: float = 2000.0


def check_pattern_energies(energy, what: str = "the energy") -> np.ndarray:
    """Validate beam energies for patterns: finite, positive and at most :data:`MAX_ENERGY_EV`.

    Returns the energies as a float array (same shape); raises :class:`~surfgeo.errors.InputError`
    with one sentence naming ``what`` otherwise.
    """
    from surfgeo.errors import InputError

    try:
        e = np.asarray(energy, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{what} must be a positive number of eV, got {energy!r}.") from None
    if e.size == 0 or np.any(~np.isfinite(e)) or np.any(e <= 0):
        bad = e[~(np.isfinite(e) & (e > 0))] if e.size else e
        got = f"{float(bad.ravel()[0]):g}" if bad.size else "nothing"
        raise InputError(f"{what} must be a positive number of eV, got {got}.")
    if np.any(e > MAX_ENERGY_EV):
        raise InputError(
            f"{what} must be at most {MAX_ENERGY_EV:g} eV (LEED energies; the electron kinematics here "
            f"are non-relativistic), got {float(e.max()):g} eV."
        )
    return e


def _energy_array(energy) -> np.ndarray:
    e = np.asarray(energy, dtype=float)
    if np.any(~np.isfinite(e)) or np.any(e <= 0):
        from surfgeo.errors import InputError

        raise InputError(f"the electron energy must be a positive number of eV, got {energy!r}.")
    return e


def wavenumber(energy_eV):
    """Electron wavenumber k = sqrt(2 m_e E) / hbar in vacuum (non-relativistic).

    Parameters
    ----------
    energy_eV : float or array_like
        Kinetic energy in eV (positive).

    Returns
    -------
    float or ndarray
        k in 1/Angstrom (about 0.51232 sqrt(E[eV])).
    """
    e = _energy_array(energy_eV)
    k = np.sqrt(e / HBAR2_2M)
    return float(k) if k.ndim == 0 else k


def wavelength(energy_eV):
    """De Broglie wavelength lambda = h / sqrt(2 m_e E) in Angstrom (1.0000 at 150.4 eV)."""
    k = wavenumber(energy_eV)
    return 2.0 * math.pi / k


def energy_from_wavenumber(k):
    """Kinetic energy (eV) of an electron of wavenumber ``k`` (1/Angstrom): E = hbar^2 k^2 / 2m."""
    k = np.asarray(k, dtype=float)
    e = HBAR2_2M * k**2
    return float(e) if e.ndim == 0 else e


def check_incidence(incidence) -> tuple[float, float]:
    """Validate an incidence ``(polar, azimuth)`` in degrees and return it as floats."""
    from surfgeo.errors import InputError

    try:
        theta, phi = (float(v) for v in incidence)
    except (TypeError, ValueError):
        raise InputError(
            f"incidence must be two numbers (polar angle, azimuth) in degrees, got {incidence!r}."
        ) from None
    if not (math.isfinite(theta) and math.isfinite(phi)) or not (0.0 <= theta < 90.0):
        raise InputError(
            f"the incidence polar angle must be at least 0 and below 90 degrees, got {incidence!r}."
        )
    return theta, phi


def incident_k_parallel(energy_eV: float, incidence=(0.0, 0.0)) -> np.ndarray:
    """Parallel momentum (1/Angstrom, shape (2,)) of the incident beam in the sample frame.

    Parameters
    ----------
    energy_eV : float
        Beam energy in eV.
    incidence : (float, float)
        Polar angle from the surface normal and azimuth from +x, degrees.
    """
    theta, phi = (math.radians(v) for v in check_incidence(incidence))
    k = wavenumber(energy_eV)
    return k * math.sin(theta) * np.array([math.cos(phi), math.sin(phi)])


def exit_directions(k_parallel, energy_eV) -> np.ndarray:
    """Unit vectors (sample frame, shape (..., 3)) of beams leaving the surface.

    Parameters
    ----------
    k_parallel : array_like, shape (..., 2)
        Parallel momentum of each beam (incident parallel momentum plus g), 1/Angstrom.
    energy_eV : float or array_like
        Energy in eV, broadcast against the leading dimensions of ``k_parallel``.

    Returns
    -------
    ndarray, shape (..., 3)
        ``(k_par / k, sqrt(1 - |k_par|^2 / k^2))``; rows of NaN for beams that do not emerge
        (``|k_par| >= k``: evanescent).
    """
    kp = np.asarray(k_parallel, dtype=float)
    k = np.asarray(wavenumber(energy_eV), dtype=float)[..., None]
    p = kp / k
    p2 = np.einsum("...i,...i->...", p, p)
    with np.errstate(invalid="ignore"):
        z = np.sqrt(1.0 - p2)
    out = np.concatenate([p, z[..., None]], axis=-1)
    out[~(p2 < 1.0)] = np.nan
    return out


def exit_angles(k_parallel, energy_eV) -> tuple[np.ndarray, np.ndarray]:
    """Exit polar angle from the surface normal and azimuth from +x (degrees) of each beam.

    Non-emerging beams get NaN for both. The azimuth lies in [0, 360) and is 0 for the beam
    leaving along the normal.
    """
    d = exit_directions(k_parallel, energy_eV)
    theta = np.degrees(np.arccos(np.clip(d[..., 2], -1.0, 1.0)))
    phi = np.degrees(np.arctan2(d[..., 1], d[..., 0])) % 360.0
    phi = np.where(np.isnan(theta), np.nan, phi)
    return theta, phi


def gun_frame_rotation(incidence=(0.0, 0.0)) -> np.ndarray:
    """Rotation matrix (3x3, acting on column vectors) from the sample frame to the gun frame.

    See the module docstring for the frame definitions. Identity at normal incidence.
    """
    theta, phi = (math.radians(v) for v in check_incidence(incidence))
    u = np.array([math.cos(phi), math.sin(phi), 0.0])
    w = np.array([-math.sin(phi), math.cos(phi), 0.0])
    z = np.array([0.0, 0.0, 1.0])
    c, s = math.cos(theta), math.sin(theta)
    # components along (u, w, z) -> rotate in the u-z plane by theta -> back to (x, y, z)
    to_uwz = np.array([u, w, z])
    rot = np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])
    return to_uwz.T @ rot @ to_uwz


def to_gun_frame(directions, incidence=(0.0, 0.0)) -> np.ndarray:
    """Directions (..., 3) from the sample frame into the gun (screen) frame."""
    # einsum rather than a BLAS matmul: many rows times a 3x3 matrix is faster this way
    return np.einsum("...j,ij->...i", np.asarray(directions, dtype=float), gun_frame_rotation(incidence))


def from_gun_frame(directions, incidence=(0.0, 0.0)) -> np.ndarray:
    """Directions (..., 3) from the gun (screen) frame back into the sample frame."""
    return np.einsum("...j,ji->...i", np.asarray(directions, dtype=float), gun_frame_rotation(incidence))


def emergence_energy(g_parallel, incidence=(0.0, 0.0)) -> np.ndarray:
    """Energy (eV) above which the beam of reciprocal vector ``g`` leaves the surface.

    The beam with parallel momentum ``k_par_in + g`` emerges when ``|k_par_in + g| < k``. At
    normal incidence this is ``E = hbar^2 |g|^2 / 2m`` (exit angle 90 degrees).

    Parameters
    ----------
    g_parallel : array_like, shape (..., 2)
        Surface reciprocal lattice vectors, 1/Angstrom, sample frame.
    incidence : (float, float)
        Polar angle and azimuth (from +x) of the incident beam, degrees.

    Returns
    -------
    ndarray, shape (...)
        Emergence energy in eV (0 for g = 0).
    """
    g, si, _, u = _onset_inputs(g_parallel, incidence)
    G = np.einsum("...i,...i->...", g, g)
    alpha = g @ u
    # |a + s g| = 1 with a = sin(theta_i) u and s = 1/k: the positive root
    with np.errstate(invalid="ignore", divide="ignore"):
        s_em = (-si * alpha + np.sqrt((si * alpha) ** 2 + G * (1.0 - si * si))) / G
        e = HBAR2_2M / s_em**2
    return np.where(G > 0, e, 0.0)


def _onset_inputs(g_parallel, incidence):
    from surfgeo.errors import InputError

    g = np.asarray(g_parallel, dtype=float)
    if g.shape[-1:] != (2,):
        raise InputError(f"reciprocal vectors must have two components, got shape {g.shape}.")
    ti, phi = (math.radians(v) for v in check_incidence(incidence))
    return g, math.sin(ti), math.cos(ti), np.array([math.cos(phi), math.sin(phi)])


def onset_energy(g_parallel, theta_max: float = 90.0, incidence=(0.0, 0.0)) -> np.ndarray:
    """Lowest energy (eV) at which a beam reaches the screen (within ``theta_max`` of its axis).

    The screen axis is the gun axis (see the module docstring); at normal incidence the
    condition is the exit polar angle ``theta <= theta_max`` and the energy is

    .. math:: E = \\frac{\\hbar^2 |g|^2}{2 m \\sin^2\\theta_{max}}.

    At oblique incidence the condition ``n_gun . d(E) = cos(theta_max)`` (``d`` the exit
    direction) becomes, after squaring, a quadratic in ``s = 1/k`` that is solved exactly here;
    spurious roots of the squaring are discarded. A beam that enters the screen and leaves it
    again at higher energy (possible at oblique incidence) is reported by its first entry.

    Parameters
    ----------
    g_parallel : array_like, shape (..., 2)
        Surface reciprocal lattice vectors (1/Angstrom), sample frame.
    theta_max : float
        Acceptance half-angle of the screen around the gun axis, degrees (0 < theta_max <= 90).
    incidence : (float, float)
        Polar angle and azimuth (from +x) of the incident beam, degrees.

    Returns
    -------
    ndarray, shape (...)
        Onset energy in eV; 0 for a beam that is on the screen at every energy (the specular
        beam within the acceptance), ``inf`` for a beam that never reaches the screen.

    References
    ----------
    .. [1] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
       Springer (1986): Ewald construction and emergence condition.
    """
    from surfgeo.errors import InputError

    g, si, ci, u = _onset_inputs(g_parallel, incidence)
    tmax = float(theta_max)
    if not (0.0 < tmax <= 90.0):
        raise InputError(f"the acceptance half-angle must be in (0, 90] degrees, got {theta_max!r}.")
    cm = math.cos(math.radians(tmax))
    G = np.einsum("...i,...i->...", g, g)[..., None]
    alpha = (g @ u)[..., None]

    def inside(s):
        """True where the beam is on the screen at s = 1/k (s broadcast against G)."""
        p2 = si * si + 2.0 * s * si * alpha + s * s * G
        with np.errstate(invalid="ignore"):
            cos_lab = -si * (si + s * alpha) + ci * np.sqrt(1.0 - p2)
        return (p2 < 1.0) & (cos_lab > cm)

    # n_gun . d = cm squared: A s^2 + B s + C = 0
    A = ci * ci * G + si * si * alpha**2
    B = 2.0 * si * alpha * (1.0 + cm)
    C = (1.0 + cm) * (cm - math.cos(2.0 * math.asin(si)))
    with np.errstate(invalid="ignore", divide="ignore"):
        sq = np.sqrt(B * B - 4.0 * A * C)
        roots = np.concatenate([(-B + sq) / (2.0 * A), (-B - sq) / (2.0 * A)], axis=-1)
        s_em = (-si * alpha + np.sqrt((si * alpha) ** 2 + G * (1.0 - si * si))) / G
    ok = np.isfinite(roots) & (roots > 0) & (roots <= s_em * (1.0 + 1e-12))
    # a root is an entry when the beam is inside just above its energy (slightly smaller s)
    entry = ok & inside(roots * (1.0 - 1e-9))
    entry_em = np.isfinite(s_em) & inside(s_em * (1.0 - 1e-9))  # inside as soon as it emerges
    cand = np.concatenate([np.where(entry, roots, -np.inf), np.where(entry_em, s_em, -np.inf)], axis=-1)
    s_entry = cand.max(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        e = np.where(np.isfinite(s_entry), HBAR2_2M / s_entry**2, np.inf)
    specular_inside = math.cos(2.0 * math.asin(si)) > cm
    return np.where(G[..., 0] > 0, e, 0.0 if specular_inside else np.inf)
