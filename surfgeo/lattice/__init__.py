"""2D surface lattices, reciprocal lattices, point groups and superstructure notation.

Pure mathematics on numpy arrays and exact fractions; this package knows nothing of atoms.
"""

from surfgeo.lattice.domains import Domain, distinct_superlattices, stabiliser, symmetry_domains
from surfgeo.lattice.hnf import canonical, equivalent, hermite_normal_form, hermite_normal_forms
from surfgeo.lattice.lattice2d import HOLOHEDRY, KINDS, Lattice2D, PointOperation, gauss_reduce
from surfgeo.lattice.rational import Surd
from surfgeo.lattice.spec import SPEC_HELP, parse_lattice
from surfgeo.lattice.superstructure import SUPERSTRUCTURE_KINDS, Superstructure, basis_note
from surfgeo.lattice.wood import WoodNotation, matrix_to_wood, parse_wood, preferred_wood, wood_to_matrix

__all__ = [
    "HOLOHEDRY",
    "KINDS",
    "Lattice2D",
    "PointOperation",
    "gauss_reduce",
    "SPEC_HELP",
    "parse_lattice",
    # superstructures and notation
    "SUPERSTRUCTURE_KINDS",
    "Superstructure",
    "basis_note",
    "Surd",
    "WoodNotation",
    "parse_wood",
    "wood_to_matrix",
    "matrix_to_wood",
    "preferred_wood",
    "hermite_normal_form",
    "hermite_normal_forms",
    "canonical",
    "equivalent",
    "Domain",
    "symmetry_domains",
    "stabiliser",
    "distinct_superlattices",
]
