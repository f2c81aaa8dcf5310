"""Joint likelihood of scattered-light colours and a thermal SED of the same grains (building block).

What is tied and what is free
-----------------------------
* Tied: the composition (fractions), porosity, a_min, q and a_max: the same
  grains scatter and emit.
* Free: each data set's own scale. The scattered-light scale (disk/star ratio
  per unit cross-section, times the geometry's phase and solid-angle factors)
  and the thermal scale (the total grain cross-section [au^2] seen at the
  star's distance) are marginalised separately with their own log-uniform
  priors; nothing ties the two unless a ring geometry fixes both, which this
  module does not do.
* The ring radius is fixed here (:class:`JointProblem` ``radius_au``). A
  radius from the SED alone is degenerate with a_min: smaller, hotter grains
  further out give nearly the same SED as larger, cooler grains further in,
  so a free radius needs a prior from imaging.
* The thermal data are excesses F_disk / F_star per band (the star's
  photosphere from the description's star at the data's distance), so the
  scattered-light likelihood machinery (:mod:`motes.dust.likelihood`) applies
  unchanged; the ``systematic`` argument of the thermal part is the fractional
  calibration error of far-IR/mm photometry, added in quadrature.

Not done yet: ``motes fit`` does not read a thermal table or build this
problem; the verdicts' split into scattered-only / thermal-only / joint ln B
needs separate runs of the sampler with :meth:`JointProblem.part`.
"""

from __future__ import annotations

import numpy as np

from ...errors import InputError, MotesError
from ...parameters import accepts_quantities
from ..likelihood import ScalePrior, ln_marginal_likelihood
from ..observations import DiskPhotometry
from .problem import ZERO_LIKELIHOOD

__all__ = ["thermal_excess_photometry", "JointProblem"]


@accepts_quantities
def thermal_excess_photometry(bands, flux_jy, error_jy, star_flux_jy, path=None) -> DiskPhotometry:
    """Thermal flux densities [Jy] as excesses over the photosphere (a DiskPhotometry).

    Parameters
    ----------
    bands : sequence of Band
    flux_jy, error_jy : ndarray[B] [Jy]
        Band-averaged flux densities of the disk and their 1-sigma errors.
    star_flux_jy : ndarray[B] [Jy]
        The model star's band fluxes at the data's distance
        (:attr:`motes.dust.model.thermal_fast.ThermalRingModel.star_flux`).
    """
    star = np.asarray(star_flux_jy, dtype=float)
    flux = np.asarray(flux_jy, dtype=float)
    err = np.asarray(error_jy, dtype=float)
    if not (star.shape == flux.shape == err.shape == (len(bands),)):
        raise InputError(f"thermal photometry needs one flux, error and star flux per band ({len(bands)})", path)
    if not (np.isfinite(star).all() and (star > 0).all()):
        raise InputError("the star's thermal band fluxes must be > 0", path)
    return DiskPhotometry(tuple(bands), flux / star, err / star, np.zeros(len(bands), bool),
                          np.full(len(bands), np.nan), ("flux",) * len(bands), "flux ratio",
                          ("thermal flux densities divided by the model star's photosphere in each band",), path)


class JointProblem:
    """ln L of one model against scattered-light colours and a thermal SED together.

    Parameters
    ----------
    scattered : motes.dust.fit.problem.FitProblem
        The scattered-light problem (its parameter space is the joint one).
    thermal_model : ThermalRingModel
        Band fluxes [Jy per au^2] of the same materials, bands in the order of ``thermal_obs``.
    thermal_obs : DiskPhotometry
        From :func:`thermal_excess_photometry`.
    radius_au : float [au]
        Ring radius (fixed).
    thermal_scale : ScalePrior
        Prior of the total cross-section [au^2].
    calibration : float
        Fractional calibration systematic of the thermal photometry.
    """

    def __init__(self, scattered, thermal_model, thermal_obs: DiskPhotometry, radius_au: float,
                 thermal_scale: ScalePrior = ScalePrior(1e-6, 1e6), calibration: float = 0.0):
        r = float(radius_au)
        if not (np.isfinite(r) and r > 0):
            raise InputError(f"the ring radius must be > 0 au, got {radius_au!r}", where="radius_au")
        if not (np.isfinite(calibration) and calibration >= 0):
            raise InputError(f"the calibration systematic must be >= 0, got {calibration!r}", where="calibration")
        self.scattered = scattered
        self.thermal_model = thermal_model
        self.thermal_obs = thermal_obs
        self.radius_au = r
        self.thermal_scale = thermal_scale
        self.calibration = float(calibration)
        self._star = np.asarray(thermal_model.star_flux, dtype=float)

    @property
    def space(self):
        return self.scattered.space

    def thermal_ln_likelihood(self, theta) -> np.ndarray:
        """ln L of the thermal data alone (cross-section marginalised), ndarray[N]."""
        theta = np.atleast_2d(theta)
        p = self.space.unpack(theta)
        try:
            flux = self.thermal_model.evaluate(p["fractions"], p["porosity"], p["a_min"], p["a_max"], p["q"],
                                               self.radius_au)
        except MotesError:
            return np.full(theta.shape[0], ZERO_LIKELIHOOD)
        ratio = flux / self._star
        bad = ~np.all(np.isfinite(ratio) & (ratio >= 0), axis=-1)
        ratio = np.where(bad[:, None], 1.0, ratio)
        out, _ = ln_marginal_likelihood(ratio, self.thermal_obs, self.thermal_scale, self.calibration)
        return np.where(bad | ~np.isfinite(out), ZERO_LIKELIHOOD, out)

    def part(self, which: str):
        """The ln L function of one data set (``"scattered"``, ``"thermal"``) or ``"joint"``."""
        return {"scattered": self.scattered.ln_likelihood, "thermal": self.thermal_ln_likelihood,
                "joint": self.ln_likelihood}[which]

    def ln_likelihood(self, theta) -> np.ndarray:
        """Joint ln L (both scales marginalised) for theta[N, ndim] -> ndarray[N]."""
        a = self.scattered.ln_likelihood(theta)
        b = self.thermal_ln_likelihood(theta)
        return np.where((a <= ZERO_LIKELIHOOD) | (b <= ZERO_LIKELIHOOD), ZERO_LIKELIHOOD, a + b)

    def batch(self, theta) -> np.ndarray:
        """Vectorised ln L (what :mod:`motes.dust.fit.batch` calls)."""
        return self.ln_likelihood(np.atleast_2d(theta))

    def __call__(self, v) -> float:
        return float(self.ln_likelihood(np.atleast_2d(v))[0])
