"""Surface names -> 2D lattices (surfgeo.slab.names), also through the CLI's lattice option."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ase.data import atomic_numbers, reference_states

from surfgeo.cli._common import resolve_lattice
from surfgeo.errors import LatticeError
from surfgeo.slab.names import parse_surface_name, surface_lattice


def _a(sym):
    # Source: ASE reference data (ase.data.reference_states)
    return reference_states[atomic_numbers[sym]]["a"]


def test_low_index_names():
    # Common practice, no source: fcc(111) hexagonal a/sqrt2; fcc(110) rectangular a/sqrt2 x a;
    # fcc(100) square a/sqrt2; hcp(0001) hexagonal a; bcc(110) centred rectangular (rhombic,
    # 109.47 degrees, side a sqrt3/2)
    pt = surface_lattice("Pt(111)")
    assert pt.kind() == "hexagonal" and pt.lengths[0] == pytest.approx(_a("Pt") / math.sqrt(2))
    assert pt.gamma == pytest.approx(120.0)
    assert np.allclose(pt.a1, [pt.lengths[0], 0.0])
    cu = surface_lattice("Cu(110)")
    assert cu.kind() == "rectangular" and cu.lengths == pytest.approx((_a("Cu") / math.sqrt(2), _a("Cu")))
    assert surface_lattice("Cu(100)").kind() == "square"
    ru = surface_lattice("Ru(0001)")
    assert ru.kind() == "hexagonal" and ru.lengths[0] == pytest.approx(_a("Ru"))
    fe = surface_lattice("Fe(110)")
    assert fe.kind() == "centred-rectangular"
    assert fe.gamma == pytest.approx(math.degrees(math.acos(-1 / 3)))
    assert fe.lengths[0] == pytest.approx(_a("Fe") * math.sqrt(3) / 2)
    assert pt.label == "Pt(111)"


def test_stepped_name_area():
    # Source: sources.md: primitive surface cell area = V_prim / d, d = a/sqrt(43) for fcc(533)
    a = _a("Pt")
    lat = surface_lattice("Pt(533)")
    assert lat.area == pytest.approx((a**3 / 4) / (a / math.sqrt(43)))


def test_overrides():
    assert surface_lattice("Pt(111):4.0").lengths[0] == pytest.approx(4.0 / math.sqrt(2))
    assert surface_lattice("Pt(111)", a=4.0).lengths[0] == pytest.approx(4.0 / math.sqrt(2))
    ru = surface_lattice("Ru(10-10):a=2.7,c=4.3")
    assert sorted(ru.lengths) == pytest.approx([2.7, 4.3])
    assert surface_lattice("Fe(100):structure=fcc,a=3.6").lengths[0] == pytest.approx(3.6 / math.sqrt(2))
    assert parse_surface_name("Cu(10 8 7)")["miller"] == (10, 8, 7)
    assert parse_surface_name(" Pt ( 1, 1, 1 ) ")["miller"] == (1, 1, 1)


def test_cli_resolves_surface_names():
    lat = resolve_lattice("Pt(111)")
    assert lat.kind() == "hexagonal"
    assert resolve_lattice("hex:2.77").lengths[0] == pytest.approx(2.77)


@pytest.mark.parametrize(
    "name,match",
    [
        ("Pt111", "cannot read the surface name"),
        ("Pt(11)", "needs 3 Miller indices"),
        ("Pt(1--11)", "bad Miller indices"),
        ("Xx(111)", "unknown chemical element"),
        ("Pt(000)", r"\(0 0 0\)"),
        ("Ru(1010)", r"i = -\(h \+ k\)"),
        ("Pt(111):b=3", "unknown option"),
        ("Pt(111):a=x", "length in Angstrom"),
        ("Ga(111)", "orthorhombic"),
    ],
)
def test_bad_names(name, match):
    with pytest.raises(LatticeError, match=match):
        surface_lattice(name)
