"""Thermal emission of dust grains: absorption efficiencies, equilibrium temperatures, spectra.

A grain of radius a at distance r from a star of luminosity L* absorbs
``pi a^2 integral Q_abs(a, lambda) L*_lambda dlambda / (4 pi r^2)`` and, in
radiative equilibrium, emits the same power ``4 pi a^2 integral Q_abs pi
B_lambda(T) dlambda``, so its temperature solves (GUIDE section 5)::

    integral Q_abs(a, lambda) L*_lambda dlambda / (16 pi r^2) = integral Q_abs(a, lambda) pi B_lambda(T) dlambda

equivalently ``integral Q_abs F*_lambda dlambda (R*/2r)^2`` with F* the stellar
surface flux. For a perfect absorber (Q_abs = 1) this is
``T_bb = (L* / (16 pi sigma r^2))^(1/4)``, about 278 K (L*/L_sun)^(1/4)
(r / 1 au)^(-1/2) (:func:`blackbody_temperature`). In general
``T = T_bb (<Q_abs>_* / <Q_abs>_T)^(1/4)`` with Planck means over the star's
spectrum and over the grain's own emission.

An optically thin cloud of grains with cross-sections ``sigma_ij`` (size node
i, radius node j) at distance d from the observer has the flux density::

    F_nu(lambda) = sum_ij sigma_ij Q_abs(a_i, lambda) B_nu(lambda, T_ij) / d^2

(each grain radiates ``4 pi a^2 pi Q_abs B_nu`` into 4 pi d^2).

Numerics
--------
* Wavelengths: the integrals run on one log-spaced grid
  (:func:`thermal_wavelength_grid`, default 0.05 um to 2 cm, 40 points per
  decade, trapezoid rule in ln lambda), wide enough for a 10,000 K star and for
  grains down to ~3 K; the grid's ends are reported by :func:`grid_coverage`.
* Q_abs (:func:`absorption_efficiency`): exact Mie (miepython through
  :mod:`motes.optics.mie`) for size parameters x <= :data:`RAY_OPTICS_X`;
  above it, ray optics (:func:`ray_optics_absorption`): Fresnel reflection and
  absorption along internal chords, with all internal reflections summed.
  The two agree to better than 1% at x = RAY_OPTICS_X (``tests/test_optics_thermal.py``);
  every result that used ray optics says so (:data:`RAY_OPTICS_NOTE`).
* Temperatures (:func:`equilibrium_temperature`): the emitted power is
  tabulated on a log grid of temperatures (:data:`TEMPERATURE_RANGE`) for
  every size at once (one matrix product), the balance is interpolated in
  (ln E, ln T) and refined by Newton steps in ln T to a relative step of
  1e-10; everything is vectorised over sizes and radii.

Units: wavelength and grain radius [um], temperature [K], luminosity
[L_sun], stellocentric distance [au], observer distance [pc], flux density
[Jy], cross-sections [au^2]. Public functions take astropy Quantities too.
"""

from __future__ import annotations

import numpy as np
from astropy import constants as const
import astropy.units as u

from ..errors import InputError, ModelError
from ..parameters import accepts_quantities
from . import mie
from ..planck import HC_OVER_K_UM_K as _HC_OVER_K_UM_K, planck_lambda

__all__ = [
    "RAY_OPTICS_X",
    "RAY_OPTICS_NOTE",
    "TEMPERATURE_RANGE",
    "WIEN_NU_UM_K",
    "planck_lambda",
    "planck_nu",
    "blackbody_temperature",
    "blackbody_radius",
    "ray_optics_absorption",
    "absorption_efficiency",
    "thermal_wavelength_grid",
    "trapezoid_weights",
    "stellar_luminosity_density",
    "absorbed_flux",
    "emitted_flux",
    "equilibrium_temperature",
    "planck_mean_efficiency",
    "thermal_flux_density",
    "grid_coverage",
]

# ----------------------------------------------------------------- constants (SI, CODATA via astropy)
_H = const.h.to_value(u.J * u.s)
_C = const.c.to_value(u.m / u.s)
_KB = const.k_B.to_value(u.J / u.K)
_SIGMA = const.sigma_sb.to_value(u.W / u.m**2 / u.K**4)
_L_SUN = const.L_sun.to_value(u.W)              # IAU 2015 nominal 3.828e26 W
_AU = const.au.to_value(u.m)
_PC = const.pc.to_value(u.m)
_JY = 1e-26

