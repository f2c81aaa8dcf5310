"""Parameters and boundary quantities, each declared once.

Two kinds of declaration live here:

* :data:`PARAMETERS`: the parameters of the disk forward model and its fits
  (fractions, porosity, grain-size limits, size slope, scattering angle,
  systematic term, flux scale) with unit, allowed range and meaning. Fit
  priors, grid axes, the forward model's validation and the docs read them.
* :data:`BOUNDARY_QUANTITIES`: argument names that carry a physical quantity
  at the public boundary (``wavelength``, ``a_min``, ``distance_pc``, ``teff``,
  ...) with the internal unit (:mod:`motes.conventions`) and physical type.

Public callables that take such an argument are decorated with
:func:`accepts_quantities`: an :class:`astropy.units.Quantity` is converted to
the internal unit (``to_value``), a bare number means the internal unit and is
passed on unchanged, and a Quantity of the wrong physical type is refused with
:class:`motes.errors.InputError` naming the callable, the argument, the unit
received and the unit expected::

    @accepts_quantities
    def flux_ratio(self, fractions, porosity, a_min, q, a_max=None): ...

    model.flux_ratio([1.0], 0.0, 2 * u.mm, 3.5, 10 * u.mm)   # a_min = 2000 um, a_max = 10000 um
"""

from __future__ import annotations

import functools
import inspect
import math
from dataclasses import dataclass
from types import MappingProxyType

import astropy.units as u
import numpy as np

from .conventions import (
    DENSITY_UNIT,
    DISTANCE_UNIT,
    FLAM_UNIT,
    FNU_UNIT,
    TEMPERATURE_UNIT,
    WAVELENGTH_UNIT,
    to_internal,
)

__all__ = [
    "Parameter",
    "PARAMETERS",
    "MIXTURE_PARAMETERS",
    "PRIOR_PARAMETERS",
    "GRAIN_PARAMETERS",
    "parameter_table",
    "BoundaryQuantity",
    "BOUNDARY_QUANTITIES",
    "SCATTERING_ANGLE_RAD",
    "STAR_TEFF",
    "REFRACTIVE_N",
    "EXTINCTION_K",
    "MAGNITUDE",
    "accepts_quantities",
    "quantity_arguments",
    "convert_arguments",
]

_ROLES = ("composition", "mixture", "grain", "geometry", "noise", "scale", "star", "material", "photometry",
          "thermal")


@dataclass(frozen=True)
class Parameter:
    """One parameter of the disk forward model or of its fits.

    Parameters
    ----------
    name : str
        As written in descriptions, stores and keyword arguments.
    role : {"composition", "mixture", "grain", "geometry", "noise", "scale"}
        ``mixture`` parameters are the per-mixture arguments of
        ``DiskColourModel.flux_ratio`` and the grid axes, in that order;
        ``grain`` ones describe the grain model of a run (one value per run).
    unit : astropy unit
        The internal unit (dimensionless for pure numbers).
    lo, hi : float
        Allowed range; ``open_lo`` / ``open_hi`` exclude the end.
    meaning : str
        One phrase, used in messages and in the docs table.
    default : float or None
        The value a description that leaves the parameter out gets (None: no
        default, the parameter must be given or has a prior).
    """

    name: str
    role: str
    unit: u.UnitBase
    lo: float
    hi: float
    open_lo: bool
    open_hi: bool
    meaning: str
    default: float | None = None

    def __post_init__(self):
        if self.role not in _ROLES:
            raise ValueError(f"role must be one of {_ROLES}, got {self.role!r}")

    @property
    def physical_type(self) -> str:
        """astropy's physical type of :attr:`unit` (e.g. ``"length"``)."""
        return str(self.unit.physical_type)

    @property
    def unit_text(self) -> str:
        """The unit as written in files and messages (``"um"``, ``"deg"``; ``""`` if none)."""
        return self.unit.to_string()

    @property
    def interval(self) -> str:
        """The allowed range as text, e.g. ``[0, 1)``.

        Examples
        --------
        >>> PARAMETERS["porosity"].interval
        '[0, 1)'
        >>> PARAMETERS["a_min"].interval
        '(0, inf)'
        """
        return f"{'(' if self.open_lo else '['}{self.lo:g}, {self.hi:g}{')' if self.open_hi else ']'}"

    def contains(self, value) -> np.ndarray:
        """True where ``value`` is finite and inside the allowed range (elementwise)."""
        v = np.asarray(value, dtype=float)
        above = v > self.lo if self.open_lo else v >= self.lo
        below = v < self.hi if self.open_hi else v <= self.hi
        return np.isfinite(v) & above & below


