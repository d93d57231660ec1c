"""Screen spec strings for the command line, e.g. ``sphere``, ``camera:dist=3,size=1024``,
``flat:scale=800,cx=512,cy=400,mirror`` or a saved calibration ``screen.json``."""

from __future__ import annotations

import json
import math
from pathlib import Path

from surfgeo.errors import FileFormatError, InputError
from surfgeo.screen.geometry import (
    DEFAULT_ACCEPTANCE,
    DEFAULT_SIZE,
    MODELS,
    ScreenGeometry,
    default_screen,
    screen_from_dict,
)

#: Short keys of the spec string and the screen fields they set.
SPEC_KEYS: dict[str, str] = {
    "cx": "centre_x",
    "cy": "centre_y",
    "scale": "scale",
    "rot": "rotation_deg",
    "stretch": "stretch",
    "stretch_deg": "stretch_deg",
    "accept": "acceptance_deg",
    "shadow": "shadow_radius",
    "holder": "holder_deg",
    "dist": "camera_distance",
}

SCREEN_HELP = (
    "screen or detector model: sphere (hemispherical screen seen from afar, r ~ sin theta; the "
    "default), camera (the same screen photographed from dist screen radii, perspective) or flat "
    "(flat detector, r ~ tan theta), optionally followed by ':' and comma-separated settings "
    "size=W[xH] (pixels), cx=, cy= (centre, px), scale= (px per radian), rot= (deg), stretch=, "
    "stretch_deg= (ellipticity), mirror, accept= (acceptance half-angle, deg), shadow= (gun "
    "shadow radius, px), holder= (holder direction, deg), dist= (camera only); or a saved "
    "calibration FILE.json"
)


def _number(spec: str, key: str, text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise InputError(f"screen setting {key}={text!r} in {spec!r} must be a number.") from None
    if not math.isfinite(v):
        raise InputError(f"screen setting {key}={text!r} in {spec!r} must be a finite number.")
    return v


def parse_screen(spec: str | None, acceptance_deg: float | None = None) -> ScreenGeometry:
    """Build a screen from a spec string (see :data:`SCREEN_HELP`) or a calibration JSON file.

    Parameters
    ----------
    spec : str or None
        The spec; None gives the default hemispherical screen.
    acceptance_deg : float, optional
        Acceptance half-angle overriding the spec's (the command's ``--theta-max``).

    Examples
    --------
    >>> parse_screen("flat:size=800x600,scale=900").width
    800
    """
    spec = (spec or "sphere").strip()
    if spec.lower().endswith(".json"):
        path = Path(spec)
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise FileFormatError(f"screen file {spec} does not exist.") from None
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise FileFormatError(f"screen file {spec} is not readable JSON ({exc}).") from None
        if isinstance(data, dict) and "screen" in data and isinstance(data["screen"], dict):
            data = data["screen"]
        try:
            screen = screen_from_dict(data)
        except TypeError as exc:
            raise FileFormatError(f"screen file {spec} does not describe a screen ({exc}).") from None
        if acceptance_deg is not None:
            screen = screen.with_params(acceptance_deg=float(acceptance_deg))
        return screen

    model, _, rest = spec.partition(":")
    model = model.strip().lower()
    if model not in MODELS:
        raise InputError(
            f"unknown screen model {model!r} in {spec!r}; use {', '.join(MODELS)} or a FILE.json."
        )
    fields: dict = {}
    size = (DEFAULT_SIZE, DEFAULT_SIZE)
    for item in (p.strip() for p in rest.split(",") if p.strip()):
        key, eq, value = item.partition("=")
        key = key.strip().lower()
        if key == "mirror" and not eq:
            fields["mirror"] = True
            continue
        if not eq:
            raise InputError(f"screen setting {item!r} in {spec!r} must look like KEY=VALUE.")
        value = value.strip()
        if key == "mirror":
            if value.lower() not in ("yes", "no", "true", "false", "1", "0"):
                raise InputError(f"screen setting mirror={value!r} in {spec!r} must be yes or no.")
            fields["mirror"] = value.lower() in ("yes", "true", "1")
        elif key == "size":
            w, _, h = value.lower().partition("x")
            try:
                size = (int(w), int(h or w))
            except ValueError:
                raise InputError(
                    f"screen setting size={value!r} in {spec!r} must be W or WxH in pixels."
                ) from None
            if min(size) <= 0:
                raise InputError(f"screen setting size={value!r} in {spec!r} must be positive.")
        elif key in SPEC_KEYS:
            if key == "dist" and model != "camera":
                raise InputError(f"screen setting dist= in {spec!r} applies to the camera model only.")
            fields[SPEC_KEYS[key]] = _number(spec, key, value)
        else:
            raise InputError(
                f"unknown screen setting {key!r} in {spec!r}; use size, cx, cy, scale, rot, stretch, "
                "stretch_deg, mirror, accept, shadow, holder or dist."
            )
    accept = (
        acceptance_deg if acceptance_deg is not None else fields.pop("acceptance_deg", DEFAULT_ACCEPTANCE)
    )
    fields.pop("acceptance_deg", None)
    base = default_screen(
        float(accept),
        model,
        size=max(size),
        **{k: v for k, v in fields.items() if k == "camera_distance"},
    )
    centre = {
        "centre_x": (size[0] - 1) / 2.0,
        "centre_y": (size[1] - 1) / 2.0,
        "scale": base.scale * min(size) / max(size),
    }
    centre.update(fields)
    return base.with_params(width=size[0], height=size[1], **centre)
