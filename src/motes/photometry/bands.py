"""Photometric bands: filter curves, synthetic photometry and zero points.

A :class:`Band` holds a throughput curve on a wavelength grid [um] and knows
what kind of curve it is:

``response="photon"``
    the curve is a per-photon throughput S(lambda) (transmission times quantum
    efficiency), the usual form of modern curves;
``response="energy"``
    the curve is an energy response R(lambda), i.e. already multiplied by
    lambda relative to a per-photon throughput.

Band averages follow the detector's counting mode (photon-counting by default,
energy-counting on request). With the weight

    w(lambda) = T(lambda) * lambda**p,  p = [counting is photon] - [response is energy]

the band-averaged flux density is

    <F_lambda> = integral F_lambda w dlambda / integral w dlambda

and the band-averaged f_nu is <F_lambda> * lambda_p**2 / c with the pivot
wavelength lambda_p**2 = integral w dlambda / integral w lambda**-2 dlambda,
which makes a flat f_nu source come back exactly (so AB = 0 for 3631 Jy).
For photon counting and a per-photon curve this is the textbook
<F_lambda> = integral F S lambda / integral S lambda (e.g. Bessell & Murphy
2012, PASP 124, 140, eq. A11) and lambda_p of Tokunaga & Vacca (2005).

Standard curves and the Vega reference spectrum come from the ``pyphot``
package; nothing is typed by hand. The Vega spectrum is CALSPEC
``alpha_lyr_stis_003`` (Bohlin & Gilliland 2004, AJ 127, 3508), the
calibration to which the 2MASS and WISE Vega zero points are tied (Cohen,
Wheaton & Megeath 2003; Wright et al. 2010): with it the 2MASS zero points come
back within 0.6%, while the later ``stis_011`` model is ~2% fainter in the near
infrared. ``VEGA_REFERENCE`` names the one in use.
"""

from __future__ import annotations

import difflib
import functools
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..conventions import AB_ZERO_POINT_JY, _FLAM_TO_FNU, flam_to_fnu
from ..errors import BandError
from ..parameters import accepts_quantities
from .band_names import RENAMED, band_entries, band_entry

__all__ = [
    "Band",
    "COUNTING_MODES",
    "standard_band_names",
    "get_band",
    "canonical_band_name",
    "top_hat_band",
    "gaussian_band",
    "band_from_curve",
    "read_band_curve",
    "vega_spectrum",
    "VEGA_REFERENCE",
]

#: pyphot flavour of the CALSPEC Vega spectrum used for every Vega zero point.
VEGA_REFERENCE = "stis_003"

COUNTING_MODES = ("photon", "energy")
_RESPONSES = ("photon", "energy")


