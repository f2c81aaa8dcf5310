"""One dust mixture's optics per band: what ``motes optics MIXTURE.toml`` reports.

A mixture file is a model description (:mod:`motes.dust.model.description`) plus a
``[mixture]`` section::

    [mixture]
    fractions = { silicate = 0.7, ice = 0.3 }   # volume fractions of the solid, sum 1
    porosity = 0.2                               # vacuum fraction of the whole grain
    a_min = 1.0                                  # [um]
    q = 3.5
    a_max = 1000.0                               # [um], optional ([model] a_max)
    reference_band = "2MASS.J"                   # optional: colours relative to it

The per-band numbers come from the exact path (miepython at every node): one
mixture is cheaper to compute directly than to tabulate.
"""

from __future__ import annotations

import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import InputError
from ...optics import mie
from ...optics.sizes import BlowoutResult
from .description import ModelDescription, read_model_description
from .colours import BandOptics, DiskColourModel
from .sampling import SizeSampling

__all__ = [
    "MixtureParameters",
    "MixtureOptics",
    "read_mixture_file",
    "parse_mixture",
    "compute_mixture_optics",
    "format_mixture_optics",
    "write_mixture_outputs",
]

_MIXTURE_KEYS = {"fractions", "porosity", "a_min", "q", "a_max", "reference_band"}


@dataclass(frozen=True)
class MixtureParameters:
    """Composition and size distribution of one mixture.

    Attributes
    ----------
    fractions : tuple of float
        Volume fractions of the solid, in the order of the materials.
    porosity : float
    a_min, a_max : float [um]
    q : float
    reference_band : str or None
    """

    fractions: tuple[float, ...]
    porosity: float
    a_min: float
    q: float
    a_max: float
    reference_band: str | None = None


@dataclass(frozen=True)
class MixtureOptics:
    """Everything ``motes optics`` prints and draws for one mixture."""

    description: ModelDescription
    parameters: MixtureParameters
    bands: tuple
    model_summary: str
    optics: BandOptics
    reference: int
    blowout: BlowoutResult | None
    spectrum_wavelength: np.ndarray
    spectrum_flux_ratio: np.ndarray
    radius: np.ndarray
    q_ext: np.ndarray
    q_sca: np.ndarray
    notes: tuple[str, ...]

    @property
    def colours(self) -> np.ndarray:
        """Magnitudes relative to the reference band."""
        return self.optics.colours(self.reference)