_INF = math.inf
_NONE = u.dimensionless_unscaled

#: The model's parameters, in the order of ``DiskColourModel.flux_ratio`` and of the fit's ``[parameters]``.
PARAMETERS: MappingProxyType = MappingProxyType({p.name: p for p in (
    Parameter("fractions", "composition", _NONE, 0.0, 1.0, False, False,
              "volume fractions of the solid, one per material; they sum to 1"),
    Parameter("porosity", "mixture", _NONE, 0.0, 1.0, False, True,
              "vacuum fraction of the whole grain"),
    Parameter("a_min", "mixture", WAVELENGTH_UNIT, 0.0, _INF, True, True,
              "smallest grain radius"),
    # q = 3.5: collisional cascade (Dohnanyi 1969, JGR 74, 2531). Allowed [0, 10]: slopes fitted to
    # debris disks lie near 3-4 and steeper than 10 would put all the cross-section in the smallest
    # grain, flatter than 0 in the largest (a wide margin around what is fitted; common practice, no
    # source); far outside, a^-q over- or underflows and the model is NaN.
    Parameter("q", "mixture", _NONE, 0.0, 10.0, False, False,
              "slope of the size distribution, dn/da ∝ a^-q", default=3.5),
    Parameter("a_max", "mixture", WAVELENGTH_UNIT, 0.0, _INF, True, True,
              "largest grain radius", default=1000.0),
    # f_max: largest vacuum-core volume fraction of the hollow-sphere grains (Min, Hovenier & de Koter
    # 2005, A&A 432, 909); f = 1 would be a grain of no material. One value per run ([model] f_max), a
    # fitted parameter ([parameters] f_max) or a grid axis ([grid] f_max), hollow spheres only.
    Parameter("f_max", "grain", _NONE, 0.0, 1.0, False, True,
              "largest vacuum-core volume fraction of hollow-sphere grains ([model] grains)"),
    Parameter("angle", "geometry", u.deg, 0.0, 180.0, True, False,
              "scattering angle", default=90.0),
    Parameter("systematic", "noise", _NONE, 0.0, _INF, False, True,
              "fractional error added in quadrature to every detection", default=0.0),
    Parameter("scale", "scale", _NONE, 0.0, _INF, False, True,
              "flux scale (dust amount and geometry) multiplying the model's ratios"),
    # the thermal side of a joint fit ([data] thermal, docs/fit.md "Joint fit"): where the grains are
    # and how much cross-section emits. A radius must also lie outside the sublimation radius
    # (motes.dust.fit.thermal_spec.sublimation_radius), which depends on the star.
    Parameter("ring_radius", "thermal", u.AU, 0.0, _INF, True, True,
              "distance of the ring's grains from the star (joint fits with thermal data)"),
    Parameter("thermal_scale", "scale", u.AU**2, 0.0, _INF, False, True,
              "total grain cross-section seen in the thermal data (joint fits)"),
    # a belt instead of a ring (r_in to r_out): surface density Sigma ∝ r^p. p = -1 is a usual choice for
    # debris belts (common practice, no source); |p| <= 10 keeps r^(p+2) within floating point over any
    # belt of the thermal side.
    Parameter("surface_density_index", "thermal", _NONE, -10.0, 10.0, False, False,
              "power-law index p of a belt's surface density, Sigma ∝ r^p (fixed; a belt of the thermal side)",
              default=-1.0),
)})

