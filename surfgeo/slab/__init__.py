"""Slabs: bulk crystals, cuts, steps, relaxations, reconstructions and adsorbates (ASE Atoms)."""

from surfgeo.slab.layers import LAYER_TOL, group_layers, layer_heights

__all__ = ["LAYER_TOL", "group_layers", "layer_heights"]