@accepts_quantities
@dataclass(frozen=True, eq=False)
class Band:
    """A photometric band.

    Parameters
    ----------
    name : str
        Name used in tables and files (e.g. ``"2mass_ks"``).
    wavelength : ndarray[n]
        Wavelength grid [um], strictly increasing.
    throughput : ndarray[n]
        Curve values (any normalisation), non-negative.
    response : {"photon", "energy"}
        What kind of curve ``throughput`` is (see module notes).
    system : str
        Photometric system ("2MASS", "WISE", "user", ...).
    vega_magnitude : float
        Magnitude the system assigns to Vega in this band (0 in most systems).
    native_system : {"Vega", "AB"}
        The magnitude system in which catalogues of this system are published.
    approximate : bool
        True for bands built from a centre and a width (top-hat, Gaussian):
        every output that uses such a band says so.
    counting : {"photon", "energy"}
        Detector counting mode used for band averages.
    source : str
        Where the curve comes from.
    note : str
        Caveats (e.g. colour corrections needed for WISE and IRAC).
    """

    name: str
    wavelength: np.ndarray
    throughput: np.ndarray
    response: str = "photon"
    system: str = "user"
    vega_magnitude: float = 0.0
    native_system: str = "Vega"
    approximate: bool = False
    counting: str = "photon"
    source: str = ""
    note: str = ""
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self):
        wl = np.asarray(self.wavelength, dtype=float)
        tr = np.asarray(self.throughput, dtype=float)
        if wl.ndim != 1 or wl.shape != tr.shape or wl.size < 2:
            raise BandError(
                f"band '{self.name}': wavelength and throughput must be 1-D arrays of "
                f"the same length >= 2, got shapes {wl.shape} and {tr.shape}"
            )
        if not (np.all(np.isfinite(wl)) and np.all(np.isfinite(tr))):
            raise BandError(f"band '{self.name}': curve contains NaN or infinite values")
        if np.any(wl <= 0):
            raise BandError(f"band '{self.name}': wavelengths must be positive")
        if np.any(np.diff(wl) <= 0):
            raise BandError(
                f"band '{self.name}': wavelengths must be strictly increasing "
                "(sort the curve and remove duplicated wavelengths)"
            )
        if np.any(tr < 0) or not np.any(tr > 0):
            raise BandError(f"band '{self.name}': throughput must be >= 0 and not all zero")
        if self.response not in _RESPONSES:
            raise BandError(
                f"band '{self.name}': response must be one of {_RESPONSES}, got {self.response!r}"
            )
        if self.counting not in COUNTING_MODES:
            raise BandError(
                f"band '{self.name}': counting must be one of {COUNTING_MODES}, got {self.counting!r}"
            )
        if self.native_system not in ("Vega", "AB"):
            raise BandError(
                f"band '{self.name}': native_system must be 'Vega' or 'AB', got {self.native_system!r}"
            )
        wl.setflags(write=False)
        tr.setflags(write=False)
        object.__setattr__(self, "wavelength", wl)
        object.__setattr__(self, "throughput", tr)

    # ------------------------------------------------------------------ weights
    def with_counting(self, counting: str) -> "Band":
        """Return a copy of this band using another detector counting mode."""
        if counting == self.counting:
            return self
        return Band(
            self.name, self.wavelength, self.throughput, self.response, self.system,
            self.vega_magnitude, self.native_system, self.approximate, counting,
            self.source, self.note,
        )

    @property
    def _power(self) -> int:
        return int(self.counting == "photon") - int(self.response == "energy")

    @accepts_quantities
    def weight(self, wavelength) -> np.ndarray:
        """Integration weight w(lambda) [arbitrary] for F_lambda averages.

        Parameters
        ----------
        wavelength : ndarray [um]

        Returns
        -------
        ndarray, same shape as ``wavelength``; zero outside the curve.
        """
        wavelength = np.asarray(wavelength, dtype=float)
        t = np.interp(wavelength, self.wavelength, self.throughput, left=0.0, right=0.0)
        return t * wavelength ** self._power

    @property
    def wavelength_min(self) -> float:
        """Shortest wavelength with non-zero throughput [um]."""
        nz = np.flatnonzero(self.throughput > 0)
        return float(self.wavelength[max(nz[0] - 1, 0)])

    @property
    def wavelength_max(self) -> float:
        """Longest wavelength with non-zero throughput [um]."""
        nz = np.flatnonzero(self.throughput > 0)
        return float(self.wavelength[min(nz[-1] + 1, self.wavelength.size - 1)])

    def _integration_grid(self, extra=None) -> np.ndarray:
        # The curve's own grid, refined 8x so that smooth spectra integrate to
        # better than 1e-5, plus any spectrum sampling points inside the band.
        wl = self.wavelength
        refined = np.concatenate(
            [np.linspace(wl[i], wl[i + 1], 8, endpoint=False) for i in range(wl.size - 1)]
            + [wl[-1:]]
        )
        if extra is not None:
            extra = np.asarray(extra, dtype=float)
            extra = extra[(extra > wl[0]) & (extra < wl[-1])]
            refined = np.union1d(refined, extra)
        return refined

    # --------------------------------------------------------------- properties
    @property
    def pivot_wavelength(self) -> float:
        """Pivot wavelength lambda_p [um]: sqrt(int w / int w lambda^-2)."""
        if "pivot" not in self._cache:
            g = self._integration_grid()
            w = self.weight(g)
            self._cache["pivot"] = float(np.sqrt(np.trapezoid(w, g) / np.trapezoid(w / g**2, g)))
        return self._cache["pivot"]

    @property
    def mean_wavelength(self) -> float:
        """Weighted mean wavelength int w lambda / int w [um]."""
        g = self._integration_grid()
        w = self.weight(g)
        return float(np.trapezoid(w * g, g) / np.trapezoid(w, g))

    @property
    def effective_wavelength(self) -> float:
        """Vega-weighted effective wavelength int w F_Vega lambda / int w F_Vega [um]."""
        if "leff" not in self._cache:
            vwl, vfl = vega_spectrum()
            g = self._integration_grid(vwl)
            wf = self.weight(g) * np.interp(g, vwl, vfl)
            self._cache["leff"] = float(np.trapezoid(wf * g, g) / np.trapezoid(wf, g))
        return self._cache["leff"]

    @property
    def width(self) -> float:
        """Equivalent width int T dlambda / max T [um] of the curve as given."""
        return float(np.trapezoid(self.throughput, self.wavelength) / self.throughput.max())

    @property
    def fwhm(self) -> float:
        """Full width at half maximum of the curve [um] (outermost crossings)."""
        t = self.throughput / self.throughput.max()
        above = np.flatnonzero(t >= 0.5)
        lo, hi = above[0], above[-1]

        def cross(i0, i1):
            t0, t1 = t[i0], t[i1]
            if t1 == t0:
                return self.wavelength[i1]
            return self.wavelength[i0] + (0.5 - t0) * (self.wavelength[i1] - self.wavelength[i0]) / (t1 - t0)

        left = self.wavelength[0] if lo == 0 else cross(lo - 1, lo)
        right = self.wavelength[-1] if hi == t.size - 1 else cross(hi, hi + 1)
        return float(right - left)

    # ------------------------------------------------------ synthetic photometry
    @accepts_quantities
    def average_flux_lambda(self, wavelength, flux_lambda) -> np.ndarray:
        """Band-averaged F_lambda of tabulated spectra.

        Parameters
        ----------
        wavelength : ndarray[n] [um]
            Increasing wavelength grid of the spectra. It must cover the band.
        flux_lambda : ndarray[..., n] [any F_lambda unit]
            One or more spectra on that grid (leading axes broadcast).

        Returns
        -------
        ndarray[...]
            <F_lambda> in the unit of ``flux_lambda``.

        Raises
        ------
        BandError
            When the spectrum does not cover the band's non-zero throughput.
        """
        wavelength = np.asarray(wavelength, dtype=float)
        flux_lambda = np.asarray(flux_lambda, dtype=float)
        if wavelength[0] > self.wavelength_min * (1 + 1e-9) or wavelength[-1] < self.wavelength_max * (1 - 1e-9):
            raise BandError(
                f"spectrum covers {wavelength[0]:.4g}-{wavelength[-1]:.4g} um but band "
                f"'{self.name}' needs {self.wavelength_min:.4g}-{self.wavelength_max:.4g} um"
            )
        g = self._integration_grid(wavelength)
        w = self.weight(g)
        flat = flux_lambda.reshape(-1, wavelength.size)
        f = np.stack([np.interp(g, wavelength, row) for row in flat])
        out = np.trapezoid(f * w, g, axis=-1) / np.trapezoid(w, g)
        return out.reshape(flux_lambda.shape[:-1]) if flux_lambda.ndim > 1 else float(out[0])

    def average_flux_lambda_of(self, function) -> float:
        """Band-averaged F_lambda of ``function(wavelength_um)`` (vectorised)."""
        g = self._integration_grid()
        w = self.weight(g)
        return float(np.trapezoid(np.asarray(function(g), dtype=float) * w, g) / np.trapezoid(w, g))

    @accepts_quantities
    def flux_lambda_to_fnu(self, mean_flux_lambda):
        """Convert a band-averaged F_lambda [W m^-2 um^-1] to <f_nu> [Jy] at the pivot."""
        return flam_to_fnu(mean_flux_lambda, self.pivot_wavelength)

    @accepts_quantities
    def fnu_to_flux_lambda(self, mean_fnu):
        """Convert a band-averaged f_nu [Jy] to <F_lambda> [W m^-2 um^-1]."""
        return np.asarray(mean_fnu) / (self.pivot_wavelength**2 * _FLAM_TO_FNU)

    # --------------------------------------------------------------- zero points
    @property
    def vega_flux_lambda(self) -> float:
        """Band-averaged F_lambda of the Vega reference spectrum [W m^-2 um^-1]."""
        if "vega" not in self._cache:
            vwl, vfl = vega_spectrum()
            self._cache["vega"] = self.average_flux_lambda(vwl, vfl)
        return self._cache["vega"]

    @property
    def vega_zero_point_jy(self) -> float:
        """f_nu [Jy] of a source with Vega magnitude 0 in this band."""
        return float(self.flux_lambda_to_fnu(self.vega_flux_lambda) * 10 ** (0.4 * self.vega_magnitude))

    @property
    def vega_zero_point_flux_lambda(self) -> float:
        """F_lambda [W m^-2 um^-1] of a source with Vega magnitude 0 in this band."""
        return float(self.vega_flux_lambda * 10 ** (0.4 * self.vega_magnitude))

    @property
    def ab_zero_point_flux_lambda(self) -> float:
        """F_lambda [W m^-2 um^-1] of a source with AB magnitude 0 (3631 Jy flat f_nu)."""
        return float(self.fnu_to_flux_lambda(AB_ZERO_POINT_JY))

    @property
    def ab_minus_vega(self) -> float:
        """m_AB - m_Vega for any source in this band [mag]."""
        return float(-2.5 * np.log10(self.vega_zero_point_jy / AB_ZERO_POINT_JY))

    @accepts_quantities
    def vega_magnitude_of(self, mean_flux_lambda):
        """Vega magnitude of a band-averaged F_lambda [W m^-2 um^-1]."""
        return -2.5 * np.log10(np.asarray(mean_flux_lambda) / self.vega_flux_lambda) + self.vega_magnitude

    @accepts_quantities
    def ab_magnitude_of(self, mean_flux_lambda):
        """AB magnitude of a band-averaged F_lambda [W m^-2 um^-1]."""
        return -2.5 * np.log10(self.flux_lambda_to_fnu(mean_flux_lambda) / AB_ZERO_POINT_JY)

    def describe(self) -> dict:
        """Summary of the band as a plain dict (used by ``motes bands``).

        Zero points and the effective wavelength are nan where the Vega
        spectrum does not cover the band (far infrared).
        """
        try:
            zp, ab, leff = self.vega_zero_point_jy, self.ab_minus_vega, self.effective_wavelength
        except BandError:
            zp = ab = leff = float("nan")
        return {
            "name": self.name,
            "system": self.system,
            "pivot_um": self.pivot_wavelength,
            "effective_um": leff,
            "fwhm_um": self.fwhm,
            "width_um": self.width,
            "vega_zp_jy": zp,
            "ab_minus_vega": ab,
            "vega_mag": self.vega_magnitude,
            "native": self.native_system,
            "response": self.response,
            "counting": self.counting,
            "approximate": self.approximate,
            "source": self.source,
            "note": self.note,
        }

    def __repr__(self) -> str:
        approx = ", approximate" if self.approximate else ""
        return f"Band({self.name!r}, pivot={self.pivot_wavelength:.4f} um{approx})"