#: Size parameter above which Q_abs comes from ray optics instead of the Mie series.
RAY_OPTICS_X = 2.0e4
RAY_OPTICS_NOTE = (f"Q_abs of grains with size parameter x > {RAY_OPTICS_X:g} from ray optics "
                   "(Fresnel reflection, absorption along internal chords); agrees with exact Mie "
                   "to < 1% at that x")
#: Temperatures the solver covers [K]: below 3 K the grid's long end (2 cm) misses part of the
#: Planck function; above 3000 K no solid survives (every dust material has sublimated; from memory).
TEMPERATURE_RANGE = (3.0, 3000.0)
#: Wien's law in frequency: B_nu(T) peaks at lambda = WIEN_NU_UM_K / T [um] (x = 2.821439...).
WIEN_NU_UM_K = _HC_OVER_K_UM_K / 2.8214393721220787
_N_TEMPERATURES = 241


# ----------------------------------------------------------------- Planck functions
@accepts_quantities
def planck_nu(wavelength, temperature):
    """Planck function B_nu(T) at a wavelength [Jy sr^-1].

    ``B_nu = B_lambda lambda^2 / c``.

    Examples
    --------
    >>> print(f"{planck_nu(1000.0, 20.0):.4e}")   # 1 mm, 20 K
    3.7723e+10
    """
    lam = np.asarray(wavelength, dtype=float)
    return planck_lambda(lam, temperature) * lam**2 * 1e-6 / _C / _JY


def _dplanck_dlnt(lam, t):
    """T dB_lambda/dT = B_lambda x / (1 - exp(-x)), x = hc / lambda k T."""
    x = _HC_OVER_K_UM_K / (lam * t)
    return planck_lambda(lam, t) * x / -np.expm1(-x)


@accepts_quantities
def blackbody_temperature(luminosity, r_au):
    """Equilibrium temperature of a perfect absorber (Q_abs = 1) [K].

    Parameters
    ----------
    luminosity : float or ndarray [L_sun]
    r_au : float or ndarray [au]

    Returns
    -------
    ndarray
        ``(L / (16 pi sigma r^2))^(1/4)``.

    Examples
    --------
    >>> print(f"{blackbody_temperature(1.0, 1.0):.1f}")
    278.3
    """
    lum = np.asarray(luminosity, dtype=float) * _L_SUN
    r = np.asarray(r_au, dtype=float) * _AU
    return (lum / (16 * np.pi * _SIGMA * r**2)) ** 0.25


@accepts_quantities
def blackbody_radius(luminosity, temperature):
    """Distance [au] at which a perfect absorber has ``temperature`` [K].

    Examples
    --------
    >>> print(f"{blackbody_radius(1.0, 278.3):.3f}")
    1.000
    """
    t1 = blackbody_temperature(luminosity, 1.0)
    return (t1 / np.asarray(temperature, dtype=float)) ** 2


# ----------------------------------------------------------------- absorption efficiencies
def _fresnel(m, mu):
    """Intensity reflectances (R_s, R_p) of a plane surface, vacuum to index m, at cos(incidence) mu."""
    sin2 = 1.0 - mu**2
    cos_t = np.sqrt(1.0 - sin2 / m**2 + 0j)
    cos_t = np.where(cos_t.imag < 0, -cos_t, cos_t)
    r_s = (mu - m * cos_t) / (mu + m * cos_t)
    r_p = (m * mu - cos_t) / (m * mu + cos_t)
    return np.abs(r_s) ** 2, np.abs(r_p) ** 2


