"""surfgeo: surface crystallography and low-energy electron diffraction (LEED).

Layers (dependencies point downwards only)::

    cli / workflows     commands, reports, the demo
    measure             images -> spots -> calibration -> matching and indexing
    diffraction, screen beams and kinematic intensities; detector geometry
    slab                bulk, cuts, steps, relaxations, reconstructions, adsorbates
    lattice             2D surface lattices and superstructure notation

Units at every interface: Angstrom, eV, degrees.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("surfgeo")
except PackageNotFoundError:  # running from a source tree that was not installed
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
