"""Thermal emission of one dust mixture, beside its scattered light: what ``motes optics`` adds.

The same grains (materials, mixing rule, porosity, size distribution) that
scatter starlight absorb it and re-radiate it. Given where they are (a ring
at one radius or a belt with a power-law surface density) and how much dust
there is, this module computes the grain temperatures against size, the
thermal spectrum, band-averaged fluxes and the excess over the photosphere,
the fractional luminosity L_dust/L*, and the ratio of the ring radius to the
blackbody radius. The physics is in :mod:`motes.optics.thermal`.

A mixture file gains a ``[thermal]`` table (and needs ``[star] luminosity``)::

    [thermal]
    radius_au = 60.0                  # ring radius [au]; or [r_in, r_out] for a belt
    surface_density_index = -1.0      # belt only (default -1): Sigma ∝ r^p
    bands = ["wise_w3", "wise_w4", "herschel-pacs_70", "mm_1.3"]   # standard or [bands.NAME]
    dust_mass_mearth = 0.01           # the dust amount: mass [M_earth], or
    # cross_section_au2 = 5.0         #   the total grain cross-section [au^2]
    distance_pc = 20.0                # optional: fluxes in Jy (ratios to the star need no distance)
    sublimation_k = { silicate = 1400.0 }   # optional: more materials to flag [K]
    sizes_per_efold = 4               # optional: Gauss nodes in ln a per e-fold for the temperatures
    flux_sizes_per_efold = 32         # optional: ... for the flux integrals (temperatures interpolated)
    radial_nodes = 12                 # optional: Gauss nodes in ln r across a belt

Every material must cover the thermal wavelength grid (0.05 um - 2 cm) or
name an extrapolation rule in its ``[[materials]]`` table (``extrapolation =
"dielectric"`` or ``"conductor"``; :mod:`motes.optics.material`); every output
that used one says so, with the share of the star's flux that fell short of
the data.

Band fluxes are photon-counting band averages ``<f_nu>`` quoted at the
pivot wavelength (:meth:`motes.photometry.bands.Band.flux_lambda_to_fnu`),
the convention of the scattered-light side. Far-infrared catalogues (IRAS,
Spitzer, Herschel, WISE) quote monochromatic flux densities at a nominal
wavelength for a reference spectrum (nu F_nu = const, or F_nu ∝ nu^-2 for
WISE); the colour corrections between the two conventions are **not**
applied (documented as ignored; they are a few per cent for wide bands on
steep spectra): compare with colour-corrected data or add a calibration
error term.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...conventions import flam_to_fnu
from ...errors import InputError, MotesError, ModelError
from ...parameters import EXTINCTION_K, PARAMETERS, REFRACTIVE_N, accepts_quantities
from ...optics import thermal as th
from ...optics.mixing import mix_refractive_index, mixture_density
from ...optics.sizes import gauss_legendre_log
from ...photometry.bands import Band, get_band
from ...tomlcheck import check_keys, read_number
from .colours import MIE_SPHERES_NOTE
from .sampling import weighted_gauss_nodes

__all__ = [
    "SUBLIMATION_TEMPERATURES",
    "THERMAL_KEYS",
    "COLOUR_CORRECTION_NOTE",
    "ThermalSettings",
    "ThermalResult",
    "parse_thermal",
    "read_thermal_settings",
    "compute_thermal",
    "belt_nodes",
]

#: Sublimation temperatures [K] of bundled materials (by file stem) with their source.
SUBLIMATION_TEMPERATURES = {
    "water_ice_crystalline": (110.0, "water ice in debris disks sublimates within the system's age above "
                                     "~100-110 K (from memory)"),
    "methane_ice": (30.0, "methane ice sublimates above ~25-30 K in vacuum (from memory)"),
}
THERMAL_KEYS = {"radius_au", "surface_density_index", "bands", "dust_mass_mearth", "cross_section_au2",
                "distance_pc", "sublimation_k", "sizes_per_efold", "flux_sizes_per_efold", "radial_nodes"}
COLOUR_CORRECTION_NOTE = ("thermal band fluxes are photon-counting band averages <f_nu> at the pivot wavelength; "
                          "no colour correction to a catalogue's nominal-wavelength convention is applied")
OPTICALLY_THIN_NOTE = "thermal emission of optically thin dust: no shadowing, no heating by other grains"
_M_EARTH_KG = 5.9722e24          # IAU 2015 nominal G M_earth / G (astropy constants: M_earth)
_AU_M = th._AU
_BAND_NODES = 48     # Gauss nodes per band: 12 left 0.4% in bands across silica features, 48 < 0.05% (measured)


@accepts_quantities
@dataclass(frozen=True)
class ThermalSettings:
    """The ``[thermal]`` table of a mixture file (see the module docstring).

    Attributes
    ----------
    radius_au : tuple of float [au]
        ``(r,)`` for a ring, ``(r_in, r_out)`` for a belt.
    surface_density_index : float or None
    bands : tuple of Band
    dust_mass_mearth, cross_section_au2 : float or None
        Exactly one is given.
    distance_pc : float or None
    sublimation_k : dict of str to float
    sizes_per_efold, flux_sizes_per_efold, radial_nodes : int
    """

    radius_au: tuple[float, ...]
    surface_density_index: float | None
    bands: tuple[Band, ...]
    dust_mass_mearth: float | None
    cross_section_au2: float | None
    distance_pc: float | None
    sublimation_k: dict
    sizes_per_efold: int = 4
    radial_nodes: int = 12
    flux_sizes_per_efold: int = 32


@dataclass(frozen=True)
class ThermalResult:
    """Thermal emission of one mixture (everything ``motes optics`` prints and draws).

    Attributes
    ----------
    settings : ThermalSettings
    luminosity : float [L_sun]
    sizes : ndarray[S] [um]
        Size nodes (Gauss-Legendre in ln a).
    radii : ndarray[R] [au]
        Radius nodes (one for a ring).
    temperature : ndarray[S, R] [K]
    blackbody_temperature : ndarray[R] [K]
    q_abs_star : ndarray[S]
        ``<Q_abs>_*`` over the star's spectrum.
    q_abs_own : ndarray[S, R]
        Planck mean of Q_abs at the grain's own temperature.
    spectrum_wavelength : ndarray[L] [um]
    spectrum_disk, spectrum_star : ndarray[L] [Jy at distance_pc, or at 1 pc when none is given]
    band_names : tuple of str
    band_pivot : ndarray[B] [um]
    band_disk, band_star : ndarray[B] [Jy, same distance convention]
    fractional_luminosity : float
    dust_temperature : float [K]
        From the peak of F_nu (Wien: lambda_peak T = 5099.7 um K).
    blackbody_radius : float [au]
    mean_radius : float [au]
        Ring radius, or cross-section-weighted mean radius of a belt.
    node_cross_section : ndarray[S, R] [au^2]
        Grain cross-section at each (size, radius) node; sums to ``cross_section_au2``.
    cross_section_au2 : float [au^2]
    dust_mass_mearth : float
        nan when a material has no density.
    flux_sizes : ndarray[S'] [um]
        The finer size nodes of the flux integrals (Q_abs ripples with x in
        the far infrared); ``flux_temperature`` [S', R] [K] interpolated from
        ``temperature`` in (ln a, ln T), ``flux_cross_section`` [S', R] [au^2].
    flags : tuple of str
        Ice above its sublimation temperature and similar warnings.
    notes : tuple of str
    """

    settings: ThermalSettings
    luminosity: float
    sizes: np.ndarray
    radii: np.ndarray
    temperature: np.ndarray
    blackbody_temperature: np.ndarray
    q_abs_star: np.ndarray
    q_abs_own: np.ndarray
    spectrum_wavelength: np.ndarray
    spectrum_disk: np.ndarray
    spectrum_star: np.ndarray
    band_names: tuple[str, ...]
    band_pivot: np.ndarray
    band_disk: np.ndarray
    band_star: np.ndarray
    fractional_luminosity: float
    dust_temperature: float
    blackbody_radius: float
    mean_radius: float
    node_cross_section: np.ndarray
    cross_section_au2: float
    dust_mass_mearth: float
    flux_sizes: np.ndarray
    flux_temperature: np.ndarray
    flux_cross_section: np.ndarray
    flags: tuple[str, ...]
    notes: tuple[str, ...]

    @property
    def excess(self) -> np.ndarray:
        """Disk/star flux ratio per thermal band (the excess over the photosphere)."""
        return self.band_disk / self.band_star

    @property
    def radius_ratio(self) -> float:
        """Ring radius over blackbody radius (Gamma)."""
        return self.mean_radius / self.blackbody_radius

    def to_table(self):
        """Per-band thermal numbers (ECSV): band, pivot [um], disk and star flux [Jy], excess."""
        from astropy.table import Table
        import astropy.units as u

        t = Table()
        t["band"] = list(self.band_names)
        t["pivot"] = self.band_pivot * u.um
        t["disk_flux"] = self.band_disk * u.Jy
        t["star_flux"] = self.band_star * u.Jy
        t["excess"] = self.excess
        t.meta.update({"distance_pc": self.settings.distance_pc if self.settings.distance_pc else
                       "none given: fluxes are at 1 pc, ratios do not depend on it",
                       "radius_au": list(self.settings.radius_au), "luminosity_lsun": self.luminosity,
                       "fractional_luminosity": self.fractional_luminosity,
                       "dust_temperature_K": self.dust_temperature, "blackbody_radius_au": self.blackbody_radius,
                       "radius_over_blackbody_radius": self.radius_ratio,
                       "cross_section_au2": self.cross_section_au2, "dust_mass_mearth": self.dust_mass_mearth,
                       "flags": list(self.flags), "notes": list(self.notes)})
        return t

    def temperature_table(self):
        """Grain temperatures against size (ECSV): one column per radius node."""
        from astropy.table import Table
        import astropy.units as u

        t = Table()
        t["radius"] = self.sizes * u.um
        t["q_abs_star"] = self.q_abs_star
        for j, r in enumerate(self.radii):
            t[f"T_{r:.4g}au"] = self.temperature[:, j] * u.K
        t.meta["blackbody_temperature_K"] = [float(v) for v in self.blackbody_temperature]
        return t


# ----------------------------------------------------------------- reading [thermal]
def parse_thermal(doc: dict, description) -> ThermalSettings | None:
    """Read the ``[thermal]`` table of a mixture document (None when there is none).

    Raises
    ------
    motes.errors.InputError
        Naming the file and field: unknown keys, a radius <= 0, a belt with
        r_out <= r_in or no ``surface_density_index``, no dust amount or two,
        unknown bands, a missing ``[star] luminosity``.
    """
    if "thermal" not in doc:
        return None
    src = description.source
    tab = doc["thermal"]
    check_keys(tab, THERMAL_KEYS, path=src, where="[thermal]", required=("radius_au", "bands"))
    if description.star.luminosity is None:
        raise InputError("the thermal side needs the star's luminosity: add luminosity = ... [L_sun]",
                         path=src, where="[star]")
    raw = tab["radius_au"]
    values = raw if isinstance(raw, list) else [raw]
    if len(values) not in (1, 2):
        raise InputError(f"radius_au must be a ring radius or [r_in, r_out] [au], got {raw!r}",
                         path=src, where="[thermal] radius_au")
    radius = tuple(read_number(v, path=src, where="[thermal] radius_au", what="a distance from the star [au]",
                               positive=True) for v in values)
    p = None
    if len(radius) == 2:
        if not radius[0] < radius[1]:
            raise InputError(f"a belt needs r_in < r_out, got {list(radius)}", path=src, where="[thermal] radius_au")
        declared = PARAMETERS["surface_density_index"]
        p = read_number(tab.get("surface_density_index", declared.default), path=src,
                        where="[thermal] surface_density_index", what=f"the index p of Sigma ∝ r^p, in "
                        f"{declared.interval}", lo=declared.lo, hi=declared.hi)
    elif "surface_density_index" in tab:
        raise InputError("surface_density_index is for a belt (radius_au = [r_in, r_out]); a ring has one radius",
                         path=src, where="[thermal] surface_density_index")
    names = tab["bands"]
    if not isinstance(names, list) or not names:
        raise InputError("bands must be a non-empty list of band names", path=src, where="[thermal] bands")
    bands = []
    for name in names:
        if not isinstance(name, str):
            raise InputError(f"band names must be strings, got {name!r}", path=src, where="[thermal] bands")
        try:
            bands.append(get_band(name, description.custom_bands))
        except MotesError as exc:
            raise InputError(str(exc), path=src, where="[thermal] bands") from None
    amount = [k for k in ("dust_mass_mearth", "cross_section_au2") if k in tab]
    if len(amount) != 1:
        raise InputError("give the amount of dust as exactly one of dust_mass_mearth [M_earth] or "
                         f"cross_section_au2 [au^2] (got {amount or 'neither'})", path=src, where="[thermal]")
    value = read_number(tab[amount[0]], path=src, where=f"[thermal] {amount[0]}", positive=True)
    distance = (read_number(tab["distance_pc"], path=src, where="[thermal] distance_pc", positive=True)
                if "distance_pc" in tab else None)
    sub = tab.get("sublimation_k", {})
    if not isinstance(sub, dict):
        raise InputError("sublimation_k must be a table { material = T [K], ... }", path=src,
                         where="[thermal] sublimation_k")
    unknown = sorted(set(sub) - set(description.material_names))
    if unknown:
        raise InputError(f"unknown material(s) {unknown}; the materials are {list(description.material_names)}",
                         path=src, where="[thermal] sublimation_k")
    sub = {k: read_number(v, path=src, where=f"[thermal] sublimation_k.{k}", positive=True) for k, v in sub.items()}
    per_efold = read_number(tab.get("sizes_per_efold", 4), path=src, where="[thermal] sizes_per_efold",
                            integer=True, lo=2, hi=16)
    n_r = read_number(tab.get("radial_nodes", 12), path=src, where="[thermal] radial_nodes", integer=True,
                      lo=2, hi=64)
    flux_per_efold = read_number(tab.get("flux_sizes_per_efold", 32), path=src,
                                 where="[thermal] flux_sizes_per_efold", integer=True, lo=2, hi=128)
    return ThermalSettings(radius, p, tuple(bands), value if amount[0] == "dust_mass_mearth" else None,
                           value if amount[0] == "cross_section_au2" else None, distance, sub, per_efold, n_r,
                           flux_per_efold)


def read_thermal_settings(path, description) -> ThermalSettings | None:
    """The ``[thermal]`` table of a mixture file already read by
    :func:`motes.dust.model.mixture.read_mixture_file` (None when there is none)."""
    import tomllib

    doc = tomllib.loads(Path(path).read_text())
    return parse_thermal(doc, description)


# ----------------------------------------------------------------- computing
def _matrix_index(description):
    matrix = description.matrix
    if matrix is None:
        return 0
    if matrix == "vacuum":
        return "vacuum"
    return list(description.material_names).index(matrix)


def _check_coverage(description, grid):
    src = description.source
    for i, mat in enumerate(description.materials):
        if mat.extrapolation is None and not mat.covers(grid).all():
            lo, hi = mat.wavelength_range
            raise InputError(
                f"thermal emission needs optical constants over {grid[0]:.3g}-{grid[-1]:.3g} um; "
                f"'{mat.name}' covers {lo:.4g}-{hi:.4g} um. Add extrapolation = \"dielectric\" "
                "(n constant, k ∝ 1/lambda beyond the data) or \"conductor\" (Hagen-Rubens, n, k ∝ lambda^1/2) "
                "to its table, or give a file that covers the range",
                path=src, where=f"[[materials]] #{i + 1} ({mat.name})")


def _indices(description, wavelength):
    samples = [m.sample(wavelength) for m in description.materials]
    notes = [n for s in samples for n in s.notes]
    return np.array([s.m for s in samples]), notes


@accepts_quantities
def belt_nodes(r_in_au, r_out_au, surface_density_index, n_nodes: int):
    """Radius nodes of a belt and the share of its grain cross-section at each.

    Parameters
    ----------
    r_in_au, r_out_au : float [au]
        Inner and outer edge, 0 < r_in <= r_out (r_in = r_out: a ring, one node).
    surface_density_index : float
        p of the surface density Sigma ∝ r^p (of cross-section, hence of mass: the size
        distribution is the same at every radius).
    n_nodes : int
        Gauss-Legendre nodes in ln r.

    Returns
    -------
    r : ndarray[R] [au]
    share : ndarray[R]
        Fraction of the total cross-section at each node (sums to 1).

    Notes
    -----
    The cross-section in an annulus is Sigma 2 pi r dr = 2 pi Sigma r^2 dln r ∝ r^(p+2) dln r,
    integrated by Gauss-Legendre in ln r between the edges; a quantity per unit cross-section
    F(r) then sums to the belt's ``sum share F(r)``, the same total cross-section (the thermal
    scale) as a ring's.

    Examples
    --------
    >>> r, share = belt_nodes(40.0, 80.0, -1.0, 4)
    >>> print(f"{share.sum():.3f} {float(np.sum(share * r)):.2f}")
    1.000 60.00
    """
    r_in, r_out, p = float(r_in_au), float(r_out_au), float(surface_density_index)
    if not (np.isfinite(r_in) and np.isfinite(r_out) and 0 < r_in <= r_out):
        raise InputError(f"a belt needs 0 < r_in <= r_out [au], got r_in = {r_in:g}, r_out = {r_out:g}",
                         where="belt")
    if not np.isfinite(p):
        raise InputError(f"a belt needs a finite surface_density_index, got {p:g}", where="belt")
    if isinstance(n_nodes, (bool, np.bool_)) or not isinstance(n_nodes, (int, np.integer)) or n_nodes < 1:
        raise InputError(f"a belt needs an integer number of radial nodes >= 1, got {n_nodes!r}", where="belt")
    if r_in == r_out:
        return np.array([r_in]), np.ones(1)
    t, w = np.polynomial.legendre.leggauss(int(n_nodes))
    half = 0.5 * np.log(r_out / r_in)
    r = np.exp(np.log(r_in) + half * (t + 1.0))
    g = w * half * (r / r_in) ** (p + 2.0)          # Sigma 2 pi r dr = 2 pi Sigma r^2 dln r
    return r, g / g.sum()


def _radial_nodes(settings):
    if len(settings.radius_au) == 1:
        return np.array(settings.radius_au), np.ones(1)
    r_in, r_out = settings.radius_au
    return belt_nodes(r_in, r_out, settings.surface_density_index, settings.radial_nodes)


def _star_at(description, luminosity, grid, l_grid, wavelength):
    """L*_lambda [L_sun/um] at other wavelengths: exact for a blackbody, log-log from the grid otherwise."""
    star = description.star
    if star.spectrum is None:
        return luminosity * np.pi * th.planck_lambda(wavelength, star.teff) / (th._SIGMA * star.teff**4)
    with np.errstate(divide="ignore"):
        ln_l = np.log(l_grid)
    return np.exp(np.interp(np.log(wavelength), np.log(grid), ln_l))


def _flux_jy(l_lambda, wavelength, distance_pc):
    """Star flux density [Jy] at distance_pc from L_lambda [L_sun/um]."""
    f_lambda = l_lambda * th._L_SUN / (4 * np.pi * (distance_pc * th._PC) ** 2)    # W m^-2 um^-1
    return flam_to_fnu(f_lambda, wavelength)


def _peak_wavelength(wavelength, f_nu):
    """Wavelength of the maximum of F_nu, refined by a parabola in ln lambda."""
    i = int(np.argmax(f_nu))
    if 0 < i < f_nu.size - 1:
        x = np.log(wavelength[i - 1:i + 2])
        y = np.log(f_nu[i - 1:i + 2])
        c = np.polyfit(x, y, 2)
        if c[0] < 0:
            return float(np.exp(-c[1] / (2 * c[0])))
    return float(wavelength[i])


def _sublimation_flags(description, mixture, settings, sizes, radii, temperature):
    flags = []
    for name, mat, f in zip(description.material_names, description.materials, mixture.fractions):
        if f <= 0:
            continue
        if name in settings.sublimation_k:
            t_sub, source = settings.sublimation_k[name], "[thermal] sublimation_k"
        else:
            stem = Path(mat.path).stem if mat.path else name
            if stem not in SUBLIMATION_TEMPERATURES:
                continue
            t_sub, source = SUBLIMATION_TEMPERATURES[stem]
        hot = temperature > t_sub
        if not hot.any():
            continue
        where = np.flatnonzero(hot.any(axis=1))
        rr = radii[hot.any(axis=0)]
        at = f"{rr[0]:.3g} au" if rr.size == 1 or rr.min() == rr.max() else f"{rr.min():.3g}-{rr.max():.3g} au"
        flags.append(f"'{name}' above its sublimation temperature {t_sub:g} K ({source}): grains of "
                     f"{sizes[where[0]]:.3g}-{sizes[where[-1]]:.3g} um at {at} reach {temperature[hot].max():.0f} K; "
                     f"{name} would not survive in them (the model keeps it)")
    return flags


def compute_thermal(description, mixture, settings: ThermalSettings) -> ThermalResult:
    """Grain temperatures, thermal spectrum and band fluxes of one mixture (exact Mie path).

    Parameters
    ----------
    description : motes.dust.model.description.ModelDescription
    mixture : motes.dust.model.mixture.MixtureParameters
    settings : ThermalSettings

    Returns
    -------
    ThermalResult

    Raises
    ------
    motes.errors.InputError
        A material without data or rule over the thermal range, a band
        outside the grid, a missing dust density for a dust mass, or a ring
        inside the sublimation radius.
    """
    src = description.source
    lum = float(description.star.luminosity)
    # the base grid plus the materials' own points across their infrared bands (> 2 um)
    grid = th.thermal_wavelength_grid(extra=np.concatenate([m.wavelength[m.wavelength > 2.0]
                                                            for m in description.materials]))
    _check_coverage(description, grid)
    notes = [MIE_SPHERES_NOTE, OPTICALLY_THIN_NOTE, COLOUR_CORRECTION_NOTE]
    l_grid, star_notes = th.stellar_luminosity_density(grid, lum, teff=description.star.teff,
                                                       spectrum=description.star.spectrum)
    notes.extend(star_notes)
    ind, ext_notes = _indices(description, grid)
    notes.extend(ext_notes)
    for i, (mat, m) in enumerate(zip(description.materials, ind)):
        bad = ~(REFRACTIVE_N.contains(m.real) & EXTINCTION_K.contains(m.imag))
        if bad.any():
            raise InputError(
                f"the '{mat.extrapolation}' rule takes '{mat.name}' to n + ik = {m[bad][0]:.4g} at "
                f"{grid[bad][0]:.4g} um, outside n in {REFRACTIVE_N.interval}, k in {EXTINCTION_K.interval}; "
                "use \"dielectric\" or \"conductor\"", path=src, where=f"[[materials]] #{i + 1} ({mat.name})")
    short = [m.wavelength_range[0] for m in description.materials if m.wavelength_range[0] > grid[0]]
    if short:
        edge = max(short)
        below = grid < edge
        share = float(np.sum(th.trapezoid_weights(grid)[below] * l_grid[below]) / lum)
        notes.append(f"{100 * share:.2g}% of the star's luminosity falls below {edge:.3g} um, where some "
                     "optical constants are extrapolated (held constant)")
    f = np.asarray(mixture.fractions, dtype=float)
    matrix = _matrix_index(description)
    m_grid = mix_refractive_index(ind, f[:, None], mixture.porosity, rule=description.mixing, matrix=matrix)
    sizes, w_size = gauss_legendre_log(mixture.a_min, mixture.a_max, n_per_efold=settings.sizes_per_efold,
                                       min_nodes=8)
    q_grid = th.absorption_efficiency(m_grid[None, :], sizes[:, None], grid[None, :])
    if (2 * np.pi * sizes.max() / grid[0]) > th.RAY_OPTICS_X:
        notes.append(th.RAY_OPTICS_NOTE)
    radii, g_radial = _radial_nodes(settings)
    # a belt's inner edge too (its Gauss nodes lie inside the edges): the hottest grains, for the
    # sublimation check and flags
    edge = radii if len(settings.radius_au) == 1 else np.append(radii, settings.radius_au[0])
    try:
        temperature = th.equilibrium_temperature(q_grid, grid, l_grid, edge)
        edge_temperature, temperature = temperature, temperature[:, :radii.size]
    except ModelError as exc:
        raise InputError(f"{exc} (radius_au = {list(settings.radius_au)})", path=src,
                         where="[thermal] radius_au") from None
    # cross-section per (size, radius) node: n(a) pi a^2 da ∝ a^(3-q) dln a
    c_size = _cross_section_weights(sizes, w_size, mixture.q)
    rho = float(np.ravel(mixture_density(np.array([m.density for m in description.materials]), f[:, None],
                                          mixture.porosity))[0])
    mass_per_area = float(np.sum(c_size * 4.0 / 3.0 * sizes * 1e-6)) * rho * 1e3        # kg per m^2 of cross-section
    if settings.cross_section_au2 is not None:
        sigma_tot = settings.cross_section_au2
        mass = sigma_tot * _AU_M**2 * mass_per_area / _M_EARTH_KG if np.isfinite(rho) else float("nan")
    else:
        if not (np.isfinite(rho) and rho > 0):
            raise InputError("dust_mass_mearth needs every material's bulk density (one is unknown): give "
                             "density = ... in its [[materials]] table or use cross_section_au2",
                             path=src, where="[thermal] dust_mass_mearth")
        mass = settings.dust_mass_mearth
        sigma_tot = mass * _M_EARTH_KG / mass_per_area / _AU_M**2
    sigma = sigma_tot * c_size[:, None] * g_radial[None, :]                              # [S, R] au^2
    absorbed = th.absorbed_flux(q_grid, grid, l_grid, radii)                             # [S, R] W m^-2
    l_dust = float(np.sum(sigma * _AU_M**2 * 4.0 * absorbed)) / th._L_SUN
    q_star = (q_grid @ (th.trapezoid_weights(grid) * l_grid)) / np.sum(th.trapezoid_weights(grid) * l_grid)
    q_own = np.stack([th.planck_mean_efficiency(q_grid, grid, temperature[:, j]) for j in range(radii.size)],
                     axis=1)
    # fluxes: a finer size quadrature (Q_abs ripples with x in the far infrared), T interpolated
    f_sizes, f_w = gauss_legendre_log(mixture.a_min, mixture.a_max, n_per_efold=settings.flux_sizes_per_efold,
                                      min_nodes=16)
    f_temperature = _interpolate_temperature(sizes, temperature, f_sizes)
    f_sigma = sigma_tot * _cross_section_weights(f_sizes, f_w, mixture.q)[:, None] * g_radial[None, :]
    d = settings.distance_pc or 1.0

    def q_at(lam):
        ind_b, _ = _indices(description, lam)      # inside the grid: its notes already say it all
        m_b = mix_refractive_index(ind_b, f[:, None], mixture.porosity, rule=description.mixing, matrix=matrix)
        return th.absorption_efficiency(m_b[None, :], f_sizes[:, None], lam[None, :])

    lam_s = np.geomspace(1.0, 5000.0, 149)
    disk_s = th.thermal_flux_density(q_at(lam_s), lam_s, f_temperature, f_sigma, d)
    star_s = _flux_jy(_star_at(description, lum, grid, l_grid, lam_s), lam_s, d)
    # band averages on Gauss nodes of each band's weight (photon counting): Mie at the nodes
    names, pivots, band_disk, band_star = [], [], [], []
    for band in settings.bands:
        lo, hi = band.wavelength_min, band.wavelength_max
        if lo < grid[0] or hi > grid[-1]:
            raise InputError(f"band '{band.name}' ({lo:.4g}-{hi:.4g} um) lies outside the thermal grid "
                             f"({grid[0]:.3g}-{grid[-1]:.3g} um)", path=src, where="[thermal] bands")
        if band.approximate:
            notes.append(f"band '{band.name}' is approximate ({band.source})")
        fine = np.union1d(np.linspace(lo, hi, 801), band.wavelength[(band.wavelength >= lo) & (band.wavelength <= hi)])
        nodes, weights = weighted_gauss_nodes(fine, band.weight(fine), _BAND_NODES)
        fnu_disk = th.thermal_flux_density(q_at(nodes), nodes, f_temperature, f_sigma, d)
        fnu_star = _flux_jy(_star_at(description, lum, grid, l_grid, nodes), nodes, d)
        to_flam = 1.0 / flam_to_fnu(1.0, nodes)                       # Jy -> W m^-2 um^-1 at each node
        names.append(band.name)
        pivots.append(band.pivot_wavelength)
        band_disk.append(float(band.flux_lambda_to_fnu(np.sum(weights * fnu_disk * to_flam))))
        band_star.append(float(band.flux_lambda_to_fnu(np.sum(weights * fnu_star * to_flam))))
    t_dust = th.WIEN_NU_UM_K / _peak_wavelength(lam_s, disk_s)
    r_bb = float(th.blackbody_radius(lum, t_dust))
    mean_r = float(np.sum(g_radial * radii))
    flags = _sublimation_flags(description, mixture, settings, sizes, edge, edge_temperature)
    return ThermalResult(settings, lum, sizes, radii, temperature, th.blackbody_temperature(lum, radii), q_star,
                         q_own, lam_s, disk_s, star_s, tuple(names), np.array(pivots), np.array(band_disk),
                         np.array(band_star), l_dust / lum, float(t_dust), r_bb, mean_r, sigma, float(sigma_tot),
                         float(mass), f_sizes, f_temperature, f_sigma, tuple(flags), tuple(dict.fromkeys(notes)))


def _cross_section_weights(sizes, w_ln_a, q):
    """Fraction of the total cross-section at each Gauss node in ln a: ∝ w a^(3-q), summing to 1."""
    c = w_ln_a * sizes ** (3.0 - q)
    return c / c.sum()


def _interpolate_temperature(sizes, temperature, at):
    """T at sizes ``at``: linear in (ln a, ln T) between the nodes, end slopes beyond them."""
    x, xq = np.log(sizes), np.log(at)
    y = np.log(temperature)                                           # [S, R]
    j = np.clip(np.searchsorted(x, xq) - 1, 0, x.size - 2)
    t = (xq - x[j]) / (x[j + 1] - x[j])
    return np.exp(y[j] + t[:, None] * (y[j + 1] - y[j]))