#: Effective temperature of a star (a photometry target's host, the star lighting a disk). 500-100000 K
#: spans the coolest brown dwarfs to the hottest O stars and white dwarfs (common practice, no source);
#: outside it the Planck function over- or underflows in the optical and near-infrared bands.
STAR_TEFF = Parameter("teff", "star", u.K, 500.0, 100000.0, False, False, "effective temperature of a star")

#: Real and imaginary parts of a material's refractive index m = n + ik in an n,k file. Up to 1e4:
#: metals reach a few hundred at millimetre wavelengths (Drude conductivity), dielectrics stay below
#: ~10 (common practice, no source); far beyond, the Mie series and the mixing rules lose all accuracy.
REFRACTIVE_N = Parameter("n", "material", _NONE, 0.0, 1e4, True, False, "real part of the refractive index")
EXTINCTION_K = Parameter("k", "material", _NONE, 0.0, 1e4, False, False, "imaginary part of the refractive index")

#: A magnitude or magnitude contrast in a photometry table. |m| <= 50: the Sun is -26.7 mag, the
#: faintest sources measured ~31 mag, and a 50 mag contrast is a flux ratio of 1e-20, far beyond any
#: instrument (common practice, no source); a larger value is a typing error, and 10^(-0.4 m)
#: would underflow to a zero flux.
MAGNITUDE = Parameter("magnitude", "photometry", _NONE, -50.0, 50.0, False, False,
                      "a magnitude or magnitude contrast [mag]")

#: Per-mixture parameters: ``flux_ratio(fractions, porosity, a_min, q, a_max)`` and the grid axes, in order.
MIXTURE_PARAMETERS: tuple[str, ...] = tuple(n for n, p in PARAMETERS.items() if p.role == "mixture")

#: Parameters with a prior in a fit's ``[parameters]`` table, in order.
PRIOR_PARAMETERS: tuple[str, ...] = tuple(n for n, p in PARAMETERS.items()
                                          if p.role in ("mixture", "geometry", "noise"))

#: Grain-model parameters: in a fit's ``[parameters]`` (a prior) or a grid's ``[grid]`` (an axis) only
#: when the grain model has them (f_max: ``[model] grains = "hollow spheres"``); absent otherwise.
GRAIN_PARAMETERS: tuple[str, ...] = tuple(n for n, p in PARAMETERS.items() if p.role == "grain")


def parameter_table() -> str:
    """The parameters as a Markdown table (the one in ``docs/fit.md``)."""
    rows = ["| parameter | unit | allowed | meaning |", "|---|---|---|---|"]
    for p in PARAMETERS.values():
        unit = p.unit_text.replace("um", "µm") or "—"
        rows.append(f"| `{p.name}` | {unit} | {p.interval} | {p.meaning} |")
    return "\n".join(rows)


# ------------------------------------------------------------ boundary quantities
@dataclass(frozen=True)
class BoundaryQuantity:
    """A physical quantity an argument carries at the public boundary.

    Parameters
    ----------
    unit : astropy unit
        The internal unit a bare number is taken to be in.
    meaning : str
    test_unit : astropy unit
        Another unit of the same physical type (the boundary tests pass a
        Quantity in it and check the conversion).
    spectral : bool
        Also accept frequencies, energies and wavenumbers (``u.spectral()``):
        right for a wavelength, wrong for a width.
    """

    unit: u.UnitBase
    meaning: str
    test_unit: u.UnitBase
    spectral: bool = False

    @property
    def physical_type(self) -> str:
        """astropy's physical type of :attr:`unit` (e.g. ``"length"``)."""
        return str(self.unit.physical_type)

    @property
    def equivalencies(self) -> list:
        """The equivalencies a conversion to :attr:`unit` uses."""
        if self.spectral:
            return u.spectral()
        if self.unit.physical_type == "temperature":
            return u.temperature()
        return []

    def to_internal(self, value, name: str, where: str | None = None):
        """``value`` in :attr:`unit`: Quantities converted, anything else returned unchanged.

        Raises
        ------
        motes.errors.InputError
            When ``value`` is a Quantity that does not convert to :attr:`unit`.
        """
        if not isinstance(value, u.Quantity):
            return value
        return to_internal(value, self.unit, name=name, equivalencies=self.equivalencies,
                           kind=self.physical_type, where=where)


