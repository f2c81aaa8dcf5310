"""Priors of a disk-colour fit and the map from the unit cube to parameters.

Nested sampling draws points uniformly in the unit cube [0, 1)^d; a prior is
the map from that cube to physical parameters (Skilling 2006, Bayesian
Analysis 1, 833; Speagle 2020, MNRAS 493, 3132, sec. 2).

Volume fractions of the solid (K materials) are uniform on the simplex, i.e.
Dirichlet(1, ..., 1). The map uses K cube coordinates: x_i = -ln u_i are
independent Exp(1) draws, and f_i = x_i / sum_j x_j is then Dirichlet(1, ..., 1)
distributed (e.g. Devroye 1986, *Non-Uniform Random Variate Generation*,
ch. XI.4). One cube direction (the sum of the x_i) does not change the
fractions; the map is still measure-preserving, so evidences are exact. A
one-material model has no fraction coordinate.

Other parameters: uniform, log-uniform, or fixed. ``a_min`` may be tied to
the radiation-pressure blow-out size of each sampled mixture: its prior is then
log-uniform in the ratio a_min / a_blow, and a_blow follows from the mixture's
density (fractions, porosity) and the star's luminosity and mass.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ...errors import FitError, quoted_names
from ...parameters import PARAMETERS, PRIOR_PARAMETERS
from ...tomlcheck import check_keys
from ..likelihood import ScalePrior

__all__ = [
    "Prior",
    "ParameterSpace",
    "dirichlet_from_cube",
    "PRIOR_KINDS",
    "PRIOR_KEYS",
    "parse_prior",
]

#: Accepted prior kinds.
PRIOR_KINDS = ("uniform", "log-uniform", "fixed")
#: Keys of a prior table, e.g. ``porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }``.
PRIOR_KEYS = ("prior", "lower", "upper", "value", "relative_to")


def dirichlet_from_cube(u) -> np.ndarray:
    """Map unit-cube coordinates to fractions uniform on the simplex.

    Parameters
    ----------
    u : ndarray[..., K]
        Coordinates in (0, 1].

    Returns
    -------
    ndarray[..., K]
        Fractions f_i = x_i / sum x_j with x_i = -ln u_i; rows sum to 1.

    Examples
    --------
    >>> f = dirichlet_from_cube([0.5, 0.25])
    >>> print(f"{f[0]:.4f} {f[1]:.4f}")
    0.3333 0.6667
    """
    u = np.asarray(u, dtype=float)
    x = -np.log(np.clip(u, 1e-300, 1.0))
    total = x.sum(axis=-1, keepdims=True)
    k = u.shape[-1]
    with np.errstate(invalid="ignore", divide="ignore"):
        f = np.where(total > 0, x / total, 1.0 / k)
    return f


@dataclass(frozen=True)
class Prior:
    """A one-dimensional prior.

    Parameters
    ----------
    kind : {"uniform", "log-uniform", "fixed"}
    lower, upper : float
        Bounds (uniform and log-uniform; log-uniform needs lower > 0).
    value : float
        The value of a fixed parameter.
    relative_to : str or None
        ``"blowout"`` for an ``a_min`` whose bounds are multiples of the
        blow-out size (only allowed for ``a_min``).
    """

    kind: str = "fixed"
    lower: float = math.nan
    upper: float = math.nan
    value: float = math.nan
    relative_to: str | None = None

    def __post_init__(self):
        if self.kind not in PRIOR_KINDS:
            raise FitError(f"prior kind must be one of {quoted_names(PRIOR_KINDS)}, got {self.kind!r}")
        if self.kind == "fixed":
            if not math.isfinite(self.value):
                raise FitError(f"a fixed parameter needs a finite value, got {self.value!r}")
        else:
            lo, hi = float(self.lower), float(self.upper)
            if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
                raise FitError(f"{self.kind} prior needs finite lower < upper, got lower={self.lower!r}, upper={self.upper!r}")
            if self.kind == "log-uniform" and lo <= 0:
                raise FitError(f"log-uniform prior needs lower > 0, got lower={lo!r}")

    @property
    def free(self) -> bool:
        """True when the parameter is sampled."""
        return self.kind != "fixed"

    def transform(self, u):
        """Map u in [0, 1] to the parameter (inverse CDF)."""
        u = np.asarray(u, dtype=float)
        if self.kind == "uniform":
            return self.lower + u * (self.upper - self.lower)
        if self.kind == "log-uniform":
            return self.lower * np.exp(u * math.log(self.upper / self.lower))
        return np.full(u.shape, self.value)

    def describe(self) -> str:
        """Short text, e.g. ``log-uniform [0.3, 20]``."""
        rel = " x a_blow" if self.relative_to == "blowout" else ""
        if self.kind == "fixed":
            return f"fixed {self.value:g}{rel}"
        return f"{self.kind} [{self.lower:g}, {self.upper:g}]{rel}"


def parse_prior(entry, name: str, path=None, allow_relative: bool = False) -> Prior:
    """Build a :class:`Prior` from a TOML value.

    A number means a fixed value; a table has ``prior`` (one of
    :data:`PRIOR_KINDS`), ``lower`` and ``upper`` (or ``value`` for fixed), and,
    for ``a_min`` only, ``relative_to = "blowout"``.

    Raises
    ------
    motes.errors.InputError
        Naming the file and ``[parameters] <name>``.
    """
    from ...errors import InputError

    where = f"[parameters] {name}"
    if isinstance(entry, bool):
        raise InputError(f"expected a number or a table, got {entry!r}", path, where)
    if isinstance(entry, (int, float)):
        entry = {"prior": "fixed", "value": float(entry)}
    if not isinstance(entry, dict):
        raise InputError(f"expected a number or a table {{prior, lower, upper}}, got {entry!r}", path, where)
    check_keys(entry, PRIOR_KEYS, path=path, where=where)
    kind = str(entry.get("prior", "fixed" if "value" in entry else "uniform")).strip().lower()
    kind = {"loguniform": "log-uniform", "log_uniform": "log-uniform"}.get(kind, kind)
    relative = entry.get("relative_to")
    if relative is not None:
        relative = str(relative).strip().lower()
        if not allow_relative or relative != "blowout":
            raise InputError(
                "relative_to is only allowed for a_min, with the value \"blowout\"", path, where)

    def number(key):
        if key not in entry:
            return math.nan
        value = entry[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(f"{key} must be a number, got {value!r}", path, where)
        return float(value)

    try:
        return Prior(kind=kind, lower=number("lower"), upper=number("upper"), value=number("value"),
                     relative_to=relative)
    except FitError as exc:
        raise InputError(str(exc), path, where) from None


@dataclass(frozen=True)
class ParameterSpace:
    """The parameters of one model and their priors.

    Parameters
    ----------
    materials : tuple of str
        Materials of this model (its fractions are free when K > 1).
    porosity, a_min, q, a_max, angle, systematic : Prior
        Priors (``fixed`` for parameters that are not sampled). ``angle`` is
        the scattering angle [deg]; ``a_min`` and ``a_max`` are in um.
    scale : ScalePrior
        Prior of the flux scale (the same in every model).
    sample_scale : bool
        Sample ln s as a parameter instead of marginalising it.
    blowout : callable or None
        ``blowout(fractions[N, K], porosity[N]) -> a_blow[N]`` [um]; needed
        when ``a_min.relative_to == "blowout"``.
    f_max : Prior or None
        Prior of the largest vacuum-core volume fraction of hollow-sphere
        grains (``[parameters] f_max``); None: not a parameter of this fit
        (spheres, or f_max fixed in ``[model]``). Sampled after the other
        scalars (before ``ring_radius``).
    ring_radius : Prior or None
        Prior of the ring radius [au] of a joint fit with thermal data
        (:mod:`motes.dust.fit.thermal_spec`); None (no such parameter) otherwise.
        When free it is sampled after the other scalars.
    """

    materials: tuple[str, ...]
    porosity: Prior = Prior("uniform", 0.0, 0.9)
    a_min: Prior = Prior("log-uniform", 0.1, 20.0)
    q: Prior = Prior("uniform", 3.0, 4.5)
    a_max: Prior = Prior("fixed", value=PARAMETERS["a_max"].default)
    angle: Prior = Prior("fixed", value=PARAMETERS["angle"].default)
    systematic: Prior = Prior("fixed", value=PARAMETERS["systematic"].default)
    scale: ScalePrior = ScalePrior()
    sample_scale: bool = False
    f_max: Prior | None = None
    ring_radius: Prior | None = None
    blowout: Callable | None = field(default=None, compare=False, repr=False)

    def __post_init__(self):
        if len(self.materials) == 0:
            raise FitError("a model needs at least one material")
        if self.a_min.relative_to == "blowout" and self.blowout is None:
            raise FitError("a_min tied to the blow-out size needs the star's luminosity and mass")
        for name in ("porosity", "q") + (("f_max",) if self.f_max is not None else ()):
            p, declared = getattr(self, name), PARAMETERS[name]
            lo = p.value if p.kind == "fixed" else p.lower
            hi = p.value if p.kind == "fixed" else p.upper
            if not declared.contains([lo, hi]).all():
                raise FitError(f"{name} must lie in {declared.interval}, got {p.describe()}")
        if self.systematic.kind != "fixed" and self.systematic.lower < 0:
            raise FitError(f"the systematic error fraction must be >= 0, got {self.systematic.describe()}")

    # ------------------------------------------------------------- layout
    @property
    def n_fraction_dims(self) -> int:
        """Cube coordinates spent on fractions (K, or 0 for one material)."""
        k = len(self.materials)
        return k if k > 1 else 0

    def _scalar_params(self):
        out = [(n, getattr(self, n)) for n in PRIOR_PARAMETERS]
        if self.f_max is not None:
            out.append(("f_max", self.f_max))
        if self.ring_radius is not None:
            out.append(("ring_radius", self.ring_radius))
        return [(n, p) for n, p in out if p.free]

    @property
    def names(self) -> tuple[str, ...]:
        """Names of the sampled coordinates, in order."""
        frac = tuple(f"fraction_{m}" for m in self.materials) if self.n_fraction_dims else ()
        scale = ("scale",) if self.sample_scale else ()
        return frac + tuple(n for n, _ in self._scalar_params()) + scale

    @property
    def ndim(self) -> int:
        """Dimension of the unit cube."""
        return len(self.names)

    @property
    def n_effective(self) -> int:
        """Number of free parameters the data must constrain (K - 1 fractions, others, scale)."""
        return max(len(self.materials) - 1, 0) + len(self._scalar_params()) + 1

    def describe(self) -> list[tuple[str, str]]:
        """(parameter, prior text) pairs for reports."""
        rows = []
        if len(self.materials) > 1:
            rows.append(("fractions", f"uniform on the simplex (Dirichlet(1,...,1)) over {', '.join(self.materials)}"))
        else:
            rows.append(("fractions", f"{self.materials[0]} only (fraction 1)"))
        for n in PRIOR_PARAMETERS:
            prior, unit = getattr(self, n), PARAMETERS[n].unit_text
            rows.append((n, prior.describe() + (f" {unit}" if unit and prior.relative_to is None else "")))
        if self.f_max is not None:
            rows.append(("f_max", self.f_max.describe()))
        if self.ring_radius is not None:
            rows.append(("ring_radius", self.ring_radius.describe() + " au"))
        rows.append(("scale", f"log-uniform [{self.scale.lower:g}, {self.scale.upper:g}], "
                     + ("sampled" if self.sample_scale else "marginalised numerically")))
        return rows

    # ---------------------------------------------------------- transform
    def transform(self, u) -> np.ndarray:
        """Map unit-cube points to parameter vectors.

        Parameters
        ----------
        u : ndarray[ndim] or ndarray[N, ndim]

        Returns
        -------
        ndarray, same shape
            Parameters in the order of :attr:`names` (fractions, then the free
            scalars, then the scale when sampled). A tied ``a_min`` is returned
            in um (ratio times the mixture's blow-out size).
        """
        u = np.asarray(u, dtype=float)
        single = u.ndim == 1
        u2 = np.atleast_2d(u)
        out = np.empty_like(u2)
        kf = self.n_fraction_dims
        if kf:
            out[:, :kf] = dirichlet_from_cube(u2[:, :kf])
        col = kf
        for name, prior in self._scalar_params():
            out[:, col] = prior.transform(u2[:, col])
            col += 1
        if self.sample_scale:
            out[:, col] = self.scale.transform(u2[:, col])
        if self.a_min.relative_to == "blowout" and self.a_min.free:
            i = self.names.index("a_min")
            params = self.unpack(out, _raw_a_min=True)
            out[:, i] = out[:, i] * self.blowout(params["fractions"], params["porosity"])
        return out[0] if single else out

    def unpack(self, theta, _raw_a_min: bool = False) -> dict[str, np.ndarray]:
        """Split parameter vectors into named arrays for the forward model.

        Parameters
        ----------
        theta : ndarray[N, ndim] (or [ndim])

        Returns
        -------
        dict
            ``fractions`` [N, K]; ``porosity``, ``a_min`` [um], ``q``,
            ``a_max`` [um], ``angle`` [deg], ``systematic`` and, when sampled,
            ``scale``: ndarray[N] each.
        """
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        n = theta.shape[0]
        kf = self.n_fraction_dims
        out = {"fractions": theta[:, :kf] if kf else np.ones((n, 1))}
        col = kf
        # the declared parameters, then the optional ones (None when the description has none), in column order
        for name in (*PRIOR_PARAMETERS, "f_max", "ring_radius"):
            prior = getattr(self, name)
            if prior is None:
                continue
            if prior.free:
                out[name] = theta[:, col]
                col += 1
            else:
                out[name] = np.full(n, prior.value)
        if self.sample_scale:
            out["scale"] = theta[:, col]
        if self.a_min.relative_to == "blowout" and not self.a_min.free and not _raw_a_min:
            out["a_min"] = out["a_min"] * self.blowout(out["fractions"], out["porosity"])
        return out
