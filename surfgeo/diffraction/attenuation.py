"""Attenuation of the electron waves inside the crystal (inelastic scattering).

Low-energy electrons lose intensity to inelastic processes on their way in to an atom and back
out to the surface. The kinematic sum multiplies the amplitude scattered by an atom at depth
``D`` below the surface by ``exp(-kappa D)``, where ``kappa`` (1/Angstrom, one per beam and
energy) is the sum of the decay constants of the incoming and the outgoing wave. Three models:

:class:`SeahDench` (default)
    The inelastic mean free path (IMFP) of the Seah-Dench "universal curve" for elements,
    ``lambda[nm] = 538 a / E^2 + 0.41 a^(3/2) E^(1/2)`` with the monolayer thickness ``a`` in nm
    and the energy ``E`` in eV. The IMFP is an *intensity* attenuation length along the path,
    so the amplitude decays as ``exp(-s / (2 lambda))`` over a path ``s``; an atom at depth ``D``
    sees the paths ``D / cos(theta_in)`` and ``D / cos(theta_out)`` with the polar angles
    measured inside the crystal (after refraction).
:class:`FixedMeanFreePath`
    The same path-length model with an energy-independent IMFP.
:class:`ImaginaryInnerPotential`
    An imaginary part ``V0i`` (eV, given as a positive magnitude) of the inner potential: the
    normal wave vector inside becomes ``k_z = sqrt(k_inside^2 - k_par^2 + i 2 m V0i / hbar^2)``
    and its imaginary part is the amplitude decay constant along the normal. For small ``V0i``
    this equals the path-length model with ``lambda = hbar v / (2 V0i)``, ``v`` the electron
    velocity inside.

The energy given to the Seah-Dench formula is the kinetic energy in vacuum (the formula is
quoted above the Fermi level; the difference, the work function of a few eV, is below the
accuracy of the curve).

References
----------
.. [1] M. P. Seah and W. A. Dench, "Quantitative electron spectroscopy of surfaces: a standard
   data base for electron inelastic mean free paths in solids", Surf. Interface Anal. 1, 2 (1979).
.. [2] J. B. Pendry, *Low Energy Electron Diffraction*, Academic Press (1974): the imaginary
   part of the optical potential and the electron lifetime.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from surfgeo.checks import positive_number
from surfgeo.diffraction.electron import HBAR2_2M
from surfgeo.errors import InputError

#: Monolayer thickness (Angstrom) used when no element of the model has a crystal structure in
#: ASE's reference states. A model choice, no source (the Seah-Dench paper's typical metal).
DEFAULT_MONOLAYER_THICKNESS = 2.5


def seah_dench_imfp(energy, monolayer_thickness) -> np.ndarray:
    """Inelastic mean free path (Angstrom) of the Seah-Dench universal curve for elements.

    Parameters
    ----------
    energy : array_like
        Electron kinetic energy in eV (> 0).
    monolayer_thickness : float
        Thickness ``a`` of one monolayer of the material in Angstrom (the cube root of the
        volume per atom).

    Returns
    -------
    ndarray
        ``lambda = 538 a / E^2 + 0.41 a^(3/2) E^(1/2)`` (a in nm, result in nm) converted to
        Angstrom.

    References
    ----------
    .. [1] M. P. Seah and W. A. Dench, Surf. Interface Anal. 1, 2 (1979), equation for elements.
    """
    e = np.asarray(energy, dtype=float)
    if np.any(~np.isfinite(e)) or np.any(e <= 0):
        raise InputError("the energy for the mean free path must be a positive number of eV.")
    a = positive_number(monolayer_thickness, "monolayer thickness")
    a_nm = a / 10.0
    return 10.0 * (538.0 * a_nm / e**2 + 0.41 * a_nm**1.5 * np.sqrt(e))


def _atomic_volume(z: int) -> float | None:
    """Volume per atom (Angstrom^3) of the element's reference crystal in ASE, or None."""
    from ase.data import reference_states

    ref = reference_states[z] if 0 <= z < len(reference_states) else None
    if not ref or "a" not in ref:
        return None
    a = ref["a"]
    sym = ref.get("symmetry")
    if sym == "fcc":
        return a**3 / 4.0
    if sym == "bcc":
        return a**3 / 2.0
    if sym == "sc":
        return a**3
    if sym == "diamond":
        return a**3 / 8.0
    if sym == "hcp":
        c = ref.get("c/a", math.sqrt(8.0 / 3.0)) * a
        return math.sqrt(3.0) / 2.0 * a * a * c / 2.0
    return None


