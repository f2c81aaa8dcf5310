"""One model of a fit: forward model + data + priors, as a likelihood.

:class:`FitProblem` evaluates the log-likelihood of parameter vectors of one
model (a subset of the candidate materials). Nested samplers in worker
processes need the likelihood and the prior transform as picklable callables:
:class:`ProblemHandle` is that small, picklable recipe. It holds the parsed
fit description and the model's name; each process builds the
:class:`FitProblem` (the forward model, its lookup tables) once, the first time
it is called, and keeps it in a per-process cache. Pickling never carries a
built forward model.
"""

from __future__ import annotations

import hashlib
import inspect
import math
import os
from pathlib import Path

import numpy as np

from ...errors import FitError, InputError, MotesError, quoted_names
from ...parameters import MIXTURE_PARAMETERS
from .spec import FitSpec, ModelSpec
from ..likelihood import chi_square_with_best_scale, effective_errors, ln_likelihood
from ..observations import DiskPhotometry, read_disk_photometry
from .priors import ParameterSpace
from ..likelihood import draw_scale, ln_marginal_likelihood

__all__ = [
    "FitProblem",
    "ProblemHandle",
    "build_colour_model",
    "read_fit_photometry",
    "ZERO_LIKELIHOOD",
    "HandleLikelihood",
    "HandlePriorTransform",
    "reset_traces",
]

#: ln L returned where the forward model cannot be evaluated (dynesty needs a finite number).
ZERO_LIKELIHOOD = -1e300


def read_fit_photometry(spec: FitSpec) -> DiskPhotometry:
    """Read the disk photometry of a fit, with the description's user bands.

    Problems name the file as the description gave it (not its absolute path).
    """
    import dataclasses

    try:
        obs = read_disk_photometry(spec.photometry_path, custom_bands=spec.description.custom_bands or None)
    except InputError as exc:
        if exc.path != str(spec.photometry_path):
            raise
        raise InputError(exc.reason, spec.photometry_shown, exc.where) from None
    # summaries, report pages and later messages name the file as given, too (issue 14)
    return dataclasses.replace(obs, path=spec.photometry_shown)


def build_colour_model(spec: FitSpec, materials, bands, intensities=None):
    """The disk-colour forward model for a subset of the candidate materials.

    Parameters
    ----------
    spec : FitSpec
    materials : tuple of str
        Names from the description's ``[[materials]]``, in order.
    bands : tuple of Band
        The photometry's bands, in order.
    intensities : tuple of str, optional
        ``"total"``/``"polarised"`` per band (the photometry's ``intensity``);
        passed only when the data have polarised rows.

    Returns
    -------
    motes.dust.model.colours.DiskColourModel
        Built from the description with only these materials
        (:meth:`motes.dust.model.description.ModelDescription.subset`).
    """
    return spec.description.subset(materials).build_model(bands=bands, intensities=intensities)


