"""Thermal vibrations in the Debye model: mean square displacements and Debye-Waller exponents.

The kinematic sum multiplies the amplitude of atom ``j`` by ``exp(-M_j)`` with
``M_j = q^2 <u_x^2>_j / 2`` (isotropic harmonic vibrations; ``<u_x^2>`` is the mean square
displacement along one Cartesian direction), so the intensity carries ``exp(-2 M)``.

``<u_x^2>`` comes from the Debye model of the lattice vibrations, per element, from a Debye
temperature and the sample temperature. Two forms are offered:

``"debye"`` (default)
    The full Debye-model result including zero-point motion,
    ``<u_x^2> = 3 hbar^2 / (m k_B Theta) * [ (T/Theta)^2 * int_0^{Theta/T} t / (e^t - 1) dt + 1/4 ]``.
``"high-temperature"``
    Its limit for ``T >> Theta``: ``<u_x^2> = 3 hbar^2 T / (m k_B Theta^2)``.

Debye temperatures default to the bulk values in :data:`DEBYE_TEMPERATURES` (Kittel's table,
recalled from memory, see the note there); any element or any single atom can be given its own
value, e.g. a lower Debye temperature for the more loosely bound surface atoms.

References
----------
.. [1] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction*,
   Springer (1986): Debye-Waller factor in LEED, high-temperature Debye model.
.. [2] C. Kittel, *Introduction to Solid State Physics*, Wiley: Debye temperatures of the
   elements (table in the chapter on phonons and thermal properties).
.. [3] B. T. M. Willis and A. W. Pryor, *Thermal Vibrations in Crystallography*, Cambridge
   University Press (1975): mean square displacement in the Debye model.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
from scipy import constants
from scipy.special import spence

from surfgeo.checks import positive_number
from surfgeo.errors import InputError

#: Debye temperatures (K) of the elements by atomic number.
#: From memory: C. Kittel, *Introduction to Solid State Physics*, table of Debye temperatures
#: (low-temperature values); recalled, not read from the book in hand, so treat the last digit
#: with care. sources.md lists Cu 343, Ag 225, Au 165, Pt 240, Pd 274, Ni 450, Al 428, W 400,
#: Fe 470 from the same table.
DEBYE_TEMPERATURES: Mapping[int, float] = {
    3: 344.0,    # Li
    4: 1440.0,   # Be
    6: 2230.0,   # C (diamond)
    10: 75.0,    # Ne
    11: 158.0,   # Na
    12: 400.0,   # Mg
    13: 428.0,   # Al
    14: 645.0,   # Si
    18: 92.0,    # Ar
    19: 91.0,    # K
    20: 230.0,   # Ca
    21: 360.0,   # Sc
    22: 420.0,   # Ti
    23: 380.0,   # V
    24: 630.0,   # Cr
    25: 410.0,   # Mn
    26: 470.0,   # Fe
    27: 445.0,   # Co
    28: 450.0,   # Ni
    29: 343.0,   # Cu
    30: 327.0,   # Zn
    31: 320.0,   # Ga
    32: 374.0,   # Ge
    33: 282.0,   # As
    36: 72.0,    # Kr
    37: 56.0,    # Rb
    38: 147.0,   # Sr
    39: 280.0,   # Y
    40: 291.0,   # Zr
    41: 275.0,   # Nb
    42: 450.0,   # Mo
    44: 600.0,   # Ru
    45: 480.0,   # Rh
    46: 274.0,   # Pd
    47: 225.0,   # Ag
    48: 209.0,   # Cd
    49: 108.0,   # In
    50: 200.0,   # Sn (grey)
    51: 211.0,   # Sb
    54: 64.0,    # Xe
    55: 38.0,    # Cs
    56: 110.0,   # Ba
    57: 142.0,   # La
    72: 252.0,   # Hf
    73: 240.0,   # Ta
    74: 400.0,   # W
    75: 430.0,   # Re
    76: 500.0,   # Os
    77: 420.0,   # Ir
    78: 240.0,   # Pt
    79: 165.0,   # Au
    80: 71.9,    # Hg
    81: 78.5,    # Tl
    82: 105.0,   # Pb
    83: 119.0,   # Bi
}

#: Debye temperature (K) used for elements missing from :data:`DEBYE_TEMPERATURES`
#: (light adsorbates such as H, O, N, S). A model choice, no source: give a value of your own
#: through ``overrides`` when the vibrations of such atoms matter.
DEFAULT_DEBYE_TEMPERATURE = 400.0

#: The forms of the Debye model understood by :func:`mean_square_displacement`.
MODELS: tuple[str, ...] = ("debye", "high-temperature")

# hbar^2 / (amu k_B) in Angstrom^2 K
_HBAR2_OVER_AMU_KB = constants.hbar**2 / (constants.atomic_mass * constants.k) * 1e20


def _symbol_to_number(key) -> int:
    from ase.data import atomic_numbers

    if isinstance(key, str):
        if key not in atomic_numbers:
            raise InputError(f"debye_temperatures has an unknown element {key!r}; use a symbol such as 'Cu'.")
        return atomic_numbers[key]
    try:
        z = int(key)
    except (TypeError, ValueError):
        raise InputError(
            f"debye_temperatures keys must be element symbols or atomic numbers, got {key!r}."
        ) from None
    if not 1 <= z <= 118:
        raise InputError(f"debye_temperatures has atomic number {z}, valid numbers are 1 to 118.")
    return z


def _positive_temperature(name: str, value) -> float:
    return positive_number(value, name, "temperature", "kelvin")


def debye_temperatures_for(numbers, overrides=None) -> np.ndarray:
    """Debye temperature (K) of every atom.

    Parameters
    ----------
    numbers : array_like of int, shape (N,)
        Atomic numbers.
    overrides : None, mapping or array_like, optional
        ``None``: the defaults (:data:`DEBYE_TEMPERATURES`, else
        :data:`DEFAULT_DEBYE_TEMPERATURE`). A mapping from element symbol or atomic number to a
        Debye temperature replaces the default of those elements. An array of shape (N,) gives
        every atom its own value (for instance a lower one for surface atoms).

    Returns
    -------
    ndarray, shape (N,)
        Debye temperatures in kelvin.
    """
    z = np.asarray(numbers, dtype=int).reshape(-1)
    table = dict(DEBYE_TEMPERATURES)
    if overrides is not None and not isinstance(overrides, Mapping):
        arr = np.asarray(overrides, dtype=float).reshape(-1) if np.ndim(overrides) else None
        if arr is None or arr.shape != z.shape:
            raise InputError(
                f"debye_temperatures must be a mapping element -> kelvin or an array of {z.size} "
                "values (one per atom)."
            )
        for v in arr:
            _positive_temperature("every per-atom Debye temperature", v)
        return arr.copy()
    if overrides:
        for key, value in overrides.items():
            table[_symbol_to_number(key)] = _positive_temperature(f"debye_temperatures[{key!r}]", value)
    return np.array([table.get(int(zi), DEFAULT_DEBYE_TEMPERATURE) for zi in z], dtype=float)


def missing_debye_temperatures(numbers, overrides=None) -> list[int]:
    """Atomic numbers that fall back to :data:`DEFAULT_DEBYE_TEMPERATURE`, sorted.

    Callers (the command line) use this to tell the user which elements had no tabulated
    value. Per-atom overrides (an array) leave nothing missing.
    """
    if overrides is not None and not isinstance(overrides, Mapping):
        return []
    given = {_symbol_to_number(k) for k in (overrides or {})}
    present = {int(z) for z in np.asarray(numbers, dtype=int).reshape(-1)}
    return sorted(z for z in present if z not in DEBYE_TEMPERATURES and z not in given)


def _debye_integral(x: np.ndarray) -> np.ndarray:
    """int_0^x t / (e^t - 1) dt for x > 0, in closed form with the dilogarithm.

    Uses int_0^x t/(e^t-1) dt = pi^2/6 + x ln(1 - e^-x) - Li2(e^-x) and
    Li2(z) = scipy.special.spence(1 - z).
    """
    x = np.asarray(x, dtype=float)
    ex = np.exp(-x)
    return math.pi**2 / 6.0 + x * np.log1p(-ex) - spence(1.0 - ex)


def mean_square_displacement(mass, debye_temperature, temperature, model: str = "debye") -> np.ndarray:
    """Mean square vibrational displacement along one direction, ``<u_x^2>`` (Angstrom^2).

    Parameters
    ----------
    mass : array_like
        Atomic mass in atomic mass units (u).
    debye_temperature : array_like
        Debye temperature Theta in kelvin (broadcast against ``mass``).
    temperature : float
        Sample temperature T in kelvin (0 allowed for ``"debye"``: zero-point motion only).
    model : {"debye", "high-temperature"}
        ``"debye"``: ``3 hbar^2/(m k_B Theta) [ (T/Theta)^2 int_0^{Theta/T} t/(e^t-1) dt + 1/4 ]``.
        ``"high-temperature"``: ``3 hbar^2 T / (m k_B Theta^2)``.

    Returns
    -------
    ndarray
        ``<u_x^2>`` in Angstrom^2.

    References
    ----------
    .. [1] B. T. M. Willis and A. W. Pryor, *Thermal Vibrations in Crystallography* (1975).
    .. [2] M. A. Van Hove, W. H. Weinberg and C.-M. Chan, *Low-Energy Electron Diffraction* (1986).
    """
    if model not in MODELS:
        raise InputError(f"vibration model must be one of {', '.join(MODELS)}, got {model!r}.")
    t = positive_number(temperature, "temperature", "temperature", "kelvin", zero_ok=True)
    m = np.asarray(mass, dtype=float)
    theta = np.asarray(debye_temperature, dtype=float)
    if np.any(m <= 0) or np.any(theta <= 0):
        raise InputError("masses and Debye temperatures must be positive.")
    if model == "high-temperature":
        if t == 0:
            raise InputError("the high-temperature Debye model needs a temperature above 0 K.")
        return 3.0 * _HBAR2_OVER_AMU_KB * t / (m * theta**2)
    pre = 3.0 * _HBAR2_OVER_AMU_KB / (m * theta)
    if t == 0:
        return pre * 0.25 * np.ones(np.broadcast(m, theta).shape)
    x = theta / t
    return pre * (_debye_integral(x) / x**2 + 0.25)


def atomic_mean_square_displacements(
    numbers, temperature, debye_temperatures=None, model: str = "debye"
) -> np.ndarray:
    """``<u_x^2>`` (Angstrom^2) of every atom from its element's mass and Debye temperature.

    Masses are ASE's standard atomic weights (``ase.data.atomic_masses``). See
    :func:`debye_temperatures_for` for ``debye_temperatures``.
    """
    from ase.data import atomic_masses

    z = np.asarray(numbers, dtype=int).reshape(-1)
    theta = debye_temperatures_for(z, debye_temperatures)
    return mean_square_displacement(atomic_masses[z], theta, temperature, model)


def debye_waller_exponent(q_squared, msd) -> np.ndarray:
    """The exponent ``M = q^2 <u_x^2> / 2`` of the amplitude factor ``exp(-M)``.

    Parameters
    ----------
    q_squared : array_like
        ``|q|^2`` in 1/Angstrom^2.
    msd : array_like
        ``<u_x^2>`` in Angstrom^2 (broadcast against ``q_squared``).
    """
    return 0.5 * np.asarray(q_squared, dtype=float) * np.asarray(msd, dtype=float)


__all__ = [
    "DEBYE_TEMPERATURES",
    "DEFAULT_DEBYE_TEMPERATURE",
    "MODELS",
    "debye_temperatures_for",
    "missing_debye_temperatures",
    "mean_square_displacement",
    "atomic_mean_square_displacements",
    "debye_waller_exponent",
]