def ray_optics_absorption(m, x, n_angles: int = 96):
    """Absorption efficiency of a large sphere in ray optics.

    Parameters
    ----------
    m : complex or complex ndarray
        ``n + i k``, ``k >= 0``.
    x : float or ndarray
        Size parameter ``2 pi a / lambda`` (>> 1); broadcasts with ``m``.
    n_angles : int
        Gauss-Legendre nodes in the cosine of the angle of incidence.

    Returns
    -------
    ndarray
        Q_abs with the broadcast shape of ``m`` and ``x``.

    Notes
    -----
    A ray hitting the sphere at impact parameter b = a sin(i) enters with
    probability 1 - R(i) (Fresnel, per polarisation), crosses a chord of
    length 2 a cos(t) (refraction angle t, sin t = sin i / n), is transmitted
    with ``E = exp(-4 k x cos t)`` and meets the surface again at the same
    angle, where a fraction R is reflected back inside. Summing the internal
    passes, the absorbed fraction is ``(1 - R)(1 - E) / (1 - R E)``. The ring
    of impact parameters ``2 pi b db = 2 pi a^2 mu dmu`` (mu = cos i) gives::

        Q_abs = 2 integral_0^1 <(1 - R)(1 - E) / (1 - R E)>_pol mu dmu.

    Diffraction carries no absorption, and edge (surface-wave) terms vanish
    as x^(-2/3); interference ripples are absent (this is their average).
    Derived here; compared with exact Mie in the tests.
    """
    m = mie.check_index(m)
    x = np.asarray(x, dtype=float)
    m, x = np.broadcast_arrays(m, x)
    t, w = np.polynomial.legendre.leggauss(n_angles)
    mu = 0.5 * (t + 1.0)
    w = 0.5 * w
    mm = m[..., None]
    n = mm.real
    cos_t2 = 1.0 - (1.0 - mu**2) / n**2
    cos_t = np.sqrt(np.clip(cos_t2, 0.0, None))
    # beyond the critical angle of an n < 1 medium the wave inside is inhomogeneous and decays
    # along the normal at the rate Im(m cos t) (complex cos t): what enters is absorbed near the surface
    decay = np.where(cos_t2 > 0, mm.imag * cos_t, np.sqrt(mm**2 - (1.0 - mu**2) + 0j).imag)
    e = np.exp(-4.0 * x[..., None] * decay)
    r_s, r_p = _fresnel(mm, mu)
    total = 0.0
    for r in (r_s, r_p):
        den = 1.0 - r * e                 # 0 only for total reflection without absorption (then no loss)
        with np.errstate(invalid="ignore", divide="ignore"):
            total = total + 0.5 * np.where(den > 0, (1.0 - r) * (1.0 - e) / np.where(den > 0, den, 1.0), 0.0)
    return 2.0 * np.sum(total * mu * w, axis=-1)


@accepts_quantities
def absorption_efficiency(m, radius, wavelength):
    """Absorption efficiency Q_abs of homogeneous spheres.

    Parameters
    ----------
    m : complex or complex ndarray
        ``n + i k`` (``k >= 0``).
    radius : float or ndarray [um]
        Grain radius.
    wavelength : float or ndarray [um]
        All three broadcast (e.g. ``m[None, :]``, ``radius[:, None]``,
        ``wavelength[None, :]`` give ``[n_sizes, n_wavelengths]``).

    Returns
    -------
    ndarray
        Exact Mie Q_abs where ``x = 2 pi a / lambda <= RAY_OPTICS_X``, ray
        optics (:func:`ray_optics_absorption`) above.

    Examples
    --------
    Rayleigh limit, Q_abs = 4 x Im[(m^2 - 1)/(m^2 + 2)] = 1.2519e-03 here (Bohren & Huffman 1983, ch. 5):

    >>> print(f"{float(absorption_efficiency(1.5 + 0.1j, 0.01, 10.0)):.4e}")
    1.2520e-03
    """
    a = np.asarray(radius, dtype=float)
    lam = np.asarray(wavelength, dtype=float)
    if not (np.isfinite(a).all() and (a > 0).all() and np.isfinite(lam).all() and (lam > 0).all()):
        raise InputError("radius and wavelength must be finite and > 0 um", where="absorption_efficiency")
    m, x = np.broadcast_arrays(mie.check_index(m), 2 * np.pi * a / lam)
    out = np.empty(x.shape)
    big = x > RAY_OPTICS_X
    if (~big).any():
        out[~big] = mie.efficiencies(m[~big], x[~big]).q_abs
    if big.any():
        out[big] = ray_optics_absorption(m[big], x[big])
    return np.clip(out, 0.0, None)   # Q_ext - Q_sca can round to -1e-17 for k = 0


