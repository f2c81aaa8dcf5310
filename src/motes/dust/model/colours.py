"""Forward model of debris-disk scattered-light colours for dust mixtures.

For optically thin dust seen at scattering angle theta, the disk/star flux
ratio at wavelength lambda is proportional to (GUIDE section 5; e.g. Bohren &
Huffman 1983, ch. 3)::

    R(lambda) = integral n(a) pi a^2 Q_sca(a, lambda) p(theta; a, lambda) da     [sr^-1]

with n(a) ∝ a^-q on [a_min, a_max] normalised to unit total geometric cross
section (``integral n pi a^2 da = 1``), m = m_eff(lambda) the effective index of
the porous mixture (:func:`motes.optics.mixing.mix_refractive_index`) and p the
Mie phase function (``integral p dOmega = 1``), averaged with equal weights over
the angles of the :class:`ScatteringGeometry`. Per band b the model returns::

    R_b = integral w_b(lambda) F*(lambda) R(lambda) dlambda / integral w_b F* dlambda

with the band's weight ``w_b`` (:meth:`motes.photometry.bands.Band.weight`,
photon counting by default) and the stellar F_lambda (a blackbody of
``star_teff`` or a user spectrum), integrated by Gauss quadrature against
``w_b F*`` (:func:`motes.dust.model.sampling.weighted_gauss_nodes`).

Substituting a = t lambda / 2 pi (GUIDE section 9)::

    R(lambda) = (lambda / 2 pi)^(3-q) [G(x_max) - G(x_min)] / integral_{a_min}^{a_max} pi a^(2-q) da
    G(x) = 1/2 integral_0^x t^-q (|S1|^2 + |S2|^2) dt = pi integral_0^x t^(2-q) Q_sca p dt

(Bohren & Huffman amplitudes; ``pi a^2 Q_sca p = a^2 (|S1|^2+|S2|^2) / 2 x^2``).
``method="exact"`` evaluates this with miepython at every quadrature node
(:mod:`motes.dust.model.sampling`); ``method="fast"`` interpolates tabulated G
(:mod:`motes.dust.model.tables`). With ``phase="hg"`` the phase function is
Henyey-Greenstein with the cross-section-weighted Mie asymmetry g of the size
distribution at that wavelength::

    R(lambda) = p_HG(theta; g_bar) integral n pi a^2 Q_sca da,
    g_bar = integral n a^2 Q_sca g da / integral n a^2 Q_sca da.

Polarised intensity: with ``intensities`` naming an output column
``"polarised"``, that column is the same integral with ``|S1|^2 - |S2|^2``
(= -2 S12, Bohren & Huffman 1983 eq. 4.77) in place of ``|S1|^2 + |S2|^2``:
signed, positive when the light is polarised perpendicular to the scattering
plane. Total and polarised columns share the model's normalisation (one flux
scale), so their ratio per band is the degree of polarisation -S12/S11 of the
band-integrated light. Henyey-Greenstein carries no polarisation: a model with
``phase="hg"`` and polarised columns is refused.

Grain model: ``grains="spheres"`` (default) is homogeneous Mie spheres of the
effective index. ``grains="hollow spheres"`` with ``f_max`` is the
distribution of hollow spheres of Min, Hovenier & de Koter (2005, A&A 432,
909): every grain of material radius ``a`` is averaged with equal weight over
vacuum-core volume fractions f in [0, f_max], outer radius ``a / (1 - f)^(1/3)``
(:mod:`motes.optics.hollow`). ``a`` (and so ``a_min``, ``a_max``, the size
distribution, the mass and the blow-out size) refers to the material; the
normalisation ``integral n pi a^2 da = 1`` is over the material cross-section,
and the core is not porosity (which stays the effective-medium vacuum fraction
of the material). With ``f_max = 0`` it is the solid sphere. With
``f_max_tables`` the model takes f_max per point (``flux_ratio(..., f_max=...)``:
a fitted f_max, or a grid axis).

Real grains are not Mie spheres: irregular and aggregate grains scatter
differently (especially in the phase function). Every result carries that note
(for hollow spheres, a note saying which grain model ran).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...errors import InputError, ModelError, OpticalConstantsError, quoted_names
from ...parameters import PARAMETERS, accepts_quantities
from ...optics import hollow, mie
from ...optics.constants import Material, load_material
from ...optics.mixing import mix_refractive_index, mixture_density
from ...optics.sizes import power_law_cross_section, find_blowout_size, BlowoutResult
from ...photometry.bands import Band, get_band
from ...photometry.spectra import blackbody_flux_lambda
from .geometry import PHASES, ScatteringGeometry
from .sampling import SizeSampling, size_parameter_rule, weighted_gauss_nodes

__all__ = [
    "ScatteringGeometry",
    "DiskColourModel",
    "BandOptics",
    "MIE_SPHERES_NOTE",
    "FRACTIONS_NOTE",
    "METHODS",
    "PHASES",
    "INTENSITIES",
    "GRAINS",
    "HOLLOW_SPHERES_NOTE",
    "F_MAX_TABLES",
]

#: Grain models: homogeneous Mie spheres, or the distribution of hollow spheres (Min et al. 2005).
GRAINS = ("spheres", "hollow spheres")

#: How the fast path tabulates an f_max that varies from point to point (``flux_ratio(..., f_max=...)``):
#: ``"nodes"``, interpolated between tables at fixed f_max nodes (a fit; :data:`motes.dust.model.tables.F_MAX_NODES`),
#: or ``"values"``, one table per distinct value (a grid's listed f_max axis).
F_MAX_TABLES = ("nodes", "values")

#: What an output column of the model holds: total or polarised intensity.
INTENSITIES = ("total", "polarised")
#: spellings accepted for the polarised kind (both trades' spellings)
_POLARISED_SPELLINGS = {"polarised": "polarised", "polarized": "polarised", "total": "total"}
HG_NO_POLARISATION = ("the Henyey-Greenstein phase function carries no polarisation, so it cannot model "
                      "polarised intensity; use phase = 'mie' for polarised colours")

METHODS = ("fast", "exact")
MIE_SPHERES_NOTE = ("real grains are not Mie spheres: irregular, porous aggregates scatter with other "
                    "phase functions and colours; treat compositions as those of equivalent spheres")
HOLLOW_SPHERES_NOTE = ("grains: a distribution of hollow spheres (Min, Hovenier & de Koter 2005), vacuum-core "
                       "volume fractions 0-{f_max:g} with equal weight at fixed material volume; sizes, mass "
                       "and blow-out refer to the material; still an idealisation of irregular grains")
HOLLOW_VARIED_NOTE = ("grains: a distribution of hollow spheres (Min, Hovenier & de Koter 2005), vacuum-core "
                      "volume fractions 0-f_max with equal weight at fixed material volume, f_max given per "
                      "point ({how}); sizes, mass and blow-out refer to the material; still an idealisation "
                      "of irregular grains")
FRACTIONS_NOTE = ("fractions are volume fractions of the solid; porosity is the vacuum fraction of the "
                  "whole grain volume")
_FRACTION_TOLERANCE = 1e-6
#: Band quadrature: a band over which some material's k + NODE_K_FLOOR varies by more than a factor
#: NODE_K_RATIO gets twice the Gauss nodes (common practice, no source; measured effect in docs/optics.md).
NODE_K_FLOOR, NODE_K_RATIO = 1e-3, 2.0


@dataclass(frozen=True)
class BandOptics:
    """Per-band optical properties of one mixture and size distribution.

    Attributes
    ----------
    bands : tuple of str
    flux_ratio : ndarray[n_bands] [sr^-1]
        Disk/star flux ratio per unit total grain cross-section.
    albedo : ndarray[n_bands]
        Single-scattering albedo, ``int n C_sca / int n C_ext``, band averaged.
    g : ndarray[n_bands]
        Cross-section-weighted asymmetry parameter ``int n C_sca g / int n C_sca``.
    q_ext : ndarray[n_bands]
        Cross-section-weighted extinction efficiency.
    m_pivot : complex ndarray[n_bands]
        Effective refractive index at each band's pivot wavelength.
    pivot : ndarray[n_bands] [um]
    density : float [g cm^-3]
        Mixture density (nan if a component's density is unknown).
    notes : tuple of str
    polarised_flux_ratio : ndarray[n_bands] [sr^-1] or None
        Polarised-intensity disk/star ratio (signed; same normalisation as
        ``flux_ratio``); None with the Henyey-Greenstein phase function.
    """

    bands: tuple[str, ...]
    flux_ratio: np.ndarray
    albedo: np.ndarray
    g: np.ndarray
    q_ext: np.ndarray
    m_pivot: np.ndarray
    pivot: np.ndarray
    density: float
    notes: tuple[str, ...]
    polarised_flux_ratio: np.ndarray | None = None

    @property
    def degree_of_polarisation(self) -> np.ndarray | None:
        """Per band ``-S12 / S11`` of the band-integrated light (polarised / total ratio)."""
        if self.polarised_flux_ratio is None:
            return None
        return self.polarised_flux_ratio / self.flux_ratio

    def colours(self, reference: int = 0) -> np.ndarray:
        """Magnitudes relative to band ``reference``: -2.5 log10(R_b / R_ref)."""
        return -2.5 * np.log10(self.flux_ratio / self.flux_ratio[reference]) + 0.0  # no "-0.0"


def _as_material(item, i) -> Material:
    if isinstance(item, Material):
        return item
    if isinstance(item, str):
        return load_material(item)
    raise InputError(f"materials[{i}] must be a Material or a material name, got {type(item).__name__}",
                     where="materials")


def _as_band(item, i) -> Band:
    if isinstance(item, Band):
        return item
    if isinstance(item, str):
        return get_band(item)
    raise InputError(f"bands[{i}] must be a Band or a band name, got {type(item).__name__}", where="bands")


class DiskColourModel:
    """Scattered-light colours of a debris disk made of porous dust mixtures.

    Parameters
    ----------
    materials : sequence of Material or str
        Solid components, in the order of the ``fractions`` columns (names are
        loaded with :func:`motes.optics.constants.load_material`).
    bands : sequence of Band or str
        Bands in the order of the output columns.
    star_teff : float [K], optional
        Blackbody stellar spectrum (used when ``star_spectrum`` is None).
    star_spectrum : (ndarray[m], ndarray[m]), optional
        Stellar wavelength [um] and F_lambda (any unit); must cover every band.
    mixing : {"bruggeman", "maxwell_garnett"}
    matrix : int, str or None
        Maxwell Garnett matrix: a component index or name, or ``"vacuum"``.
    geometry : ScatteringGeometry
    method : {"fast", "exact"}
        Lookup tables (:mod:`motes.dust.model.tables`) or miepython at every node.
    a_max : float [um]
        Default largest grain radius.
    wavelength_nodes : int
        Gauss nodes per band (weight: filter times stellar spectrum); bands on
        an absorption feature of a material get twice as many (see
        ``NODE_K_RATIO``).
    size_sampling : SizeSampling
        Size-parameter quadrature of the exact path.
    intensities : sequence of {"total", "polarised"}, optional
        What each output column holds (one per band; default all total). A
        band may appear twice, once per kind.
    grains : {"spheres", "hollow spheres"}
        Homogeneous spheres (default) or the hollow-sphere distribution.
    f_max : float, optional
        Largest vacuum-core volume fraction, in [0, 1); required with
        ``grains="hollow spheres"`` (unless ``f_max_tables`` is given),
        refused with spheres.
    f_max_tables : {"nodes", "values"}, optional
        Hollow spheres whose f_max is given per point (``flux_ratio(...,
        f_max=...)``: a fitted f_max or a grid axis); ``f_max`` may then be
        None. How the fast path tabulates it: ``"nodes"`` interpolates between
        tables at the f_max nodes :data:`motes.dust.model.tables.F_MAX_NODES`
        (4-point Lagrange; error measured in docs/optics.md), ``"values"``
        builds one table per distinct value. The exact path computes every
        value as given.

    Notes
    -----
    See the module docstring for the formulas. Output: ``flux_ratio`` [sr^-1]
    per unit total cross-section; multiply by a free scale (dust amount and
    geometry) to compare with data.
    """

    @accepts_quantities
    def __init__(self, materials, bands, *, star_teff=None, star_spectrum=None,
                 mixing="bruggeman", matrix=None, geometry=ScatteringGeometry(),
                 method="fast", a_max=1000.0, wavelength_nodes: int = 8,
                 size_sampling: SizeSampling = SizeSampling(), table_spec=None, intensities=None,
                 grains: str = "spheres", f_max=None, f_max_tables: str | None = None):
        if f_max_tables is not None and f_max_tables not in F_MAX_TABLES:
            raise InputError(f"f_max_tables must be one of {quoted_names(F_MAX_TABLES)}, got {f_max_tables!r}",
                             where="f_max_tables")
        if f_max_tables is not None and grains != "hollow spheres":
            raise InputError("f_max_tables (f_max per point) is used by grains = 'hollow spheres' only",
                             where="f_max_tables")
        self.f_max_tables = f_max_tables
        self.grains, self.f_max = self._check_grains(grains, f_max, f_max_tables is not None)
        self._tables = {}
        self.materials = tuple(_as_material(m, i) for i, m in enumerate(materials))
        self.bands = tuple(_as_band(b, i) for i, b in enumerate(bands))
        self.intensities = self._check_intensities(intensities, geometry)
        if not self.materials:
            raise InputError("a dust model needs at least one material", where="materials")
        if not self.bands:
            raise InputError("a dust model needs at least one band", where="bands")
        names = [m.name for m in self.materials]
        if len(set(names)) != len(names):
            raise InputError(f"materials are listed twice: {names}", where="materials")
        if method not in METHODS:
            raise InputError(f"method must be one of {quoted_names(METHODS)}, got {method!r}", where="method")
        if mixing not in ("bruggeman", "maxwell_garnett"):
            raise InputError(f"mixing must be 'bruggeman' or 'maxwell_garnett', got {mixing!r}", where="mixing")
        if not isinstance(geometry, ScatteringGeometry):
            raise InputError("geometry must be a ScatteringGeometry", where="geometry")
        if not (np.isfinite(a_max) and a_max > 0):
            raise InputError(f"a_max must be a positive size in um, got {a_max!r}", where="a_max")
        if int(wavelength_nodes) < 1:
            raise InputError("wavelength_nodes must be >= 1", where="wavelength_nodes")
        self.mixing = mixing
        self.matrix = self._matrix_index(matrix)
        self.geometry = geometry
        self.method = method
        self.a_max = float(a_max)
        self.wavelength_nodes = int(wavelength_nodes)
        self.size_sampling = size_sampling
        self.table_spec = table_spec
        self._table = None
        self.star_teff, self.star_spectrum = self._check_star(star_teff, star_spectrum)
        self._setup_nodes()

    # ------------------------------------------------------------ set-up
    @staticmethod
    def _check_grains(grains, f_max, per_point=False):
        if grains not in GRAINS:
            raise InputError(f"grains must be one of {quoted_names(GRAINS)}, got {grains!r}", where="grains")
        if grains == "spheres":
            if f_max is not None:
                raise InputError("f_max (largest vacuum-core volume fraction) is used by grains = 'hollow "
                                 "spheres' only", where="f_max")
            return grains, None
        declared = PARAMETERS["f_max"]
        if f_max is None and per_point:
            return grains, None
        if f_max is None:
            raise InputError("grains = 'hollow spheres' needs f_max, the largest vacuum-core volume fraction, "
                             f"in {declared.interval} (0.8 is common practice, no source)", where="f_max")
        try:
            value = float(f_max)
        except (TypeError, ValueError):
            value = float("nan")
        if not declared.contains(value):
            raise InputError(f"f_max ({declared.meaning}) must be in {declared.interval}, got {f_max!r}",
                             where="f_max")
        return grains, value

    @property
    def hollow(self) -> bool:
        """True for the hollow-sphere grain model."""
        return self.grains == "hollow spheres"

    @property
    def f_max_varies(self) -> bool:
        """True when f_max is given per point (``flux_ratio(..., f_max=...)``; a fit or grid over f_max)."""
        return self.f_max_tables is not None

    @property
    def grain_summary(self) -> str:
        """Which grain model runs, as text (``"spheres"`` or ``"hollow spheres (f_max = 0.8)"``)."""
        if not self.hollow:
            return "spheres"
        if self.f_max is None:
            return "hollow spheres (f_max per point)"
        return f"hollow spheres (f_max = {self.f_max:g})"

    def _f_max(self, f_max):
        f_max = self.f_max if f_max is None else float(f_max)
        if f_max is None:
            raise InputError("this hollow-sphere model takes f_max per point: pass f_max=...", where="f_max")
        return f_max

    def _intensity(self, m, t, theta, quantity="total", f_max=None):
        """Angle mean of ``|S1|^2 + |S2|^2`` (or ``|S1|^2 - |S2|^2``) per material size parameter."""
        if not self.hollow:
            if quantity == "polarised":
                return mie.polarised_scattered_intensity(m, t, theta)
            return mie.scattered_intensity(m, t, theta)
        total, polarised = hollow.hollow_intensities(m, t, theta, self._f_max(f_max))
        return polarised if quantity == "polarised" else total

    def _intensities(self, m, t, theta, f_max=None):
        """Both angle means of :meth:`_intensity` (total, polarised) from one Mie pass."""
        if not self.hollow:
            return mie.scattered_intensities(m, t, theta)
        return hollow.hollow_intensities(m, t, theta, self._f_max(f_max))

    def grain_efficiencies(self, m, t, f_max=None):
        """Efficiencies per material cross-section (Mie, or the hollow-sphere average; ``f_max`` overrides)."""
        if not self.hollow:
            return mie.efficiencies(m, t)
        return hollow.hollow_efficiencies(m, t, self._f_max(f_max))

    def _check_intensities(self, intensities, geometry) -> tuple[str, ...]:
        n = len(self.bands)
        if intensities is None:
            return ("total",) * n
        if isinstance(intensities, str):
            intensities = (intensities,) * n
        out = []
        for i, item in enumerate(intensities):
            kind = _POLARISED_SPELLINGS.get(str(item).strip().lower())
            if kind is None:
                raise InputError(f"intensities[{i}] must be 'total' or 'polarised', got {item!r}",
                                 where="intensities")
            out.append(kind)
        if len(out) != n:
            raise InputError(f"intensities must have one entry per band ({n}), got {len(out)}",
                             where="intensities")
        pairs = [(b.name, k) for b, k in zip(self.bands, out)]
        if len(set(pairs)) != len(pairs):
            dup = sorted({f"{b} ({k})" for b, k in pairs if pairs.count((b, k)) > 1})
            raise InputError(f"band(s) {dup} listed twice with the same intensity", where="bands")
        if "polarised" in out and isinstance(geometry, ScatteringGeometry) and geometry.phase != "mie":
            raise InputError(HG_NO_POLARISATION, where="[geometry] phase")
        return tuple(out)

    @property
    def has_polarised(self) -> bool:
        """True when some output column is polarised intensity."""
        return "polarised" in self.intensities

    @property
    def has_total(self) -> bool:
        """True when some output column is total intensity."""
        return "total" in self.intensities

    def _matrix_index(self, matrix):
        if matrix is None:
            return 0
        if isinstance(matrix, str):
            if matrix == "vacuum":
                return "vacuum"
            names = [m.name for m in self.materials]
            if matrix not in names:
                raise InputError(f"matrix {matrix!r} is not one of the materials {names} or 'vacuum'",
                                 where="matrix")
            return names.index(matrix)
        if isinstance(matrix, (int, np.integer)) and 0 <= matrix < len(self.materials):
            return int(matrix)
        raise InputError(f"matrix must be a material name, index or 'vacuum', got {matrix!r}", where="matrix")

    @staticmethod
    def _check_star(teff, spectrum):
        if spectrum is not None:
            try:
                wl, fl = (np.asarray(v, dtype=float) for v in spectrum)
            except (TypeError, ValueError):
                raise InputError("star_spectrum must be (wavelength [um], F_lambda) arrays",
                                 where="star_spectrum") from None
            if wl.ndim != 1 or wl.shape != fl.shape or wl.size < 2 or not np.all(np.diff(wl) > 0) \
                    or not (np.isfinite(fl).all() and (fl >= 0).all()):
                raise InputError("star_spectrum needs increasing wavelengths and finite F_lambda >= 0 "
                                 "of the same length", where="star_spectrum")
            return (None if teff is None else float(teff)), (wl, fl)
        if teff is None:
            raise InputError("give the star as star_teff [K] (blackbody) or star_spectrum", where="star")
        if not (np.isfinite(teff) and teff > 0):
            raise InputError(f"star_teff must be a positive temperature in K, got {teff!r}", where="star_teff")
        return float(teff), None

    @accepts_quantities
    def star_flux(self, wavelength) -> np.ndarray:
        """Stellar F_lambda at ``wavelength`` [um] (arbitrary scale)."""
        wavelength = np.asarray(wavelength, dtype=float)
        if self.star_spectrum is None:
            return blackbody_flux_lambda(wavelength, self.star_teff)
        wl, fl = self.star_spectrum
        return np.interp(wavelength, wl, fl, left=np.nan, right=np.nan)

    def _setup_nodes(self):
        nodes, weights, owner = [], [], []
        notes = [MIE_SPHERES_NOTE, FRACTIONS_NOTE]
        if self.hollow and self.f_max is not None:
            notes.append(HOLLOW_SPHERES_NOTE.format(f_max=self.f_max))
        elif self.hollow:
            how = ("fast path: interpolated between tables at f_max nodes" if self.f_max_tables == "nodes"
                   else "fast path: one table per value")
            notes.append(HOLLOW_VARIED_NOTE.format(how=how if self.method == "fast" else "exact path"))
        for b, band in enumerate(self.bands):
            grid = np.union1d(np.linspace(band.wavelength_min, band.wavelength_max, 801),
                              band.wavelength[(band.wavelength >= band.wavelength_min)
                                              & (band.wavelength <= band.wavelength_max)])
            if self.star_spectrum is not None:
                wl = self.star_spectrum[0]
                if wl[0] > band.wavelength_min or wl[-1] < band.wavelength_max:
                    raise InputError(f"the stellar spectrum ({wl[0]:.4g}-{wl[-1]:.4g} um) does not cover band "
                                     f"'{band.name}' ({band.wavelength_min:.4g}-{band.wavelength_max:.4g} um)",
                                     where="star_spectrum")
                grid = np.union1d(grid, wl[(wl > grid[0]) & (wl < grid[-1])])
            w = band.weight(grid) * self.star_flux(grid)
            x, wx = self._band_nodes(grid, w)
            nodes.append(x)
            weights.append(wx)
            owner.append(np.full(x.size, b))
            if band.approximate:
                notes.append(f"band '{band.name}' is approximate ({band.source})")
        self.node_wavelength = np.concatenate(nodes)
        self.node_weight = np.concatenate(weights)
        self.node_band = np.concatenate(owner)
        self._node_polarised = np.array([self.intensities[b] == "polarised" for b in self.node_band], dtype=bool)
        # band-average matrix [L, B]
        avg = np.zeros((self.node_wavelength.size, len(self.bands)))
        avg[np.arange(self.node_wavelength.size), self.node_band] = self.node_weight
        self._band_matrix = avg
        indices = []
        for mat in self.materials:
            try:
                sample = mat.sample(self.node_wavelength)
            except OpticalConstantsError as exc:
                lo, hi = mat.wavelength_range
                bad = [bd.name for bd, x in zip(self.bands, nodes)
                       if x.min() < lo or x.max() > hi]
                raise OpticalConstantsError(
                    f"band(s) {bad} lie outside the optical constants of '{mat.name}' "
                    f"({lo:.4g}-{hi:.4g} um); choose other bands, another file, or allow an explicit "
                    f"extrapolation rule for this material ({exc.reason})", path=mat.path) from None
            indices.append(sample.m)
            notes.extend(sample.notes)
        self._indices = np.asarray(indices, dtype=complex)  # [K, L]
        self.notes = tuple(dict.fromkeys(notes))

    def _band_nodes(self, grid, weight):
        """Gauss nodes of one band: ``wavelength_nodes``, twice as many on an absorption feature.

        A band over which some material's k + ``NODE_K_FLOOR`` changes by more
        than a factor ``NODE_K_RATIO`` (where the band's weight is above 1% of
        its peak) sits on an absorption feature (e.g. the ice bands at 2.0, 3.1
        and 3.3 um): its average needs more nodes than a band over a smooth
        continuum.
        """
        inside = weight >= 0.01 * weight.max()
        count = self.wavelength_nodes
        for mat in self.materials:
            try:
                k = mat.sample(grid[inside]).m.imag + NODE_K_FLOOR
            except OpticalConstantsError:
                continue  # reported with the band's name in _setup_nodes
            if k.max() > NODE_K_RATIO * k.min():
                count = 2 * self.wavelength_nodes
                break
        return weighted_gauss_nodes(grid, weight, count)

    # ----------------------------------------------------------- inputs
    def _parameters(self, fractions, porosity, a_min, q, a_max):
        f = np.asarray(fractions, dtype=float)
        k = len(self.materials)
        if f.ndim == 1:
            f = f[None, :]
        if f.ndim != 2 or f.shape[1] != k:
            raise InputError(f"fractions must have shape (N, {k}) for the materials "
                             f"{[m.name for m in self.materials]}, got {np.shape(fractions)}", where="fractions")
        if not np.isfinite(f).all() or (f < 0).any():
            raise InputError("fractions must be finite and >= 0", where="fractions")
        sums = f.sum(axis=1)
        if np.any(np.abs(sums - 1) > _FRACTION_TOLERANCE):
            i = int(np.argmax(np.abs(sums - 1)))
            raise InputError(f"fractions (volume fractions of the solid) must sum to 1; row {i} sums to "
                             f"{sums[i]:.6g}", where="fractions")
        n = f.shape[0]
        a_max = self.a_max if a_max is None else a_max
        try:
            porosity, a_min, q, a_max = (np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy()
                                         for v in (porosity, a_min, q, a_max))
        except ValueError:
            raise InputError(f"porosity, a_min, q and a_max must be scalars or arrays of length {n}") from None
        por, size = PARAMETERS["porosity"], PARAMETERS["a_min"]
        if not por.contains(porosity).all():
            raise InputError(f"porosity ({por.meaning}) must be in {por.interval}", where="porosity")
        if not (np.isfinite(a_min).all() and np.isfinite(a_max).all()) or not size.contains(a_min).all():
            raise InputError(f"a_min and a_max must be finite and > {size.lo:g} {size.unit_text}", where="a_min")
        if (a_min >= a_max).any():
            i = int(np.flatnonzero(a_min >= a_max)[0])
            raise InputError(f"a_min must be smaller than a_max; row {i}: a_min = {a_min[i]:g} um, "
                             f"a_max = {a_max[i]:g} um", where="a_min")
        if not np.isfinite(q).all():
            raise InputError("q must be finite", where="q")
        if not PARAMETERS["q"].contains(q).all():
            raise InputError(f"q ({PARAMETERS['q'].meaning}) must be in {PARAMETERS['q'].interval}", where="q")
        return f, porosity, a_min, q, a_max

    @accepts_quantities
    def effective_index(self, fractions, porosity, wavelength=None) -> np.ndarray:
        """Effective index ``n + ik`` of the mixtures.

        Parameters
        ----------
        fractions : ndarray[N, K]
        porosity : ndarray[N] or float
        wavelength : ndarray[L] [um], optional
            Default: the model's band nodes.

        Returns
        -------
        complex ndarray[N, L]
        """
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        p = np.broadcast_to(np.asarray(porosity, dtype=float), (f.shape[0],))
        if wavelength is None:
            ind = self._indices
        else:
            ind = np.asarray([m.refractive_index(np.atleast_1d(wavelength)) for m in self.materials])
        return mix_refractive_index(ind[:, None, :], f.T[:, :, None], p[:, None],
                                    rule=self.mixing, matrix=self.matrix)

    def density(self, fractions, porosity) -> np.ndarray:
        """Mixture density [g cm^-3], ``(1 - P) sum f_i rho_i`` (nan if unknown)."""
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        rho = np.array([m.density for m in self.materials])
        return mixture_density(rho, f.T, porosity)

    # ------------------------------------------------------------ outputs
    @accepts_quantities
    def flux_ratio(self, fractions, porosity, a_min, q, a_max=None, f_max=None) -> np.ndarray:
        """Disk/star flux ratio per band for dust of unit total cross-section.

        Parameters
        ----------
        fractions : ndarray[N, K]
            Volume fractions of the solid; rows sum to 1.
        porosity : ndarray[N] or float
            Vacuum fraction of the whole grain.
        a_min : ndarray[N] or float [um]
        q : ndarray[N] or float
        a_max : ndarray[N] or float [um], optional
            Default: the model's ``a_max``.
        f_max : ndarray[N] or float, optional
            Largest vacuum-core volume fraction per point (hollow-sphere
            models built with ``f_max_tables``; default: the model's f_max).

        Returns
        -------
        ndarray[N, n_bands] [sr^-1]
            Band-averaged cross-section-weighted ``Q_sca p(theta)``; in a
            polarised column (``intensities``) its polarised twin, signed.
        """
        f, p, a_min, q, a_max = self._parameters(fractions, porosity, a_min, q, a_max)
        f_max = self._point_f_max(f_max, f.shape[0])
        m = self.effective_index(f, p)
        if not self.has_polarised:
            return self._node_values(m, self.node_wavelength, a_min, q, a_max, "total", f_max) @ self._band_matrix
        node = np.empty(m.shape)
        for quantity, cols in (("total", ~self._node_polarised), ("polarised", self._node_polarised)):
            if cols.any():
                node[:, cols] = self._node_values(m[:, cols], self.node_wavelength[cols], a_min, q, a_max,
                                                  quantity, f_max)
        return node @ self._band_matrix

    def _point_f_max(self, f_max, n):
        """Per-point f_max as ndarray[n] (None: the model's own f_max)."""
        if f_max is None:
            if self.f_max_varies and self.f_max is None:
                raise InputError("this hollow-sphere model takes f_max per point (a fitted f_max or a grid "
                                 "axis): pass f_max=...", where="f_max")
            return None
        if not self.f_max_varies:
            raise InputError("f_max per point needs a hollow-sphere model built with f_max_tables "
                             "('nodes' or 'values')", where="f_max")
        try:
            values = np.broadcast_to(np.asarray(f_max, dtype=float), (n,)).copy()
        except ValueError:
            raise InputError(f"f_max must be a scalar or an array of length {n}", where="f_max") from None
        declared = PARAMETERS["f_max"]
        if not declared.contains(values).all():
            bad = values[~declared.contains(values)][0]
            raise InputError(f"f_max ({declared.meaning}) must be in {declared.interval}, got {bad:g}",
                             where="f_max")
        return values

    def _node_values(self, m, wavelength, a_min, q, a_max, quantity, f_max):
        """Monochromatic ratios [N, L] of one quantity, by the model's method; f_max per point or None."""
        if f_max is None:
            if self.method == "fast":
                return self._fast_table().node_values(m, wavelength, a_min, q, a_max, quantity=quantity)
            return self.node_values_exact(m, wavelength, a_min, q, a_max, quantity=quantity)
        out = np.zeros(m.shape)
        if self.method == "exact":
            for value in np.unique(f_max):
                rows = f_max == value
                out[rows] = self.node_values_exact(m[rows], wavelength, a_min[rows], q[rows], a_max[rows],
                                                   quantity=quantity, f_max=value)
            return out
        from .tables import f_max_terms

        for table_f_max, rows, weight in f_max_terms(f_max, self.f_max_tables):
            out[rows] += weight[:, None] * self._fast_table(table_f_max).node_values(
                m[rows], wavelength, a_min[rows], q[rows], a_max[rows], quantity=quantity)
        return out

    def _fast_table(self, f_max=None):
        """The fast path (the model's own f_max, or the tables of ``f_max`` for a per-point f_max)."""
        if f_max is None:
            if self._table is None:
                from .tables import table_for_model

                self._table = table_for_model(self, lazy=True)
            return self._table
        table = self._tables.get(float(f_max))
        if table is None:
            from .tables import table_for_model

            table = self._tables[float(f_max)] = table_for_model(self, lazy=True, f_max=float(f_max))
        return table

    def prepare(self, fractions=None, porosity=None, f_max=None) -> None:
        """Load or build the fast path's lookup tables now (``method="fast"`` only).

        Without arguments, every tile the model's mixtures can reach (any
        fractions, porosity 0-0.95) is made ready; with ``fractions[N, K]`` and
        ``porosity[N]``, only what those mixtures need (others are built on
        demand). Call it once in the parent process before starting workers:
        they then load the cached tiles instead of building them. A model with
        f_max per point (``f_max_tables``) prepares the tables of the f_max
        values ``f_max`` (an array; for ``"nodes"``, the nodes their
        interpolation uses); without it, none.
        """
        if self.method != "fast":
            return
        from .tables import f_max_terms, table_for_model

        if not self.f_max_varies or self.f_max is not None:
            self._table = table_for_model(self, fractions=fractions, porosity=porosity)
        if self.f_max_varies and f_max is not None:
            values = np.unique(np.atleast_1d(np.asarray(f_max, dtype=float)))
            for table_f_max, _, _ in f_max_terms(values, self.f_max_tables):
                self._tables[float(table_f_max)] = table_for_model(self, fractions=fractions, porosity=porosity,
                                                                   f_max=float(table_f_max))

    @accepts_quantities
    def node_values_exact(self, m, wavelength, a_min, q, a_max, sampling: SizeSampling | None = None,
                          quantity: str = "total", f_max=None):
        """Monochromatic flux ratio R(lambda) by direct Mie quadrature.

        Parameters
        ----------
        m : complex ndarray[N, L]
            Effective indices at the wavelengths.
        wavelength : ndarray[L] [um]
        a_min, q, a_max : ndarray[N]
        sampling : SizeSampling, optional
            Default: the model's ``size_sampling``.
        quantity : {"total", "polarised"}
            Total intensity, or polarised intensity (``|S1|^2 - |S2|^2``, signed;
            Mie phase function only).
        f_max : float, optional
            Hollow spheres: this f_max instead of the model's.

        Returns
        -------
        ndarray[N, L] [sr^-1]
        """
        if quantity not in INTENSITIES:
            raise InputError(f"quantity must be one of {quoted_names(INTENSITIES)}, got {quantity!r}",
                             where="quantity")
        if quantity == "polarised" and self.geometry.phase != "mie":
            raise InputError(HG_NO_POLARISATION, where="[geometry] phase")
        return self._exact_node_values(m, wavelength, a_min, q, a_max, sampling, (quantity,), f_max)[0]

    @accepts_quantities
    def node_values_exact_both(self, m, wavelength, a_min, q, a_max, sampling: SizeSampling | None = None,
                               f_max=None):
        """Total and polarised :meth:`node_values_exact` from one Mie pass (Mie phase function only).

        Each is bit-identical to :meth:`node_values_exact` with that ``quantity``;
        the Mie series, nearly all the cost, runs once instead of twice.

        Returns
        -------
        total, polarised : ndarray[N, L] [sr^-1]
        """
        if self.geometry.phase != "mie":
            raise InputError(HG_NO_POLARISATION, where="[geometry] phase")
        return self._exact_node_values(m, wavelength, a_min, q, a_max, sampling, ("total", "polarised"), f_max)

    def _exact_node_values(self, m, wavelength, a_min, q, a_max, sampling, quantities, f_max):
        """The quadrature of :meth:`node_values_exact`, one output array per entry of ``quantities``."""
        sampling = sampling or self.size_sampling
        m = mie.check_index(np.atleast_2d(m))
        wavelength = np.asarray(wavelength, dtype=float)
        n_pts, n_lam = m.shape
        a_min, q, a_max = (np.broadcast_to(np.asarray(v, dtype=float), (n_pts,)) for v in (a_min, q, a_max))
        outs = tuple(np.empty((n_pts, n_lam)) for _ in quantities)
        theta = self.geometry.angles_rad
        norm = np.pi * power_law_cross_section(a_min, a_max, q)  # integral n pi a^2 da
        for i in range(n_pts):
            ts, ws, mm, owner = [], [], [], []
            for j in range(n_lam):
                wn = 2 * np.pi / wavelength[j]
                t, w = size_parameter_rule(wn * a_min[i], wn * a_max[i], sampling, m[i, j].imag)
                ts.append(t)
                ws.append(w)
                mm.append(np.full(t.size, m[i, j]))
                owner.append(np.full(t.size, j))
            t, w, mm, owner = (np.concatenate(v) for v in (ts, ws, mm, owner))
            if len(quantities) == 2:
                intensities = self._intensities(mm, t, theta, f_max)
                integrals = [np.bincount(owner, w * 0.5 * t ** (-q[i]) * s, minlength=n_lam) for s in intensities]
            elif quantities[0] == "polarised" or self.geometry.phase == "mie":
                s = self._intensity(mm, t, theta, quantities[0], f_max)
                integrals = [np.bincount(owner, w * 0.5 * t ** (-q[i]) * s, minlength=n_lam)]
            else:
                e = self.grain_efficiencies(mm, t, f_max)
                base = w * t ** (2.0 - q[i]) * e.q_sca
                csca = np.pi * np.bincount(owner, base, minlength=n_lam)
                gbar = np.bincount(owner, base * e.g, minlength=n_lam) * np.pi / csca
                integrals = [csca * self.geometry.hg_phase(gbar)]
            for out, integral in zip(outs, integrals):
                out[i] = (wavelength / (2 * np.pi)) ** (3.0 - q[i]) * integral / norm[i]
        return outs

    @accepts_quantities
    def monochromatic_flux_ratio(self, wavelength, fractions, porosity, a_min, q, a_max=None,
                                 quantity: str = "total", method: str = "exact", f_max=None) -> np.ndarray:
        """R(lambda) [sr^-1] at given wavelengths (no band average).

        ``quantity="polarised"`` gives the polarised-intensity ratio (signed).
        ``method="exact"`` (default) is the direct Mie quadrature;
        ``method="fast"`` interpolates the lookup tables (``method="fast"``
        models only; missing tiles are built), the path the model's band
        values take. Measured on the demo disk's fit (9 posterior spectra of
        96 wavelengths, 0.56-4.2 um, a_max = 1 mm): within 0.3% of the exact
        path everywhere (rms 0.05%), 0.2 s against 124 s on a busy 2-core
        machine.

        Returns
        -------
        ndarray[N, L]
        """
        if method not in METHODS:
            raise InputError(f"method must be one of {quoted_names(METHODS)}, got {method!r}", where="method")
        if method == "fast" and self.method != "fast":
            raise InputError("method='fast' needs a model built with method='fast' (its lookup tables)",
                             where="method")
        wavelength = np.atleast_1d(np.asarray(wavelength, dtype=float))
        f, p, a_min, q, a_max = self._parameters(fractions, porosity, a_min, q, a_max)
        f_max = self._point_f_max(f_max, f.shape[0])     # per point (f_max_tables models), else None
        m = self.effective_index(f, p, wavelength)
        if f_max is not None:
            if method == "fast":
                return self._node_values(m, wavelength, a_min, q, a_max, quantity, f_max)
            exact = np.zeros(m.shape)
            for value in np.unique(f_max):
                rows = f_max == value
                exact[rows] = self.node_values_exact(m[rows], wavelength, a_min[rows], q[rows], a_max[rows],
                                                     quantity=quantity, f_max=value)
            return exact
        if method == "fast":
            return self._fast_table().node_values(m, wavelength, a_min, q, a_max, quantity=quantity)
        return self.node_values_exact(m, wavelength, a_min, q, a_max, quantity=quantity)

    @accepts_quantities
    def band_optics(self, fractions, porosity, a_min, q, a_max=None, n_per_efold: int = 24,
                    polarised: bool = False) -> BandOptics:
        """Flux ratio, albedo, g and Q_ext per band for ONE mixture (exact path).

        Parameters
        ----------
        fractions : ndarray[K]
        porosity, a_min, q, a_max : float
        n_per_efold : int
            Gauss-Legendre nodes per e-fold of a for the efficiency averages
            (Q_ext, Q_sca and g are smooth in a once averaged over a band).
        polarised : bool
            Also the polarised-intensity ratio of every band (Mie phase
            function only; ``polarised_flux_ratio`` stays None with HG).

        ``flux_ratio`` is the total intensity of every band, whatever the
        model's ``intensities``.
        """
        f, p, a_min, q, a_max = self._parameters(fractions, porosity, a_min, q, a_max)
        if f.shape[0] != 1:
            raise InputError("band_optics takes one mixture (fractions of shape (K,))", where="fractions")
        pol_ratio = None
        if polarised and self.geometry.phase == "mie":     # both from one Mie pass
            total, pol = self.node_values_exact_both(self.effective_index(f, p), self.node_wavelength, a_min, q,
                                                     a_max)
            ratio, pol_ratio = (total @ self._band_matrix)[0], (pol @ self._band_matrix)[0]
        else:
            ratio = (self.node_values_exact(self.effective_index(f, p), self.node_wavelength, a_min, q, a_max)
                     @ self._band_matrix)[0]
        from ...optics.sizes import PowerLaw

        a, w = PowerLaw(float(a_min[0]), float(a_max[0]), float(q[0])).quadrature(n_per_efold)
        m = self.effective_index(f, p)[0]  # [L]
        e = self.grain_efficiencies(m[:, None], 2 * np.pi * a[None, :] / self.node_wavelength[:, None])
        csca = (e.q_sca * w).sum(axis=1)
        cext = (e.q_ext * w).sum(axis=1)
        cg = (e.q_sca * e.g * w).sum(axis=1)
        bm = self._band_matrix
        albedo = (csca @ bm) / (cext @ bm)
        g = (cg @ bm) / (csca @ bm)
        pivots = np.array([b.pivot_wavelength for b in self.bands])
        m_piv = self.effective_index(f, p, pivots)[0]
        return BandOptics(bands=tuple(b.name for b in self.bands), flux_ratio=ratio, albedo=albedo, g=g,
                          q_ext=cext @ bm, m_pivot=m_piv, pivot=pivots,
                          density=float(np.ravel(self.density(f, p))[0]), notes=self.notes,
                          polarised_flux_ratio=pol_ratio)

    @accepts_quantities
    def radiation_pressure_efficiency(self, fractions, porosity, a, n_wavelengths: int = 64):
        """Q_pr = Q_ext - g Q_sca averaged over the stellar F_lambda, for radii ``a`` [um].

        The average runs over the wavelengths where every material has data
        (no extrapolation), trimmed to where the star emits (between the
        wavelengths below and above which it puts 1e-4 of its flux, so that the
        nodes sample the stellar spectrum rather than the materials' far-infrared
        tails); the fraction of stellar flux covered is returned.

        Returns
        -------
        q_pr : ndarray[len(a)]
        covered : float
            Fraction of the stellar bolometric flux inside the range used.
        """
        lo = max(m.wavelength_range[0] for m in self.materials)
        hi = min(m.wavelength_range[1] for m in self.materials)
        lo, hi = max(lo, 0.05), min(hi, 1000.0)
        if self.star_spectrum is not None:
            lo, hi = max(lo, self.star_spectrum[0][0]), min(hi, self.star_spectrum[0][-1])
        full = np.geomspace(0.05, 1000.0, 4000)
        if self.star_spectrum is not None:
            full = self.star_spectrum[0]
        fl_full = self.star_flux(full)
        cum = np.concatenate([[0.0], np.cumsum(0.5 * (fl_full[1:] + fl_full[:-1]) * np.diff(full))])
        cum /= cum[-1]
        lo = max(lo, float(np.interp(1e-4, cum, full)))
        hi = min(hi, float(np.interp(1.0 - 1e-4, cum, full)))
        lam = np.geomspace(lo, hi, n_wavelengths)
        flux = self.star_flux(lam)
        inside = (full >= lo) & (full <= hi)
        covered = float(np.trapezoid(np.where(inside, fl_full, 0.0), full) / np.trapezoid(fl_full, full))
        m = self.effective_index(np.atleast_2d(fractions), porosity, lam)[0]
        a = np.atleast_1d(np.asarray(a, dtype=float))
        e = self.grain_efficiencies(m[None, :], 2 * np.pi * a[:, None] / lam[None, :])
        wts = np.gradient(lam) * flux
        return (e.q_pr * wts).sum(axis=1) / wts.sum(), covered

    @accepts_quantities
    def blowout(self, fractions, porosity, luminosity_lsun, mass_msun) -> BlowoutResult:
        """Blow-out radius of this mixture around a star (Burns, Lamy & Soter 1979).

        Q_pr(a) from Mie theory averaged over the stellar spectrum; the
        mixture density from the components' bulk densities and the porosity.
        """
        rho = float(np.ravel(self.density(fractions, porosity))[0])
        if not np.isfinite(rho) or rho <= 0:
            raise ModelError("the mixture density is unknown (a component has no density); "
                             "give densities to compute the blow-out size")
        cache = {}

        def q_pr(a):
            q, cov = self.radiation_pressure_efficiency(fractions, porosity, a)
            cache["covered"] = cov
            return q

        result = find_blowout_size(q_pr, luminosity_lsun, mass_msun, rho, a_range=(0.01, 100.0))
        cov = cache.get("covered", 1.0)
        if cov < 0.99:
            note = (f"Q_pr averaged over the wavelengths covered by every material's data, "
                    f"{100 * cov:.0f}% of the stellar flux")
            result = BlowoutResult(result.size, result.beta_max, result.size_of_beta_max, result.a,
                                   result.beta, result.q_pr, result.message, result.notes + (note,))
        return result

    @accepts_quantities
    def blowout_sizes(self, fractions, porosity, luminosity_lsun, mass_msun) -> np.ndarray:
        """Blow-out radius [um] of each mixture: :meth:`blowout` row by row.

        Parameters
        ----------
        fractions : ndarray[N, K]
        porosity : ndarray[N] or float
        luminosity_lsun, mass_msun : float

        Returns
        -------
        ndarray[N] [um]
            nan where beta < 1/2 at every size (no grain is blown out).
        """
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        p = np.broadcast_to(np.asarray(porosity, dtype=float), (f.shape[0],))
        out = np.empty(f.shape[0])
        for i in range(f.shape[0]):
            size = self.blowout(f[i:i + 1], p[i], luminosity_lsun, mass_msun).size
            out[i] = np.nan if size is None else size
        return out

    def describe(self) -> str:
        """Short multi-line summary of the model's set-up."""
        star = (f"blackbody {self.star_teff:g} K" if self.star_spectrum is None
                else f"user spectrum ({self.star_spectrum[0][0]:.3g}-{self.star_spectrum[0][-1]:.3g} um)")
        return "\n".join([
            f"materials: {', '.join(m.name for m in self.materials)} (mixing: {self.mixing})",
            f"bands: {', '.join(b.name for b in self.bands)} ({self.wavelength_nodes} nodes per band)",
            f"star: {star}",
            f"geometry: scattering angles {', '.join(f'{a:g}' for a in self.geometry.angles_deg)} deg, "
            f"phase function {self.geometry.phase}",
            f"method: {self.method}; default a_max {self.a_max:g} um; Mie: {mie.solver_summary()}",
            f"grains: {self.grain_summary}",
        ] + ([f"polarised intensity in band(s): "
              f"{', '.join(b.name for b, k in zip(self.bands, self.intensities) if k == 'polarised')}"]
             if self.has_polarised else []))
