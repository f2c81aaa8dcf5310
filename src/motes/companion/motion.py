"""Is it bound? Common proper motion against the track of a background object.

A distant background object keeps its place on the sky while the host moves, so its
offset from the host changes by −[μ Δt + ϖ ΔP(t)] (host proper motion μ, parallax ϖ,
parallax factors P(t) from the Earth's barycentric position); a bound companion keeps
its offset up to slow orbital motion. :func:`common_proper_motion` compares the two
hypotheses on two or more epochs of relative astrometry
(:class:`~motes.companion.astrometry.RelativeAstrometry`) with a Bayes factor, a χ²
of each and the rule it applies; :func:`background_track` gives the track for the
figure. The Earth's position comes from astropy's built-in solar-system ephemeris,
with IERS downloads switched off: everything runs offline.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..parameters import accepts_quantities
from .astrometry import RelativeAstrometry

__all__ = [
    "BACKGROUND_PM_SIGMA_MAS_YR",
    "BAYES_FACTOR_THRESHOLD",
    "VERDICTS",
    "HostMotion",
    "MotionSettings",
    "BackgroundTrack",
    "MotionTest",
    "earth_barycentric_au",
    "host_displacement",
    "background_track",
    "common_proper_motion",
]

_MAS_PER_RAD = 180.0 / math.pi * 3600e3
_AU_PER_PC = 648000.0 / math.pi          # IAU 2015 Resolution B2: 1 pc = 648000/π au
_DAYS_PER_YR = 365.25                    # Julian year

#: Default 1-sigma per axis of the background object's own proper motion [mas/yr]. A field
#: star at d kpc with tangential velocity v_t km/s moves μ = v_t / (4.74 d) mas/yr: 30-50 km/s
#: at 2-5 kpc gives 1.5-5 mas/yr. "A few mas/yr" for distant field stars is common practice,
#: no source; set it for your field (nearer background stars move faster).
BACKGROUND_PM_SIGMA_MAS_YR = 5.0
#: Bayes factor beyond which one hypothesis is called: B > 150 (2 ln B > 10) is "very strong"
#: evidence on the scale of Kass & Raftery 1995 (JASA 90, 773; from memory).
BAYES_FACTOR_THRESHOLD = 150.0
VERDICTS = ("co-moving", "background", "ambiguous", "not decisive")


@accepts_quantities
@dataclass(frozen=True)
class HostMotion:
    """The host's position, proper motion and parallax.

    ``ra_deg``, ``dec_deg`` ICRS [deg]; ``pm_ra_mas_yr`` is μα* = μα cos δ and
    ``pm_dec_mas_yr`` μδ [mas/yr]; ``parallax_mas`` [mas] > 0; errors 1-sigma
    (0 when unknown, which makes them exact).
    """

    ra_deg: float
    dec_deg: float
    pm_ra_mas_yr: float
    pm_dec_mas_yr: float
    parallax_mas: float
    pm_ra_mas_yr_error: float = 0.0
    pm_dec_mas_yr_error: float = 0.0
    parallax_mas_error: float = 0.0

    def __post_init__(self):
        values = {f: getattr(self, f) for f in self.__dataclass_fields__}
        bad = [k for k, v in values.items() if not math.isfinite(v)]
        if bad:
            raise InputError(f"the host's {', '.join(bad)} must be finite numbers", where="HostMotion")
        if self.parallax_mas <= 0:
            raise InputError(f"parallax must be > 0 mas, got {self.parallax_mas!r}", where="HostMotion")
        if not -90.0 <= self.dec_deg <= 90.0:
            raise InputError(f"declination must be in [-90, 90] deg, got {self.dec_deg!r}", where="HostMotion")

    @classmethod
    def from_host(cls, host, path=None) -> "HostMotion":
        """From a :class:`motes.photometry.HostStar` read from a target file.

        Raises
        ------
        InputError
            Naming the ``[host]`` keys the proper-motion test needs and the file lacks.
        """
        keys = {"ra_deg": host.ra_deg, "dec_deg": host.dec_deg, "pm_ra_mas_yr": host.pm_ra_mas_yr,
                "pm_dec_mas_yr": host.pm_dec_mas_yr, "parallax_mas": host.parallax_mas}
        missing = [k for k, v in keys.items() if not math.isfinite(v)]
        if missing:
            raise InputError(f"the proper-motion test needs {', '.join(missing)} (see docs/companion.md)",
                             path, "[host]")
        return cls(host.ra_deg, host.dec_deg, host.pm_ra_mas_yr, host.pm_dec_mas_yr, host.parallax_mas,
                   host.pm_ra_mas_yr_error, host.pm_dec_mas_yr_error, host.parallax_mas_error)


@accepts_quantities
@dataclass(frozen=True)
class MotionSettings:
    """Choices of the common-proper-motion test.

    Parameters
    ----------
    orbital_tolerance_mas_yr : float [mas/yr]
        1-sigma per axis of orbital motion allowed to the co-moving hypothesis
        (a linear drift with a Gaussian prior); 0 = a constant offset.
    background_pm_sigma_mas_yr : float [mas/yr]
        1-sigma per axis of the background object's own proper motion
        (default :data:`BACKGROUND_PM_SIGMA_MAS_YR`).
    bayes_factor_threshold : float
        B beyond which a hypothesis is called (default :data:`BAYES_FACTOR_THRESHOLD`).
    decisive_sigma : float
        Below this many sigma of host motion over the baseline the test is "not decisive".
    """

    orbital_tolerance_mas_yr: float = 0.0
    background_pm_sigma_mas_yr: float = BACKGROUND_PM_SIGMA_MAS_YR
    bayes_factor_threshold: float = BAYES_FACTOR_THRESHOLD
    decisive_sigma: float = 3.0   # common practice, no source

    def __post_init__(self):
        for name in ("orbital_tolerance_mas_yr", "background_pm_sigma_mas_yr"):
            if not (math.isfinite(getattr(self, name)) and getattr(self, name) >= 0):
                raise InputError(f"{name} must be >= 0, got {getattr(self, name)!r}", where="MotionSettings")
        if not self.bayes_factor_threshold > 1 or not self.decisive_sigma > 0:
            raise InputError("bayes_factor_threshold must be > 1 and decisive_sigma > 0", where="MotionSettings")

    @property
    def rule(self) -> str:
        """The decision rule, as printed."""
        b = self.bayes_factor_threshold
        return (f"co-moving if B = L(co-moving)/L(background) > {b:g}, background if B < 1/{b:g} "
                f"(2 ln B > {2 * math.log(b):.0f}: 'very strong', Kass & Raftery 1995), otherwise ambiguous; "
                f"not decisive when the host's motion over the baseline is below {self.decisive_sigma:g} sigma "
                "of the measurements")


def earth_barycentric_au(mjd) -> np.ndarray:
    """The Earth's barycentric position (ICRS, equatorial) [au], shape (3, n).

    Uses astropy's built-in ephemeris with IERS downloads switched off (for
    this call only); ``mjd`` is taken as TT.
    """
    from astropy.coordinates import get_body_barycentric, solar_system_ephemeris
    from astropy.time import Time
    from astropy.utils import iers

    from erfa import ErfaWarning

    with iers.conf.set_temp("auto_download", False), solar_system_ephemeris.set("builtin"), \
            warnings.catch_warnings():
        # TT -> TDB estimates UT for its ~µs diurnal term; beyond the bundled leap-second table erfa
        # warns "dubious year": irrelevant at the µs level this feeds (the Earth moves 3 cm in 1 µs)
        warnings.simplefilter("ignore", ErfaWarning)
        pos = get_body_barycentric("earth", Time(np.atleast_1d(np.asarray(mjd, float)), format="mjd", scale="tt"))
    return np.asarray(pos.xyz.to_value("au"), dtype=float).reshape(3, -1)


def _tangent(host: HostMotion, mjd, reference_mjd: float, parallax_mas: float) -> np.ndarray:
    """Apparent tangent-plane position of the host [mas] from the Earth, shape (n, 2)."""
    a, d = math.radians(host.ra_deg), math.radians(host.dec_deg)
    u0 = np.array([math.cos(d) * math.cos(a), math.cos(d) * math.sin(a), math.sin(d)])
    east = np.array([-math.sin(a), math.cos(a), 0.0])
    north = np.array([-math.sin(d) * math.cos(a), -math.sin(d) * math.sin(a), math.cos(d)])
    dist = 1000.0 / parallax_mas * _AU_PER_PC
    dt = (np.atleast_1d(np.asarray(mjd, float)) - reference_mjd) / _DAYS_PER_YR
    velocity = (host.pm_ra_mas_yr * east + host.pm_dec_mas_yr * north) / _MAS_PER_RAD   # rad/yr, tangential
    rel = dist * (u0[:, None] + velocity[:, None] * dt) - earth_barycentric_au(mjd)
    depth = u0 @ rel
    return np.stack([east @ rel / depth, north @ rel / depth], axis=1) * _MAS_PER_RAD


def host_displacement(host: HostMotion, mjd, reference_mjd: float) -> np.ndarray:
    """The host's apparent displacement on the sky since ``reference_mjd`` [mas], shape (n, 2).

    Parameters
    ----------
    host : HostMotion
    mjd : array [MJD, TT]
    reference_mjd : float [MJD, TT]

    Notes
    -----
    Straight-line motion at constant tangential velocity (zero radial velocity,
    so no perspective acceleration) from the barycentre, seen from the Earth:
    the host at r(t) = d (û + μ (t − t_ref)), the Earth at E(t), the apparent
    direction r − E projected on the tangent plane at (α, δ) (gnomonic, (Δα*, Δδ)).
    To first order in E/d this is μ Δt + ϖ ΔP(t) with the closed-form parallax
    factors of Green (1985, Spherical Astronomy), P_α* = X sin α − Y cos α,
    P_δ = X cos α sin δ + Y sin α sin δ − Z cos δ (the tests check it).
    """
    ref = _tangent(host, [reference_mjd], reference_mjd, host.parallax_mas)
    return _tangent(host, mjd, reference_mjd, host.parallax_mas) - ref


def _design(host, mjd, ref, settings):
    """Background mean offset change −D(t) and the columns (with prior variances) of both hypotheses."""
    disp = host_displacement(host, mjd, ref)
    dt = (np.asarray(mjd, float) - ref) / _DAYS_PER_YR
    parallactic = (disp - np.outer(dt, [host.pm_ra_mas_yr, host.pm_dec_mas_yr])) / host.parallax_mas
    n = len(dt)
    zeros = np.zeros(n)
    ra_col = np.stack([dt, zeros], 1).ravel()
    dec_col = np.stack([zeros, dt], 1).ravel()
    sb2 = settings.background_pm_sigma_mas_yr ** 2
    background = [(ra_col, sb2 + host.pm_ra_mas_yr_error ** 2), (dec_col, sb2 + host.pm_dec_mas_yr_error ** 2),
                  (-parallactic.ravel(), host.parallax_mas_error ** 2)]
    tol2 = settings.orbital_tolerance_mas_yr ** 2
    comoving = [(ra_col, tol2), (dec_col, tol2)]
    return -disp, comoving, background


def _marginal(residual, noise, columns):
    """χ²_min and ln L of y = Aθ + Σ cβ + noise, θ (2-D offset) flat, β ~ N(0, var)."""
    k = noise.copy()
    for col, var in columns:
        if var > 0:
            k += var * np.outer(col, col)
    a = np.tile(np.eye(2), (len(residual) // 2, 1))
    kinv = np.linalg.inv(k)
    ata = a.T @ kinv @ a
    atr = a.T @ kinv @ residual
    chi2 = float(residual @ kinv @ residual - atr @ np.linalg.solve(ata, atr))
    n = len(residual)
    lnl = -0.5 * (chi2 + np.linalg.slogdet(k)[1] + np.linalg.slogdet(ata)[1] + (n - 2) * math.log(2 * math.pi))
    return chi2, lnl


def _block_diagonal(cov):
    n = len(cov)
    out = np.zeros((2 * n, 2 * n))
    for i in range(n):
        out[2 * i:2 * i + 2, 2 * i:2 * i + 2] = cov[i]
    return out


@dataclass(frozen=True)
class BackgroundTrack:
    """Where a background object would be: offsets [mas] at ``mjd``, with covariance.

    Anchored at the measured offset of epoch ``reference`` (its error included).
    """

    mjd: np.ndarray
    offset: np.ndarray        # (m, 2) [mas]
    covariance: np.ndarray    # (m, 2, 2) [mas^2]
    reference: int = 0


def background_track(astrometry: RelativeAstrometry, host: HostMotion, mjd=None,
                     settings: MotionSettings = MotionSettings(), reference: int = 0) -> BackgroundTrack:
    """The track of a background object through the measured offset of epoch ``reference``.

    Parameters
    ----------
    astrometry : RelativeAstrometry
    host : HostMotion
    mjd : array [MJD, TT], optional
        Where to evaluate it (default: 400 points from the first to the last epoch).
    settings : MotionSettings
        The background object's own proper-motion prior enters the covariance.
    reference : int
        The anchoring epoch (row of ``astrometry``).

    Returns
    -------
    BackgroundTrack
        Offset(t) = offset(t_ref) − [D(t) − D(t_ref)]; covariance = the anchor's
        plus the background proper-motion prior, the host's proper-motion and
        parallax errors, propagated to t.
    """
    ref = float(astrometry.mjd[reference])
    if mjd is None:
        mjd = np.linspace(astrometry.mjd.min(), astrometry.mjd.max(), 400)
    mjd = np.atleast_1d(np.asarray(mjd, float))
    mean, _, columns = _design(host, mjd, ref, settings)
    offset = astrometry.offset[reference] + mean
    cov = np.repeat(astrometry.covariance[reference][None], len(mjd), axis=0)
    for col, var in columns:
        c = col.reshape(-1, 2)
        cov = cov + var * c[:, :, None] * c[:, None, :]
    return BackgroundTrack(mjd, offset, cov, reference)


@dataclass(frozen=True)
class MotionTest:
    """The result of :func:`common_proper_motion` (numbers as printed by :mod:`motes.report`)."""

    astrometry: RelativeAstrometry
    host: HostMotion
    settings: MotionSettings
    verdict: str
    ln_bayes_factor: float          # ln [L(co-moving) / L(background)]
    chi2_comoving: float
    chi2_background: float
    dof: int
    p_comoving: float
    p_background: float
    motion_sigma: float             # host motion over the baseline in sigma of the measurements
    baseline_yr: float
    predicted: np.ndarray           # (n, 2) background offsets at the epochs, anchored at the first [mas]
    notes: tuple[str, ...] = field(default=())


def common_proper_motion(astrometry: RelativeAstrometry, host: HostMotion,
                         settings: MotionSettings = MotionSettings()) -> MotionTest:
    """Compare "co-moving with the host" with "a distant background object".

    Parameters
    ----------
    astrometry : RelativeAstrometry
        Two or more epochs of the companion's offset from the host.
    host : HostMotion
    settings : MotionSettings

    Returns
    -------
    MotionTest

    Notes
    -----
    Both hypotheses are linear in their parameters with Gaussian errors. Co-moving:
    y_i = θ + ω (t_i − t_ref), ω ~ N(0, τ²) per axis (τ the orbital tolerance).
    Background: y_i = θ − D(t_i) + ν (t_i − t_ref) − δϖ P(t_i), ν ~ N(0, σ_b² + σ_μ²)
    per axis (own motion plus the host's proper-motion error), δϖ ~ N(0, σ_ϖ²), with
    D the host displacement (:func:`host_displacement`) and P its parallactic part.
    θ, the offset at t_ref, has the same flat prior under both and cancels in B. With
    K = C + Σ σ² c cᵀ: ln L = −½ [χ²_min + ln|K| + ln|AᵀK⁻¹A| + (2n − 2) ln 2π],
    χ² with 2n − 2 degrees of freedom. "Not decisive" when max over epoch pairs of
    |ΔD| / σ(pair, along ΔD) is below ``decisive_sigma``.
    """
    from scipy.stats import chi2 as chi2_dist

    y = astrometry.offset.ravel()
    noise = _block_diagonal(astrometry.covariance)
    ref = float(astrometry.mjd[0])
    mean_bg, cols_co, cols_bg = _design(host, astrometry.mjd, ref, settings)
    chi2_co, lnl_co = _marginal(y, noise, cols_co)
    chi2_bg, lnl_bg = _marginal(y - mean_bg.ravel(), noise, cols_bg)
    n = len(astrometry.mjd)
    dof = 2 * n - 2
    disp = -mean_bg
    best = 0.0
    for i in range(n):
        for j in range(i + 1, n):
            delta = disp[j] - disp[i]
            size = float(np.hypot(*delta))
            if size > 0:
                u = delta / size
                best = max(best, size / math.sqrt(u @ (astrometry.covariance[i] + astrometry.covariance[j]) @ u))
    ln_b = lnl_co - lnl_bg
    ln_thr = math.log(settings.bayes_factor_threshold)
    if best < settings.decisive_sigma:
        verdict = "not decisive"
    elif ln_b > ln_thr:
        verdict = "co-moving"
    elif ln_b < -ln_thr:
        verdict = "background"
    else:
        verdict = "ambiguous"
    p_co, p_bg = float(chi2_dist.sf(chi2_co, dof)), float(chi2_dist.sf(chi2_bg, dof))
    notes = []
    if settings.orbital_tolerance_mas_yr > 0:
        notes.append(f"co-moving hypothesis allows orbital motion of {settings.orbital_tolerance_mas_yr:g} mas/yr "
                     "(1-sigma per axis, linear drift)")
    else:
        notes.append("co-moving hypothesis: constant offset (no orbital motion allowed; set a tolerance "
                     "to allow it)")
    notes.append(f"background object's own proper motion: Gaussian, sigma = "
                 f"{settings.background_pm_sigma_mas_yr:g} mas/yr per axis; its parallax taken as 0")
    notes.append("no perspective acceleration (zero radial velocity); Earth from astropy's built-in ephemeris")
    if verdict in ("co-moving", "background"):
        p = p_co if verdict == "co-moving" else p_bg
        if p < 1e-3:
            notes.append(f"the preferred hypothesis fits poorly (chi2 p = {p:.1e}): check the errors, or "
                         "orbital motion beyond the tolerance")
    predicted = astrometry.offset[0] + mean_bg
    return MotionTest(astrometry, host, settings, verdict, float(ln_b), chi2_co, chi2_bg, dof, p_co, p_bg,
                      float(best), float((astrometry.mjd.max() - astrometry.mjd.min()) / _DAYS_PER_YR),
                      predicted, tuple(notes))
