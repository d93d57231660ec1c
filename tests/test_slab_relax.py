"""Layer relaxations (surfgeo.slab.relax)."""

from __future__ import annotations

import numpy as np
import pytest
from ase import Atoms
from ase.build import fcc111

from surfgeo.errors import StructureError
from surfgeo.slab.cut import surface_slab
from surfgeo.slab.layers import slab_layers
from surfgeo.slab.relax import parse_relaxation, relax_layers


def _heights(atoms):
    return np.array([atoms.positions[idx, 2].mean() for idx in slab_layers(atoms)])


def test_percent_changes_top():
    slab = surface_slab("Cu", (1, 1, 0), layers=8, size=(2, 2))
    d0 = slab.info["surfgeo"]["layer_spacing"]
    h0 = _heights(slab)
    r = relax_layers(slab, "d12=-10%,d23=+3.5%")
    h = _heights(r)
    top = np.diff(h)[::-1]
    # Common practice, no source: Delta d_ij in % of the bulk spacing
    assert top[0] == pytest.approx(0.90 * d0)
    assert top[1] == pytest.approx(1.035 * d0)
    assert np.allclose(top[2:], d0)
    assert np.allclose(h[:-3], h0[:-3])  # deep layers unmoved
    assert np.allclose(slab.positions, surface_slab("Cu", (1, 1, 0), layers=8, size=(2, 2)).positions)
    rec = r.info["surfgeo"]["relaxations"][-1]
    assert rec["side"] == "top"
    assert rec["changes"]["d12"] == {"value": -10.0, "unit": "%", "angstrom": pytest.approx(-0.1 * d0)}
    assert "relax_layers" in r.info["surfgeo"]["provenance"][-1]


def test_angstrom_lateral_bottom_and_both():
    slab = surface_slab("Pt", (1, 0, 0), layers=7)
    d0 = slab.info["surfgeo"]["layer_spacing"]
    r = relax_layers(slab, {"d12": -0.05, "d23": "0.02A", "x1": 0.1, "y2": -0.2})
    sp = np.diff(_heights(r))[::-1]
    assert sp[0] == pytest.approx(d0 - 0.05) and sp[1] == pytest.approx(d0 + 0.02)
    layers = slab_layers(r)
    assert np.allclose(r.positions[layers[-1], :2] - slab.positions[layers[-1], :2], [0.1, 0.0])
    assert np.allclose(r.positions[layers[-2], :2] - slab.positions[layers[-2], :2], [0.0, -0.2])
    b = relax_layers(slab, "d12=-5%", side="bottom")
    sp = np.diff(_heights(b))
    assert sp[0] == pytest.approx(0.95 * d0) and np.allclose(sp[1:], d0)
    both = relax_layers(slab, "d12=-5%,d23=2%", side="both")
    sp = np.diff(_heights(both))
    assert np.allclose(sp, sp[::-1])  # the same on both surfaces
    assert sp[0] == pytest.approx(0.95 * d0) and sp[1] == pytest.approx(1.02 * d0)


def test_percentages_refer_to_the_ideal_slab_not_the_relaxed_one():
    slab = surface_slab("Cu", (1, 1, 1), layers=6)
    d0 = slab.info["surfgeo"]["layer_spacing"]
    twice = relax_layers(relax_layers(slab, "d12=-2%"), "d12=-2%")
    assert np.diff(_heights(twice))[-1] == pytest.approx(0.96 * d0)
    assert len(twice.info["surfgeo"]["relaxations"]) == 2


def test_foreign_slab_uses_measured_spacing_and_adsorbates_follow():
    slab = fcc111("Cu", (1, 1, 4), vacuum=6.0)
    r = relax_layers(slab, "d12=-10%")
    assert r.info["surfgeo"]["relaxations"][0]["reference"].startswith("spacing measured")
    own = surface_slab("Cu", (1, 1, 1), layers=4)
    own += Atoms("O", positions=[own.positions[-1] + [0, 0, 1.8]])  # tag 0: adsorbate
    r = relax_layers(own, "d12=-0.1")
    assert r.positions[-1, 2] - own.positions[-1, 2] == pytest.approx(-0.1)


@pytest.mark.parametrize(
    "spec,side,match",
    [
        ("d12=-100%", "top", "cross or touch"),
        ("d12=-3.0", "top", "cross or touch"),
        ("d56=1%", "top", "only 4 layers"),
        ("d13=1%", "top", "neighbouring layers"),
        ("z1=0.1", "top", "unknown relaxation key"),
        ("d12", "top", "cannot read"),
        ("d12=abc", "top", "percentage"),
        ("x1=5%", "top", "not a percentage"),
        ("d12=1%,d12=2%", "top", "twice"),
        ("d12=1%,d23=1%", "both", "needs at least 6 layers"),
        ("d12=1%", "middle", "side must be"),
        ("", "top", "empty"),
    ],
)
def test_impossible_relaxations(spec, side, match):
    slab = surface_slab("Cu", (1, 0, 0), layers=4)
    with pytest.raises(StructureError, match=match):
        relax_layers(slab, spec, side=side)


def test_parse_relaxation_keys():
    assert parse_relaxation("d910=1%") == {"d9,10": (1.0, "%")}
    assert parse_relaxation({"D12": "-2.5 %"}) == {"d12": (-2.5, "%")}
