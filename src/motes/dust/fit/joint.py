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
* The ring radius is fixed (:class:`JointProblem` ``radius_au``) or a
  parameter of the space (``ring_radius``, sampled with its prior); or the
  thermal model is a belt with fixed edges and surface density index
  (:class:`motes.dust.model.thermal_belt.ThermalBeltModel`), tied the same
  way (:func:`tied_text`). A
  radius from the SED alone is degenerate with a_min: smaller, hotter grains
  further out give nearly the same SED as larger, cooler grains further in,
  so a free radius needs a prior from imaging.
* The thermal data are excesses F_disk / F_star per band (the star's
  photosphere from the description's star at the data's distance), so the
  scattered-light likelihood machinery (:mod:`motes.dust.likelihood`) applies
  unchanged; the ``systematic`` argument of the thermal part is the fractional
  calibration error of far-IR/mm photometry, added in quadrature.

``motes fit`` builds this problem when the description names a thermal table
(:mod:`motes.dust.fit.thermal_spec`, :mod:`motes.dust.fit.joint_run`); with
``[thermal] verdicts_by_data`` it also runs every model on each data set alone
(``which = "scattered"`` / ``"thermal"``) so that the verdicts say which data
drove them.
"""

from __future__ import annotations

import numpy as np

from ...errors import InputError, MotesError
from ...parameters import accepts_quantities
from ..likelihood import (ScalePrior, chi_square_with_best_scale, draw_scale, effective_errors,
                          ln_marginal_likelihood)
from ..observations import DiskPhotometry
from .problem import ZERO_LIKELIHOOD

__all__ = ["thermal_excess_photometry", "ThermalProblem", "JointProblem", "JOINT_PARTS", "TIED", "FREE",
           "tied_text", "is_belt"]

#: The evidence runs of a joint fit: both data sets, each alone.
JOINT_PARTS = ("joint", "scattered", "thermal")
#: What the scattered light and the thermal data share in a joint fit, and what each has of its own.
TIED = "composition (volume fractions), grain model, porosity, a_min, q, a_max, ring radius"
FREE = ("the two flux scales: the scattered-light scale and the thermal scale (total grain cross-section "
        "[au^2]), each marginalised under its own log-uniform prior")


def is_belt(thermal_model) -> bool:
    """Whether a thermal model is a belt (fixed radii) rather than a ring (radius per point)."""
    return getattr(thermal_model, "belt_au", None) is not None


def tied_text(thermal_model=None) -> str:
    """:data:`TIED` for a ring; for a belt its fixed edges and surface density index in place of the radius.

    Examples
    --------
    >>> class Belt:
    ...     belt_au, surface_density_index = (40.0, 90.0), -1.0
    >>> print(tied_text(Belt()).split("a_max, ")[-1])
    belt 40-90 au (fixed edges, surface density ∝ r^-1, the same grains at every radius)
    """
    if not is_belt(thermal_model):
        return TIED
    (r_in, r_out), p = thermal_model.belt_au, thermal_model.surface_density_index
    return TIED.replace("ring radius", f"belt {r_in:g}-{r_out:g} au (fixed edges, surface density ∝ r^{p:g}, "
                                       "the same grains at every radius)")


@accepts_quantities
def thermal_excess_photometry(bands, flux_jy, error_jy, star_flux_jy, path=None, is_limit=None,
                              limit_sigma=None) -> DiskPhotometry:
    """Thermal flux densities [Jy] as excesses over the photosphere (a DiskPhotometry).

    Parameters
    ----------
    bands : sequence of Band
    flux_jy, error_jy : ndarray[B] [Jy]
        Band-averaged flux densities of the disk and their 1-sigma errors.
    star_flux_jy : ndarray[B] [Jy]
        The model star's band fluxes at the data's distance
        (:attr:`motes.dust.model.thermal_fast.ThermalRingModel.star_flux`).
    is_limit, limit_sigma : ndarray[B], optional
        Upper limits (``flux_jy`` is then the N-sigma limit, ``error_jy`` limit / N).
    """
    star = np.asarray(star_flux_jy, dtype=float)
    flux = np.asarray(flux_jy, dtype=float)
    err = np.asarray(error_jy, dtype=float)
    if not (star.shape == flux.shape == err.shape == (len(bands),)):
        raise InputError(f"thermal photometry needs one flux, error and star flux per band ({len(bands)})", path)
    if not (np.isfinite(star).all() and (star > 0).all()):
        raise InputError("the star's thermal band fluxes must be > 0", path)
    lim = np.zeros(len(bands), bool) if is_limit is None else np.asarray(is_limit, bool)
    sig = np.full(len(bands), np.nan) if limit_sigma is None else np.asarray(limit_sigma, float)
    return DiskPhotometry(tuple(bands), flux / star, err / star, lim, sig, ("flux",) * len(bands), "flux ratio",
                          ("thermal flux densities divided by the model star's photosphere in each band",), path)


class _ThermalSpace:
    """The joint parameter space seen from the thermal side: its scale prior, its error term."""

    def __init__(self, space, scale: ScalePrior, calibration: float):
        self._space, self.scale, self.calibration = space, scale, float(calibration)
        self.sample_scale = False

    def __getattr__(self, name):
        return getattr(self._space, name)

    def unpack(self, theta, **kwargs):
        p = dict(self._space.unpack(theta, **kwargs))
        p["systematic"] = np.full(p["porosity"].shape, self.calibration)
        return p


class ThermalProblem:
    """ln L of the thermal data alone, with the interface of :class:`~motes.dust.fit.problem.FitProblem`.

    Parameters
    ----------
    thermal_model : ThermalRingModel
    thermal_obs : DiskPhotometry
        Excesses over the model photosphere (:func:`thermal_excess_photometry`).
    space : ParameterSpace
        The joint space; its ``ring_radius`` (when present) is the radius, else ``radius_au``.
    scale : ScalePrior
        Prior of the thermal scale, the total grain cross-section [au^2].
    calibration : float
        Fractional calibration error (the ``systematic`` of the thermal data).
    radius_au : float or None [au]
    """

    def __init__(self, thermal_model, thermal_obs: DiskPhotometry, space, scale: ScalePrior, calibration: float,
                 radius_au=None):
        self.colour_model = thermal_model
        self.obs = thermal_obs
        self.space = _ThermalSpace(space, scale, calibration)
        self.radius_au = radius_au
        self._star = np.asarray(thermal_model.star_flux, dtype=float)

    def radius(self, p) -> np.ndarray:
        """Ring radius [au] of unpacked parameters ``p`` (a belt's cross-section-weighted mean radius)."""
        if is_belt(self.colour_model):
            return np.full(p["porosity"].shape, float(self.colour_model.mean_radius))
        if "ring_radius" in p:
            return p["ring_radius"]
        return np.full(p["porosity"].shape, float(self.radius_au))

    def model_fluxes(self, theta) -> np.ndarray:
        """Model band fluxes [Jy per au^2 of cross-section at the data's distance], ndarray[N, B]."""
        p = self.space.unpack(np.atleast_2d(theta))
        where = () if is_belt(self.colour_model) else (self.radius(p),)     # a belt's radii are its own
        return np.atleast_2d(self.colour_model.evaluate(p["fractions"], p["porosity"], p["a_min"], p["a_max"],
                                                        p["q"], *where))

    def model_ratios(self, theta) -> np.ndarray:
        """Model excesses per au^2 of cross-section, ndarray[N, B]."""
        return self.model_fluxes(theta) / self._star

    def ln_likelihood(self, theta) -> np.ndarray:
        """ln L of the thermal data (cross-section marginalised), ndarray[N]."""
        theta = np.atleast_2d(theta)
        try:
            ratio = self.model_ratios(theta)
        except MotesError:
            if theta.shape[0] == 1:
                return np.full(1, ZERO_LIKELIHOOD)
            # one point of the batch is outside the model's range (e.g. grains hotter or colder than the
            # temperature table): that point alone has zero likelihood, not its whole batch
            return np.concatenate([self.ln_likelihood(row[None, :]) for row in theta])
        bad = ~np.all(np.isfinite(ratio) & (ratio >= 0), axis=-1)
        ratio = np.where(bad[:, None], 1.0, ratio)
        out, _ = ln_marginal_likelihood(ratio, self.obs, self.space.scale, self.space.calibration)
        return np.where(bad | ~np.isfinite(out), ZERO_LIKELIHOOD, out)

    def best_scale_fit(self, theta):
        """Best cross-section [au^2], chi2 and max ln L (normalised) for theta[N, ndim]."""
        import math

        ratio = self.model_ratios(np.atleast_2d(theta))
        scale, chi2, _ = chi_square_with_best_scale(ratio, self.obs, self.space.calibration)
        sig = effective_errors(self.obs, self.space.calibration)
        norm = np.where(self.obs.is_limit, 0.0, np.log(sig) + 0.5 * math.log(2 * math.pi)).sum(axis=-1)
        return scale, chi2, -0.5 * chi2 - norm

    def posterior_scale(self, theta, rng: np.random.Generator):
        """Draw the cross-section [au^2] from p(scale | parameters, data) for theta[N, ndim]."""
        ratio = self.model_ratios(np.atleast_2d(theta))
        return draw_scale(ratio, self.obs, self.space.scale, self.space.calibration, rng=rng)


class JointProblem:
    """ln L of one model against scattered-light colours and a thermal SED together.

    Parameters
    ----------
    scattered : motes.dust.fit.problem.FitProblem
        The scattered-light problem (its parameter space is the joint one).
    thermal_model : ThermalRingModel or ThermalBeltModel
        Band fluxes [Jy per au^2] of the same materials, bands in the order of ``thermal_obs``.
    thermal_obs : DiskPhotometry
        From :func:`thermal_excess_photometry`.
    radius_au : float or None [au]
        Ring radius when the space has no ``ring_radius`` parameter (None for a belt, whose
        radii are fixed; a belt with a ``ring_radius`` in the space or a radius is refused).
    thermal_scale : ScalePrior
        Prior of the total cross-section [au^2].
    calibration : float
        Fractional calibration systematic of the thermal photometry.
    which : {"joint", "scattered", "thermal"}
        The data :meth:`ln_likelihood` uses (the runs of ``verdicts_by_data``).
    """

    def __init__(self, scattered, thermal_model, thermal_obs: DiskPhotometry, radius_au=None,
                 thermal_scale: ScalePrior = ScalePrior(1e-6, 1e6), calibration: float = 0.0, which: str = "joint"):
        if is_belt(thermal_model):
            if radius_au is not None or getattr(scattered.space, "ring_radius", None) is not None:
                raise InputError("a belt's radii are fixed by its edges: give no radius_au and no ring_radius",
                                 where="radius_au")
            r = None
        elif radius_au is None:
            if getattr(scattered.space, "ring_radius", None) is None:
                raise InputError("the ring radius is needed: give radius_au or a space with ring_radius",
                                 where="radius_au")
            r = None
        else:
            r = float(radius_au)
            if not (np.isfinite(r) and r > 0):
                raise InputError(f"the ring radius must be > 0 au, got {radius_au!r}", where="radius_au")
        if not (np.isfinite(calibration) and calibration >= 0):
            raise InputError(f"the calibration systematic must be >= 0, got {calibration!r}", where="calibration")
        if which not in JOINT_PARTS:
            raise InputError(f"which must be one of {JOINT_PARTS}, got {which!r}", where="which")
        self.scattered = scattered
        self.thermal = ThermalProblem(thermal_model, thermal_obs, scattered.space, thermal_scale, calibration, r)
        self.thermal_model = thermal_model
        self.thermal_obs = thermal_obs
        self.radius_au = r
        self.thermal_scale = thermal_scale
        self.calibration = float(calibration)
        self.which = which

    @property
    def space(self):
        return self.scattered.space

    @property
    def tied(self) -> str:
        """What both data sets share (:func:`tied_text` of the thermal model)."""
        return tied_text(self.thermal_model)

    @property
    def colour_model(self):
        """The scattered-light forward model (what the fit machinery prepares and quotes)."""
        return self.scattered.colour_model

    @property
    def n_detections(self) -> int:
        """Detections the current data set (``which``) holds."""
        n_s, n_t = self.scattered.obs.n_detections, self.thermal_obs.n_detections
        return {"joint": n_s + n_t, "scattered": n_s, "thermal": n_t}[self.which]

    @property
    def n_effective(self) -> int:
        """Free parameters of the current data set: the space's, plus the thermal scale when used."""
        return self.space.n_effective + (self.which == "joint")

    def thermal_ln_likelihood(self, theta) -> np.ndarray:
        """ln L of the thermal data alone (cross-section marginalised), ndarray[N]."""
        return self.thermal.ln_likelihood(theta)

    def part(self, which: str):
        """The ln L function of one data set (``"scattered"``, ``"thermal"``) or ``"joint"``."""
        return {"scattered": self.scattered.ln_likelihood, "thermal": self.thermal_ln_likelihood,
                "joint": self.joint_ln_likelihood}[which]

    def joint_ln_likelihood(self, theta) -> np.ndarray:
        """Joint ln L (both scales marginalised) for theta[N, ndim] -> ndarray[N]."""
        a = self.scattered.ln_likelihood(theta)
        b = self.thermal_ln_likelihood(theta)
        return np.where((a <= ZERO_LIKELIHOOD) | (b <= ZERO_LIKELIHOOD), ZERO_LIKELIHOOD, a + b)

    def ln_likelihood(self, theta) -> np.ndarray:
        """ln L of the data set ``which`` (default both) for theta[N, ndim] -> ndarray[N]."""
        return self.part(self.which)(np.atleast_2d(theta))

    def batch(self, theta) -> np.ndarray:
        """Vectorised ln L (what :mod:`motes.dust.fit.batch` calls)."""
        return self.ln_likelihood(np.atleast_2d(theta))

    def __call__(self, v) -> float:
        return float(self.ln_likelihood(np.atleast_2d(v))[0])
