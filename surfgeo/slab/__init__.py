"""Slabs: bulk crystals, cuts, steps, relaxations, reconstructions and adsorbates (ASE Atoms).

Main entry points (plain functions returning :class:`ase.Atoms`, in the style of ASE's
builders): :func:`bulk_crystal`, :func:`surface_slab`, :func:`stepped_slab`,
:func:`relax_layers`; and for reading slabs: :func:`surface_info`, :func:`slab_summary`,
:func:`plane_group`, :func:`surface_lattice` (surface names such as ``Pt(111)``).
Heavy submodules are imported on first use.
"""

from surfgeo.slab.layers import LAYER_TOL, group_layers, layer_heights, slab_layers

_LAZY = {
    "bulk_crystal": "surfgeo.slab.bulk",
    "read_bulk": "surfgeo.slab.bulk",
    "surface_slab": "surfgeo.slab.cut",
    "face_geometry": "surfgeo.slab.cut",
    "terminations": "surfgeo.slab.cut",
    "stepped_slab": "surfgeo.slab.steps",
    "step_notation": "surfgeo.slab.steps",
    "miller_from_notation": "surfgeo.slab.steps",
    "relax_layers": "surfgeo.slab.relax",
    "surface_info": "surfgeo.slab.info",
    "set_surface_info": "surfgeo.slab.info",
    "update_surface_info": "surfgeo.slab.info",
    "SurfaceInfo": "surfgeo.slab.info",
    "slab_summary": "surfgeo.slab.summary",
    "plane_group": "surfgeo.slab.symmetry",
    "layer_symmetry": "surfgeo.slab.symmetry",
    "surface_lattice": "surfgeo.slab.names",
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'surfgeo.slab' has no attribute {name!r}")


__all__ = ["LAYER_TOL", "group_layers", "layer_heights", "slab_layers", *_LAZY]
