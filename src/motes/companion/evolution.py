"""Mass at an age: a user's evolutionary-model table, interpolated and inverted.

A mass from photometry needs an age, and the age needs models: motes ships none and
invents none. The user's table (CSV or ECSV, documented in ``docs/companion.md``,
section "Mass at an age") has one row per model point (age, mass) with Teff,
luminosity and absolute magnitudes in bands; :func:`read_evolution_table` reads it,
:func:`mass_at_age` inverts one band's absolute magnitude into a mass at a given age,
propagating the age and magnitude errors by Monte Carlo, and :func:`masses_at_age`
does it for every band a calibrated photometry shares with the table.

Interpolation is linear in log10(age) between the two tabulated isochrones that
bracket the age, and linear in log10(mass) along each isochrone; nothing is
extrapolated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np

from ..errors import BandError, InputError
from ..parameters import BoundaryQuantity, accepts_quantities
from ..photometry.bands import get_band
from .astrometry import _rows

__all__ = ["MONTE_CARLO_SEED", "EvolutionTable", "MassAtAge", "read_evolution_table", "mass_at_age", "masses_at_age"]

_AGE_COLUMNS = {"age_gyr": 1.0, "age_myr": 1e-3}
_MASS_COLUMNS = {"mass_msun": 1.0, "mass_mjup": 1.0 / 1047.57}   # M_sun/M_Jup = 1047.57 (IAU 2015 nominal values)
_QUANTITIES = ("teff_k", "log_l_lsun")
# Ages are converted here, not declared in motes.parameters: the boundary tests refuse seconds for
# every declared name, and seconds are a time.
_AGE = BoundaryQuantity(u.Gyr, "age", u.Myr)
#: Seed of the Monte Carlo when ``motes classify --evolution`` is given none (results reproducible).
MONTE_CARLO_SEED = 1


@dataclass(frozen=True)
class EvolutionTable:
    """Isochrones of an evolutionary model.

    Attributes
    ----------
    log_ages : ndarray, shape (k,)
        log10(age / Gyr) of the isochrones, increasing.
    log_masses : tuple of ndarray
        log10(mass / M_sun) along each isochrone, increasing.
    columns : tuple of dict
        Per isochrone, column name (``teff_k``, ``log_l_lsun`` and band names) -> values (nan: not tabulated).
    bands : tuple of str
        The band columns (canonical band names).
    path : str or None
    """

    log_ages: np.ndarray
    log_masses: tuple
    columns: tuple
    bands: tuple[str, ...]
    path: str | None = None

    @property
    def age_range_gyr(self) -> tuple[float, float]:
        """The youngest and oldest tabulated ages [Gyr]."""
        return float(10 ** self.log_ages[0]), float(10 ** self.log_ages[-1])

    def _bracket(self, log_age):
        """(index, weight) pairs of the isochrones bracketing ``log_age``, or None outside the table."""
        ages = self.log_ages
        if not ages[0] - 1e-12 <= log_age <= ages[-1] + 1e-12:
            return None
        k = int(np.clip(np.searchsorted(ages, log_age, side="right") - 1, 0, len(ages) - 1))
        if k == len(ages) - 1 or abs(log_age - ages[k]) < 1e-12:
            return ((k, 1.0),)
        w = (log_age - ages[k]) / (ages[k + 1] - ages[k])
        return ((k, 1.0 - w), (k + 1, w))

    @accepts_quantities
    def value(self, name: str, age_gyr: float, mass_msun: float) -> float:
        """Column ``name`` at (age [Gyr], mass [M_sun]); nan outside the table.

        Linear in log10 age between bracketing isochrones, linear in log10 mass along each.
        """
        age_gyr = _AGE.to_internal(age_gyr, "age_gyr", "EvolutionTable.value")
        bracket = self._bracket(math.log10(age_gyr)) if age_gyr > 0 else None
        if bracket is None or mass_msun <= 0:
            return math.nan
        y = math.log10(mass_msun)
        total = 0.0
        for k, w in bracket:
            lm = self.log_masses[k]
            if not lm[0] - 1e-12 <= y <= lm[-1] + 1e-12:
                return math.nan
            total += w * float(np.interp(y, lm, self.columns[k][name]))
        return total

    def _masses_for(self, band, log_age, magnitude) -> list[float]:
        """Every log10 mass at which ``band`` takes ``magnitude`` at ``log_age`` (empty: not covered)."""
        bracket = self._bracket(log_age)
        if bracket is None:
            return []
        lo = max(self.log_masses[k][0] for k, _ in bracket)
        hi = min(self.log_masses[k][-1] for k, _ in bracket)
        nodes = np.unique(np.concatenate([self.log_masses[k] for k, _ in bracket]))
        nodes = nodes[(nodes >= lo) & (nodes <= hi)]
        g = sum(w * np.interp(nodes, self.log_masses[k], self.columns[k][band]) for k, w in bracket) - magnitude
        roots = []
        for i in range(len(nodes) - 1):
            a, b = g[i], g[i + 1]
            if not (math.isfinite(a) and math.isfinite(b)):
                continue
            if a == 0:
                roots.append(float(nodes[i]))
            elif a * b < 0:
                roots.append(float(nodes[i] - a * (nodes[i + 1] - nodes[i]) / (b - a)))
        if len(g) and g[-1] == 0:
            roots.append(float(nodes[-1]))
        return sorted(set(roots))

    def magnitude_range(self, band: str, age_gyr: float) -> tuple[float, float]:
        """The band's absolute magnitudes covered at ``age_gyr`` [Gyr] (nan when the age is not covered)."""
        age_gyr = _AGE.to_internal(age_gyr, "age_gyr", "EvolutionTable.magnitude_range")
        bracket = self._bracket(math.log10(age_gyr)) if age_gyr > 0 else None
        if bracket is None:
            return math.nan, math.nan
        lo = max(self.log_masses[k][0] for k, _ in bracket)
        hi = min(self.log_masses[k][-1] for k, _ in bracket)
        nodes = np.unique(np.concatenate([self.log_masses[k] for k, _ in bracket]))
        nodes = nodes[(nodes >= lo) & (nodes <= hi)]
        g = sum(w * np.interp(nodes, self.log_masses[k], self.columns[k][band]) for k, w in bracket)
        return float(np.nanmin(g)), float(np.nanmax(g))


