"""Calibrated photometry of a companion: magnitudes, fluxes, absolute magnitudes.

:func:`calibrate` turns a :class:`~motes.photometry.targets.Target` (read by
:func:`read_target`) into :class:`CalibratedPhotometry`: one
:class:`BandPhotometry` row per band with the Vega apparent magnitude, the
band-averaged f_nu and the absolute magnitude, plus the distance modulus
held *once* as a shared term.

Uncertainty model
-----------------
Every row carries 1-sigma errors from the measurement, the host magnitude
(contrasts, including the synthesis systematic) and the Vega zero point
(whenever a Vega magnitude is turned into a physical flux or the reverse):

* Vega magnitude, or contrast on a Vega host magnitude ("Vega scale"):
  σ_m² = σ_meas² [+ σ_host²];  (σ_f/f)² = (σ_m / 1.0857)² + ε_ZP²
* AB magnitude, flux density, or contrast on an AB host magnitude
  ("physical scale"): (σ_f/f)² = (σ_meas-as-fraction)² [+ (σ_host/1.0857)²];
  σ_m² = (1.0857 σ_f/f)² + (1.0857 ε_ZP)²

with ε_ZP the fractional zero-point error of the band's system
(:data:`motes.photometry.conversions.ZERO_POINT_FRACTIONAL_ERROR`). The
distance term is never folded in: ``absolute_mag_error`` equals
``apparent_mag_error`` and :attr:`CalibratedPhotometry.distance_modulus_error`
is the one term shared by all bands (it is fully correlated between them).
Errors are propagated linearly (first order in σ/value).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import __version__
from ..errors import BandError, InputError, PhotometryError
from .bands import Band
from .conversions import (
    MAG_PER_LN,
    distance_from_parallax,
    distance_modulus,
    distance_modulus_error,
    flux_to_magnitude,
    magnitude_to_flux,
    ratio_to_delta_mag,
    zero_point_error,
)
from .synthesis import synthesise_host_magnitude
from .measurement_table import Measurement, parse_flux_unit
from .targets import HostStar, Target, read_target

__all__ = [
    "BandPhotometry",
    "CalibratedPhotometry",
    "Target",
    "read_target",
    "calibrate",
    "LOW_PARALLAX_SNR",
]

#: Below this parallax signal-to-noise ratio 1000/ϖ is a biased distance.
LOW_PARALLAX_SNR = 5.0


@dataclass(frozen=True)
class BandPhotometry:
    """One calibrated row of a target's photometry.

    Attributes
    ----------
    band : Band
    input_kind : str
        ``"vega_mag"``, ``"ab_mag"``, ``"flux"``, ``"contrast_mag"`` or ``"contrast_ratio"``.
    is_limit : bool
        True for an N-sigma upper limit (non-detection).
    limit_sigma : float
        N of the N-sigma limit (nan for detections).
    apparent_mag : float [mag]
        Vega magnitude (for a limit: the N-sigma limiting magnitude).
    apparent_mag_error : float [mag]
        1-sigma; host, contrast and zero-point terms, no distance term (nan for limits).
    flux_jy : float [Jy]
        Band-averaged f_nu (for a limit: the N-sigma limiting flux).
    flux_jy_error : float [Jy]
        1-sigma (for a limit: limiting flux / N, i.e. the noise).
    absolute_mag : float [mag]
        apparent_mag - distance_modulus (nan without a distance).
    absolute_mag_error : float [mag]
        Same as ``apparent_mag_error`` (the distance term is kept separate).
    host_synthesised : bool
        The host magnitude used in this band was synthesised from a spectrum.
    notes : tuple of str
    host_mag, host_mag_error : float [mag]
        Host Vega magnitude used for a contrast (nan otherwise).
    zero_point_error : float
        Fractional zero-point uncertainty assumed for this band.
    row : int
        Row of the input table.
    """

    band: Band
    input_kind: str
    is_limit: bool
    limit_sigma: float
    apparent_mag: float
    apparent_mag_error: float
    flux_jy: float
    flux_jy_error: float
    absolute_mag: float
    absolute_mag_error: float
    host_synthesised: bool
    notes: tuple[str, ...] = ()
    host_mag: float = math.nan
    host_mag_error: float = math.nan
    zero_point_error: float = math.nan
    row: int = 0

    @property
    def ab_mag(self) -> float:
        """AB magnitude [mag] (for a limit: the limiting AB magnitude)."""
        return self.apparent_mag + self.band.ab_minus_vega

    @property
    def flux_lambda(self) -> float:
        """Band-averaged F_lambda [W m^-2 um^-1] (f_nu converted at the pivot)."""
        return float(self.band.fnu_to_flux_lambda(self.flux_jy))

    @property
    def flux_lambda_error(self) -> float:
        """1-sigma of :attr:`flux_lambda` [W m^-2 um^-1]."""
        return float(self.band.fnu_to_flux_lambda(self.flux_jy_error))


@dataclass(frozen=True)
class CalibratedPhotometry:
    """A target's calibrated photometry, rows sorted by pivot wavelength.

    Attributes
    ----------
    target : str
    rows : tuple of BandPhotometry
    distance_pc, distance_pc_error : float [pc]
        nan if unknown.
    distance_modulus : float [mag]
        5 log10(d / 10 pc); nan if unknown.
    distance_modulus_error : float [mag]
        The one distance term shared by every band.
    notes : tuple of str
    counting : str
        Default detector counting mode used.
    """

    target: str
    rows: tuple[BandPhotometry, ...]
    distance_pc: float
    distance_pc_error: float
    distance_modulus: float
    distance_modulus_error: float
    notes: tuple[str, ...] = ()
    counting: str = "photon"

    def bands(self) -> tuple[Band, ...]:
        """The bands of the rows, in row order."""
        return tuple(r.band for r in self.rows)

    def row(self, band_name: str) -> BandPhotometry:
        """The row of the band called ``band_name``."""
        for r in self.rows:
            if r.band.name == band_name:
                return r
        raise KeyError(band_name)

    def to_table(self):
        """The rows as an astropy Table with units; notes and distance in ``meta``.

        Returns
        -------
        astropy.table.Table
        """
        import astropy.units as u
        from astropy.table import Table

        rows = self.rows
        mag = u.mag
        flam = u.W / u.m**2 / u.um

        def col(values, unit=None):
            arr = np.array(values, dtype=float)
            return arr * unit if unit is not None else arr

        t = Table()
        t["band"] = [r.band.name for r in rows]
        t["system"] = [r.band.system for r in rows]
        t["pivot_wavelength"] = col([r.band.pivot_wavelength for r in rows], u.um)
        t["input_kind"] = [r.input_kind for r in rows]
        t["is_limit"] = [r.is_limit for r in rows]
        t["limit_sigma"] = col([r.limit_sigma for r in rows])
        t["apparent_mag"] = col([r.apparent_mag for r in rows], mag)
        t["apparent_mag_error"] = col([r.apparent_mag_error for r in rows], mag)
        t["ab_mag"] = col([r.ab_mag for r in rows], mag)
        t["flux"] = col([r.flux_jy for r in rows], u.Jy)
        t["flux_error"] = col([r.flux_jy_error for r in rows], u.Jy)
        t["flux_lambda"] = col([r.flux_lambda for r in rows], flam)
        t["flux_lambda_error"] = col([r.flux_lambda_error for r in rows], flam)
        t["absolute_mag"] = col([r.absolute_mag for r in rows], mag)
        t["absolute_mag_error"] = col([r.absolute_mag_error for r in rows], mag)
        t["host_mag"] = col([r.host_mag for r in rows], mag)
        t["host_mag_error"] = col([r.host_mag_error for r in rows], mag)
        t["host_synthesised"] = [r.host_synthesised for r in rows]
        t["approximate_band"] = [r.band.approximate for r in rows]
        t["zero_point_error"] = col([r.zero_point_error for r in rows])
        t["notes"] = [" | ".join(r.notes) for r in rows]
        descriptions = {
            "apparent_mag": "Vega magnitude (N-sigma limiting magnitude for limits)",
            "apparent_mag_error": "1-sigma: measurement, host and zero-point terms; no distance term",
            "flux": "band-averaged f_nu (N-sigma limiting flux for limits)",
            "flux_error": "1-sigma (limiting flux / N for limits)",
            "absolute_mag": "apparent_mag - distance_modulus (meta); distance error NOT included",
            "absolute_mag_error": "same as apparent_mag_error; add meta distance_modulus_error, shared by all bands",
            "zero_point_error": "fractional Vega zero-point uncertainty assumed",
        }
        for name, text in descriptions.items():
            t[name].description = text
        t.meta.update({
            "target": self.target,
            "distance_pc": self.distance_pc,
            "distance_pc_error": self.distance_pc_error,
            "distance_modulus": self.distance_modulus,
            "distance_modulus_error": self.distance_modulus_error,
            "distance_note": "distance_modulus_error is one term shared by (fully correlated between) all bands",
            "counting": self.counting,
            "notes": list(self.notes),
            "motes_version": __version__,
        })
        return t


# ----------------------------------------------------------------- calibration
def _distance(host: HostStar, notes: list) -> tuple[float, float, float, float]:
    if host.parallax_mas > 0:
        d, de, mu, mue = distance_from_parallax(host.parallax_mas, host.parallax_mas_error)
        notes.append(
            f"distance from parallax {host.parallax_mas:g} ± {host.parallax_mas_error:g} mas: d = 1000/parallax, "
            "errors propagated linearly"
        )
        snr = host.parallax_mas / host.parallax_mas_error
        if snr < LOW_PARALLAX_SNR:
            notes.append(
                f"WARNING: parallax S/N = {snr:.1f} < {LOW_PARALLAX_SNR:g}: 1/parallax is a biased distance and "
                "the linear error understates its skewed uncertainty; prefer a prior-based distance"
            )
        return d, de, mu, mue
    if host.distance_pc > 0:
        return (host.distance_pc, host.distance_pc_error, float(distance_modulus(host.distance_pc)),
                float(distance_modulus_error(host.distance_pc, host.distance_pc_error)))
    notes.append("no distance given: absolute magnitudes are not computed")
    return math.nan, math.nan, math.nan, math.nan


def _host_magnitude(target: Target, m: Measurement, reference: Band | None, notes: list):
    """(magnitude, error, system, synthesised) of the host in m.band."""
    entry = target.host.magnitude_in(m.band)
    if entry is not None:
        return entry.magnitude, entry.error, entry.system, False
    try:
        syn = synthesise_host_magnitude(m.band, target.host, reference=reference,
                                        systematic=target.settings.synthesis_systematic_mag)
    except PhotometryError as exc:
        raise PhotometryError(
            f"a contrast needs the host's magnitude in {m.band.name}: {exc.reason}; add it under "
            "[host.magnitudes] or give [host] teff_k or a [host.spectrum]",
            target.photometry_path, f"row {m.row} (band {m.band.name!r})",
        ) from None
    except BandError as exc:
        raise PhotometryError(f"cannot synthesise the host magnitude in {m.band.name}: {exc.reason}",
                              target.path, "[host.spectrum]") from None
    notes.append(syn.note)
    return syn.magnitude, syn.error, syn.system, True


def _flux_in_jy(m: Measurement) -> tuple[float, float]:
    import astropy.units as u

    try:
        unit = parse_flux_unit(m.unit)
    except ValueError as exc:
        raise InputError(str(exc), where=f"row {m.row} (band {m.band.name!r})") from None
    scale = (1 * unit).to_value(u.Jy) if unit.is_equivalent(u.Jy) else None
    if scale is None:
        flam = (1 * unit).to_value(u.W / u.m**2 / u.um)
        scale = float(m.band.flux_lambda_to_fnu(flam))
    error = m.error * scale if not m.is_limit else math.nan
    return m.value * scale, error


def _calibrate_row(target: Target, m: Measurement, mu: float, reference: Band | None) -> BandPhotometry:
    band = m.band
    eps = zero_point_error(band, target.settings.zero_point_errors)
    zp_vega = band.vega_zero_point_jy
    ab_shift = band.ab_minus_vega  # m_AB - m_Vega
    notes: list[str] = []
    if band.approximate:
        notes.append(f"approximate band ({band.source})")
    if band.counting != target.settings.counting:
        notes.append(f"{band.counting}-counting band average")
    host_mag = host_err = math.nan
    synthesised = False
    kind = m.kind
    # mag_vega: Vega magnitude; stat: 1-sigma [mag] on the row's own scale
    # ("vega" for Vega magnitudes, "physical" for AB magnitudes and fluxes).
    if kind == "vega_mag":
        scale, mag_vega, stat = "vega", m.value, m.error
    elif kind == "ab_mag":
        scale, mag_vega, stat = "physical", m.value - ab_shift, m.error
    elif kind == "flux":
        flux, flux_err = _flux_in_jy(m)
        scale, mag_vega = "physical", float(flux_to_magnitude(flux, zp_vega))
        stat = MAG_PER_LN * flux_err / flux
    else:
        if kind == "contrast_ratio":
            delta = float(ratio_to_delta_mag(m.value))
            delta_err = MAG_PER_LN * m.error / m.value
        else:
            delta, delta_err = m.value, m.error
        host_raw, host_err, system, synthesised = _host_magnitude(target, m, reference, notes)
        host_mag = host_raw if system == "Vega" else host_raw - ab_shift
        scale = "vega" if system == "Vega" else "physical"
        mag_vega = host_mag + delta
        stat = math.hypot(host_err, delta_err)
        if m.is_limit:
            notes.append(f"host magnitude uncertainty (±{host_err:.3f} mag) not folded into the limit")
    if kind != "flux":
        # identical to 3631 Jy 10^(-0.4 m_AB) on the physical scale
        flux = float(magnitude_to_flux(mag_vega, zp_vega))
    if m.is_limit:
        mag_err = math.nan
        flux_err = flux / m.limit_sigma
        notes.append(f"{m.limit_sigma:g}-sigma upper limit")
    elif scale == "vega":
        mag_err = stat
        flux_err = flux * math.hypot(stat / MAG_PER_LN, eps)
    else:
        mag_err = math.hypot(stat, MAG_PER_LN * eps)
        flux_err = flux * stat / MAG_PER_LN
    if m.note:
        notes.append(m.note)
    has_distance = math.isfinite(mu)
    return BandPhotometry(
        band=band, input_kind=kind, is_limit=m.is_limit, limit_sigma=m.limit_sigma,
        apparent_mag=float(mag_vega), apparent_mag_error=float(mag_err),
        flux_jy=float(flux), flux_jy_error=float(flux_err),
        absolute_mag=float(mag_vega - mu) if has_distance else math.nan,
        absolute_mag_error=float(mag_err) if has_distance else math.nan,
        host_synthesised=synthesised, notes=tuple(notes), host_mag=float(host_mag),
        host_mag_error=float(host_err), zero_point_error=float(eps), row=m.row,
    )


def calibrate(target: Target) -> CalibratedPhotometry:
    """Calibrate a target's photometry.

    Parameters
    ----------
    target : Target
        From :func:`read_target` or built in Python.

    Returns
    -------
    CalibratedPhotometry
        Rows sorted by pivot wavelength.

    Raises
    ------
    PhotometryError
        A contrast in a band where the host has no magnitude and none can be
        synthesised (no Teff, no spectrum), or a spectrum that does not cover a band.

    Notes
    -----
    contrast → apparent magnitude: m = m_host + Δm (Δm = -2.5 log10 r for a flux ratio);
    apparent magnitude → f_nu: f = ZP_Vega 10^(-0.4 m) (AB: 3631 Jy 10^(-0.4 m_AB),
    Oke & Gunn 1983); f_nu of an F_lambda at the pivot wavelength;
    absolute magnitude: M = m - 5 log10(d / 10 pc). The uncertainty model is
    in the module notes.
    """
    if not isinstance(target, Target):
        raise InputError(f"calibrate() needs a Target (see read_target), got {type(target).__name__}")
    notes: list[str] = []
    d, de, mu, mue = _distance(target.host, notes)
    reference = None
    ref_name = target.settings.synthesis_reference_band
    if ref_name is not None:
        matches = [e.band for e in target.host.magnitudes if e.band.name.lower() == ref_name.lower()]
        if not matches:
            raise PhotometryError(f"the host has no magnitude in the reference band {ref_name!r}",
                                  target.path, "[settings] synthesis_reference_band")
        reference = matches[0]
    rows = [_calibrate_row(target, m, mu, reference) for m in target.measurements]
    rows.sort(key=lambda r: r.band.pivot_wavelength)
    if any(r.host_synthesised for r in rows):
        notes.append(
            "host magnitudes flagged S are synthesised from a spectrum model, with the systematic given in "
            "their row's note: a blackbody lacks the molecular bands of cool stars"
        )
        if target.host.spectrum is None and target.host.teff < 4000:
            notes.append(
                f"WARNING: host Teff {target.host.teff:.0f} K: blackbody colours of M dwarfs can be off by "
                "~0.2 mag; give a model spectrum or raise [settings] synthesis_systematic_mag"
            )
    # approximate bands: flagged per row (flag A and the row's note give the definition), not noted again here
    cc = sorted({r.band.system for r in rows if r.band.system in ("WISE", "Spitzer/IRAC")})
    if cc:
        notes.append(f"{' and '.join(cc)} fluxes assume a reference spectrum: colour corrections may be needed")
    notes.append(f"{target.settings.counting}-counting band averages; Vega zero points from the "
                 "CALSPEC Vega spectrum (see `motes bands`)")
    return CalibratedPhotometry(target.name, tuple(rows), float(d), float(de), float(mu), float(mue),
                                tuple(notes), target.settings.counting)

