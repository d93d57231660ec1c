"""Patterns over an energy range: onset energies, positions versus energy, intensities.

The beams are enumerated once at the highest energy (the set of emerging beams only grows
with the energy, also at oblique incidence), then every quantity is evaluated for all
energies at once as (energies x beams) arrays.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from surfgeo.diffraction.beams import format_index, terrace_indices
from surfgeo.diffraction.electron import (
    check_pattern_energies,
    exit_angles,
    incident_k_parallel,
    onset_energy,
)
from surfgeo.diffraction.pattern import (
    Pattern,
    _check_theta_max,
    domain_intensities,
    slab_context,
    slab_pattern,
    superstructure_pattern,
    terrace_lattice,
)
from surfgeo.errors import InputError

#: Energies per block of the intensity calculation (one progress step each).
BLOCK = 16


def parse_energies(text: str) -> np.ndarray:
    """Energies from ``"100"``, ``"40:300:2"`` (start:stop:step, stop included) or ``"50,80,120"``.

    Returns the distinct energies in increasing order (a repeated energy is computed once, so
    ``"100,100"`` is a single energy, not a sweep).
    """
    s = str(text).strip()
    try:
        if ":" in s:
            parts = [float(p) for p in s.split(":")]
            if len(parts) != 3:
                raise ValueError
            start, stop, step = parts
            if step <= 0 or stop < start:
                raise InputError(
                    f"energy range {text!r} needs START:STOP:STEP with STOP >= START and a positive STEP."
                )
            n = int(math.floor((stop - start) / step + 1e-9)) + 1
            if n > 100000:
                raise InputError(
                    f"energy range {text!r} has {n} energies; use a larger step (at most 100000)."
                )
            e = start + step * np.arange(n)
        else:
            e = np.array([float(p) for p in s.split(",") if p.strip()])
    except ValueError:
        raise InputError(
            f"energy {text!r} must be a number of eV, a list E1,E2,... or a range START:STOP:STEP."
        ) from None
    return np.unique(check_pattern_energies(e, f"energy {text!r}"))


@dataclass
class PatternSweep:
    """A pattern over many energies.

    Attributes
    ----------
    energies : ndarray, shape (NE,)
        Energies, eV (increasing).
    base : Pattern
        The pattern at the highest energy with every emerging beam: labels, sources, domains.
    index : ndarray of int, shape (Nb,)
        Beams of ``base`` kept in the sweep (those reaching the screen within the range).
    k_parallel : ndarray, shape (NE, Nb, 2)
        Parallel momentum of each beam at each energy (varies with E at oblique incidence).
    theta, phi : ndarray, shape (NE, Nb)
        Exit polar angle and azimuth (from a1), degrees; NaN where the beam does not emerge.
    onset : ndarray, shape (Nb,)
        Energy (eV) at which each beam enters the screen (within ``theta_max`` of the axis).
    intensity : ndarray or None, shape (NE, Nb)
        Weighted kinematic intensities (qualitative), NaN where the beam does not emerge.
    theta_max : float
        Acceptance half-angle used for the onsets, degrees.
    terrace_hk : ndarray or None, shape (NE, Nb, 2)
        Beam indices relative to the terrace lattice of a stepped slab (energy dependent).
    """

    energies: np.ndarray
    base: Pattern
    index: np.ndarray
    k_parallel: np.ndarray
    theta: np.ndarray
    phi: np.ndarray
    onset: np.ndarray
    intensity: np.ndarray | None
    theta_max: float
    terrace_hk: np.ndarray | None = None

    @property
    def hk(self) -> list:
        return [self.base.hk[i] for i in self.index]

    @property
    def labels(self) -> list[str]:
        """Beam labels as text, e.g. ``"(1/2, 0)"``."""
        return [f"({format_index(h)}, {format_index(k)})" for h, k in self.hk]

    def screen_positions(self, screen) -> tuple[np.ndarray, np.ndarray]:
        """Image positions (NE, Nb, 2) and visibility (NE, Nb) on a screen model."""
        inc = self.base.incidence_xy
        e = self.energies[:, None]
        px = screen.to_pixels(self.k_parallel, e, inc)
        vis = screen.visible(self.k_parallel, e, inc)
        return px, vis

    def to_dict(self, screen=None) -> dict:
        """JSON form: like :meth:`Pattern.to_dict` with per-energy lists."""
        px = vis = None
        if screen is not None:
            px, vis = self.screen_positions(screen)
        base = self.base
        beams = []
        for j, i in enumerate(self.index):
            h, k = base.hk[i]
            em = np.isfinite(self.theta[:, j])
            b = {
                "hk": [format_index(h), format_index(k)],
                "order": "integer" if base.integer[i] else "fractional",
                "source": base.source[i],
                "domains": list(base.domains[i]),
                "onset_eV": float(self.onset[j]) if np.isfinite(self.onset[j]) else None,
                "k_parallel": [[float(x), float(y)] for x, y in self.k_parallel[:, j]],
                "theta_deg": [float(t) if e else None for t, e in zip(self.theta[:, j], em, strict=True)],
                "phi_deg": [float(t) if e else None for t, e in zip(self.phi[:, j], em, strict=True)],
                "intensity": None
                if self.intensity is None
                else [float(v) if e else None for v, e in zip(self.intensity[:, j], em, strict=True)],
            }
            if base.via[i] is not None:
                b["via"] = base.via[i]
            if self.terrace_hk is not None:
                b["terrace_hk"] = [
                    [float(x), float(y)] if e else None
                    for (x, y), e in zip(self.terrace_hk[:, j], em, strict=True)
                ]
            if px is not None:
                b["screen_xy"] = [
                    [float(x), float(y)] if e else None for (x, y), e in zip(px[:, j], em, strict=True)
                ]
                b["on_screen"] = [bool(v) for v in vis[:, j]]
            beams.append(b)
        return base.json_frame([float(e) for e in self.energies], self.theta_max, beams, screen)


def pattern_sweep(
    energies,
    *,
    lattice=None,
    matrix=None,
    atoms=None,
    incidence=(0.0, 0.0),
    domains: bool = True,
    weights=None,
    theta_max: float = 90.0,
    double_order: int = 0,
    symprec: float | None = None,
    show_progress: bool | None = None,
    **kinematic,
) -> PatternSweep:
    """Beams, onsets, positions and (with atoms) kinematic intensities over an energy range.

    Give either ``atoms`` (a slab: positions and intensities) or ``lattice`` with an optional
    ``matrix`` (positions only). The other parameters are those of
    :func:`~surfgeo.diffraction.pattern.slab_pattern` and
    :func:`~surfgeo.diffraction.pattern.superstructure_pattern`; ``theta_max`` is the
    acceptance half-angle used for the onset energies and to choose the beams kept (those that
    reach the screen within the range). ``show_progress`` draws a progress bar on a terminal.

    Notes
    -----
    Kinematic intensities are qualitative for LEED (multiple scattering is strong); beam
    positions and symmetry extinctions at normal incidence are exact.
    """
    from surfgeo.progress import progress

    e = np.sort(check_pattern_energies(np.ravel(energies), "the energies"))
    theta_max = _check_theta_max(theta_max)
    emax = float(e[-1])
    if atoms is not None:
        base = slab_pattern(
            atoms,
            emax,
            incidence,
            domains=domains,
            weights=weights,
            theta_max=90.0,
            symprec=symprec,
            intensities=False,
        )
    else:
        if lattice is None:
            raise InputError("give a slab (atoms) or a substrate lattice for an energy sweep.")
        base = superstructure_pattern(
            lattice,
            matrix,
            emax,
            incidence,
            domains=domains,
            weights=weights,
            theta_max=90.0,
            double_order=double_order,
        )
    inc = base.incidence_xy
    onset_all = onset_energy(base.g, theta_max, inc)
    index = np.flatnonzero(onset_all <= emax * (1 + 1e-12))
    g = base.g[index]
    kin = np.stack([incident_k_parallel(x, inc) for x in e])  # (NE, 2)
    kp = kin[:, None, :] + g[None, :, :]
    theta, phi = exit_angles(kp, e[:, None])
    a1 = math.degrees(math.atan2(base.lattice.a1[1], base.lattice.a1[0]))
    phi = (phi - a1) % 360.0
    intensity = None
    if atoms is not None:
        _, _, records, reps, _ = slab_context(atoms, domains, weights, symprec)
        nd = len(records)
        member = np.zeros((len(index), nd), dtype=bool)
        for j, i in enumerate(index):
            member[j, list(base.domains[i])] = True
        w = np.array([r.weight for r in records])
        intensity = np.zeros((len(e), len(index)))
        blocks = [e[i : i + BLOCK] for i in range(0, len(e), BLOCK)]
        rows = []
        for block in progress(blocks, desc="intensities", enabled=show_progress):
            per = domain_intensities(
                atoms, [g[member[:, d]] for d in range(nd)], block, inc, reps, **kinematic
            )
            part = np.zeros((len(block), len(index)))
            for d in range(nd):
                part[:, member[:, d]] += w[d] * np.nan_to_num(per[d], nan=0.0)
            rows.append(part)
        intensity = np.concatenate(rows) if rows else intensity
        intensity[~np.isfinite(theta)] = np.nan
    terrace = None
    if atoms is not None:
        t = terrace_lattice(atoms)
        if t is not None:
            terrace = np.stack([terrace_indices(kp[f], x, inc, t) for f, x in enumerate(e)])
    return PatternSweep(e, base, index, kp, theta, phi, onset_all[index], intensity, theta_max, terrace)


__all__ = ["PatternSweep", "parse_energies", "pattern_sweep"]
