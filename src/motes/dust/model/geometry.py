"""Scattering geometry of a disk-colour model: the angles seen and the phase-function model."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import InputError, quoted_names
from ...parameters import PARAMETERS, accepts_quantities

__all__ = ["ScatteringGeometry", "PHASES"]

PHASES = ("mie", "hg")


@accepts_quantities
@dataclass(frozen=True)
class ScatteringGeometry:
    """Scattering angles at which the disk is seen, and the phase-function model.

    Parameters
    ----------
    angles_deg : tuple of float
        Scattering angles [deg] in (0, 180], averaged with equal weights.
    phase : {"mie", "hg"}
        Mie phase function, or Henyey-Greenstein with the size-distribution
        averaged Mie asymmetry parameter g.
    """

    angles_deg: tuple[float, ...] = (90.0,)
    phase: str = "mie"

    def __post_init__(self):
        try:
            angles = tuple(float(a) for a in np.atleast_1d(self.angles_deg))
        except (TypeError, ValueError):
            raise InputError(f"angles_deg must be numbers, got {self.angles_deg!r}", where="angles_deg") from None
        declared = PARAMETERS["angle"]
        if not angles or not declared.contains(angles).all():
            raise InputError(f"scattering angles must be in {declared.interval} {declared.unit_text}, got {angles!r}",
                             where="angles_deg")
        if self.phase not in PHASES:
            raise InputError(f"phase must be one of {quoted_names(PHASES)}, got {self.phase!r}", where="phase")
        object.__setattr__(self, "angles_deg", angles)

    @classmethod
    @accepts_quantities
    def ring(cls, inclination_deg: float, n_azimuths: int = 8, phase: str = "mie") -> "ScatteringGeometry":
        """Angles sampled by a circular ring at inclination i (0 = face-on).

        A ring point at azimuth phi from the ansa is seen at scattering angle
        ``theta = arccos(sin i cos phi)``; ``n_azimuths`` azimuths at the
        midpoints of equal intervals over a half-turn give angles spread
        over 90 deg +- i with the ring's own weighting.
        """
        i = float(inclination_deg)
        if not (np.isfinite(i) and 0 <= i < 90) or n_azimuths < 1:
            raise InputError(f"inclination must be in [0, 90) deg, got {inclination_deg!r}",
                             where="inclination_deg")
        phi = (np.arange(n_azimuths) + 0.5) * np.pi / n_azimuths
        theta = np.degrees(np.arccos(np.sin(np.radians(i)) * np.cos(phi)))
        return cls(tuple(float(t) for t in theta), phase)

    @property
    def angles_rad(self) -> np.ndarray:
        return np.radians(np.asarray(self.angles_deg))

    def key(self) -> str:
        """Stable text identifying the geometry (used in table cache keys)."""
        return f"{self.phase}:" + ",".join(f"{a:.10g}" for a in self.angles_deg)

    def hg_phase(self, g) -> np.ndarray:
        """Henyey-Greenstein phase function [sr^-1] averaged over the angles.

        ``p = (1 - g^2) / (4 pi (1 + g^2 - 2 g cos theta)^(3/2))`` (Henyey &
        Greenstein 1941, ApJ 93, 70); ``g`` any shape.
        """
        g = np.asarray(g, dtype=float)[..., None]
        mu = np.cos(self.angles_rad)
        p = (1 - g**2) / (4 * np.pi * (1 + g**2 - 2 * g * mu) ** 1.5)
        return p.mean(axis=-1)
