"""Screen and detector models: radial laws, exact inverse, visibility, parameters, spec strings."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from surfgeo.diffraction.electron import wavenumber
from surfgeo.errors import InputError
from surfgeo.screen import (
    CameraScreen,
    FarScreen,
    FlatDetector,
    default_screen,
    parse_screen,
    screen_from_dict,
)


def _radius(screen, kp, energy):
    px = screen.to_pixels(kp, energy)
    return np.hypot(px[:, 0] - screen.centre_x, px[:, 1] - screen.centre_y)


def test_far_screen_sin_law():
    # Common practice, no source: seen from far along the axis (orthographic projection), the point at
    # polar angle theta on a sphere of radius R lies R sin(theta) from the axis
    s = FarScreen(centre_x=100.0, centre_y=80.0, scale=250.0)
    k = wavenumber(120.0)
    theta = np.radians(np.linspace(0, 60, 13))
    kp = np.stack([k * np.sin(theta), np.zeros_like(theta)], axis=1)
    assert np.allclose(_radius(s, kp, 120.0), 250.0 * np.sin(theta), atol=1e-9)


def test_flat_detector_tan_law():
    # Common practice, no source: a ray at theta from the normal of a plane at distance L meets it
    # L tan(theta) from the foot of the normal
    s = FlatDetector(centre_x=0.0, centre_y=0.0, scale=900.0, acceptance_deg=60)
    k = wavenumber(75.0)
    theta = np.radians(np.linspace(0, 60, 13))
    kp = np.stack([np.zeros_like(theta), k * np.sin(theta)], axis=1)
    assert np.allclose(_radius(s, kp, 75.0), 900.0 * np.tan(theta), atol=1e-9)


def test_camera_screen_pinhole_projection():
    # Common practice, no source: pinhole on the axis at distance D R from the sample sees the screen
    # point (R sin t, R cos t) at tan(alpha) = sin t / (D - cos t); image radius = f tan(alpha)
    for D in (2.5, 6.0, -3.0):
        s = CameraScreen(centre_x=0.0, centre_y=0.0, scale=400.0, camera_distance=D, acceptance_deg=50)
        theta = np.radians(np.linspace(0, 50, 11))
        k = wavenumber(200.0)
        kp = np.stack([k * np.sin(theta), np.zeros_like(theta)], axis=1)
        f = 400.0 * (D - 1.0)  # focal length in pixels giving slope 1 at the centre
        ref = np.abs(f * np.sin(theta) / (D - np.cos(theta)))
        assert np.allclose(_radius(s, kp, 200.0), ref, atol=1e-9)
    # far away the camera sees the sin law
    far = CameraScreen(scale=300.0, camera_distance=1e7)
    kp = np.array([[1.0, 2.0], [-0.5, 0.3]])
    assert np.allclose(far.to_pixels(kp, 90.0), FarScreen(scale=300.0).to_pixels(kp, 90.0), atol=1e-4)


@pytest.mark.parametrize("incidence", [(0.0, 0.0), (18.0, 35.0), (40.0, 250.0)])
def test_three_models_against_ray_geometry(incidence):
    """Full image positions (any azimuth, oblique incidence) from an independent 3D construction."""
    from scipy.spatial.transform import Rotation

    energy = 110.0
    k = wavenumber(energy)
    rng = np.random.default_rng(4)
    kp = rng.uniform(-0.9, 0.9, size=(300, 2)) * k
    kin = k * math.sin(math.radians(incidence[0])) * np.array(
        [math.cos(math.radians(incidence[1])), math.sin(math.radians(incidence[1]))])
    kp = kp + kin
    kp = kp[np.hypot(kp[:, 0], kp[:, 1]) < 0.95 * k]
    # exit directions in the sample frame (+z out of the surface): parallel momentum conserved
    d = np.column_stack([kp / k, np.sqrt(1.0 - np.sum((kp / k) ** 2, axis=1))])
    # Source: scipy.spatial.transform.Rotation; the gun axis (-sin t u, cos t) is turned onto +z by the
    # rotation through t about z x u (u the incidence azimuth), the frame of surfgeo.diffraction.electron
    t = math.radians(incidence[0])
    u = np.array([math.cos(math.radians(incidence[1])), math.sin(math.radians(incidence[1])), 0.0])
    lab = Rotation.from_rotvec(t * np.cross([0.0, 0.0, 1.0], u)).apply(d)
    assert np.allclose(Rotation.from_rotvec(t * np.cross([0.0, 0.0, 1.0], u)).apply(
        [-math.sin(t) * u[0], -math.sin(t) * u[1], math.cos(t)]), [0.0, 0.0, 1.0])
    front = lab[:, 2] > math.cos(math.radians(60.0))
    lab, kp = lab[front], kp[front]
    assert len(kp) > 50
    cx, cy, scale = 301.0, 222.0, 350.0
    # Common practice, no source: a hemisphere of radius R seen from far along its axis shows the ray's
    # hit point R d at (R d_x, R d_y); a plane at distance L is hit at L d / d_z; a pinhole on the axis
    # at D R sees R d at f (d_x, d_y) / (D - d_z). Image x right, y down (design.md).
    D = 3.5
    models = [
        (FarScreen(centre_x=cx, centre_y=cy, scale=scale, acceptance_deg=60), lab[:, :2]),
        (FlatDetector(centre_x=cx, centre_y=cy, scale=scale, acceptance_deg=60), lab[:, :2] / lab[:, 2:]),
        (CameraScreen(centre_x=cx, centre_y=cy, scale=scale, camera_distance=D, acceptance_deg=60),
         (D - 1.0) * lab[:, :2] / (D - lab[:, 2:])),
    ]
    for screen, w in models:
        ref = np.column_stack([cx + scale * w[:, 0], cy - scale * w[:, 1]])
        assert np.allclose(screen.to_pixels(kp, energy, incidence), ref, atol=1e-9), screen.kind


def _screens():
    common = dict(centre_x=311.3, centre_y=207.9, rotation_deg=23.0, stretch=0.07, stretch_deg=-40.0)
    return [
        FarScreen(scale=280.0, mirror=True, **common),
        FlatDetector(scale=510.0, acceptance_deg=70, **common),
        CameraScreen(scale=330.0, camera_distance=3.2, acceptance_deg=60, **common),
        CameraScreen(scale=330.0, camera_distance=-2.5, mirror=True, acceptance_deg=60, **common),
    ]


@pytest.mark.parametrize("screen", _screens(), ids=lambda s: s.kind + ("-m" if s.mirror else ""))
@pytest.mark.parametrize("incidence", [(0.0, 0.0), (14.0, 33.0)])
def test_round_trip_to_1e_9_pixels(screen, incidence):
    # Common practice, no source: to_k_parallel inverts to_pixels (the 1e-9 px asked for in issue 5)
    rng = np.random.default_rng(3)
    energy = 140.0
    px = np.stack([rng.uniform(0, 620, 4000), rng.uniform(0, 420, 4000)], axis=1)
    kp = screen.to_k_parallel(px, energy, incidence)
    back = screen.to_pixels(kp, energy, incidence)
    ok = np.isfinite(kp[:, 0])
    assert ok.sum() > 2000
    assert np.max(np.abs(back[ok] - px[ok])) < 1e-9
    # and the other way round for beams within the range of the law
    kp0 = rng.uniform(-3, 3, size=(4000, 2))
    p0 = screen.to_pixels(kp0, energy, incidence)
    fin = np.isfinite(p0[:, 0])
    assert fin.sum() > 1000
    assert np.max(np.abs(screen.to_pixels(screen.to_k_parallel(p0[fin], energy, incidence), energy, incidence)
                         - p0[fin])) < 1e-9


@settings(max_examples=60, deadline=None)
@given(
    st.floats(-500, 500), st.floats(-500, 500), st.floats(50, 2000), st.floats(-180, 180),
    st.floats(-0.3, 0.3), st.floats(-90, 90), st.booleans(), st.sampled_from(["sphere", "flat", "camera"]),
)
def test_round_trip_property(cx, cy, scale, rot, stretch, sdeg, mirror, model):
    # Common practice, no source: to_k_parallel inverts to_pixels (the 1e-9 px asked for in issue 5),
    # as a property over the parameters
    cls = {"sphere": FarScreen, "flat": FlatDetector, "camera": CameraScreen}[model]
    s = cls(centre_x=cx, centre_y=cy, scale=scale, rotation_deg=rot, stretch=stretch, stretch_deg=sdeg,
            mirror=mirror, acceptance_deg=45)
    k = wavenumber(60.0)
    ang = np.radians(np.linspace(0, 45, 10))
    kp = k * np.stack([np.sin(ang) * np.cos(3 * ang), np.sin(ang) * np.sin(3 * ang)], axis=1)
    px = s.to_pixels(kp, 60.0)
    assert np.max(np.abs(s.to_pixels(s.to_k_parallel(px, 60.0), 60.0) - px)) < 1e-9 * max(1.0, scale / 500)


def test_orientation_x_right_y_down():
    # Common practice, no source (design.md image convention): +kx to the right, +ky up, so y decreases
    s = FarScreen(centre_x=50.0, centre_y=50.0, scale=100.0)
    px = s.to_pixels(np.array([[1.0, 0.0], [0.0, 1.0]]), 100.0)
    assert px[0, 0] > 50 and px[0, 1] == pytest.approx(50.0)
    assert px[1, 1] < 50 and px[1, 0] == pytest.approx(50.0)
    m = s.with_params(mirror=True)
    assert m.to_pixels(np.array([[1.0, 0.0]]), 100.0)[0, 0] < 50
    r = s.with_params(rotation_deg=90.0)
    r0 = _radius(s, np.array([[1.0, 0]]), 100.0)[0]
    assert r.to_pixels(np.array([[1.0, 0.0]]), 100.0)[0] == pytest.approx([50.0, 50.0 - r0])


def test_visibility_acceptance_and_shadows():
    s = FarScreen(centre_x=0.0, centre_y=0.0, scale=100.0, acceptance_deg=40.0, shadow_radius=10.0,
                  holder_deg=270.0)
    k = wavenumber(100.0)

    def kp(theta_deg, phi_deg):
        t, p = math.radians(theta_deg), math.radians(phi_deg)
        return np.array([[k * math.sin(t) * math.cos(p), k * math.sin(t) * math.sin(p)]])

    assert s.visible(kp(30, 0), 100.0)[0]
    assert not s.visible(kp(45, 0), 100.0)[0]  # outside the acceptance
    assert not s.visible(kp(2, 0), 100.0)[0]  # behind the gun (100 sin 2 deg = 3.5 px < 10 px)
    assert not s.visible(kp(30, 270), 100.0)[0]  # down the holder (y down in the image)
    assert s.visible(kp(30, 90), 100.0)[0]
    assert not s.visible(np.array([[50.0, 0.0]]), 100.0)[0]  # evanescent


def test_params_vector_and_json_round_trip(tmp_path):
    for s in _screens():
        v = s.params()
        assert len(v) == len(s.param_names)
        s2 = s.with_params(v + 1.0)
        assert np.allclose(s2.params(), v + 1.0)
        assert s2.mirror == s.mirror and s2.acceptance_deg == s.acceptance_deg
        d = json.loads(json.dumps(s.to_dict()))
        assert screen_from_dict(d) == s
    assert "camera_distance" in CameraScreen.param_names
    with pytest.raises(InputError, match="expected 6 screen parameters"):
        FarScreen().with_params([1.0, 2.0])


@pytest.mark.parametrize(
    "spec, match",
    [
        ("dome", "unknown screen model"),
        ("sphere:scale=abc", "must be a number"),
        ("sphere:zoom=3", "unknown screen setting"),
        ("sphere:size=0", "positive"),
        ("flat:dist=3", "camera model only"),
        ("camera:dist=0.5", "camera_distance"),
        ("sphere:scale=-4", "scale must be positive"),
        ("sphere:accept=95", "acceptance"),
        ("sphere:accept=0", "acceptance half-angle"),  # was a ZeroDivisionError
        ("sphere:accept=-5", "acceptance half-angle"),  # was blamed on the scale
        ("camera:dist=3,accept=80", "70.5288"),
        ("sphere:stretch", "KEY=VALUE"),
        ("missing.json", "does not exist"),
    ],
)
def test_bad_screen_specs(spec, match):
    with pytest.raises(InputError, match=match):
        parse_screen(spec)


def test_screen_spec_strings(tmp_path):
    s = parse_screen("camera:dist=3,size=1024x768,mirror,rot=5,accept=50,shadow=12,holder=300")
    assert isinstance(s, CameraScreen)
    assert (s.width, s.height, s.camera_distance, s.mirror) == (1024, 768, 3.0, True)
    assert (s.centre_x, s.centre_y) == (511.5, 383.5)
    assert parse_screen(None) == default_screen()
    assert parse_screen("flat", acceptance_deg=30).acceptance_deg == 30
    path = tmp_path / "cal.json"
    path.write_text(json.dumps({"screen": s.to_dict()}))
    assert parse_screen(str(path)) == s
    (tmp_path / "bad.json").write_text("{not json")
    with pytest.raises(InputError, match="not readable JSON"):
        parse_screen(str(tmp_path / "bad.json"))
    (tmp_path / "odd.json").write_text(json.dumps({"model": "flat", "zoom": 2}))
    with pytest.raises(InputError, match="unknown screen field"):
        parse_screen(str(tmp_path / "odd.json"))


def _surfgeo_imports(path):
    """Every ``surfgeo...`` module a source file imports (top level and inside functions)."""
    import ast

    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("surfgeo"):
            out.add(node.module)
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name.startswith("surfgeo"))
    return out


def test_screen_and_diffraction_imports_have_no_cycle():
    # Common practice, no source (DEVELOPERS.md layers): screen may use diffraction.electron, a module of
    # the same layer, but nothing in diffraction may import screen, so there is no cycle
    from pathlib import Path

    import surfgeo

    root = Path(surfgeo.__file__).parent
    for path in sorted((root / "diffraction").glob("*.py")):
        assert not any(m.startswith("surfgeo.screen") for m in _surfgeo_imports(path)), path.name
    used = set().union(*(_surfgeo_imports(p) for p in (root / "screen").glob("*.py")))
    assert {m for m in used if m.startswith("surfgeo.diffraction")} == {"surfgeo.diffraction.electron"}
    # electron.py itself needs nothing of surfgeo but the errors
    assert _surfgeo_imports(root / "diffraction" / "electron.py") <= {"surfgeo.errors"}