def _blowout_function(spec: FitSpec, colour_model):
    """``blowout(fractions[N, K], porosity[N]) -> a_blow[N]`` [um] of each mixture.

    The one blow-out computation of motes,
    :meth:`motes.dust.model.colours.DiskColourModel.blowout_sizes` (Mie Q_pr
    averaged over the stellar spectrum). Refuses before sampling when the
    star has no luminosity and mass, when a density is unknown, or when a pure
    component at the porosity bounds has no blow-out size (beta < 1/2 at
    every size): a_min cannot then be tied to it.
    """
    star = spec.description.star
    if not star.has_luminosity_and_mass:
        raise FitError(f"{spec.source}: a_min tied to the blow-out size needs [star] luminosity and mass")
    lum, mass = star.luminosity, star.mass
    missing = [m.name for m in colour_model.materials if not (np.isfinite(m.density) and m.density > 0)]
    if missing:
        raise FitError(f"a_min tied to the blow-out size needs the bulk density of {quoted_names(missing)}")
    porosity = spec.parameters.get("porosity")
    if porosity is None or not porosity.free:
        ends = [0.0 if porosity is None else porosity.value]
    else:
        ends = [porosity.lower, porosity.upper]
    k = len(colour_model.materials)
    pure = np.repeat(np.eye(k), len(ends), axis=0)
    sizes = colour_model.blowout_sizes(pure, np.tile(ends, k), lum, mass)
    if not np.all(np.isfinite(sizes)):
        bad = sorted({colour_model.materials[i // len(ends)].name for i in np.flatnonzero(~np.isfinite(sizes))})
        raise FitError(f"{spec.source}: a_min is tied to the blow-out size, but grains of {quoted_names(bad)} are never blown "
                       f"out by this star (beta < 1/2 at every size, L = {lum:g} L_sun, M = {mass:g} M_sun); "
                       "give a_min in um instead")

    def blowout(fractions, porosity):
        return colour_model.blowout_sizes(fractions, porosity, lum, mass)

    return blowout


class FitProblem:
    """Likelihood of one model of a fit.

    Parameters
    ----------
    colour_model : object
        Has ``flux_ratio(fractions[N, K], porosity[N], a_min[N], q[N], a_max=[N])
        -> ndarray[N, B]`` (and optionally an ``angle`` keyword) with the
        photometry's bands in order.
    obs : DiskPhotometry
    space : ParameterSpace
    """

    def __init__(self, colour_model, obs: DiskPhotometry, space: ParameterSpace):
        self.colour_model = colour_model
        self.obs = obs
        self.space = space
        params = inspect.signature(colour_model.flux_ratio).parameters
        self._angle_keyword = next((k for k in ("angle_deg", "angle", "angles_deg") if k in params), None)
        if space.angle.free and self._angle_keyword is None:
            raise FitError("a free scattering angle needs a forward model whose flux_ratio takes an angle; "
                           "this one does not: fix angle in [parameters]")
        if obs.has_polarised and tuple(getattr(colour_model, "intensities", ())) != tuple(obs.intensity):
            raise FitError(f"{obs.path or 'the photometry'}: the data have polarised-intensity rows "
                           f"({', '.join(b for b, p in zip(obs.band_names, obs.is_polarised) if p)}), but the "
                           "forward model has no polarised columns for them")
        self._polarised = obs.is_polarised      # polarised model values may be negative

    # ------------------------------------------------------------ forward
    def model_ratios(self, theta) -> np.ndarray:
        """Unscaled model disk/star ratios, ndarray[N, B], for parameters theta[N, ndim]."""
        p = self.space.unpack(theta)
        kwargs = {"a_max": p["a_max"]}
        if self._angle_keyword is not None and (self.space.angle.free or self.space.angle.value != 90.0):
            kwargs[self._angle_keyword] = p["angle"]
        if "f_max" in p:          # a fitted f_max (hollow-sphere grains): one value per point
            kwargs["f_max"] = p["f_max"]
        flux = self.colour_model.flux_ratio(p["fractions"], *(p[n] for n in MIXTURE_PARAMETERS[:3]), **kwargs)
        return np.atleast_2d(np.asarray(flux, dtype=float))

    def ln_likelihood(self, theta) -> np.ndarray:
        """ln L (scale marginalised, or at the sampled scale) for theta[N, ndim] -> ndarray[N]."""
        theta = np.atleast_2d(theta)
        p = self.space.unpack(theta)
        try:
            flux = self.model_ratios(theta)
        except MotesError:
            return np.full(theta.shape[0], ZERO_LIKELIHOOD)
        bad = ~np.all(np.isfinite(flux) & ((flux >= 0) | self._polarised), axis=-1)
        flux = np.where(bad[:, None], 1.0, flux)
        if self.space.sample_scale:
            out = ln_likelihood(p["scale"][:, None] * flux, self.obs, p["systematic"])
        else:
            out, _ = ln_marginal_likelihood(flux, self.obs, self.space.scale, p["systematic"])
        out = np.where(bad | ~np.isfinite(out), ZERO_LIKELIHOOD, out)
        return out

    def best_scale_fit(self, theta):
        """Profile over the scale: best scale, chi2 and max ln L for theta[N, ndim].

        Returns
        -------
        scale, chi2, ln_l_max : ndarray[N]
            ``ln_l_max`` includes the Gaussian normalisation (systematic term).
        """
        theta = np.atleast_2d(theta)
        p = self.space.unpack(theta)
        flux = self.model_ratios(theta)
        scale, chi2, _ = chi_square_with_best_scale(flux, self.obs, p["systematic"])
        sig = effective_errors(self.obs, p["systematic"])
        norm = np.where(self.obs.is_limit, 0.0, np.log(sig) + 0.5 * math.log(2 * math.pi)).sum(axis=-1)
        return scale, chi2, -0.5 * chi2 - norm

    def posterior_scale(self, theta, rng: np.random.Generator):
        """Draw the scale for posterior samples theta[N, ndim] (or return the sampled one)."""
        theta = np.atleast_2d(theta)
        p = self.space.unpack(theta)
        if self.space.sample_scale:
            return p["scale"]
        flux = self.model_ratios(theta)
        return draw_scale(flux, self.obs, self.space.scale, p["systematic"], rng=rng)


# --------------------------------------------------------------- handles
_PROBLEMS: dict[str, FitProblem] = {}
_TRACED: set = set()


def reset_traces(trace_dir) -> None:
    """Forget, in this process, which handles already left a trace in ``trace_dir``."""
    trace_dir = str(trace_dir)
    for item in [t for t in _TRACED if t[1] == trace_dir]:
        _TRACED.discard(item)


class ProblemHandle:
    """Picklable recipe for one model's :class:`FitProblem`, with a per-process cache.

    Parameters
    ----------
    spec : FitSpec
    model : ModelSpec
    model_factory : callable, optional
        ``model_factory(spec, materials, bands) -> colour model``; picklable
        (module level). Default :func:`build_colour_model`.
    trace_dir : str, optional
        Folder in which each process that evaluates the likelihood leaves an
        empty file named after its process id (how a run reports how many
        worker processes really took part).
    part : {"joint", "scattered", "thermal"}
        With thermal data (``spec.thermal``): which data the likelihood uses
        (:class:`motes.dust.fit.joint.JointProblem` ``which``). Ignored otherwise.
    """

    def __init__(self, spec: FitSpec, model: ModelSpec, model_factory=None, trace_dir=None, part: str = "joint"):
        self.spec = spec
        self.model = model
        self.model_factory = model_factory
        self.trace_dir = None if trace_dir is None else str(trace_dir)
        self.part = part
        factory_name = "default" if model_factory is None else \
            f"{getattr(model_factory, '__module__', '')}.{getattr(model_factory, '__qualname__', repr(model_factory))}"
        key = f"{spec.digest}|{model.name}|{factory_name}|{spec.source}"
        if spec.thermal is not None:
            key += f"|{part}"
        self.key = hashlib.sha256(key.encode()).hexdigest()

    def build(self) -> FitProblem:
        """Build (or fetch from this process's cache) the :class:`FitProblem`."""
        problem = _PROBLEMS.get(self.key)
        if problem is None:
            obs = read_fit_photometry(self.spec)
            factory = self.model_factory or build_colour_model
            if obs.has_polarised:
                if "intensities" not in inspect.signature(factory).parameters:
                    raise FitError(f"{obs.path}: the data have polarised-intensity rows, but the model factory "
                                   "takes no intensities (it models total intensity only)")
                colour_model = factory(self.spec, self.model.materials, obs.bands, intensities=obs.intensity)
            else:
                colour_model = factory(self.spec, self.model.materials, obs.bands)
            blowout = None
            a_min = self.spec.parameters.get("a_min")
            if a_min is not None and a_min.relative_to == "blowout":
                blowout = _blowout_function(self.spec, colour_model)
            space = self.spec.parameter_space(self.model, blowout=blowout)
            problem = FitProblem(colour_model, obs, space)
            if self.spec.thermal is not None:
                from .joint_run import build_joint_problem

                problem = build_joint_problem(self.spec, self.model, problem, self.part)
            _PROBLEMS[self.key] = problem
        return problem

    def _trace(self):
        if self.trace_dir is None or (self.key, self.trace_dir) in _TRACED:
            return
        _TRACED.add((self.key, self.trace_dir))
        try:
            Path(self.trace_dir).mkdir(parents=True, exist_ok=True)
            (Path(self.trace_dir) / str(os.getpid())).touch()
        except OSError:
            pass

    @property
    def space(self) -> ParameterSpace:
        return self.build().space

    def log_likelihood(self, v) -> float:
        """dynesty log-likelihood of one parameter vector."""
        self._trace()
        return float(self.build().ln_likelihood(np.asarray(v)[None, :])[0])

    def log_likelihood_batch(self, theta) -> np.ndarray:
        """ln L of parameter vectors theta[N, ndim] in one vectorised call, ndarray[N]."""
        self._trace()
        return np.asarray(self.build().ln_likelihood(np.atleast_2d(np.asarray(theta, dtype=float))), dtype=float)

    def prior_transform(self, u) -> np.ndarray:
        """dynesty prior transform of one unit-cube point (or of points u[N, ndim])."""
        return self.build().space.transform(np.asarray(u, dtype=float))

    def __getstate__(self):
        return {"spec": self.spec, "model": self.model, "model_factory": self.model_factory,
                "trace_dir": self.trace_dir, "key": self.key, "part": self.part}

    def __setstate__(self, state):
        self.__dict__.update(state)


class HandleLikelihood:
    """Picklable ``loglike(v)`` bound to a :class:`ProblemHandle`."""

    def __init__(self, handle: ProblemHandle):
        self.handle = handle

    def __call__(self, v):
        return self.handle.log_likelihood(v)

    def batch(self, theta) -> np.ndarray:
        """ln L of theta[N, ndim] at once (used by :class:`motes.dust.fit.batch.BatchPool`)."""
        return self.handle.log_likelihood_batch(theta)


class HandlePriorTransform:
    """Picklable ``prior_transform(u)`` bound to a :class:`ProblemHandle`."""

    def __init__(self, handle: ProblemHandle):
        self.handle = handle

    def __call__(self, u):
        return self.handle.prior_transform(u)

    def batch(self, u) -> np.ndarray:
        """Transform of unit-cube points u[N, ndim] at once."""
        return self.handle.prior_transform(np.atleast_2d(u))
