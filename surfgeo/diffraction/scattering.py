"""Atomic scattering amplitudes for the kinematic sum.

An *amplitude model* is any callable

``model(numbers, energy, k_inside, cos_angle) -> array``

with ``numbers`` the distinct atomic numbers of the model (shape (S,)), ``energy`` the kinetic
energy in vacuum (eV), ``k_inside`` the electron wavenumber inside the crystal (1/Angstrom) and
``cos_angle`` the cosines of the scattering angles between the incident and the exit wave
vectors inside the crystal (shape (Nb,)). It returns complex amplitudes of shape (S, Nb), or
anything that broadcasts to it ((S, 1) for an isotropic model). The kinematic functions call it
once per energy, so energy- and angle-dependent amplitudes, for example from partial-wave phase
shifts, plug in without changing any caller.

Two models are provided:

:class:`IsotropicAmplitudes` (the default)
    One real, energy- and angle-independent amplitude per element, ``f = sqrt(Z)`` unless
    overridden, so that the backscattered intensity per atom grows in proportion to the atomic
    number. *A model choice, not a physical law:* real LEED amplitudes depend strongly on energy
    and angle, which is one reason why kinematic intensities are only qualitative for LEED.
:class:`PartialWaveAmplitudes`
    ``f(theta) = 1/(2 i k) sum_l (2l + 1) (exp(2 i delta_l) - 1) P_l(cos theta)`` from phase
    shifts ``delta_l(E)`` that the user supplies per element (Angstrom).

References
----------
.. [1] J. J. Sakurai, *Modern Quantum Mechanics*, Addison-Wesley (1994), partial-wave expansion
   of the scattering amplitude and the optical theorem.
.. [2] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
   Springer (1986): phase shifts in LEED.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Protocol

import numpy as np
from scipy.special import eval_legendre

from surfgeo.errors import InputError


class AmplitudeModel(Protocol):
    """The interface of an atomic scattering amplitude model (see the module docstring)."""

    def __call__(
        self, numbers: np.ndarray, energy: float, k_inside: float, cos_angle: np.ndarray
    ) -> np.ndarray: ...


def _element_key(key, what: str) -> int:
    from ase.data import atomic_numbers

    if isinstance(key, str):
        if key not in atomic_numbers:
            raise InputError(f"{what} has an unknown element {key!r}; use a symbol such as 'Cu'.")
        return atomic_numbers[key]
    try:
        z = int(key)
    except (TypeError, ValueError):
        raise InputError(f"{what} keys must be element symbols or atomic numbers, got {key!r}.") from None
    if not 1 <= z <= 118:
        raise InputError(f"{what} has atomic number {z}; valid numbers are 1 to 118.")
    return z


class IsotropicAmplitudes:
    """Energy- and angle-independent amplitudes, one per element.

    Parameters
    ----------
    values : mapping, optional
        Element symbol or atomic number -> amplitude (real or complex, any common unit). Elements
        not listed get ``Z ** exponent``.
    exponent : float
        Exponent of the default ``f = Z ** exponent`` (0.5: intensity per atom proportional to
        Z; 0: all elements equal). A model choice, no source.
    """

    def __init__(self, values: Mapping | None = None, exponent: float = 0.5) -> None:
        self.values: dict[int, complex] = {}
        for key, v in (values or {}).items():
            try:
                c = complex(v)
            except (TypeError, ValueError):
                raise InputError(f"amplitude of {key!r} must be a number, got {v!r}.") from None
            if not (math.isfinite(c.real) and math.isfinite(c.imag)):
                raise InputError(f"amplitude of {key!r} must be finite, got {v!r}.")
            self.values[_element_key(key, "amplitudes")] = c
        self.exponent = float(exponent)

    def element_amplitudes(self, numbers) -> np.ndarray:
        """Amplitude of each given atomic number, shape (S,) complex."""
        z = np.asarray(numbers, dtype=int).reshape(-1)
        return np.array([self.values.get(int(zi), float(zi) ** self.exponent) for zi in z], dtype=complex)

    def __call__(self, numbers, energy, k_inside, cos_angle) -> np.ndarray:
        return self.element_amplitudes(numbers)[:, None]

    def __repr__(self) -> str:
        return f"IsotropicAmplitudes({self.values!r}, exponent={self.exponent})"


def partial_wave_amplitude(phase_shifts, k, cos_angle) -> np.ndarray:
    """Scattering amplitude (Angstrom) from partial-wave phase shifts.

    Parameters
    ----------
    phase_shifts : array_like, shape (L + 1,) or (..., L + 1)
        Phase shifts ``delta_l`` in radians for l = 0 .. L.
    k : float
        Wavenumber (1/Angstrom) at which the phase shifts apply.
    cos_angle : array_like
        Cosines of the scattering angles.

    Returns
    -------
    ndarray, complex
        ``f = 1/(2 i k) sum_l (2l+1) (exp(2 i delta_l) - 1) P_l(cos theta)``, shape
        ``phase_shifts.shape[:-1] + cos_angle.shape``.

    References
    ----------
    .. [1] J. J. Sakurai, *Modern Quantum Mechanics* (1994), partial-wave expansion.
    """
    d = np.asarray(phase_shifts, dtype=float)
    c = np.asarray(cos_angle, dtype=float)
    ell = np.arange(d.shape[-1])
    coeff = (2 * ell + 1) * (np.exp(2j * d) - 1.0) / (2j * float(k))  # (..., L+1)
    legendre = eval_legendre(ell[:, None], c.reshape(-1)[None, :])  # (L+1, M)
    return (coeff @ legendre).reshape(d.shape[:-1] + c.shape)


class PartialWaveAmplitudes:
    """Energy- and angle-dependent amplitudes from per-element phase shifts.

    Parameters
    ----------
    phase_shifts : mapping
        Element symbol or atomic number -> callable ``energy_eV -> array of delta_l`` (radians,
        l = 0 .. L). The callable receives the kinetic energy inside the crystal (vacuum energy
        plus the real inner potential) when ``inside=True`` (the default, as phase shifts are
        usually tabulated against the muffin-tin zero), else the vacuum energy.
    inside : bool
        See above.
    fallback : AmplitudeModel, optional
        Model for elements without phase shifts; without one such elements raise an error.
    """

    def __init__(
        self,
        phase_shifts: Mapping[int | str, Callable[[float], np.ndarray]],
        inside: bool = True,
        fallback: AmplitudeModel | None = None,
    ) -> None:
        self.phase_shifts = {_element_key(k, "phase_shifts"): v for k, v in phase_shifts.items()}
        self.inside = inside
        self.fallback = fallback

    def __call__(self, numbers, energy, k_inside, cos_angle) -> np.ndarray:
        from surfgeo.diffraction.electron import energy_from_wavenumber, wavenumber

        z = np.asarray(numbers, dtype=int).reshape(-1)
        c = np.asarray(cos_angle, dtype=float).reshape(-1)
        out = np.empty((z.size, c.size), dtype=complex)
        e_inside = energy_from_wavenumber(float(k_inside))
        for i, zi in enumerate(z):
            fn = self.phase_shifts.get(int(zi))
            if fn is None:
                if self.fallback is None:
                    raise InputError(f"no phase shifts were given for atomic number {int(zi)}.")
                out[i] = np.broadcast_to(self.fallback(z[i : i + 1], energy, k_inside, c), (1, c.size))[0]
                continue
            delta = np.asarray(fn(e_inside if self.inside else float(energy)), dtype=float)
            # with inside=False the phase shifts refer to the vacuum wavenumber
            k = float(k_inside) if self.inside else wavenumber(float(energy))
            out[i] = partial_wave_amplitude(delta, k, c)
        return out


def resolve_amplitudes(amplitudes) -> AmplitudeModel:
    """Turn the ``amplitudes`` argument of the kinematic functions into a model.

    ``None`` gives the default :class:`IsotropicAmplitudes`; a mapping element -> number gives
    :class:`IsotropicAmplitudes` with those values; a callable is used as an
    :class:`AmplitudeModel`.
    """
    if amplitudes is None:
        return IsotropicAmplitudes()
    if isinstance(amplitudes, Mapping):
        return IsotropicAmplitudes(amplitudes)
    if callable(amplitudes):
        return amplitudes
    raise InputError(
        "amplitudes must be None, a mapping element -> amplitude, or an amplitude model "
        f"callable(numbers, energy, k_inside, cos_angle), got {amplitudes!r}."
    )


__all__ = [
    "AmplitudeModel",
    "IsotropicAmplitudes",
    "PartialWaveAmplitudes",
    "partial_wave_amplitude",
    "resolve_amplitudes",
]