# ---------------------------------------------------------------------- Vega
@functools.lru_cache(maxsize=1)
def vega_spectrum() -> tuple[np.ndarray, np.ndarray]:
    """The Vega reference spectrum: wavelength [um], F_lambda [W m^-2 um^-1].

    CALSPEC ``alpha_lyr_stis_003`` (Bohlin & Gilliland 2004) as carried by the
    ``pyphot`` package (see ``VEGA_REFERENCE`` and the module notes).
    """
    import astropy.units as u
    from pyphot.vega import Vega

    with Vega(flavor=VEGA_REFERENCE) as v:
        wl = np.asarray(v.wavelength.to_value(u.um), dtype=float)
        fl = np.asarray(v.flux.to_value(u.erg / u.s / u.cm**2 / u.AA), dtype=float)
    order = np.argsort(wl)
    wl, fl = wl[order], fl[order] * 10.0  # erg s-1 cm-2 A-1 -> W m-2 um-1
    keep = np.concatenate([[True], np.diff(wl) > 0])
    return wl[keep], fl[keep]


# ------------------------------------------------------------- standard bands
# The identifiers, systems, Vega magnitudes and notes of the standard bands are
# declared in :mod:`motes.photometry.band_names`.
def standard_band_names() -> list[str]:
    """Identifiers of the bands motes knows without any user file (see :mod:`.band_names`)."""
    return list(band_entries())


