"""Measured patterns: spot finding, calibration, matching and indexing. Never builds structures."""
