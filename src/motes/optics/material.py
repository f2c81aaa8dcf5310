"""A material's optical constants: the :class:`Material` container and its interpolation.

:class:`Material` holds a complex refractive index ``m = n + i k``
(``k >= 0``) tabulated on an increasing wavelength grid [um], a bulk density
[g cm^-3] with its source, and a provenance text; reading files and finding
materials by name live in :mod:`motes.optics.constants`, which re-exports
these names.

Interpolation
-------------
Between tabulated points ``n`` is interpolated linearly in ``ln lambda`` and
``k`` linearly in ``(ln lambda, ln k)``: absorption coefficients span many
decades across a band wing (water ice: k from 1e-9 to 0.5 between 0.5 and
3 um), and interpolating k linearly would fill the wings with absorption
that is not in the data; a power-law wing is reproduced exactly in log-log.
Where one of the two bracketing k values is 0, k is interpolated linearly in
``ln lambda`` instead (log k is undefined there).

Outside the tabulated range motes refuses to extrapolate
(:class:`~motes.errors.OpticalConstantsError`) unless the material was given
an explicit rule (``extrapolation="constant"`` holds the end values,
``"loglog"`` continues ``ln n`` and ``ln k`` linearly in ``ln lambda`` with
the slope between the end point and the tabulated point nearest to a factor
1.25 inside the range). Two rules are meant for thermal emission, whose
balance needs constants from the ultraviolet to the millimetre:

* ``"dielectric"``: beyond the longest tabulated wavelength n stays at its end
  value and ``k ∝ 1/lambda`` (the far-infrared wing of the lowest-frequency
  resonance, where ``eps_2 = 2 n k ∝ omega``);
* ``"conductor"``: beyond the longest tabulated wavelength ``n, k ∝ lambda^(1/2)``
  from their end values, the Hagen-Rubens behaviour of a conductor whose
  conductivity is constant at low frequency (Bohren & Huffman 1983, ch. 9,
  where n ≈ k ∝ lambda^(1/2)). The end values keep their own ratio (the
  bundled iron ends at 55.6 um with n/k ≈ 0.36, not yet the n ≈ k limit):
  forcing n = k would put a jump at the end of the data.

On the ultraviolet side both hold n and k at the shortest tabulated
wavelength (``"constant"``). Dielectric ices and silica absorb far more
strongly below ~0.2 um than at the edge of tables that stop there (basic fact
of the trade, no source; the bundled ice, silica and carbon reach ~0.1 um,
iron, magnetite and soot only 0.21-0.26 um), so this side under-estimates the
ultraviolet absorption; callers report how much of the star's flux falls there.

A material that extrapolated says so:
:meth:`Material.extrapolation_notes` and :meth:`Material.sample` return notes
that every caller must carry to its outputs.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from ..errors import OpticalConstantsError
from ..parameters import accepts_quantities

__all__ = ["Material", "IndexSample", "EXTRAPOLATION_RULES", "EXTRAPOLATION_DESCRIPTIONS", "VACUUM"]

#: Explicit extrapolation rules; ``None`` (the default) refuses to extrapolate.
EXTRAPOLATION_RULES = ("constant", "loglog", "dielectric", "conductor")
#: What each rule does, for notes and docs.
EXTRAPOLATION_DESCRIPTIONS = {
    "constant": "n and k held at the end values",
    "loglog": "ln n and ln k continued linearly in ln lambda",
    "dielectric": "long side: n constant, k ∝ 1/lambda; short side: n, k constant",
    "conductor": "long side: Hagen-Rubens n, k ∝ lambda^1/2 (Bohren & Huffman 1983, ch. 9); "
                 "short side: n, k constant",
}


@dataclass(frozen=True)
class IndexSample:
    """Refractive index sampled at given wavelengths, with extrapolation flags.

    Attributes
    ----------
    wavelength : ndarray[...] [um]
    m : complex ndarray[...]
        ``n + i k``.
    extrapolated : bool ndarray[...]
        True where the value came from an extrapolation rule.
    notes : tuple of str
        One note per use of an extrapolation rule; empty when none was used.
        Carry these to every output that uses ``m``.
    """

    wavelength: np.ndarray
    m: np.ndarray
    extrapolated: np.ndarray
    notes: tuple[str, ...]


@accepts_quantities
@dataclass(frozen=True, eq=False)
class Material:
    """Optical constants and bulk density of one material.

    Parameters
    ----------
    name : str
        Short name (bundled files: the file stem, e.g. ``"water_ice_crystalline"``).
    wavelength : ndarray[n] [um]
        Strictly increasing, positive.
    n, k : ndarray[n]
        Real and imaginary parts of the refractive index, ``n > 0``, ``k >= 0``.
    density : float [g cm^-3]
        Bulk density, ``nan`` if unknown.
    density_source : str
        Where the density comes from.
    provenance : str
        Material, measurement reference, temperature/phase, license (one line per item).
    path : str or None
        File the data were read from.
    extrapolation : {None, "constant", "loglog", "dielectric", "conductor"}
        ``None`` refuses wavelengths outside the data; a rule name allows them
        and every output using such values must carry the notes.
    """

    name: str
    wavelength: np.ndarray
    n: np.ndarray
    k: np.ndarray
    density: float = float("nan")
    density_source: str = "unknown"
    provenance: str = ""
    path: str | None = None
    extrapolation: str | None = None

    def __post_init__(self):
        wl = np.array(self.wavelength, dtype=float)
        n = np.array(self.n, dtype=float)
        k = np.array(self.k, dtype=float)
        where = f"material '{self.name}'"
        if wl.ndim != 1 or wl.shape != n.shape or wl.shape != k.shape or wl.size < 2:
            raise OpticalConstantsError(
                f"wavelength, n and k must be 1-D arrays of one length >= 2, got shapes "
                f"{wl.shape}, {n.shape}, {k.shape}", path=self.path, where=where)
        if not (np.isfinite(wl).all() and np.isfinite(n).all() and np.isfinite(k).all()):
            raise OpticalConstantsError("wavelength, n and k must be finite", path=self.path, where=where)
        if (wl <= 0).any() or (np.diff(wl) <= 0).any():
            raise OpticalConstantsError("wavelengths must be positive and strictly increasing",
                                        path=self.path, where=where)
        if (n <= 0).any():
            raise OpticalConstantsError("n must be > 0", path=self.path, where=where)
        if (k < 0).any():
            raise OpticalConstantsError("k must be >= 0 (motes uses m = n + ik)", path=self.path, where=where)
        if self.extrapolation is not None and self.extrapolation not in EXTRAPOLATION_RULES:
            raise OpticalConstantsError(
                f"extrapolation must be None or one of {EXTRAPOLATION_RULES}, got "
                f"{self.extrapolation!r}", path=self.path, where=where)
        for arr in (wl, n, k):
            arr.setflags(write=False)
        object.__setattr__(self, "wavelength", wl)
        object.__setattr__(self, "n", n)
        object.__setattr__(self, "k", k)
        object.__setattr__(self, "density", float(self.density))

    @property
    def wavelength_range(self) -> tuple[float, float]:
        """Tabulated range ``(min, max)`` [um]."""
        return float(self.wavelength[0]), float(self.wavelength[-1])

    def with_extrapolation(self, rule: str | None) -> "Material":
        """Return a copy that uses extrapolation ``rule`` (``None`` refuses)."""
        return dataclasses.replace(self, extrapolation=rule)

    @accepts_quantities
    def covers(self, wavelength) -> np.ndarray:
        """True where ``wavelength`` [um] lies inside the tabulated range."""
        w = np.asarray(wavelength, dtype=float)
        lo, hi = self.wavelength_range
        return (w >= lo) & (w <= hi)

    @accepts_quantities
    def extrapolation_notes(self, wavelength) -> tuple[str, ...]:
        """Notes to print when ``wavelength`` [um] needs the extrapolation rule."""
        w = np.asarray(wavelength, dtype=float)
        outside = ~self.covers(w)
        if not outside.any() or self.extrapolation is None:
            return ()
        lo, hi = self.wavelength_range
        wo = w[outside]
        span = f"{wo.min():.4g}" if wo.min() == wo.max() else f"{wo.min():.4g}-{wo.max():.4g}"
        rule = f"'{self.extrapolation}' rule"
        if self.extrapolation in ("dielectric", "conductor"):
            rule += f" ({EXTRAPOLATION_DESCRIPTIONS[self.extrapolation]})"
        return (f"optical constants of '{self.name}' extrapolated with the "
                f"{rule} at {span} um (data cover {lo:.4g}-{hi:.4g} um)",)

    @accepts_quantities
    def refractive_index(self, wavelength) -> np.ndarray:
        """Complex refractive index ``n + i k`` at ``wavelength``.

        Parameters
        ----------
        wavelength : float or ndarray[...] [um], or Quantity
            Any spectral unit when a Quantity.

        Returns
        -------
        complex ndarray[...]
            Same shape as ``wavelength``.

        Raises
        ------
        motes.errors.OpticalConstantsError
            When a wavelength lies outside the data and no extrapolation rule
            was chosen.

        Notes
        -----
        n is linear in ln(lambda); k is linear in (ln lambda, ln k), or
        linear in ln(lambda) where a bracketing k is 0 (module notes).
        """
        return self.sample(wavelength).m

    @accepts_quantities
    def sample(self, wavelength) -> IndexSample:
        """Refractive index at ``wavelength`` [um] with extrapolation flags and notes."""
        w = _wavelength_um(wavelength)
        if not (np.isfinite(w).all() and (w > 0).all()):
            raise OpticalConstantsError(
                f"wavelengths must be finite and > 0 um, got {w[~(np.isfinite(w) & (w > 0))][:3]}",
                where=f"material '{self.name}'")
        inside = self.covers(w)
        if not inside.all() and self.extrapolation is None:
            wo = w[~inside]
            lo, hi = self.wavelength_range
            span = f"{wo.min():.4g}" if wo.min() == wo.max() else f"{wo.min():.4g}-{wo.max():.4g}"
            raise OpticalConstantsError(
                f"wavelength {span} um lies outside the data of "
                f"'{self.name}' ({lo:.4g}-{hi:.4g} um); motes does not extrapolate optical "
                "constants unless asked (extrapolation = one of "
                f"{', '.join(repr(r) for r in EXTRAPOLATION_RULES)})",
                path=self.path)
        m = _interpolate(self, w)
        return IndexSample(wavelength=w, m=m, extrapolated=~inside, notes=self.extrapolation_notes(w))

    def describe(self) -> str:
        """One-line summary: name, range, points, density."""
        lo, hi = self.wavelength_range
        dens = "unknown density" if not np.isfinite(self.density) else f"{self.density:g} g/cm3"
        return f"{self.name}: {lo:.4g}-{hi:.4g} um, {self.wavelength.size} points, {dens}"


def _wavelength_um(wavelength) -> np.ndarray:
    import astropy.units as u

    from ..conventions import to_internal

    w = to_internal(wavelength, u.um, name="wavelength", equivalencies=u.spectral())
    return np.asarray(w, dtype=float)


_LOGLOG_SPAN = 1.25  # wavelength ratio over which the "loglog" end slopes are taken


def _interpolate(mat: Material, w: np.ndarray) -> np.ndarray:
    """n + ik at w [um]: interpolation inside the data, the material's rule outside."""
    x = np.log(mat.wavelength)
    xq = np.log(w)
    j = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, x.size - 2)
    t = np.clip((xq - x[j]) / (x[j + 1] - x[j]), 0.0, 1.0)  # clip = "constant" outside
    n0, n1, k0, k1 = mat.n[j], mat.n[j + 1], mat.k[j], mat.k[j + 1]
    n = np.asarray(n0 + t * (n1 - n0))
    positive = (k0 > 0) & (k1 > 0)
    with np.errstate(divide="ignore"):
        lk0 = np.log(np.where(positive, k0, 1.0))
        lk1 = np.log(np.where(positive, k1, 1.0))
    k = np.where(positive, np.exp(lk0 + t * (lk1 - lk0)), k0 + t * (k1 - k0))
    if mat.extrapolation == "loglog":
        for end, outside in ((0, xq < x[0]), (-1, xq > x[-1])):
            if outside.any():
                ln_n, ln_k = _loglog_slopes(mat, end)
                dx = xq[outside] - x[end]
                n[outside] = mat.n[end] * np.exp(ln_n * dx)
                k[outside] = mat.k[end] * np.exp(ln_k * dx)
    elif mat.extrapolation in ("dielectric", "conductor"):
        beyond = xq > x[-1]          # the short side keeps the clipped ("constant") values
        if beyond.any():
            ratio = np.exp(xq[beyond] - x[-1])           # lambda / lambda_end
            if mat.extrapolation == "dielectric":
                k[beyond] = mat.k[-1] / ratio
            else:
                n[beyond] = mat.n[-1] * np.sqrt(ratio)
                k[beyond] = mat.k[-1] * np.sqrt(ratio)
    return n + 1j * k