@functools.lru_cache(maxsize=None)
def _load_standard(name: str, entry=None) -> Band:
    import astropy.units as u

    entry = entry or band_entries()[name]
    if entry.half_power_um is not None:
        return _half_power_top_hat(entry)
    curve = _pyphot_library()[entry.key]
    wl = np.asarray(u.Quantity(curve.wavelength).to_value(u.um), dtype=float)
    tr = np.asarray(curve.transmit, dtype=float)
    order = np.argsort(wl)
    wl, tr = wl[order], np.clip(tr[order], 0.0, None)
    keep = np.concatenate([[True], np.diff(wl) > 0])
    return Band(
        name=name,
        wavelength=wl[keep],
        throughput=tr[keep],
        response="photon" if curve.dtype == "photon" else "energy",
        system=entry.system,
        vega_magnitude=entry.vega_magnitude,
        native_system=entry.native_system,
        source=f"pyphot filter library, curve '{entry.key}'",
        note=entry.note,
    )


def _half_power_top_hat(entry, n: int = 401) -> Band:
    # Flat between the half-power points, with linear edges 1% of the width
    # long centred on them, so that the curve is at half power exactly there.
    lo, hi = entry.half_power_um
    edge = 0.01 * (hi - lo)
    wl = np.concatenate([[lo - edge / 2], np.linspace(lo + edge / 2, hi - edge / 2, n), [hi + edge / 2]])
    tr = np.concatenate([[0.0], np.ones(n), [0.0]])
    return Band(entry.name, wl, tr, response="photon", system=entry.system,
                vega_magnitude=entry.vega_magnitude, native_system=entry.native_system, approximate=True,
                source=f"top-hat from the half-power points {lo:g}-{hi:g} um", note=entry.note)


