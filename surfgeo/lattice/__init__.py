"""2D surface lattices, reciprocal lattices, point groups and superstructure notation.

Pure mathematics on numpy arrays and exact fractions; this package knows nothing of atoms.
"""

from surfgeo.lattice.lattice2d import HOLOHEDRY, KINDS, Lattice2D, PointOperation
from surfgeo.lattice.spec import SPEC_HELP, parse_lattice

__all__ = ["HOLOHEDRY", "KINDS", "Lattice2D", "PointOperation", "SPEC_HELP", "parse_lattice"]