# ----------------------------------------------------------------- grids and the star
def thermal_wavelength_grid(lo: float = 0.05, hi: float = 2.0e4, per_decade: int = 40, extra=None,
                            extra_per_decade: int = 200) -> np.ndarray:
    """Log-spaced wavelength grid for the thermal balance [um].

    Parameters
    ----------
    lo, hi : float [um]
        Ends of the grid: 0.05 um holds all but ~1e-6 of a 10,000 K
        blackbody's flux, 2 cm all but ~1e-3 of a 3 K blackbody's.
    per_decade : int
        Points per decade of the base grid.
    extra : ndarray, optional [um]
        Wavelengths to add (e.g. the tabulated points of the materials
        across their infrared bands, which 40 points per decade do not
        resolve: silica's 9 um band is ~10% wide); thinned to at most
        ``extra_per_decade`` points per decade.

    Returns
    -------
    ndarray[n] [um]
        Strictly increasing.
    """
    if not (0 < lo < hi) or per_decade < 4:
        raise InputError(f"need 0 < lo < hi and per_decade >= 4, got {lo!r}, {hi!r}, {per_decade!r}",
                         where="thermal_wavelength_grid")
    n = int(np.ceil(np.log10(hi / lo) * per_decade)) + 1
    grid = np.geomspace(lo, hi, n)
    if extra is not None:
        e = np.unique(np.asarray(extra, dtype=float))
        e = e[(e > lo) & (e < hi)]
        if e.size:
            step = np.log(10.0) / extra_per_decade
            kept, last = [], -np.inf
            for v in np.log(e):
                if v - last >= step:
                    kept.append(v)
                    last = v
            grid = np.union1d(grid, np.exp(kept))
            grid = grid[np.concatenate([[True], np.diff(np.log(grid)) > 1e-9])]
    return grid


@accepts_quantities
def trapezoid_weights(wavelength) -> np.ndarray:
    """Weights ``w`` with ``integral f dlambda ≈ sum w f`` on the grid [um].

    The trapezoid rule in ln(lambda) applied to ``lambda f``: on a log-spaced
    grid it converges exponentially for smooth spectra such as the Planck
    function (a 40-per-decade grid integrates B_lambda to ~1e-12), where the
    trapezoid rule in lambda is off by ~5e-4.
    """
    lam = np.asarray(wavelength, dtype=float)
    x = np.log(lam)
    w = np.zeros_like(lam)
    d = np.diff(x)
    w[:-1] += 0.5 * d
    w[1:] += 0.5 * d
    return w * lam