def read_evolution_table(path, custom: dict | None = None) -> EvolutionTable:
    """Read an evolutionary-model table (CSV or ECSV).

    Parameters
    ----------
    path : str or Path
    custom : dict of str to Band, optional
        User bands (e.g. a target's ``[bands.NAME]``) a column may name.

    Returns
    -------
    EvolutionTable

    Raises
    ------
    InputError
        Naming the file, row and column: no age or mass column, a column that is
        no known band, a non-positive age or mass, a repeated (age, mass), an
        isochrone with fewer than two masses, a non-numeric cell.
    """
    path = Path(path)
    header, rows = _rows(path, "evolutionary-model table", "age_gyr,mass_msun,teff_k,log_l_lsun,BAND,...")
    cols = {}
    for kind, options in (("age", _AGE_COLUMNS), ("mass", _MASS_COLUMNS)):
        found = [c for c in options if c in header]
        if len(found) != 1:
            raise InputError(f"give exactly one {kind} column, one of {', '.join(options)}; found "
                             f"{', '.join(found) or 'none'}", path, "header")
        cols[kind] = found[0]
    bands, band_columns = [], []
    user = {k.lower(): k for k in custom or {}}   # the header is read in lower case
    for name in header:
        if name in (cols["age"], cols["mass"], *_QUANTITIES) or name == "note":
            continue
        try:
            band = get_band(user.get(name, name), custom)
        except BandError as exc:
            raise InputError(f"column {name!r} is neither {', '.join(_QUANTITIES)} nor a known band: {exc.reason}",
                             path, "header") from None
        bands.append(band.name)
        band_columns.append(name)
    if not bands:
        raise InputError("no band column (absolute Vega magnitudes, named as `motes bands` lists them)", path,
                         "header")
    points = {}
    for number, row in enumerate(rows, 1):
        where = f"row {number}"
        values = {}
        for col in (cols["age"], cols["mass"], *[q for q in _QUANTITIES if q in header], *band_columns):
            text = row.get(col, "")
            if text == "":
                if col in (cols["age"], cols["mass"]):
                    raise InputError(f"column {col!r}: a value is required", path, where)
                values[col] = math.nan
                continue
            try:
                values[col] = float(text)
            except ValueError:
                raise InputError(f"column {col!r}: expected a number, got {text!r}", path, where) from None
        age, mass = values[cols["age"]] * _AGE_COLUMNS[cols["age"]], values[cols["mass"]] * _MASS_COLUMNS[cols["mass"]]
        for col, v in ((cols["age"], age), (cols["mass"], mass)):
            if not (math.isfinite(v) and v > 0):
                raise InputError(f"column {col!r}: must be a positive number, got {row[col]!r}", path, where)
        key = (round(math.log10(age), 10), round(math.log10(mass), 10))
        if key in points:
            raise InputError(f"age {row[cols['age']]} and mass {row[cols['mass']]} repeat {points[key][0]}",
                             path, where)
        data = {q: values.get(q, math.nan) for q in _QUANTITIES}
        data.update({b: values[c] for b, c in zip(bands, band_columns)})
        points[key] = (where, data, math.log10(age), math.log10(mass))   # keys rounded, values exact
    ages = sorted({k[0] for k in points})
    log_ages, log_masses, columns = [], [], []
    for a in ages:
        keys = sorted(k for k in points if k[0] == a)
        if len(keys) < 2:
            raise InputError(f"the isochrone at {10 ** a:g} Gyr has {len(keys)} mass; at least two are needed",
                             path, points[keys[0]][0])
        log_ages.append(points[keys[0]][2])
        log_masses.append(np.array([points[k][3] for k in keys]))
        columns.append({name: np.array([points[k][1][name] for k in keys]) for name in (*_QUANTITIES, *bands)})
    return EvolutionTable(np.array(log_ages), tuple(log_masses), tuple(columns), tuple(bands), str(path))


