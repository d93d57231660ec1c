"""Detector geometry: where a beam of given parallel momentum lands on a screen or detector."""