def _loglog_slopes(mat: Material, end: int) -> tuple[float, float]:
    """d ln n / d ln lambda and d ln k / d ln lambda at one end of the data.

    Taken between the end point and the tabulated point nearest to a factor
    ``_LOGLOG_SPAN`` inside the range (adjacent points are too noisy). A k of
    0 at either point gives a slope of 0 (k stays at its end value).
    """
    x = np.log(mat.wavelength)
    target = x[end] + (np.log(_LOGLOG_SPAN) if end == 0 else -np.log(_LOGLOG_SPAN))
    i = int(np.argmin(np.abs(x - target)))
    if i == (end % x.size):
        i = 1 if end == 0 else x.size - 2
    dx = x[i] - x[end]
    slope_n = (np.log(mat.n[i]) - np.log(mat.n[end])) / dx
    if mat.k[i] > 0 and mat.k[end] > 0:
        slope_k = (np.log(mat.k[i]) - np.log(mat.k[end])) / dx
    else:
        slope_k = 0.0
    return float(slope_n), float(slope_k)


#: Vacuum (m = 1 exactly) over 1e-4 um to 1e8 um, usable as a porosity component.
VACUUM = Material(
    name="vacuum",
    wavelength=np.array([1e-4, 1e8]),
    n=np.ones(2),
    k=np.zeros(2),
    density=0.0,
    density_source="vacuum has no mass",
    provenance="material: vacuum (m = 1 exactly)",
    path=None,
)