@dataclass(frozen=True)
class MassAtAge:
    """A companion's mass (and Teff, luminosity) at an age, from one band.

    ``mass_msun``, ``teff_k``, ``log_l_lsun``: the values at the nominal age and
    magnitude; ``*_interval``: (16th, 50th, 84th) percentiles over the Monte Carlo
    draws that the table covers; ``fraction_outside``: draws it does not cover.
    """

    band: str
    age_gyr: float
    age_gyr_error: float
    absolute_mag: float
    absolute_mag_error: float
    mass_msun: float
    mass_interval: tuple[float, float, float]
    teff_k: float
    teff_interval: tuple[float, float, float]
    log_l_lsun: float
    log_l_interval: tuple[float, float, float]
    n_draws: int
    fraction_outside: float
    table: str | None = None
    notes: tuple[str, ...] = field(default=())


def mass_at_age(table: EvolutionTable, band: str, absolute_mag: float, absolute_mag_error: float,
                age_gyr: float, age_gyr_error: float, rng: np.random.Generator, n_draws: int = 4000) -> MassAtAge:
    """Mass at an age from one band's absolute magnitude.

    Parameters
    ----------
    table : EvolutionTable
    band : str
        A band column of the table.
    absolute_mag, absolute_mag_error : float [mag]
        Absolute Vega magnitude and its 1-sigma (distance term included).
    age_gyr, age_gyr_error : float [Gyr]
        The age and its 1-sigma (Gaussian, draws at age <= 0 count as outside).
    rng : numpy.random.Generator
    n_draws : int

    Returns
    -------
    MassAtAge

    Raises
    ------
    InputError
        When the table does not cover the age, or not the magnitude at that age,
        or reaches the magnitude at more than one mass at that age.
    """
    age_gyr = _AGE.to_internal(age_gyr, "age_gyr", "mass_at_age")
    age_gyr_error = _AGE.to_internal(age_gyr_error, "age_gyr_error", "mass_at_age")
    where = f"band {band!r}"
    if band not in table.bands:
        raise InputError(f"the table has no column for this band; its bands: {', '.join(table.bands)}",
                         table.path, where)
    if not (age_gyr > 0 and math.isfinite(age_gyr)) or not age_gyr_error >= 0:
        raise InputError(f"age must be > 0 Gyr with an error >= 0, got {age_gyr!r} +- {age_gyr_error!r}")
    lo_age, hi_age = table.age_range_gyr
    if table._bracket(math.log10(age_gyr)) is None:
        raise InputError(f"the table covers ages {lo_age:g}-{hi_age:g} Gyr, not the requested {age_gyr:g} Gyr",
                         table.path)
    roots = table._masses_for(band, math.log10(age_gyr), absolute_mag)
    if not roots:
        lo, hi = table.magnitude_range(band, age_gyr)
        raise InputError(f"at {age_gyr:g} Gyr the table covers absolute magnitudes {lo:.2f} to {hi:.2f}, "
                         f"not the companion's {absolute_mag:.2f}", table.path, where)
    if len(roots) > 1:
        masses = ", ".join(f"{10 ** r:.4g}" for r in roots)
        raise InputError(f"at {age_gyr:g} Gyr magnitude {absolute_mag:.2f} is reached at several masses "
                         f"({masses} M_sun): the band does not determine the mass", table.path, where)
    mass = 10 ** roots[0]
    ages = rng.normal(age_gyr, age_gyr_error, n_draws) if age_gyr_error > 0 else np.full(n_draws, age_gyr)
    mags = rng.normal(absolute_mag, absolute_mag_error, n_draws) if absolute_mag_error > 0 else \
        np.full(n_draws, absolute_mag)
    draws = []
    for a, m in zip(ages, mags):
        if a <= 0:
            continue
        r = table._masses_for(band, math.log10(a), m)
        if len(r) == 1:
            draws.append((a, 10 ** r[0]))
    outside = 1.0 - len(draws) / n_draws
    notes = []
    if outside > 0.025:
        notes.append(f"{100 * outside:.1f}% of the draws fall outside the table (or are ambiguous): "
                     "the interval is truncated there"
                     + ("; the value printed (at the nominal age and magnitude) is outside the interval of the "
                        "covered draws" if _outside_interval(draws, mass) else ""))

    def interval(name):
        vals = np.array([table.value(name, a, m) for a, m in draws])
        vals = vals[np.isfinite(vals)]
        return tuple(float(v) for v in np.percentile(vals, [16, 50, 84])) if len(vals) else (math.nan,) * 3

    masses = np.array([m for _, m in draws])
    mass_iv = tuple(float(v) for v in np.percentile(masses, [16, 50, 84])) if len(masses) else (math.nan,) * 3
    return MassAtAge(band, age_gyr, age_gyr_error, absolute_mag, absolute_mag_error, mass, mass_iv,
                     table.value("teff_k", age_gyr, mass), interval("teff_k"),
                     table.value("log_l_lsun", age_gyr, mass), interval("log_l_lsun"),
                     n_draws, outside, table.path, tuple(notes))