_WAVELENGTH = BoundaryQuantity(WAVELENGTH_UNIT, "wavelength", u.nm, spectral=True)
_BANDWIDTH = BoundaryQuantity(WAVELENGTH_UNIT, "band width", u.nm)
_SIZE = BoundaryQuantity(PARAMETERS["a_min"].unit, "grain radius", u.mm)   # a_min, a_max: one unit
_TEMPERATURE = BoundaryQuantity(TEMPERATURE_UNIT, "temperature", u.deg_C)
_DISTANCE = BoundaryQuantity(DISTANCE_UNIT, "distance", u.kpc)
_FNU = BoundaryQuantity(FNU_UNIT, "flux density f_nu", u.mJy)
_FLAM = BoundaryQuantity(FLAM_UNIT, "flux density F_lambda", u.erg / u.s / u.cm**2 / u.AA)

#: Argument name -> the quantity it carries, for every public callable.
BOUNDARY_QUANTITIES: MappingProxyType = MappingProxyType({
    **dict.fromkeys(("wavelength", "wavelengths", "centre"), _WAVELENGTH),
    **dict.fromkeys(("width", "fwhm"), _BANDWIDTH),
    **dict.fromkeys(("a", "a_0", "radius", "a_range", "a_min", "a_max"), _SIZE),
    **dict.fromkeys(("angles_deg", "inclination_deg"), BoundaryQuantity(u.deg, "angle", u.rad)),
    **dict.fromkeys(("teff", "teffs", "star_teff", "temperature"), _TEMPERATURE),
    **dict.fromkeys(("luminosity", "luminosity_lsun"), BoundaryQuantity(u.L_sun, "luminosity", u.W)),
    **dict.fromkeys(("mass", "mass_msun"), BoundaryQuantity(u.M_sun, "mass", u.M_jup)),
    **dict.fromkeys(("r_au", "r_in_au", "r_out_au"),
                    BoundaryQuantity(u.AU, "distance from the star", u.km)),
    **dict.fromkeys(("distance_pc", "distance_pc_error", "host_distance_pc"), _DISTANCE),
    **dict.fromkeys(("parallax_mas", "parallax_mas_error"), BoundaryQuantity(u.mas, "parallax", u.arcsec)),
    **dict.fromkeys(("density", "densities"),
                    BoundaryQuantity(DENSITY_UNIT, "grain (bulk) density", u.kg / u.m**3)),
    **dict.fromkeys(("flux_jy", "zero_point_jy", "mean_fnu", "flux_nu"), _FNU),
    **dict.fromkeys(("flux_lambda", "mean_flux_lambda"), _FLAM),
    "radius_rjup": BoundaryQuantity(u.R_jup, "radius", u.R_earth),
    **dict.fromkeys(("ra_deg", "dec_deg", "pa_deg", "pa_error_deg", "north_angle_error_deg"),
                    BoundaryQuantity(u.deg, "sky angle", u.rad)),
    **dict.fromkeys(("pm_ra_mas_yr", "pm_ra_mas_yr_error", "pm_dec_mas_yr", "pm_dec_mas_yr_error",
                     "orbital_tolerance_mas_yr", "background_pm_sigma_mas_yr"),
                    BoundaryQuantity(u.mas / u.yr, "proper motion", u.arcsec / u.yr)),
    **dict.fromkeys(("separation_mas", "separation_mas_error"),
                    BoundaryQuantity(u.mas, "angular offset", u.arcsec)),
})
#: Scattering angles of the Mie functions (``theta``; not a registered name: ``theta`` is also a parameter vector).
SCATTERING_ANGLE_RAD = BoundaryQuantity(u.rad, "scattering angle", u.deg)


# ------------------------------------------------------------------ the decorator
_HOOK = "__motes_quantities__"