@accepts_quantities
def stellar_luminosity_density(wavelength, luminosity, teff=None, spectrum=None):
    """The star's spectral luminosity L*_lambda [L_sun um^-1] on a grid.

    Parameters
    ----------
    wavelength : ndarray[n] [um]
        Increasing grid (usually :func:`thermal_wavelength_grid`).
    luminosity : float [L_sun]
    teff : float [K], optional
        Blackbody star (used when ``spectrum`` is None).
    spectrum : (ndarray[m], ndarray[m]), optional
        Wavelength [um] and F_lambda (any scale) of the star; only its shape is used.

    Returns
    -------
    l_lambda : ndarray[n] [L_sun um^-1]
        Normalised so that ``integral L_lambda dlambda = luminosity`` over the grid.
    notes : tuple of str
        How a user spectrum was continued beyond its range.

    Notes
    -----
    Blackbody: ``L_lambda = L pi B_lambda(T) / (sigma T^4)``. A user spectrum
    is interpolated linearly in (ln lambda, ln F_lambda); beyond its long end
    it is continued as Rayleigh-Jeans (F_lambda ∝ lambda^-4) and below its short
    end it is taken as zero, and the notes say so (with the fraction of a
    blackbody of ``teff`` that falls there, when ``teff`` is given).
    """
    lam = np.asarray(wavelength, dtype=float)
    lum = float(luminosity)
    if not (np.isfinite(lum) and lum > 0):
        raise InputError(f"the star's luminosity must be > 0 L_sun, got {luminosity!r}", where="luminosity")
    notes = []
    if spectrum is None:
        if teff is None or not (np.isfinite(teff) and teff > 0):
            raise InputError("the star needs teff [K] or a spectrum", where="teff")
        shape = np.pi * planck_lambda(lam, teff) / (_SIGMA * float(teff) ** 4)
    else:
        wl, fl = (np.asarray(v, dtype=float) for v in spectrum)
        positive = fl > 0
        wl, fl = wl[positive], fl[positive]
        if wl.size < 2:
            raise InputError("the star's spectrum needs at least two positive F_lambda values", where="spectrum")
        shape = np.zeros_like(lam)
        inside = (lam >= wl[0]) & (lam <= wl[-1])
        shape[inside] = np.exp(np.interp(np.log(lam[inside]), np.log(wl), np.log(fl)))
        above = lam > wl[-1]
        shape[above] = fl[-1] * (lam[above] / wl[-1]) ** -4.0
        if above.any():
            notes.append(f"star's spectrum continued as Rayleigh-Jeans (F_lambda ∝ lambda^-4) beyond "
                         f"{wl[-1]:.4g} um")
        if lam[0] < wl[0]:
            miss = ""
            if teff is not None:
                x = np.geomspace(lam[0], wl[0], 400)
                full = np.pi * planck_lambda(lam, teff) / (_SIGMA * float(teff) ** 4)
                part = np.trapezoid(np.pi * planck_lambda(x, teff) / (_SIGMA * float(teff) ** 4), x)
                miss = f" (a {teff:g} K blackbody puts {100 * part / np.sum(trapezoid_weights(lam) * full):.2g}% of its flux there)"
            notes.append(f"star's spectrum starts at {wl[0]:.4g} um: no stellar flux below it{miss}")
    total = np.sum(trapezoid_weights(lam) * shape)
    if not total > 0:
        raise InputError("the star's spectrum has no flux on the thermal wavelength grid", where="spectrum")
    return lum * shape / total, tuple(notes)


@accepts_quantities
def grid_coverage(wavelength, temperature) -> np.ndarray:
    """Fraction of ``integral pi B_lambda(T) dlambda = sigma T^4`` that the grid holds (elementwise in T)."""
    lam = np.asarray(wavelength, dtype=float)
    t = np.asarray(temperature, dtype=float)
    w = trapezoid_weights(lam)
    b = np.pi * planck_lambda(lam, t[..., None])
    return np.sum(w * b, axis=-1) / (_SIGMA * t**4)


# ----------------------------------------------------------------- the balance
def _check_q(q_abs, wavelength):
    q = np.asarray(q_abs, dtype=float)
    lam = np.asarray(wavelength, dtype=float)
    if q.ndim < 1 or q.shape[-1] != lam.size:
        raise InputError(f"q_abs must have the wavelength axis last ({lam.size}), got shape {q.shape}",
                         where="q_abs")
    if not (np.isfinite(q).all() and (q >= 0).all()):
        raise InputError("q_abs must be finite and >= 0", where="q_abs")
    return q, lam


@accepts_quantities
def absorbed_flux(q_abs, wavelength, luminosity_density, r_au):
    """Left side of the balance, ``integral Q_abs L*_lambda dlambda / (16 pi r^2)`` [W m^-2].

    Parameters
    ----------
    q_abs : ndarray[..., n_wavelengths]
    wavelength : ndarray[n_wavelengths] [um]
    luminosity_density : ndarray[n_wavelengths] [L_sun um^-1]
    r_au : float or ndarray[n_r] [au]

    Returns
    -------
    ndarray[..., n_r] (``[...]`` for scalar ``r_au``)
    """
    q, lam = _check_q(q_abs, wavelength)
    r = np.asarray(r_au, dtype=float)
    if not (np.isfinite(r).all() and (r > 0).all()):
        raise InputError(f"distances from the star must be > 0 au, got {r_au!r}", where="r_au")
    power = q @ (trapezoid_weights(lam) * np.asarray(luminosity_density, dtype=float)) * _L_SUN
    return power[..., None] / (16 * np.pi * (np.atleast_1d(r) * _AU) ** 2) if r.ndim else \
        power / (16 * np.pi * (float(r) * _AU) ** 2)


