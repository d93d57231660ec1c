"""Checks of single input numbers, shared by every layer, with one-sentence messages."""

from __future__ import annotations

import math

from surfgeo.errors import InputError


def positive_number(value, what: str, quantity: str = "length", unit: str = "Angstrom", *,
                    zero_ok: bool = False, inf_ok: bool = False,
                    error: type[InputError] = InputError) -> float:
    """``value`` as a float that is positive (or zero, with ``zero_ok``) and finite.

    Parameters
    ----------
    value
        The number as given (a float, an int, a numeric string ...).
    what : str
        Its name in the message, e.g. ``"the k-point spacing"`` or ``"a"``.
    quantity, unit : str
        What it measures and in which unit, for the message: ``"length"``, ``"Angstrom"``.
    zero_ok : bool
        Accept 0.
    inf_ok : bool
        Accept +infinity (e.g. "no attenuation").
    error : type
        The :class:`~surfgeo.errors.InputError` subclass to raise.

    Raises
    ------
    InputError (or ``error``)
        ``"<what> must be a positive <quantity> in <unit>, got <value>."``, or ``"... must be a
        number in <unit> ..."`` when it is not a number.

    Examples
    --------
    >>> positive_number("2.5", "a")
    2.5
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise error(f"{what} must be a number in {unit}, got {value!r}.") from None
    ok = (v >= 0 if zero_ok else v > 0) and (math.isfinite(v) or (inf_ok and v == math.inf))
    if not ok:
        raise error(f"{what} must be {'zero or ' if zero_ok else ''}a positive {quantity} in {unit}, "
                    f"got {value!r}.")
    return v


__all__ = ["positive_number"]