def _converter(func, declared: dict, where: str):
    sig = inspect.signature(func)

    def convert(args, kwargs, partial: bool = False):
        bound = (sig.bind_partial if partial else sig.bind)(*args, **kwargs)
        for name, quantity in declared.items():
            if name in bound.arguments:
                bound.arguments[name] = quantity.to_internal(bound.arguments[name], name, where)
        return bound

    return convert


def accepts_quantities(obj=None, *, exclude=(), extra=None):
    """Convert the declared quantity arguments of a callable at the boundary.

    Every argument of ``obj`` whose name is in :data:`BOUNDARY_QUANTITIES`
    (less ``exclude``, plus ``extra``) is converted when it is an
    :class:`astropy.units.Quantity`; other values pass unchanged.

    Parameters
    ----------
    obj : function or class
        A function or method (decorate under ``@classmethod``/``@staticmethod``),
        or a class, whose ``__init__`` is wrapped (put the decorator above
        ``@dataclass``).
    exclude : sequence of str
        Declared names that mean something else in this callable.
    extra : dict of str to BoundaryQuantity, optional
        Arguments to convert that are not registered names.

    Returns
    -------
    The wrapped callable, with the signature and docstring of ``obj``;
    :func:`quantity_arguments` tells which arguments it converts.

    Examples
    --------
    >>> import astropy.units as u
    >>> @accepts_quantities
    ... def size_ratio(a_min, a_max):
    ...     return a_max / a_min
    >>> print(f"{size_ratio(0.5, 1 * u.mm):.1f}")
    2000.0
    >>> size_ratio(0.5, 1 * u.s)
    Traceback (most recent call last):
    ...
    motes.errors.InputError: size_ratio: a_max has unit 's', which does not convert to 'um' (length)
    """
    if obj is None:
        return functools.partial(accepts_quantities, exclude=exclude, extra=extra)
    if isinstance(obj, type):
        obj.__init__ = accepts_quantities(obj.__init__, exclude=exclude, extra=extra)
        return obj
    names = inspect.signature(obj).parameters
    declared = {n: BOUNDARY_QUANTITIES[n] for n in names if n in BOUNDARY_QUANTITIES and n not in exclude}
    declared.update({n: q for n, q in (extra or {}).items() if n in names})
    if not declared:
        raise TypeError(f"{obj.__qualname__} takes no declared quantity argument")
    where = obj.__qualname__.removesuffix(".__init__")
    convert = _converter(obj, declared, where)

    @functools.wraps(obj)
    def wrapper(*args, **kwargs):
        if any(isinstance(v, u.Quantity) for v in args) or any(isinstance(v, u.Quantity) for v in kwargs.values()):
            bound = convert(args, kwargs)
            return obj(*bound.args, **bound.kwargs)
        return obj(*args, **kwargs)

    setattr(wrapper, _HOOK, (MappingProxyType(declared), convert))
    return wrapper


def _hook(func):
    if isinstance(func, type):
        func = func.__init__
    return getattr(getattr(func, "__func__", func), _HOOK, None)


def quantity_arguments(func) -> MappingProxyType:
    """The arguments :func:`accepts_quantities` converts for ``func`` (empty if none).

    ``func`` may be a function, a method (bound or not) or a class.

    Examples
    --------
    >>> from motes.optics.sizes import PowerLaw
    >>> sorted(quantity_arguments(PowerLaw))
    ['a_max', 'a_min']
    """
    hook = _hook(func)
    return hook[0] if hook else MappingProxyType({})


def convert_arguments(func, *args, **kwargs) -> dict:
    """The arguments ``func`` would receive after conversion, without calling it.

    Arguments may be partial (required ones left out); for a class or a
    method taken from its class the first positional argument is ``self``.

    Raises
    ------
    TypeError
        When ``func`` does not convert quantities.
    motes.errors.InputError
        A Quantity of the wrong physical type.
    """
    hook = _hook(func)
    if hook is None:
        raise TypeError(f"{getattr(func, '__qualname__', func)!r} does not convert quantities")
    if inspect.ismethod(func):
        args = (func.__self__, *args)
    return dict(hook[1](args, kwargs, partial=True).arguments)