@accepts_quantities
def emitted_flux(q_abs, wavelength, temperature):
    """Right side of the balance, ``integral Q_abs pi B_lambda(T) dlambda`` [W m^-2].

    Parameters
    ----------
    q_abs : ndarray[S, n_wavelengths]
    wavelength : ndarray[n_wavelengths] [um]
    temperature : ndarray[S] or ndarray[S, n_r] [K]
        One temperature per row of ``q_abs`` (and per radius).
    """
    q, lam = _check_q(q_abs, wavelength)
    t = np.asarray(temperature, dtype=float)
    w = trapezoid_weights(lam)
    qq = q.reshape(q.shape[:-1] + (1,) * (t.ndim - (q.ndim - 1)) + q.shape[-1:])
    return np.sum(qq * w * np.pi * planck_lambda(lam, t[..., None]), axis=-1)


@accepts_quantities
def equilibrium_temperature(q_abs, wavelength, luminosity_density, r_au):
    """Grain temperatures in radiative equilibrium [K], vectorised over sizes and radii.

    Parameters
    ----------
    q_abs : ndarray[n_sizes, n_wavelengths]
        Absorption efficiencies on the grid ``wavelength``.
    wavelength : ndarray[n_wavelengths] [um]
        The balance grid (UV to mm: :func:`thermal_wavelength_grid`).
    luminosity_density : ndarray[n_wavelengths] [L_sun um^-1]
        The star's L*_lambda on the grid (:func:`stellar_luminosity_density`).
    r_au : float or ndarray[n_r] [au]
        Distances from the star.

    Returns
    -------
    ndarray[n_sizes, n_r] [K] (``[n_sizes]`` for scalar ``r_au``)

    Raises
    ------
    motes.errors.ModelError
        A grain that absorbs nothing, or a temperature outside
        :data:`TEMPERATURE_RANGE` (a ring inside the radius where every solid
        sublimates, or so far out that the grid's long end truncates B_lambda).

    Notes
    -----
    Solves ``E(T) = A`` with E and A from :func:`emitted_flux` and
    :func:`absorbed_flux` on the same grid: E is tabulated at
    ``_N_TEMPERATURES`` log-spaced temperatures for all sizes at once
    (E is strictly increasing in T), the root is interpolated in (ln E, ln T)
    and refined by Newton steps on ln E(ln T) until the step is below 1e-10.

    Examples
    --------
    A grey grain (Q_abs = 1) is a blackbody:

    >>> import numpy as np
    >>> lam = thermal_wavelength_grid()
    >>> l_lam, _ = stellar_luminosity_density(lam, 1.0, teff=5772.0)
    >>> t = equilibrium_temperature(np.ones((1, lam.size)), lam, l_lam, 1.0)
    >>> print(f"{t[0]:.1f} K")
    278.3 K
    """
    q, lam = _check_q(q_abs, wavelength)
    if q.ndim != 2:
        raise InputError(f"q_abs must be [n_sizes, n_wavelengths], got shape {q.shape}", where="q_abs")
    scalar = np.ndim(r_au) == 0
    a = absorbed_flux(q, lam, luminosity_density, np.atleast_1d(np.asarray(r_au, dtype=float)))   # [S, R]
    if not (a > 0).all():
        raise ModelError("a grain absorbs no starlight (Q_abs = 0 wherever the star shines)")
    w = trapezoid_weights(lam)
    t_grid = np.geomspace(*TEMPERATURE_RANGE, _N_TEMPERATURES)
    e_tab = q @ (w[:, None] * np.pi * planck_lambda(lam[:, None], t_grid[None, :]))       # [S, T]
    with np.errstate(divide="ignore"):
        ln_e = np.log(e_tab)
    ln_a = np.log(a)
    lo_bad = ln_a < ln_e[:, :1]
    hi_bad = ln_a > ln_e[:, -1:]
    if hi_bad.any():
        raise ModelError(f"grains would be hotter than {TEMPERATURE_RANGE[1]:g} K: the ring lies inside the "
                         "sublimation radius of every solid (move it out)")
    if lo_bad.any():
        raise ModelError(f"grains would be colder than {TEMPERATURE_RANGE[0]:g} K: too far from the star for "
                         "the thermal wavelength grid")
    # bracket by counting grid points below (rows of ln_e are increasing)
    j = np.clip((ln_e[:, None, :] < ln_a[:, :, None]).sum(axis=-1) - 1, 0, t_grid.size - 2)
    rows = np.arange(q.shape[0])[:, None]
    e0, e1 = ln_e[rows, j], ln_e[rows, j + 1]
    lt = np.log(t_grid)
    frac = np.where(np.isfinite(e0) & (e1 > e0), (ln_a - e0) / (e1 - e0), 1.0)
    ln_t = lt[j] + frac * (lt[j + 1] - lt[j])
    for _ in range(30):
        t = np.exp(ln_t)
        b = np.pi * planck_lambda(lam, t[..., None])                       # [S, R, L]
        db = np.pi * _dplanck_dlnt(lam, t[..., None])
        e = np.sum(q[:, None, :] * w * b, axis=-1)
        de = np.sum(q[:, None, :] * w * db, axis=-1)
        step = (np.log(e) - ln_a) * e / de
        ln_t = ln_t - np.clip(step, -0.5, 0.5)
        if np.max(np.abs(step)) < 1e-10:
            break
    else:  # pragma: no cover - Newton on a smooth convex function from a close start
        raise ModelError("the grain-temperature solver did not converge")
    t = np.exp(ln_t)
    return t[:, 0] if scalar else t