def _outside_interval(draws, mass: float) -> bool:
    """Whether ``mass`` lies outside the 16th-84th percentiles of the covered draws' masses."""
    if not draws:
        return False
    lo, hi = np.percentile([m for _, m in draws], [16, 84])
    return not (lo <= mass <= hi)


def masses_at_age(table: EvolutionTable, photometry, age_gyr: float, age_gyr_error: float,
                  rng: np.random.Generator, n_draws: int = 4000) -> tuple[MassAtAge, ...]:
    """:func:`mass_at_age` for every detected band a calibrated photometry shares with the table.

    Parameters
    ----------
    table : EvolutionTable
    photometry : motes.photometry.CalibratedPhotometry
        Needs a distance; each band's error includes the distance-modulus error.
    age_gyr, age_gyr_error : float [Gyr]
    rng : numpy.random.Generator
    n_draws : int

    Raises
    ------
    InputError
        Without a distance, without a shared detected band, or as :func:`mass_at_age`.
    """
    age_gyr = _AGE.to_internal(age_gyr, "age_gyr", "masses_at_age")
    age_gyr_error = _AGE.to_internal(age_gyr_error, "age_gyr_error", "masses_at_age")
    if not math.isfinite(photometry.distance_modulus):
        raise InputError("a mass at an age needs the host's distance (parallax_mas or distance_pc in [host])")
    rows = [r for r in photometry.rows if not r.is_limit and r.band.name in table.bands
            and math.isfinite(r.absolute_mag)]
    if not rows:
        observed = ", ".join(r.band.name for r in photometry.rows)
        raise InputError(f"no detected band of {photometry.target!r} ({observed}) "
                         f"is a column of the table ({', '.join(table.bands)})", table.path)
    return tuple(mass_at_age(table, r.band.name, r.absolute_mag,
                             math.hypot(r.absolute_mag_error, photometry.distance_modulus_error),
                             age_gyr, age_gyr_error, rng, n_draws) for r in rows)