@functools.lru_cache(maxsize=1)
def _pyphot_library():
    from pyphot import get_library

    return get_library()


def _refuse_old_name(name: str) -> None:
    lowered = {k.lower(): v for k, v in RENAMED.items()}
    new = lowered.get(name.strip().lower())
    if new is not None:
        raise BandError(f"band {name!r} is now called {new!r} (motes band identifiers are "
                        "facility[-instrument]_band; `motes bands` lists them)")


def canonical_band_name(name: str) -> str | None:
    """The standard identifier ``name`` stands for (case-insensitive), or None.

    Raises
    ------
    BandError
        For a band name of an earlier motes release, naming its identifier.
    """
    _refuse_old_name(name)
    entry = band_entry(name)
    return entry.name if entry is not None else None


def get_band(name: str, custom: dict[str, Band] | None = None, counting: str = "photon") -> Band:
    """Look a band up by name.

    Parameters
    ----------
    name : str
        A standard identifier (case-insensitive, e.g. ``"2MASS_Ks"`` for
        ``2mass_ks``; :mod:`motes.photometry.band_names`) or the name of a user
        band in ``custom``.
    custom : dict of str to Band, optional
        User-defined bands, searched first.
    counting : {"photon", "energy"}
        Detector counting mode for band averages.

    Raises
    ------
    BandError
        For an unknown name (the message suggests the closest known names) or
        a name of an earlier release (the message gives its identifier).
    """
    if counting not in COUNTING_MODES:
        raise BandError(f"counting must be one of {COUNTING_MODES}, got {counting!r}")
    custom = custom or {}
    if name in custom:
        return custom[name].with_counting(counting)
    canonical = canonical_band_name(name)
    if canonical is None:
        known = list(custom) + standard_band_names()
        # compare case-insensitively: "2mass_k" should suggest "2mass_ks"
        by_lower = {k.lower(): k for k in known}
        lowered = name.strip().lower()
        close = [k for k in known if k.lower().endswith("_" + lowered)]
        close += [by_lower[c] for c in difflib.get_close_matches(lowered, list(by_lower), n=3, cutoff=0.4)
                  if by_lower[c] not in close]
        hint = f"; did you mean {', '.join(repr(c) for c in close[:4])}?" if close else ""
        raise BandError(
            f"unknown band {name!r}{hint} (`motes bands` lists the known bands; "
            "define others as a curve file or a top-hat/Gaussian band)"
        )
    return _load_standard(canonical).with_counting(counting)


