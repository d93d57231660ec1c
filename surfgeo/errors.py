"""The exception hierarchy of surfgeo.

Every error that a user can cause by what they type or the files they pass is an
:class:`InputError` (or a subclass). The command line turns these into one sentence on
stderr and exit status 2. Anything else that escapes is a bug in surfgeo.

::

    SurfgeoError
    +-- InputError (also a ValueError)
    |   +-- LatticeError        bad lattice kind, parameters or spec string
    |   +-- NotationError       bad Wood notation or superstructure matrix
    |   +-- StructureError      impossible crystal, face, slab or model
    |   +-- FileFormatError     a file that cannot be read or does not parse
    |   +-- OutputExistsError   refusing to overwrite without ``force``
    +-- ComputationError        a numerical procedure failed to reach an answer
"""

from __future__ import annotations


class SurfgeoError(Exception):
    """Base class of all errors raised deliberately by surfgeo."""


class InputError(SurfgeoError, ValueError):
    """The user gave something surfgeo cannot use; the message says what would be valid."""


class LatticeError(InputError):
    """Bad 2D lattice: unknown kind, non-positive constants, degenerate vectors."""


class NotationError(InputError):
    """Bad superstructure: malformed Wood notation, singular or malformed matrix."""


class StructureError(InputError):
    """Bad crystal, face, slab or surface model."""


class FileFormatError(InputError):
    """A file that cannot be read, is empty, or does not have the expected layout."""


class OutputExistsError(InputError):
    """An output file exists and overwriting was not requested."""


class ComputationError(SurfgeoError):
    """A numerical procedure (fit, search) did not reach an answer."""


__all__ = [
    "SurfgeoError",
    "InputError",
    "LatticeError",
    "NotationError",
    "StructureError",
    "FileFormatError",
    "OutputExistsError",
    "ComputationError",
]
