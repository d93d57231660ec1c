"""Beams and kinematic intensities: from a surface model and an energy to diffraction beams."""
