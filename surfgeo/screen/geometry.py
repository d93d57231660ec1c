"""Screen and detector geometry: where a diffracted beam lands in an image, and back.

Three models share one set of explicit parameters and differ only in the radial law, i.e.
how the angle ``theta`` between a beam and the screen axis (the gun axis) becomes a distance
``r`` from the pattern centre in the image:

=====================  =====================================  ==============================
class                  radial law ``r / scale``               what it describes
=====================  =====================================  ==============================
:class:`FarScreen`     ``sin(theta)``                         hemispherical screen, sample at
                                                              its centre, viewed from far
                                                              along its axis (the default)
:class:`CameraScreen`  ``(D - 1) sin(theta) / (D - cos(theta))``  the same screen photographed
                                                              by a camera on the axis at a
                                                              distance ``D`` screen radii from
                                                              the sample (``D > 1`` behind the
                                                              screen, ``D < -1`` in front of
                                                              the sample)
:class:`FlatDetector`  ``tan(theta)``                         flat detector normal to the
                                                              axis (``scale`` = distance in
                                                              pixels)
=====================  =====================================  ==============================

All three laws have slope 1 at ``theta = 0``, so ``scale`` is the number of pixels per radian
near the centre in every model, and ``CameraScreen`` tends to ``FarScreen`` as ``D -> inf``.

The frame
---------
A beam's direction is first taken into the *gun frame* (see
:mod:`surfgeo.diffraction.electron`: +z along the gun/screen axis; at normal incidence the
sample frame itself). With ``theta`` its angle from +z and ``psi`` its azimuth, the
normalised screen point is ``w = rho(theta) (cos psi, sin psi)``, oriented as the sample
surface is seen from the vacuum (from the screen): +x to the right and +y up. Then, in this
order: optional mirror (``x -> -x``), rotation by ``rotation_deg`` (counterclockwise as seen
in the image), stretch by ``1 + stretch`` along the direction ``stretch_deg`` (ellipticity),
and finally the image position (``w'`` the distorted point)

``x = centre_x + scale * w'_x``,  ``y = centre_y - scale * w'_y``

in pixels, x to the right and y *downwards*, the centre of the top-left pixel at (0, 0).

Visibility: a beam is on the screen when ``theta <= acceptance_deg`` and it falls neither in
the gun shadow (a disc of ``shadow_radius`` pixels around the centre) nor, when
``holder_deg`` is given, in the holder's shadow (a band of the same half-width from the centre
to the edge of the image along the direction ``holder_deg``, counterclockwise from +x as seen
in the image).

Parameters for fitting
----------------------
``params()`` returns the continuous geometric parameters as one float vector, named by
``param_names``; ``with_params(vector)`` returns a copy with new values. ``mirror``, the
acceptance and the shadows are settings, not fit parameters. ``to_dict()`` /
:func:`screen_from_dict` save and restore a calibration as JSON.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from surfgeo.diffraction.electron import exit_directions, from_gun_frame, to_gun_frame, wavenumber
from surfgeo.errors import InputError

#: Default image size (pixels) of a screen that was not calibrated.
DEFAULT_SIZE = 512
#: Default acceptance half-angle (degrees) of a screen.
DEFAULT_ACCEPTANCE = 55.0


@dataclass(frozen=True)
class ScreenGeometry:
    """Base class of the screen models; see the module docstring for the frame.

    Attributes
    ----------
    centre_x, centre_y : float
        Image position (pixels) of the screen axis (the beam direction towards the gun).
    scale : float
        Pixels per radian near the centre (positive).
    rotation_deg : float
        In-plane rotation of the pattern, degrees counterclockwise as seen in the image.
    stretch : float
        Relative elongation along ``stretch_deg`` (0 = round; must exceed -1).
    stretch_deg : float
        Direction of the elongation, degrees from +x counterclockwise (before the y flip).
    mirror : bool
        Mirror the pattern (x -> -x before the rotation), e.g. for a camera looking at the
        screen from the other side.
    acceptance_deg : float
        Acceptance half-angle around the axis, degrees.
    shadow_radius : float
        Radius of the gun shadow around the centre, pixels (0 = none).
    holder_deg : float or None
        Direction of the gun holder's shadow (a band of half-width ``shadow_radius``), degrees
        counterclockwise from +x as seen in the image; None for no holder shadow.
    width, height : int
        Image size in pixels (for figures and defaults).
    """

    centre_x: float = (DEFAULT_SIZE - 1) / 2.0
    centre_y: float = (DEFAULT_SIZE - 1) / 2.0
    scale: float = 0.47 * DEFAULT_SIZE / math.sin(math.radians(DEFAULT_ACCEPTANCE))
    rotation_deg: float = 0.0
    stretch: float = 0.0
    stretch_deg: float = 0.0
    mirror: bool = False
    acceptance_deg: float = DEFAULT_ACCEPTANCE
    shadow_radius: float = 0.0
    holder_deg: float | None = None
    width: int = DEFAULT_SIZE
    height: int = DEFAULT_SIZE

    #: Model name used in spec strings and JSON.
    kind: ClassVar[str] = ""
    #: Names of the continuous parameters returned by :meth:`params`.
    param_names: ClassVar[tuple[str, ...]] = (
        "centre_x",
        "centre_y",
        "scale",
        "rotation_deg",
        "stretch",
        "stretch_deg",
    )

    def __post_init__(self) -> None:
        for name in (*ScreenGeometry.param_names, "acceptance_deg", "shadow_radius"):
            v = getattr(self, name)
            if (
                isinstance(v, bool)
                or not isinstance(v, (int, float, np.floating, np.integer))
                or not math.isfinite(float(v))
            ):
                raise InputError(f"screen parameter {name} must be a finite number, got {v!r}.")
            object.__setattr__(self, name, float(v))
        if self.scale <= 0:
            raise InputError(
                f"screen parameter scale must be positive (pixels per radian), got {self.scale}."
            )
        if self.stretch <= -1.0:
            raise InputError(f"screen parameter stretch must exceed -1, got {self.stretch}.")
        if not (0.0 < self.acceptance_deg <= self.max_theta_deg):
            raise InputError(
                f"screen parameter acceptance_deg must be in (0, {self.max_theta_deg:.6g}] degrees "
                f"for the {self.kind} model, got {self.acceptance_deg}."
            )
        if self.shadow_radius < 0:
            raise InputError(
                f"screen parameter shadow_radius must be 0 or positive, got {self.shadow_radius}."
            )
        if self.holder_deg is not None:
            try:
                h = float(self.holder_deg)
            except (TypeError, ValueError):
                raise InputError(
                    f"screen parameter holder_deg must be a number, got {self.holder_deg!r}."
                ) from None
            if not math.isfinite(h):
                raise InputError("screen parameter holder_deg must be a finite number of degrees.")
            object.__setattr__(self, "holder_deg", h)
        for name in ("width", "height"):
            v = getattr(self, name)
            if isinstance(v, bool) or int(v) != v or int(v) <= 0:
                raise InputError(
                    f"screen parameter {name} must be a positive whole number of pixels, got {v!r}."
                )
            object.__setattr__(self, name, int(v))
        object.__setattr__(self, "mirror", bool(self.mirror))

    # ----------------------------------------------------------------- radial law
    @property
    def max_theta_deg(self) -> float:
        """Largest angle from the axis (degrees) the radial law maps one-to-one."""
        return 90.0

    def radial(self, theta: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        """Normalised radius ``r / scale`` of a beam at ``theta`` radians from the axis."""
        raise NotImplementedError

    def inverse_radial(self, rho: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        """Angle ``theta`` (radians) from the normalised radius; NaN outside the valid range."""
        raise NotImplementedError

    # ----------------------------------------------------------------- linear part
    def _linear(self) -> np.ndarray:
        """The 2x2 matrix taking the normalised point w to (dx, dy_up) / scale."""
        c, s = math.cos(math.radians(self.rotation_deg)), math.sin(math.radians(self.rotation_deg))
        rot = np.array([[c, -s], [s, c]])
        mir = np.diag([-1.0, 1.0]) if self.mirror else np.eye(2)
        n = np.array([math.cos(math.radians(self.stretch_deg)), math.sin(math.radians(self.stretch_deg))])
        stretch = np.eye(2) + self.stretch * np.outer(n, n)
        return stretch @ rot @ mir

    # ----------------------------------------------------------------- directions <-> pixels
    def directions_to_pixels(self, directions) -> np.ndarray:
        """Image positions (..., 2) of unit direction vectors (..., 3) in the gun frame.

        Directions beyond the valid range of the radial law, or NaN, give NaN.
        """
        d = np.asarray(directions, dtype=float)
        theta = np.arccos(np.clip(d[..., 2], -1.0, 1.0))
        psi = np.arctan2(d[..., 1], d[..., 0])
        with np.errstate(invalid="ignore"):
            bad = ~(theta <= math.radians(self.max_theta_deg) * (1 + 1e-12))
        rho = self.radial(np.where(bad, 0.0, theta))
        w = rho[..., None] * np.stack([np.cos(psi), np.sin(psi)], axis=-1)
        v = np.einsum("...j,ij->...i", w, self._linear())
        px = np.stack(
            [self.centre_x + self.scale * v[..., 0], self.centre_y - self.scale * v[..., 1]], axis=-1
        )
        px[bad | np.isnan(theta)] = np.nan
        return px

    def pixels_to_directions(self, pixels) -> np.ndarray:
        """Unit direction vectors (..., 3) in the gun frame of image positions (..., 2).

        Positions outside the range of the radial law give NaN.
        """
        p = np.asarray(pixels, dtype=float)
        v = np.stack(
            [(p[..., 0] - self.centre_x) / self.scale, (self.centre_y - p[..., 1]) / self.scale], axis=-1
        )
        w = np.einsum("...j,ij->...i", v, np.linalg.inv(self._linear()))
        rho = np.hypot(w[..., 0], w[..., 1])
        psi = np.arctan2(w[..., 1], w[..., 0])
        theta = self.inverse_radial(rho)
        st = np.sin(theta)
        return np.stack([st * np.cos(psi), st * np.sin(psi), np.cos(theta)], axis=-1)

    # ----------------------------------------------------------------- k_parallel <-> pixels
    def to_pixels(self, k_parallel, energy_eV, incidence=(0.0, 0.0)) -> np.ndarray:
        """Image positions (..., 2) of beams with parallel momentum ``k_parallel`` (..., 2).

        Parameters
        ----------
        k_parallel : array_like, shape (..., 2)
            Parallel momentum of the beams (incident parallel momentum plus g), 1/Angstrom,
            in the sample frame.
        energy_eV : float or array_like
            Energy in eV (broadcast against the leading dimensions).
        incidence : (float, float)
            Polar angle and azimuth (from +x of the sample frame) of the incident beam, degrees.

        Returns
        -------
        ndarray, shape (..., 2)
            Pixel coordinates (x right, y down); NaN for beams that do not emerge.
        """
        return self.directions_to_pixels(to_gun_frame(exit_directions(k_parallel, energy_eV), incidence))

    def to_k_parallel(self, pixels, energy_eV, incidence=(0.0, 0.0)) -> np.ndarray:
        """Parallel momentum (..., 2) in 1/Angstrom (sample frame) of image positions at an energy.

        The exact inverse of :meth:`to_pixels`; NaN for positions that correspond to no beam
        leaving the surface.
        """
        d = from_gun_frame(self.pixels_to_directions(pixels), incidence)
        k = np.asarray(wavenumber(energy_eV), dtype=float)[..., None]
        kp = k * d[..., :2]
        kp[~(d[..., 2] > 0)] = np.nan
        return kp

    def angle_from_axis(self, k_parallel, energy_eV, incidence=(0.0, 0.0)) -> np.ndarray:
        """Angle (degrees) between each beam and the screen axis; NaN for non-emerging beams."""
        d = to_gun_frame(exit_directions(k_parallel, energy_eV), incidence)
        return np.degrees(np.arccos(np.clip(d[..., 2], -1.0, 1.0)))

    def in_shadow(self, pixels) -> np.ndarray:
        """True for image positions hidden by the gun or its holder."""
        p = np.asarray(pixels, dtype=float)
        dx, dy = p[..., 0] - self.centre_x, -(p[..., 1] - self.centre_y)
        hidden = np.hypot(dx, dy) < self.shadow_radius
        if self.holder_deg is not None and self.shadow_radius > 0:
            h = math.radians(self.holder_deg)
            along = dx * math.cos(h) + dy * math.sin(h)
            across = -dx * math.sin(h) + dy * math.cos(h)
            hidden |= (along > 0) & (np.abs(across) < self.shadow_radius)
        return hidden

    def visible(self, k_parallel, energy_eV, incidence=(0.0, 0.0)) -> np.ndarray:
        """True for beams inside the acceptance and outside the gun and holder shadows."""
        ang = self.angle_from_axis(k_parallel, energy_eV, incidence)
        px = self.to_pixels(k_parallel, energy_eV, incidence)
        with np.errstate(invalid="ignore"):
            inside = ang <= self.acceptance_deg
        return inside & ~self.in_shadow(px)

    def rim(self, n: int = 361) -> np.ndarray:
        """Image positions (n, 2) of the edge of the acceptance cone (for figures)."""
        t = math.radians(self.acceptance_deg)
        psi = np.linspace(0.0, 2.0 * math.pi, n)
        d = np.stack(
            [np.full(n, math.sin(t)) * np.cos(psi), math.sin(t) * np.sin(psi), np.full(n, math.cos(t))],
            axis=-1,
        )
        return self.directions_to_pixels(d)

    # ----------------------------------------------------------------- parameters
    def params(self) -> np.ndarray:
        """The continuous geometric parameters as a float vector, in the order of ``param_names``."""
        return np.array([getattr(self, n) for n in self.param_names], dtype=float)

    def with_params(self, values=None, **changes) -> ScreenGeometry:
        """A copy with new parameter values: a vector in ``param_names`` order and/or keywords."""
        new = {}
        if values is not None:
            vals = np.asarray(values, dtype=float).ravel()
            if vals.size != len(self.param_names):
                raise InputError(
                    f"expected {len(self.param_names)} screen parameters ({', '.join(self.param_names)}), "
                    f"got {vals.size}."
                )
            new.update({n: float(v) for n, v in zip(self.param_names, vals, strict=True)})
        unknown = set(changes) - {f.name for f in dataclasses.fields(self)}
        if unknown:
            raise InputError(f"unknown screen parameter(s) {sorted(unknown)} for the {self.kind} model.")
        new.update(changes)
        return dataclasses.replace(self, **new)

    def to_dict(self) -> dict:
        """A JSON-able description (``model`` plus every field) for saving calibrations."""
        d = {"model": self.kind}
        d.update({f.name: getattr(self, f.name) for f in dataclasses.fields(self)})
        return d

    def describe(self) -> str:
        """One line for reports."""
        extra = "".join(
            f", {n}={getattr(self, n):.6g}" for n in self.param_names if n not in ScreenGeometry.param_names
        )
        return (
            f"{self.kind} screen: centre ({self.centre_x:.6g}, {self.centre_y:.6g}) px, "
            f"scale {self.scale:.6g} px/rad, rotation {self.rotation_deg:.6g} deg"
            f"{', mirrored' if self.mirror else ''}{extra}, acceptance {self.acceptance_deg:.6g} deg"
        )


@dataclass(frozen=True)
class FarScreen(ScreenGeometry):
    """Hemispherical screen (sample at its centre) viewed from far along its axis: r = scale sin(theta)."""

    kind: ClassVar[str] = "sphere"

    def radial(self, theta):
        return np.sin(theta)

    def inverse_radial(self, rho):
        rho = np.asarray(rho, dtype=float)
        with np.errstate(invalid="ignore"):
            return np.where(rho <= 1.0, np.arcsin(np.minimum(rho, 1.0)), np.nan)


@dataclass(frozen=True)
class FlatDetector(ScreenGeometry):
    """Flat detector normal to the axis at ``scale`` pixels from the sample: r = scale tan(theta)."""

    kind: ClassVar[str] = "flat"
    scale: float = 0.47 * DEFAULT_SIZE / math.tan(math.radians(DEFAULT_ACCEPTANCE))

    @property
    def max_theta_deg(self) -> float:
        return 89.999

    def radial(self, theta):
        return np.tan(theta)

    def inverse_radial(self, rho):
        return np.arctan(np.asarray(rho, dtype=float))


@dataclass(frozen=True)
class CameraScreen(ScreenGeometry):
    """Hemispherical screen photographed by a camera on its axis at a finite distance.

    The camera's pinhole sits on the axis at ``camera_distance`` screen radii from the sample:
    ``D > 1`` behind the screen (rear view), ``D < -1`` on the sample's side (front view).
    A point at angle theta on the screen (radius R) is seen at
    ``tan(alpha) = R sin(theta) / (D R - R cos(theta))`` from the axis, so in the image
    ``r / scale = (D - 1) sin(theta) / (D - cos(theta))`` (normalised to slope 1 at the centre).
    For ``D > 1`` the law folds back beyond ``cos(theta) = 1/D`` (the rim seen edge-on); the
    acceptance must stay below that angle.
    """

    kind: ClassVar[str] = "camera"
    param_names: ClassVar[tuple[str, ...]] = ScreenGeometry.param_names + ("camera_distance",)
    camera_distance: float = 4.0

    def __post_init__(self) -> None:
        D = self.camera_distance
        if (
            isinstance(D, bool)
            or not isinstance(D, (int, float, np.floating, np.integer))
            or not math.isfinite(float(D))
            or abs(float(D)) <= 1.0
        ):
            raise InputError(
                f"screen parameter camera_distance must be a number of screen radii above 1 (rear view) "
                f"or below -1 (front view), got {D!r}."
            )
        object.__setattr__(self, "camera_distance", float(D))
        super().__post_init__()

    @property
    def max_theta_deg(self) -> float:
        D = self.camera_distance
        return math.degrees(math.acos(1.0 / D)) if D > 1 else 90.0

    def radial(self, theta):
        D = self.camera_distance
        return (D - 1.0) * np.sin(theta) / (D - np.cos(theta))

    def inverse_radial(self, rho):
        # (D - 1) sin(t) + rho cos(t) = rho D, i.e. R sin(t + beta) = rho D
        D = self.camera_distance
        rho = np.asarray(rho, dtype=float)
        a = D - 1.0
        R = np.hypot(a, rho)
        beta = np.arctan2(rho, a)
        with np.errstate(invalid="ignore"):
            base = np.arcsin(np.clip(rho * D / R, -1.0, 1.0))
            reachable = np.abs(rho * D / R) <= 1.0 + 1e-12
        tmax = math.radians(self.max_theta_deg) * (1 + 1e-12)
        c1 = np.mod(base - beta + math.pi, 2 * math.pi) - math.pi
        c2 = np.mod(math.pi - base - beta + math.pi, 2 * math.pi) - math.pi
        ok1 = (c1 >= -1e-12) & (c1 <= tmax)
        ok2 = (c2 >= -1e-12) & (c2 <= tmax)
        theta = np.where(ok1, c1, np.where(ok2, c2, np.nan))
        return np.where(reachable, np.maximum(theta, 0.0), np.nan)


#: The screen models by their spec/JSON name.
MODELS: dict[str, type[ScreenGeometry]] = {cls.kind: cls for cls in (FarScreen, CameraScreen, FlatDetector)}


def screen_from_dict(data: dict) -> ScreenGeometry:
    """Rebuild a screen from :meth:`ScreenGeometry.to_dict` output (e.g. a saved calibration)."""
    if not isinstance(data, dict) or "model" not in data:
        raise InputError(
            f"a screen description must be a JSON object with a 'model' key ({', '.join(MODELS)})."
        )
    model = data["model"]
    if model not in MODELS:
        raise InputError(f"unknown screen model {model!r}; use one of {', '.join(MODELS)}.")
    cls = MODELS[model]
    fields = {f.name for f in dataclasses.fields(cls)}
    unknown = set(data) - fields - {"model"}
    if unknown:
        raise InputError(
            f"unknown screen field(s) {sorted(unknown)} for the {model} model; "
            f"valid fields are {', '.join(sorted(fields))}."
        )
    return cls(**{k: v for k, v in data.items() if k != "model"})


def default_screen(
    acceptance_deg: float = DEFAULT_ACCEPTANCE, model: str = "sphere", size: int = DEFAULT_SIZE, **kwargs
) -> ScreenGeometry:
    """An uncalibrated screen of ``size`` x ``size`` pixels whose acceptance rim fills 94 % of it."""
    if model not in MODELS:
        raise InputError(f"unknown screen model {model!r}; use one of {', '.join(MODELS)}.")
    cls = MODELS[model]
    # any valid acceptance will do to evaluate the radial law
    probe = cls(acceptance_deg=1.0, **{k: v for k, v in kwargs.items() if k == "camera_distance"})
    try:
        accept = float(acceptance_deg)
    except (TypeError, ValueError):
        accept = math.nan
    if not (0.0 < accept <= probe.max_theta_deg):
        raise InputError(
            f"the screen's acceptance half-angle must be in (0, {probe.max_theta_deg:.6g}] degrees for the "
            f"{model} model, got {acceptance_deg!r}."
        )
    rho = float(probe.radial(np.array(math.radians(accept))))
    centre = (size - 1) / 2.0
    return cls(
        **{
            "centre_x": centre,
            "centre_y": centre,
            "scale": 0.47 * size / rho,
            "acceptance_deg": acceptance_deg,
            "width": size,
            "height": size,
            **kwargs,
        }
    )