def _number(value, source, where, lo=None, hi=None, open_hi=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not np.isfinite(value):
        raise InputError(f"expected a number, got {value!r}", path=source, where=where)
    v = float(value)
    if (lo is not None and v < lo) or (hi is not None and (v >= hi if open_hi else v > hi)):
        raise InputError(f"{v:g} is outside the allowed range [{lo}, {hi}{')' if open_hi else ']'}",
                         path=source, where=where)
    return v


def parse_mixture(doc: dict, description: ModelDescription) -> MixtureParameters:
    """Read the ``[mixture]`` section against the description's materials."""
    src = description.source
    mix = doc.get("mixture")
    if not isinstance(mix, dict):
        raise InputError("missing the [mixture] table (fractions, porosity, a_min, q)", path=src)
    unknown = set(mix) - _MIXTURE_KEYS
    if unknown:
        raise InputError(f"unknown key(s) {sorted(unknown)}; allowed: {sorted(_MIXTURE_KEYS)}",
                         path=src, where="[mixture]")
    names = description.material_names
    fr = mix.get("fractions")
    if not isinstance(fr, dict):
        raise InputError("fractions must be a table { material = fraction, ... }", path=src,
                         where="[mixture] fractions")
    extra = set(fr) - set(names)
    if extra:
        raise InputError(f"unknown material(s) {sorted(extra)}; the materials are {list(names)}",
                         path=src, where="[mixture] fractions")
    fractions = tuple(_number(fr.get(n, 0.0), src, f"[mixture] fractions.{n}", 0.0, 1.0) for n in names)
    if abs(sum(fractions) - 1.0) > 1e-6:
        raise InputError(f"fractions are volume fractions of the solid and must sum to 1; they sum to "
                         f"{sum(fractions):.6g}", path=src, where="[mixture] fractions")
    for key in ("porosity", "a_min", "q"):
        if key not in mix:
            raise InputError(f"missing {key}", path=src, where="[mixture]")
    porosity = _number(mix["porosity"], src, "[mixture] porosity", 0.0, 1.0, open_hi=True)
    a_min = _number(mix["a_min"], src, "[mixture] a_min", 0.0)
    q = _number(mix["q"], src, "[mixture] q")
    a_max = _number(mix.get("a_max", description.a_max), src, "[mixture] a_max", 0.0)
    if not 0 < a_min < a_max:
        raise InputError(f"need 0 < a_min < a_max, got a_min = {a_min:g} um, a_max = {a_max:g} um",
                         path=src, where="[mixture] a_min")
    ref = mix.get("reference_band")
    if ref is not None and not isinstance(ref, str):
        raise InputError("reference_band must be a band name", path=src, where="[mixture] reference_band")
    return MixtureParameters(fractions, porosity, a_min, q, a_max, ref)


def read_mixture_file(path) -> tuple[ModelDescription, MixtureParameters]:
    """Read a mixture file: the model description and its ``[mixture]``."""
    import tomllib

    path = Path(path)
    desc = read_model_description(path)
    doc = tomllib.loads(path.read_text())
    return desc, parse_mixture(doc, desc)


def compute_mixture_optics(description: ModelDescription, mixture: MixtureParameters,
                           spectrum_points: int = 60) -> MixtureOptics:
    """Per-band optics, blow-out size and the curves for the figures (exact path).

    Parameters
    ----------
    description : ModelDescription
    mixture : MixtureParameters
    spectrum_points : int
        Wavelengths of the monochromatic curve (computed with a coarser size
        quadrature, ``SizeSampling(c0=1e-3)``; it is only drawn).
    """
    model: DiskColourModel = description.build_model(method="exact")
    names = [b.name for b in model.bands]
    reference = 0
    if mixture.reference_band is not None:
        if mixture.reference_band not in names:
            raise InputError(f"reference_band {mixture.reference_band!r} is not one of the bands {names}",
                             path=description.source, where="[mixture] reference_band")
        reference = names.index(mixture.reference_band)
    f = np.array(mixture.fractions)
    optics = model.band_optics(f, mixture.porosity, mixture.a_min, mixture.q, mixture.a_max)
    blow = None
    notes = list(optics.notes)
    star = description.star
    if star.has_luminosity_and_mass:
        if np.isfinite(optics.density) and optics.density > 0:
            blow = model.blowout(f[None, :], mixture.porosity, star.luminosity, star.mass)
            notes.extend(blow.notes)
        else:
            notes.append("no blow-out size: a material has no bulk density")
    # monochromatic curve across the bands (coarser quadrature; drawn only)
    lo = min(b.wavelength_min for b in model.bands)
    hi = max(b.wavelength_max for b in model.bands)
    lo_ok = max(m.wavelength_range[0] for m in model.materials)
    hi_ok = min(m.wavelength_range[1] for m in model.materials)
    lam = np.geomspace(max(lo / 1.1, lo_ok), min(hi * 1.1, hi_ok), spectrum_points)
    m_lam = model.effective_index(f[None, :], mixture.porosity, lam)
    curve = model.node_values_exact(m_lam, lam, mixture.a_min, mixture.q, mixture.a_max,
                                    sampling=SizeSampling(c0=1e-3))[0]
    # efficiencies against size at the band pivots
    radius = np.geomspace(0.01, max(mixture.a_max, 10.0), 240)
    e = mie.efficiencies(optics.m_pivot[:, None], 2 * np.pi * radius[None, :] / optics.pivot[:, None])
    return MixtureOptics(description, mixture, model.bands, model.describe(), optics, reference, blow, lam, curve,
                         radius, e.q_ext, e.q_sca, tuple(dict.fromkeys(notes)))


def format_mixture_optics(result: MixtureOptics) -> str:
    """The text ``motes optics`` prints."""
    o, p = result.optics, result.parameters
    mats = result.description.material_names
    ref = o.bands[result.reference]
    lines = [result.model_summary,
             "mixture: " + ", ".join(f"{n} {f:.3g}" for n, f in zip(mats, p.fractions))
             + f"; porosity {p.porosity:.3g}; sizes {p.a_min:g}-{p.a_max:g} um, q = {p.q:g}",
             f"mixture density: {o.density:.4g} g cm^-3" if np.isfinite(o.density)
             else "mixture density: unknown (a material has no bulk density)",
             "",
             f"{'band':<14}{'pivot um':>9}  {'m_eff (n + ik)':<22}{'R [1/sr]':>11}"
             f"{'colour':>9}{'albedo':>8}{'g':>7}{'Q_ext':>7}"]
    colours = result.colours
    for i, band in enumerate(o.bands):
        m = o.m_pivot[i]
        lines.append(f"{band:<14}{o.pivot[i]:9.4f}  {m.real:7.4f} + {m.imag:9.3e}i   {o.flux_ratio[i]:11.4e}"
                     f"{colours[i]:9.4f}{o.albedo[i]:8.4f}{o.g[i]:7.3f}{o.q_ext[i]:7.3f}")
    lines.append(f"(R: disk/star flux ratio per unit total grain cross-section; colour: mag relative to {ref}; "
                 "albedo and g: cross-section weighted, band averaged; exact Mie path)")
    if result.blowout is not None:
        lines.append("")
        lines.append(result.blowout.message)
    lines.append("")
    lines.extend(f"Note: {n}" for n in result.notes)
    return "\n".join(lines)


def _table(result: MixtureOptics):
    from astropy.table import Table
    import astropy.units as u

    o = result.optics
    t = Table()
    t["band"] = list(o.bands)
    t["pivot"] = o.pivot * u.um
    t["n_eff"] = o.m_pivot.real
    t["k_eff"] = o.m_pivot.imag
    t["flux_ratio"] = o.flux_ratio / u.sr
    t["colour"] = result.colours * u.mag
    t["albedo"] = o.albedo
    t["g"] = o.g
    t["q_ext"] = o.q_ext
    p = result.parameters
    t.meta.update({"materials": list(result.description.material_names), "fractions": list(p.fractions),
                   "porosity": p.porosity, "a_min_um": p.a_min, "a_max_um": p.a_max, "q": p.q,
                   "reference_band": o.bands[result.reference], "density_g_cm3": o.density,
                   "notes": list(result.notes), "mie_solver": mie.solver_summary()})
    return t


def write_mixture_outputs(result: MixtureOptics, folder, stem: str = "optics", figures: bool = True) -> list[Path]:
    """Write the per-band table (ECSV) and the two figures; return the paths."""
    from ...report.optics_figures import plot_efficiencies, plot_reflectance

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    table_path = folder / f"{stem}_bands.ecsv"
    fd, tmp = tempfile.mkstemp(dir=folder, suffix=".ecsv.tmp")
    os.close(fd)
    try:
        _table(result).write(tmp, format="ascii.ecsv", overwrite=True)
        os.replace(tmp, table_path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    out.append(table_path)
    if figures:
        p = result.parameters
        title = ", ".join(f"{n} {f:.2g}" for n, f in zip(result.description.material_names, p.fractions)) \
            + f"; porosity {p.porosity:.2g}; a = {p.a_min:g}-{p.a_max:g} um, q = {p.q:g}"
        out.append(plot_reflectance(folder / f"{stem}_reflectance.png", result.spectrum_wavelength,
                                    result.spectrum_flux_ratio, result.bands, result.optics.flux_ratio, title,
                                    notes=("Mie spheres at the stated scattering angles; real grains are not "
                                           "Mie spheres.",)))
        out.append(plot_efficiencies(folder / f"{stem}_efficiencies.png", result.radius, result.q_ext,
                                     result.q_sca, result.optics.pivot, list(result.optics.bands),
                                     title, p.a_min, p.a_max))
    return out
