"""Text of a common-proper-motion test and of masses at an age."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["format_motion_test", "format_masses_at_age"]

_MJUP_PER_MSUN = 1047.57   # IAU 2015 nominal masses (Resolution B3)


def _p(p: float) -> str:
    """A p-value as text: ``= 0.468``, ``= 3.4e-05``, or ``< 1e-300`` when it underflows."""
    return f"= {p:.3g}" if p > 0 else "< 1e-300"


def format_motion_test(result, name: str = "") -> str:
    """The report of a :class:`~motes.companion.motion.MotionTest`, as printed by ``motes motion``.

    Parameters
    ----------
    result : MotionTest
    name : str
        The companion's name, for the heading.
    """
    from ..companion.motion import background_track

    astro, host, s = result.astrometry, result.host, result.settings
    track = background_track(astro, host, astro.mjd, settings=s)
    lines = [f"common proper motion{': ' + name if name else ''}",
             f"  host: ra {host.ra_deg:.6f} deg, dec {host.dec_deg:+.6f} deg, "
             f"pm ({host.pm_ra_mas_yr:+.3f} +- {host.pm_ra_mas_yr_error:.3f}, "
             f"{host.pm_dec_mas_yr:+.3f} +- {host.pm_dec_mas_yr_error:.3f}) mas/yr, "
             f"parallax {host.parallax_mas:.3f} +- {host.parallax_mas_error:.3f} mas",
             f"  epochs: {len(astro.mjd)} over {result.baseline_yr:.2f} yr"
             + (f" ({astro.path})" if astro.path else ""),
             "  epoch                     measured dra, ddec [mas]        background track [mas]   diff [sigma]",
             "  (track from the first epoch; diff: measured minus track in sigma of both, the track's "
             "prior on a background star's own motion included)"]
    for i in range(len(astro.mjd)):
        off, err, pred = astro.offset[i], astro.errors[i], track.offset[i]
        d = off - pred
        sig = math.sqrt(float(d @ np.linalg.solve(astro.covariance[i] + track.covariance[i], d))) if i else 0.0
        label = (astro.labels[i] if astro.labels else f"{astro.years[i]:.3f}")[:24]
        lines.append(f"  {label:<24}  {off[0]:+9.2f} +- {err[0]:5.2f}, {off[1]:+9.2f} +- {err[1]:5.2f}   "
                     f"{pred[0]:+9.2f}, {pred[1]:+9.2f}   {sig:8.1f}")
    lines += [
        f"  host motion over the baseline: {result.motion_sigma:.1f} sigma of the measurements",
        f"  co-moving : chi2 = {result.chi2_comoving:.2f} for {result.dof} dof (p {_p(result.p_comoving)})",
        f"  background: chi2 = {result.chi2_background:.2f} for {result.dof} dof (p {_p(result.p_background)})",
        f"  ln B = {result.ln_bayes_factor:.2f} (B = L(co-moving) / L(background))",
        f"  VERDICT: {result.verdict}",
        f"  rule: {s.rule}",
    ]
    lines += [f"  note: {n}" for n in result.notes]
    return "\n".join(lines)


def format_masses_at_age(results) -> str:
    """Masses at an age (:func:`motes.companion.evolution.masses_at_age`), one line per band."""
    if not results:
        return ""
    first = results[0]
    lines = [f"mass at an age: {first.age_gyr:g} +- {first.age_gyr_error:g} Gyr, evolutionary table {first.table}"
             " (linear in log age and log mass; Monte Carlo over age and magnitude)"]
    for r in results:
        lo, med, hi = r.mass_interval
        lines.append(
            f"  {r.band:<12} M_abs {r.absolute_mag:6.2f} +- {r.absolute_mag_error:4.2f}: mass {r.mass_msun:.4f} M_sun"
            f" ({r.mass_msun * _MJUP_PER_MSUN:.1f} M_Jup; 68%: {lo * _MJUP_PER_MSUN:.1f}-{hi * _MJUP_PER_MSUN:.1f}"
            f" M_Jup), Teff {r.teff_k:.0f} K (68%: {r.teff_interval[0]:.0f}-{r.teff_interval[2]:.0f}),"
            f" log L/L_sun {r.log_l_lsun:.2f}")
        lines += [f"    note: {n}" for n in r.notes]
    lines.append("  note: bands are inverted separately (their errors share the distance and the age)")
    return "\n".join(lines)