@accepts_quantities
def planck_mean_efficiency(q_abs, wavelength, temperature):
    """Planck-mean absorption efficiency ``<Q_abs>_T = integral Q_abs B_lambda(T) / integral B_lambda(T)``.

    Parameters
    ----------
    q_abs : ndarray[S, n_wavelengths]
    wavelength : ndarray[n_wavelengths] [um]
    temperature : float or ndarray[S] [K]
    """
    q, lam = _check_q(q_abs, wavelength)
    t = np.broadcast_to(np.asarray(temperature, dtype=float), q.shape[:-1])
    w = trapezoid_weights(lam)
    b = planck_lambda(lam, t[..., None])
    return np.sum(q * w * b, axis=-1) / np.sum(w * b, axis=-1)


@accepts_quantities
def thermal_flux_density(q_abs, wavelength, temperature, cross_section_au2, distance_pc):
    """Thermal flux density of optically thin grains [Jy].

    Parameters
    ----------
    q_abs : ndarray[n_sizes, n_wavelengths]
        Q_abs at the output wavelengths (any grid, not necessarily the balance grid).
    wavelength : ndarray[n_wavelengths] [um]
    temperature : ndarray[n_sizes, n_r] [K]
        Grain temperatures (:func:`equilibrium_temperature`).
    cross_section_au2 : ndarray[n_sizes, n_r] [au^2]
        Total geometric cross-section of the grains at each (size, radius) node.
    distance_pc : float [pc]
        Distance to the observer.

    Returns
    -------
    ndarray[n_wavelengths] [Jy]
        ``sum_ij sigma_ij Q_abs(a_i, lambda) B_nu(lambda, T_ij) / d^2``.

    Examples
    --------
    One au^2 of blackbody grains at 50 K seen from 10 pc, at 100 um:

    >>> import numpy as np
    >>> f = thermal_flux_density(np.ones((1, 1)), [100.0], [[50.0]], [[1.0]], 10.0)
    >>> print(f"{f[0]:.4e} Jy")
    5.5681e-01 Jy
    """
    q, lam = _check_q(q_abs, wavelength)
    t = np.asarray(temperature, dtype=float)
    sigma = np.asarray(cross_section_au2, dtype=float)
    if t.shape != sigma.shape or t.shape[0] != q.shape[0]:
        raise InputError(f"temperature {t.shape} and cross_section_au2 {sigma.shape} must both be "
                         f"[n_sizes = {q.shape[0]}, n_r]", where="temperature")
    d = float(distance_pc)
    if not (np.isfinite(d) and d > 0):
        raise InputError(f"distance_pc must be > 0, got {distance_pc!r}", where="distance_pc")
    b = planck_nu(lam, t[..., None])                                         # [S, R, L] Jy/sr
    per_size = np.sum(sigma[..., None] * b, axis=1)                          # [S, L]
    return np.sum(q * per_size, axis=0) * _AU**2 / (d * _PC) ** 2