def monolayer_thickness(numbers) -> float:
    """Monolayer thickness (Angstrom) of a material of the given atoms.

    The cube root of the composition-weighted mean volume per atom of the elements' reference
    crystals in ASE (``ase.data.reference_states``; fcc, bcc, hcp, diamond and simple cubic
    elements). Elements without such a crystal (gases, molecular solids) are left out of the
    mean; if none is left, :data:`DEFAULT_MONOLAYER_THICKNESS` is returned.
    """
    elements, counts = np.unique(np.asarray(numbers, dtype=int).reshape(-1), return_counts=True)
    vols = np.array([_atomic_volume(int(zi)) or np.nan for zi in elements], dtype=float)
    known = ~np.isnan(vols)
    if not known.any():
        return DEFAULT_MONOLAYER_THICKNESS
    return float(np.average(vols[known], weights=counts[known])) ** (1.0 / 3.0)


def _path_decay(imfp: np.ndarray, k_inside, kz_in, kz_out) -> np.ndarray:
    """Amplitude decay per unit depth for the path-length model: K/(2 lambda) (1/|kz_in| + 1/kz_out)."""
    k_inside = np.asarray(k_inside, dtype=float)[:, None]
    kz_in = np.abs(np.asarray(kz_in, dtype=float))[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        return k_inside / (2.0 * np.asarray(imfp, dtype=float)[:, None]) * (1.0 / kz_in + 1.0 / kz_out)


@dataclass(frozen=True)
class SeahDench:
    """Seah-Dench inelastic mean free path (path-length model).

    Parameters
    ----------
    monolayer_thickness : float or None
        Monolayer thickness in Angstrom; ``None`` derives it from the atoms of the model with
        :func:`monolayer_thickness`.
    """

    monolayer_thickness: float | None = None

    def for_atoms(self, numbers) -> SeahDench:
        """This model with the monolayer thickness filled in from the atoms if it was None."""
        if self.monolayer_thickness is not None:
            return self
        return SeahDench(monolayer_thickness(numbers))

    def mean_free_path(self, energy) -> np.ndarray:
        """IMFP in Angstrom at the given vacuum energies (eV)."""
        a = self.monolayer_thickness if self.monolayer_thickness is not None else DEFAULT_MONOLAYER_THICKNESS
        return seah_dench_imfp(energy, a)

    def amplitude_decay(self, energy, k_inside, kz_in, kz_out) -> np.ndarray:
        """Amplitude decay constant per unit depth (1/Angstrom), incoming plus outgoing wave.

        Parameters
        ----------
        energy : ndarray, shape (NE,)
            Vacuum energies in eV.
        k_inside : ndarray, shape (NE,)
            Wavenumber inside the crystal (1/Angstrom).
        kz_in : ndarray, shape (NE,)
            Normal component of the incident wave vector inside (1/Angstrom, sign ignored).
        kz_out : ndarray, shape (NE, Nb)
            Normal components of the exit wave vectors inside (1/Angstrom, positive).
        """
        return _path_decay(self.mean_free_path(energy), k_inside, kz_in, kz_out)


@dataclass(frozen=True)
class FixedMeanFreePath:
    """An energy-independent inelastic mean free path ``length`` (Angstrom), path-length model.

    ``length = math.inf`` switches attenuation off.
    """

    length: float

    def __post_init__(self) -> None:
        v = positive_number(self.length, "attenuation length (inf: none)", inf_ok=True)
        object.__setattr__(self, "length", v)

    def for_atoms(self, numbers) -> FixedMeanFreePath:
        return self

    def mean_free_path(self, energy) -> np.ndarray:
        return np.full(np.shape(energy), self.length, dtype=float)

    def amplitude_decay(self, energy, k_inside, kz_in, kz_out) -> np.ndarray:
        """See :meth:`SeahDench.amplitude_decay`."""
        if math.isinf(self.length):
            return np.zeros(np.shape(kz_out))
        return _path_decay(self.mean_free_path(energy), k_inside, kz_in, kz_out)


@dataclass(frozen=True)
class ImaginaryInnerPotential:
    """Attenuation from the imaginary part of the inner potential.

    Parameters
    ----------
    v0i : float
        Magnitude of the imaginary inner potential in eV (typically 3 to 5 eV). Conventions
        differ in its sign; give the magnitude.
    """

    v0i: float

    def __post_init__(self) -> None:
        try:
            v = float(self.v0i)
        except (TypeError, ValueError):
            raise InputError(f"imaginary inner potential must be a number of eV, got {self.v0i!r}.") from None
        if not math.isfinite(v) or v < 0:
            raise InputError(
                "imaginary inner potential must be given as a magnitude (zero or positive eV), "
                f"got {self.v0i!r}."
            )
        object.__setattr__(self, "v0i", v)

    def for_atoms(self, numbers) -> ImaginaryInnerPotential:
        return self

    def amplitude_decay(self, energy, k_inside, kz_in, kz_out) -> np.ndarray:
        """See :meth:`SeahDench.amplitude_decay`; here ``Im sqrt(k_z^2 + i V0i / (hbar^2/2m))``."""
        eta = self.v0i / HBAR2_2M
        kz_in = np.asarray(kz_in, dtype=float)[:, None]
        kz_out = np.asarray(kz_out, dtype=float)
        return (np.sqrt(kz_in**2 + 1j * eta).imag + np.sqrt(kz_out**2 + 1j * eta).imag)

    def mean_free_path(self, energy, inner_potential: float = 0.0) -> np.ndarray:
        """The equivalent IMFP ``hbar v / (2 V0i)`` (Angstrom) at small ``V0i``, for comparison.

        ``v`` is the velocity inside the crystal at kinetic energy ``E + V0r``.
        """
        e_in = np.asarray(energy, dtype=float) + inner_potential
        if self.v0i == 0:
            return np.full(np.shape(e_in), math.inf)
        # hbar v / (2 V0i) = hbar sqrt(2 E / m) / (2 V0i) = 2 sqrt(E * hbar^2/2m) / (2 V0i)
        return np.sqrt(e_in * HBAR2_2M) / self.v0i


def resolve_attenuation(attenuation):
    """Turn the ``attenuation`` argument of the kinematic functions into a model object.

    ``None`` gives :class:`SeahDench` with the monolayer thickness from the atoms; a number gives
    :class:`FixedMeanFreePath` of that length (Angstrom; ``math.inf`` for none); a model object
    (anything with ``amplitude_decay`` and ``for_atoms``) is returned unchanged.
    """
    if attenuation is None:
        return SeahDench()
    if hasattr(attenuation, "amplitude_decay"):
        return attenuation
    if isinstance(attenuation, bool):
        raise InputError("attenuation must be None, a mean free path in Angstrom or an attenuation model.")
    if isinstance(attenuation, int | float | np.floating | np.integer):
        return FixedMeanFreePath(float(attenuation))
    raise InputError(
        "attenuation must be None (Seah-Dench), a mean free path in Angstrom, or an attenuation model "
        f"such as ImaginaryInnerPotential(4.0), got {attenuation!r}."
    )


__all__ = [
    "DEFAULT_MONOLAYER_THICKNESS",
    "seah_dench_imfp",
    "monolayer_thickness",
    "SeahDench",
    "FixedMeanFreePath",
    "ImaginaryInnerPotential",
    "resolve_attenuation",
]