# ---------------------------------------------------------------- user bands
@accepts_quantities
def top_hat_band(name: str, centre: float, width: float, n: int = 401) -> Band:
    """An approximate top-hat band [um] with a short linear edge (1% of the width).

    Marked ``approximate``: outputs that use it say so.
    """
    _check_centre_width(name, centre, width)
    edge = 0.01 * width
    lo, hi = centre - width / 2, centre + width / 2
    wl = np.concatenate([[lo - edge], np.linspace(lo, hi, n), [hi + edge]])
    tr = np.concatenate([[0.0], np.ones(n), [0.0]])
    return Band(name, wl, tr, response="photon", system="user (top-hat)", approximate=True,
                source=f"top-hat, centre {centre:g} um, width {width:g} um")


@accepts_quantities
def gaussian_band(name: str, centre: float, fwhm: float, n: int = 401) -> Band:
    """An approximate Gaussian band [um], truncated at +-3 FWHM. Marked ``approximate``."""
    _check_centre_width(name, centre, fwhm)
    sigma = fwhm / 2.354820045
    wl = np.linspace(centre - 3 * fwhm, centre + 3 * fwhm, n)
    if wl[0] <= 0:
        raise BandError(f"band '{name}': a Gaussian of FWHM {fwhm:g} um at {centre:g} um reaches lambda <= 0")
    tr = np.exp(-0.5 * ((wl - centre) / sigma) ** 2)
    return Band(name, wl, tr, response="photon", system="user (Gaussian)", approximate=True,
                source=f"Gaussian, centre {centre:g} um, FWHM {fwhm:g} um")


def _check_centre_width(name, centre, width):
    if not (np.isfinite(centre) and np.isfinite(width)) or centre <= 0 or width <= 0 or width >= 2 * centre:
        raise BandError(
            f"band '{name}': centre and width must be positive finite numbers in um with "
            f"width < 2*centre, got centre={centre!r}, width={width!r}"
        )


@accepts_quantities
def band_from_curve(name: str, wavelength, throughput, response: str = "photon", **kwargs) -> Band:
    """A user band from arrays (wavelength [um], throughput)."""
    wl = np.asarray(wavelength, dtype=float)
    tr = np.asarray(throughput, dtype=float)
    order = np.argsort(wl, kind="stable")
    return Band(name, wl[order], tr[order], response=response, system=kwargs.pop("system", "user"), **kwargs)


def read_band_curve(path, name: str | None = None, wavelength_unit: str = "um",
                    response: str = "photon") -> Band:
    """Read a user filter curve: two columns, wavelength and throughput.

    Lines starting with ``#`` are comments. A comment line
    ``# wavelength_unit: nm`` (or ``um``, ``AA``, ``Angstrom``) overrides
    ``wavelength_unit``; ``# response: energy`` overrides ``response``.

    Raises
    ------
    BandError
        Naming the file and line of the first problem found.
    """
    import astropy.units as u

    path = Path(path)
    name = name or path.stem
    try:
        lines = path.read_text().splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise BandError(f"cannot read filter curve: {exc}", path) from exc
    rows = []
    for number, line in enumerate(lines, 1):
        text = line.strip()
        if not text:
            continue
        if text.startswith("#"):
            key, _, value = text.lstrip("#").partition(":")
            key = key.strip().lower()
            if key in ("wavelength_unit", "unit"):
                wavelength_unit = value.strip()
            elif key == "response":
                response = value.strip().lower()
            continue
        parts = text.replace(",", " ").split()
        if len(parts) < 2:
            raise BandError("expected two columns: wavelength and throughput", path, f"line {number}")
        try:
            rows.append((float(parts[0]), float(parts[1])))
        except ValueError:
            raise BandError(f"cannot read numbers from {text!r}", path, f"line {number}") from None
    if len(rows) < 2:
        raise BandError("a filter curve needs at least two rows", path)
    try:
        unit = u.Unit(wavelength_unit)
        scale = (1 * unit).to_value(u.um)
    except (ValueError, u.UnitConversionError):
        raise BandError(f"wavelength unit {wavelength_unit!r} is not a length unit", path) from None
    arr = np.asarray(rows)
    wl = arr[:, 0] * scale
    if np.unique(wl).size != wl.size:
        raise BandError("duplicated wavelengths in filter curve", path)
    try:
        return band_from_curve(name, wl, arr[:, 1], response=response,
                               source=f"user curve {path}")
    except BandError as exc:
        raise BandError(exc.reason, path) from None
