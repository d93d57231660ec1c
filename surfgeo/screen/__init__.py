"""Detector geometry: where a beam of given parallel momentum lands on a screen or detector.

Three models (:class:`FarScreen`, :class:`CameraScreen`, :class:`FlatDetector`) with explicit
parameters; see :mod:`surfgeo.screen.geometry` for the frame and the radial laws.
"""

from surfgeo.screen.geometry import (
    MODELS,
    CameraScreen,
    FarScreen,
    FlatDetector,
    ScreenGeometry,
    default_screen,
    screen_from_dict,
)
from surfgeo.screen.spec import SCREEN_HELP, parse_screen

__all__ = [
    "MODELS",
    "CameraScreen",
    "FarScreen",
    "FlatDetector",
    "ScreenGeometry",
    "SCREEN_HELP",
    "default_screen",
    "parse_screen",
    "screen_from_dict",
]
