"""One dust mixture's optics per band: what ``motes optics MIXTURE.toml`` reports.

A mixture file is a model description (:mod:`motes.dust.model.description`) plus a
``[mixture]`` section::

    [mixture]
    fractions = { silicate = 0.7, ice = 0.3 }   # volume fractions of the solid, sum 1
    porosity = 0.2                               # vacuum fraction of the whole grain
    a_min = 1.0                                  # [um]
    q = 3.5
    a_max = 1000.0                               # [um], optional ([model] a_max)
    reference_band = "2mass_j"                   # optional: colours relative to it

The per-band numbers come from the exact path (miepython at every node): one
mixture is cheaper to compute directly than to tabulate. With the Mie phase
function the polarised intensity (``|S1|^2 - |S2|^2``, signed) and the degree
of polarisation per band come with them; Henyey-Greenstein carries no
polarisation, so they are left out (and a note says so).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import InputError, quoted_names
from ...tomlcheck import check_keys, get_table, read_number
from ...parameters import MIXTURE_PARAMETERS, PARAMETERS, accepts_quantities
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
]

_MIXTURE_KEYS = {"fractions", *MIXTURE_PARAMETERS, "reference_band"}


@accepts_quantities
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
    spectrum_polarised_ratio: np.ndarray | None = None

    @property
    def colours(self) -> np.ndarray:
        """Magnitudes relative to the reference band."""
        return self.optics.colours(self.reference)

    def provenance(self) -> dict:
        """What produced these numbers (:meth:`ModelDescription.provenance`), with this mixture's sizes."""
        out = self.description.provenance()
        p = self.parameters
        out["size_distribution"] = (f"power law dn/da ∝ a^-q, q = {p.q:g}, from a_min = {p.a_min:g} um to "
                                    f"a_max = {p.a_max:g} um")
        return out

    def to_table(self):
        """The per-band numbers as a table (what ``motes optics`` writes as ECSV).

        Returns
        -------
        astropy.table.Table
            Columns ``band, pivot [um], n_eff, k_eff, flux_ratio [1/sr], colour [mag],
            albedo, g, q_ext`` and, with the Mie phase function,
            ``polarised_flux_ratio [1/sr]`` and ``degree_of_polarisation``; the
            mixture, the notes and what produced the table
            (:meth:`ModelDescription.provenance`) in ``meta``.
        """
        from astropy.table import Table
        import astropy.units as u

        o = self.optics
        t = Table()
        t["band"] = list(o.bands)
        t["pivot"] = o.pivot * u.um
        t["n_eff"] = o.m_pivot.real
        t["k_eff"] = o.m_pivot.imag
        t["flux_ratio"] = o.flux_ratio / u.sr
        t["colour"] = self.colours * u.mag
        t["albedo"] = o.albedo
        t["g"] = o.g
        t["q_ext"] = o.q_ext
        if o.polarised_flux_ratio is not None:
            t["polarised_flux_ratio"] = o.polarised_flux_ratio / u.sr
            t["degree_of_polarisation"] = o.degree_of_polarisation
        p = self.parameters
        t.meta.update(self.provenance())      # version, mixing rule, geometry, star, grains, sizes
        t.meta.update({"materials": list(self.description.material_names), "fractions": list(p.fractions),
                       "porosity": p.porosity, "a_min_um": p.a_min, "a_max_um": p.a_max, "q": p.q,
                       "reference_band": o.bands[self.reference], "density_g_cm3": o.density,
                       "notes": list(self.notes), "mie_solver": mie.solver_summary()})
        return t


def parse_mixture(doc: dict, description: ModelDescription) -> MixtureParameters:
    """Read the ``[mixture]`` section against the description's materials."""
    src = description.source
    mix = get_table(doc, "mixture", path=src, required=True, expected="fractions, porosity, a_min, q")
    check_keys(mix, _MIXTURE_KEYS, path=src, where="[mixture]", required=("porosity", "a_min", "q"))
    names = description.material_names
    fr = mix.get("fractions")
    if not isinstance(fr, dict):
        raise InputError("fractions must be a table { material = fraction, ... }", path=src,
                         where="[mixture] fractions")
    extra = set(fr) - set(names)
    if extra:
        raise InputError(f"unknown material(s) {quoted_names(sorted(extra))}; the materials are "
                         f"{quoted_names(names)}",
                         path=src, where="[mixture] fractions")
    fractions = tuple(read_number(fr.get(n, 0.0), path=src, where=f"[mixture] fractions.{n}", lo=0.0, hi=1.0)
                      for n in names)
    if abs(sum(fractions) - 1.0) > 1e-6:
        raise InputError(f"fractions are volume fractions of the solid and must sum to 1; they sum to "
                         f"{sum(fractions):.6g}", path=src, where="[mixture] fractions")
    por = PARAMETERS["porosity"]
    porosity = read_number(mix["porosity"], path=src, where="[mixture] porosity", lo=por.lo, hi=por.hi,
                           open_hi=por.open_hi)
    a_min = read_number(mix["a_min"], path=src, where="[mixture] a_min", lo=0.0)
    q = read_number(mix["q"], path=src, where="[mixture] q")
    a_max = read_number(mix.get("a_max", description.a_max), path=src, where="[mixture] a_max", lo=0.0)
    if not 0 < a_min < a_max:
        raise InputError(f"need 0 < a_min < a_max, got a_min = {a_min:g} um, a_max = {a_max:g} um",
                         path=src, where="[mixture] a_min")
    ref = mix.get("reference_band")
    if ref is not None and not isinstance(ref, str):
        raise InputError("reference_band must be a band name", path=src, where="[mixture] reference_band")
    return MixtureParameters(fractions, porosity, a_min, q, a_max, ref)


def read_mixture_file(path) -> tuple[ModelDescription, MixtureParameters]:
    """Read a mixture file: the model description and its ``[mixture]``.

    An optional ``[thermal]`` table (:mod:`motes.dust.model.thermal`) is allowed
    and read by :func:`motes.dust.model.thermal.read_thermal_settings`.
    """
    import tomllib

    path = Path(path)
    desc = read_model_description(path, extra_tables=("mixture", "thermal"))
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
            raise InputError(f"reference_band {mixture.reference_band!r} is not one of the bands {quoted_names(names)}",
                             path=description.source, where="[mixture] reference_band")
        reference = names.index(mixture.reference_band)
    f = np.array(mixture.fractions)
    optics = model.band_optics(f, mixture.porosity, mixture.a_min, mixture.q, mixture.a_max, polarised=True)
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
    pol_curve = None
    if model.geometry.phase == "mie":      # total and polarised from one Mie pass
        curve, pol_curve = (v[0] for v in model.node_values_exact_both(
            m_lam, lam, mixture.a_min, mixture.q, mixture.a_max, sampling=SizeSampling(c0=1e-3)))
    else:
        curve = model.node_values_exact(m_lam, lam, mixture.a_min, mixture.q, mixture.a_max,
                                        sampling=SizeSampling(c0=1e-3))[0]
        notes.append("no polarised intensity: the Henyey-Greenstein phase function carries no polarisation")
    # efficiencies against size at the band pivots
    radius = np.geomspace(0.01, max(mixture.a_max, 10.0), 240)
    e = model.grain_efficiencies(optics.m_pivot[:, None], 2 * np.pi * radius[None, :] / optics.pivot[:, None])
    return MixtureOptics(description, mixture, model.bands, model.describe(), optics, reference, blow, lam, curve,
                         radius, e.q_ext, e.q_sca, tuple(dict.fromkeys(notes)), spectrum_polarised_ratio=pol_curve)

