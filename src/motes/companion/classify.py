"""Rank spectral types of a companion from its calibrated photometry.

:func:`classify` takes :class:`~motes.photometry.CalibratedPhotometry` and
ranks, separately for every template source (the built-in dwarf sequence, a
user library, blackbodies) and every mode:

``distance`` (distance known)
    template absolute magnitudes + the host's distance modulus mu, with the
    shared offset delta ~ N(0, sigma_mu^2 + sigma_lum^2): sigma_mu is the
    distance-modulus error (one term for all bands), sigma_lum the intrinsic
    luminosity scatter of the templates at fixed type;
``colours`` (colours only)
    delta free, with a flat prior of fixed width (:data:`OFFSET_PRIOR_WIDTH`
    = 40 mag; for templates with an absolute scale delta is the distance
    modulus and the range is -5 to 35 mag, i.e. 0.1 pc to 100 Mpc).

Per-band template scatter sigma_tpl adds to the observed errors (in the
colours-only mode, for the dwarf sequence, with the sequence's own uncertainty
measured from its rows added in quadrature: :func:`sequence_colour_scatter`;
there sigma_tpl is also an unknown of the object, marginalised over a
log-uniform prior, :data:`COLOUR_SCATTER_RANGE`).
The likelihood, the limits and the marginalisation are in
:mod:`motes.companion.likelihood`. Template probabilities of the dwarf
sequence include a prior over types (:mod:`motes.companion.type_prior`;
default: the solar-neighbourhood space density per subtype), and every
estimate is also computed with a flat prior; intervals are highest-density
intervals and separate peaks are reported (:mod:`motes.companion.type_posterior`).

Band sets
---------
Templates are compared only over the same bands. Within one source, a
ranking uses every observed band that some template covers, and drops the
templates that miss one of them - unless those templates carried more than
:data:`EXCLUSION_TOLERANCE` of the probability in a first ranking over the
bands that *all* templates cover, in which case the extra bands are dropped
instead. Either way the output says which bands and templates were left out.
Blackbodies rank over every band and are run when some observed band is used
by no other source (or when asked): the output says so.
"""

from __future__ import annotations

import math
import os
import tomllib
from dataclasses import dataclass, fields
from dataclasses import replace as dataclass_replace
from pathlib import Path

import numpy as np
from scipy.special import logsumexp

from ..errors import FitError, InputError
from ..photometry.bands import canonical_band_name
from ..tomlcheck import check_keys, check_tables
from .band_mapping import mapping_pivot_warnings
from .blackbody import BlackbodySet
from .extinction import EXTINCTION_LAWS, av_prior_grid, extinction_coefficients
from .likelihood import FlatOffset, GaussianOffset, offset_marginal
from .results import Classification, Ranking
from .sequence import load_dwarf_sequence, read_dwarf_sequence_file
from .spectral_types import type_code, type_label
from .summary_stats import FIT_P_THRESHOLD, build_rows, distance_check, type_estimate
from .templates import TemplateGrid
from .type_prior import TypePrior, parse_type_prior

__all__ = [
    "ClassifySettings",
    "classify",
    "MODES",
    "OFFSET_PRIOR_WIDTH",
    "OFFSET_PRIOR_LOWER",
    "EXCLUSION_TOLERANCE",
    "CAVEATS",
    "sequence_colour_scatter",
    "SEQUENCE_SCATTER_WINDOW",
    "COLOUR_SCATTER_RANGE",
    "COLOUR_SCATTER_NODES",
    "colour_scatter_nodes",
]

MODES = ("auto", "distance", "colours", "both")

#: Width [mag] of the flat prior on the offset in the colours-only mode.
OFFSET_PRIOR_WIDTH = 40.0
#: Lower end [mag] of that prior for templates with an absolute scale (0.1 pc).
OFFSET_PRIOR_LOWER = -5.0
#: Default log-uniform prior range [mag] of the per-band template scatter of the dwarf sequence in the
#: colours-only mode (:attr:`ClassifySettings.colour_scatter_range`). How far an individual dwarf's
#: near-infrared colours sit from the mean sequence at its type is not one number: most field dwarfs
#: lie close to it, while metallicity, gravity (youth), clouds (red and blue L dwarfs) and unresolved
#: binarity move a minority far off. A scale mixture of Gaussians - the scatter an unknown of the
#: object, with the scale-invariant (log-uniform) prior between physical bounds - describes such a
#: narrow core with heavy tails. Lower bound 0.02 mag: no smaller than the colour spread at fixed
#: type that the quantisation of spectral types alone gives (types to +-0.5 subtype, common practice,
#: no source, times the sequence's slopes of 0.01-0.04 mag per subtype in J-H and H-Ks for K-M dwarfs,
#: read from its rows: up to 0.02 mag), and about the ~0.02-0.03 mag rms of J-H and H-Ks at fixed type
#: of solar-neighbourhood FGK dwarfs (from memory); upper bound 0.30 mag: the top of the 0.1-0.3 mag
#: range of common practice (no source), about the J-Ks offset of the red and blue L dwarfs from the
#: mean of their type (~0.3-0.5 mag in J-Ks, Faherty et al. 2009, AJ 137, 1; Kirkpatrick et al. 2010,
#: ApJS 190, 100; from memory). No published per-type table of the intrinsic rms of J-H, H-Ks at
#: fixed type was at hand (none could be read in full). Chosen from these arguments before any
#: classification was run with it; not fitted to any test set.
COLOUR_SCATTER_RANGE = (0.02, 0.30)
#: Nodes of the scale mixture over that range (midpoints of equal steps in ln sigma, equal weights).
COLOUR_SCATTER_NODES = 9
#: Probability (from the bands all templates share) that templates may carry
#: before motes refuses to drop them for the sake of an extra band.
EXCLUSION_TOLERANCE = 0.01

CAVEATS = (
    "Young, low-gravity objects are redder in the near-infrared (and brighter) than field dwarfs of "
    "the same type: against a field sequence their colours suggest too late a type and their "
    "absolute magnitudes too early a type.",
    "Extinction reddens and dims; it is negligible for most companions within ~100 pc but not for "
    "background stars.",
    "An unresolved equal-mass binary is 0.75 mag brighter than a single object: the distance-known "
    "mode then prefers an earlier type and the colours-only distance comes out too small.",
    "Masses are the mean sequence's (tentative) masses of field dwarfs (the built-in sequence tabulates "
    "them to L3, none for later types): a mass from a colour or magnitude assumes a field age, and near "
    "or below the hydrogen-burning limit a younger object of the same type is much less massive.",
    "With only J, H and Ks and no distance, late-T dwarfs and G/K stars have similar 2MASS colours: "
    "the colours-only posterior then has a T peak and a G/K peak - add a distance, or a band that "
    "separates them (a visible band, W1/L' or a methane band; the built-in sequence has no W1/W2 beyond "
    "T2 and no optical bands beyond L8, so compare those with a spectral library or your own sequence).",
    "The sequence is a mean of field dwarfs in standard bands (see its header for the photometric "
    "systems); a library of real spectra through your real bands is the more faithful template set.",
    "A spectral type from photometry is indicative only; a spectrum confirms it.",
)


@dataclass(frozen=True)
class ClassifySettings:
    """Choices of a classification (loadable from TOML, see :meth:`from_toml`).

    Parameters
    ----------
    mode : {"auto", "distance", "colours", "both"}
        ``auto`` = both when the host distance is known, else colours only.
        ``"colors"`` is accepted for ``"colours"``.
    band_map : tuple of (str, str)
        Explicit mappings (observed band, standard sequence band), e.g.
        ``(("NIRC2.Kp", "2mass_ks"),)``. Nothing is mapped otherwise.
    template_scatter : float [mag]
        Intrinsic scatter of template colours, per band (default 0.10:
        common practice, no source - 0.1-0.3 mag is usual).
    colour_scatter_range : (float, float) or None [mag]
        In the colours-only mode, the dwarf sequence's per-band template
        scatter is not fixed but an unknown of the object, marginalised over a
        log-uniform prior between these two values (default 0.02-0.30 mag,
        argued in :data:`COLOUR_SCATTER_RANGE`); its probabilities are then a
        scale mixture over :data:`COLOUR_SCATTER_NODES` values. The chi2,
        the best offset and the goodness of fit are still those at
        ``template_scatter``. None: the fixed ``template_scatter`` throughout.
    luminosity_scatter : float [mag]
        Intrinsic scatter of absolute magnitude at fixed type, shared by all
        bands (default 0.30: the rms of absolute magnitudes about
        spectral-type relations is ~0.3-0.4 mag, Dupuy & Liu 2012, from memory).
    use_sequence : bool
        Rank the built-in dwarf sequence.
    type_range : (str, str) or None
        Restrict the sequence, e.g. ``("M0", "T9")``.
    type_step : float
        Sequence grid step in subtypes.
    blackbody : {"auto", "always", "never"}
        ``auto``: only when some band is used by no other source.
    blackbody_radius_rjup : float or None [R_Jup]
        Gives blackbodies an absolute scale (then they also take part in the
        distance-known mode).
    extinction : bool
        Marginalise A_V with a uniform prior on [0, av_max].
    extinction_law : str
    rv : float
    av_max : float [mag]
    av_steps : int
    tension_sigma : float
        Tension between the colours-only and the host distance moduli above
        which the result is flagged.
    sequence_file : str or None
        A user's own dwarf sequence table in the bundled file's format
        (:func:`motes.companion.sequence.read_dwarf_sequence_file`) used instead
        of the built-in sequence; in a TOML ``[classify]`` table a relative
        path is relative to that file's folder.
    type_prior : str, mapping or TypePrior
        Prior over the sequence's types, in the modes of ``type_prior_modes``: ``"field"`` (default:
        the space density per subtype of solar-neighbourhood dwarfs, argued in
        :mod:`motes.companion.type_prior`), ``"flat"``, or knots
        ``{"M0": 1, "L0": 0.3, "T8": 0.3}`` / ``"M0=1,L0=0.3,T8=0.3"`` (linear
        between, zero outside). The flat-prior estimate is always reported
        beside it. Stored as a :class:`~motes.companion.type_prior.TypePrior`.
    type_prior_modes : tuple of {"colours", "distance"}
        The modes the type prior enters (default ``("colours",)``). With J, H
        and Ks alone and no distance, the colours leave the type nearly
        degenerate (M0-M7 agree to < 0.1 mag), and only a population prior
        keeps the answer physical. With the distance known, the absolute
        magnitude constrains the type and the default stays flat: the field
        densities step down by a factor ~3 across M9-L0, and a companion found
        by imaging next to a star is selected by its contrast, not drawn at a
        random position from the field, so the field densities are not its
        population; pulling a well-measured absolute magnitude across that
        step would bias the distance-known type. ``("colours", "distance")``
        applies the prior to both.
    """

    mode: str = "auto"
    band_map: tuple = ()
    template_scatter: float = 0.10
    colour_scatter_range: tuple | None = COLOUR_SCATTER_RANGE
    luminosity_scatter: float = 0.30
    use_sequence: bool = True
    type_range: tuple | None = None
    type_step: float = 0.1
    blackbody: str = "auto"
    blackbody_radius_rjup: float | None = None
    extinction: bool = False
    extinction_law: str = "G23"
    rv: float = 3.1
    av_max: float = 5.0
    av_steps: int = 41
    tension_sigma: float = 3.0
    sequence_file: str | None = None
    type_prior: object = "field"
    type_prior_modes: tuple = ("colours",)

    def __post_init__(self):
        if self.mode == "colors":   # both spellings of the trade are accepted; "colours" is kept
            object.__setattr__(self, "mode", "colours")
        if self.mode not in MODES:
            raise InputError(f"mode must be one of {', '.join(MODES)}, got {self.mode!r}")
        if self.blackbody not in ("auto", "always", "never"):
            raise InputError(f"blackbody must be 'auto', 'always' or 'never', got {self.blackbody!r}")
        for name in ("template_scatter", "luminosity_scatter"):
            value = getattr(self, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0):
                raise InputError(f"{name} must be a number >= 0 [mag], got {value!r}")
        if self.colour_scatter_range is not None:
            rng = self.colour_scatter_range
            try:
                lo, hi = (float(v) for v in rng)
            except (TypeError, ValueError):
                raise InputError("colour_scatter_range must be two numbers [mag], e.g. (0.02, 0.30), or None, "
                                 f"got {rng!r}") from None
            if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
                raise InputError(f"colour_scatter_range must be 0 < low <= high [mag], got {rng!r}")
            object.__setattr__(self, "colour_scatter_range", (lo, hi))
        if not (self.type_step > 0):
            raise InputError(f"type_step must be positive, got {self.type_step!r}")
        object.__setattr__(self, "type_prior", parse_type_prior(self.type_prior))
        modes = self.type_prior_modes
        modes = (modes,) if isinstance(modes, str) else tuple(modes)
        modes = tuple("colours" if m == "colors" else m for m in modes)
        if not modes or any(m not in ("colours", "distance") for m in modes):
            raise InputError(f"type_prior_modes must list 'colours' and/or 'distance', got {self.type_prior_modes!r}")
        object.__setattr__(self, "type_prior_modes", modes)
        if self.sequence_file is not None:
            if not isinstance(self.sequence_file, (str, os.PathLike)):
                raise InputError(f"sequence_file must be a path to a sequence table, got {self.sequence_file!r}")
            object.__setattr__(self, "sequence_file", os.fspath(self.sequence_file))
        if self.extinction_law not in EXTINCTION_LAWS:
            raise InputError(f"extinction_law must be one of {', '.join(EXTINCTION_LAWS)}")
        pairs = []
        for pair in self.band_map:
            if not (isinstance(pair, (tuple, list)) and len(pair) == 2 and all(isinstance(p, str) for p in pair)):
                raise InputError(f"band_map entries must be (observed, standard) name pairs, got {pair!r}")
            pairs.append((pair[0], canonical_band_name(pair[1]) or pair[1]))
        object.__setattr__(self, "band_map", tuple(pairs))
        if self.type_range is not None:
            if len(self.type_range) != 2:
                raise InputError(f"type_range must be two types, e.g. ('M0', 'T9'), got {self.type_range!r}")
            lo, hi = (type_code(t) for t in self.type_range)
            if not hi > lo:
                raise InputError(f"type_range must be increasing, got {self.type_range!r}")
            object.__setattr__(self, "type_range", (lo, hi))
            # refused here too (not only against the sequence in classify) so that a settings file is named
            codes = np.linspace(lo, hi, max(int(round((hi - lo) / 0.1)) + 1, 2))
            if self.use_sequence and not np.any(self.type_prior.weights(codes) > 0):
                raise InputError(f"type_prior ({self.type_prior.describe()}) gives zero weight to every type in "
                                 f"type_range {type_label(lo)}-{type_label(hi)}: it excludes every template")

    @classmethod
    def from_mapping(cls, doc: dict, path=None) -> "ClassifySettings":
        """Settings from a dict (e.g. a TOML ``[classify]`` table)."""
        check_keys(doc, {f.name for f in fields(cls)}, path=path, where="[classify]", noun="setting")
        doc = dict(doc)
        if isinstance(doc.get("band_map"), dict):
            doc["band_map"] = tuple(doc["band_map"].items())
        if "type_range" in doc and doc["type_range"] is not None:
            doc["type_range"] = tuple(doc["type_range"])
        if isinstance(doc.get("sequence_file"), str) and path is not None:
            doc["sequence_file"] = str(Path(path).parent / doc["sequence_file"])
        try:
            return cls(**doc)
        except InputError as exc:
            raise InputError(exc.reason, path, "[classify]") from None
        except TypeError as exc:
            raise InputError(f"bad setting: {exc}", path, "[classify]") from None

    @classmethod
    def from_toml(cls, path) -> "ClassifySettings":
        """Read a ``[classify]`` table from a TOML file.

        A file without one holds its settings at the top level; either way a
        ``[boundness]`` table (read by
        :meth:`motes.companion.BoundnessSettings.from_toml`) may sit beside
        them, and a file holding only ``[boundness]`` gives the default settings.
        """
        path = Path(path)
        try:
            doc = tomllib.loads(path.read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"malformed TOML: {exc}", path) from None
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read settings: {exc}", path) from None
        if "classify" in doc:
            check_tables(doc, ("classify", "boundness"), path=path)
            return cls.from_mapping(doc["classify"], path)
        return cls.from_mapping({k: v for k, v in doc.items() if k != "boundness"}, path)


@dataclass(frozen=True, eq=False)
class _Observations:
    """The photometry as arrays, in row order."""

    bands: tuple
    names: tuple[str, ...]
    mag: np.ndarray          # apparent Vega magnitude (limiting magnitude for limits)
    sigma: np.ndarray        # 1-sigma [mag] (nan for limits)
    detected: np.ndarray
    limit_flux: np.ndarray   # N-sigma limiting flux [Jy] (nan for detections)
    limit_noise: np.ndarray  # [Jy]
    zero_point: np.ndarray   # flux of magnitude 0 [Jy]
    mu: float
    mu_error: float
    distance_pc: float


def _observations(photometry) -> _Observations:
    rows = getattr(photometry, "rows", None)
    if not rows:
        raise InputError("the photometry has no rows: nothing to classify")
    names = [r.band.name for r in rows]
    if len(set(names)) != len(names):
        raise InputError(f"duplicated band in the photometry: {', '.join(sorted({n for n in names if names.count(n) > 1}))}")
    mag, sigma, det, lf, ln, zp = [], [], [], [], [], []
    for r in rows:
        where = f"band {r.band.name!r}"
        if r.is_limit:
            if not (math.isfinite(r.flux_jy) and r.flux_jy > 0 and math.isfinite(r.flux_jy_error)
                    and r.flux_jy_error > 0):
                raise InputError("an upper limit needs a positive limiting flux and noise", where=where)
            mag.append(r.apparent_mag)
            sigma.append(math.nan)
            det.append(False)
            lf.append(r.flux_jy)
            ln.append(r.flux_jy_error)
        else:
            if not (math.isfinite(r.apparent_mag) and math.isfinite(r.apparent_mag_error)
                    and r.apparent_mag_error > 0):
                raise InputError("a detection needs a finite magnitude and a positive uncertainty",
                                 where=where)
            mag.append(r.apparent_mag)
            sigma.append(r.apparent_mag_error)
            det.append(True)
            lf.append(math.nan)
            ln.append(math.nan)
        z = r.flux_jy * 10 ** (0.4 * r.apparent_mag) if (math.isfinite(r.flux_jy) and r.flux_jy > 0
                                                         and math.isfinite(r.apparent_mag)) else math.nan
        zp.append(z if math.isfinite(z) else r.band.vega_zero_point_jy)
    det = np.array(det)
    if not det.any():
        raise FitError(f"all {len(rows)} bands are upper limits: at least one detection is needed to "
                       "classify (limits only bound the templates from one side)")
    return _Observations(
        tuple(r.band for r in rows), tuple(names), np.array(mag, float), np.array(sigma, float), det,
        np.array(lf, float), np.array(ln, float), np.array(zp, float),
        float(photometry.distance_modulus), float(photometry.distance_modulus_error),
        float(photometry.distance_pc),
    )


def _modes(settings: ClassifySettings, obs: _Observations) -> tuple[str, ...]:
    has_distance = math.isfinite(obs.mu)
    if settings.mode == "auto":
        return ("distance", "colours") if has_distance else ("colours",)
    if settings.mode in ("distance", "both") and not has_distance:
        raise FitError(f"mode {settings.mode!r} needs the host's distance (parallax or distance in the "
                       "target file); use the colours-only mode")
    return ("distance", "colours") if settings.mode == "both" else (settings.mode,)


def _needed(mode: str, settings: ClassifySettings) -> int:
    """Detections needed: more than the free parameters (offset free in colours mode, A_V)."""
    return (2 if mode == "colours" else 1) + int(settings.extinction)


@dataclass
class _Fit:
    """What _rank_over computes for one band set."""

    columns: np.ndarray
    templates: np.ndarray
    marginal: object
    probability: np.ndarray
    model: np.ndarray
    probability_flat: np.ndarray | None = None   # the same with a flat type prior


def _fit(grid: TemplateGrid, obs: _Observations, mode: str, settings: ClassifySettings, columns, templates,
         ext):
    """Fit templates; probabilities include the type prior (sequence), ``probability_flat`` does not."""
    model = grid.magnitudes[np.ix_(templates, columns)]
    if mode == "distance":
        model = model + obs.mu
        prior = GaussianOffset(math.hypot(obs.mu_error if math.isfinite(obs.mu_error) else 0.0,
                                          settings.luminosity_scatter))
    else:
        absolute = grid.absolute[templates]
        lower = np.where(absolute, OFFSET_PRIOR_LOWER, np.nan)
        # no absolute scale: the same width, centred on the template's own median offset
        det = obs.detected[columns]
        free_centre = np.median(obs.mag[columns][det][None, :] - model[:, det], axis=1)
        lower = np.where(absolute, lower, free_centre - OFFSET_PRIOR_WIDTH / 2)
        prior = FlatOffset(lower, lower + OFFSET_PRIOR_WIDTH)
    kwargs = {}
    if not obs.detected[columns].all():
        kwargs.update(limit_flux=obs.limit_flux[columns], limit_noise=obs.limit_noise[columns],
                      zero_point=obs.zero_point[columns])
    if ext is not None:
        nodes, weights = av_prior_grid(settings.av_max, settings.av_steps)
        kwargs.update(extinction_coeff=ext[columns], av_nodes=nodes, av_weights=weights)
    sigma = np.where(obs.detected[columns], obs.sigma[columns], 1.0)
    scatter = settings.template_scatter
    if mode == "colours" and grid.kind == "sequence" and "row_residuals" in grid.extra:
        scatter = sequence_colour_scatter(grid, templates, columns, settings.template_scatter)
    marginal = offset_marginal(model, obs.mag[columns], sigma, obs.detected[columns],
                               scatter, prior, **kwargs)
    if mode == "colours" and grid.kind == "sequence" and settings.colour_scatter_range is not None:
        # the template scatter an unknown of the object: a scale mixture (see COLOUR_SCATTER_RANGE)
        ln_zs = []
        for s in colour_scatter_nodes(settings.colour_scatter_range):
            sc = (sequence_colour_scatter(grid, templates, columns, s) if "row_residuals" in grid.extra else s)
            ln_zs.append(offset_marginal(model, obs.mag[columns], sigma, obs.detected[columns],
                                         sc, prior, **kwargs).ln_evidence)
        with np.errstate(divide="ignore"):
            mixed = logsumexp(np.stack(ln_zs), axis=0) - math.log(len(ln_zs))
        marginal = dataclass_replace(marginal, ln_evidence=mixed)
    ln_z = marginal.ln_evidence
    if not np.any(np.isfinite(ln_z)):
        return None
    flat = np.exp(ln_z - logsumexp(ln_z))
    probability = flat
    if grid.kind == "sequence" and settings.type_prior.name != "flat" and mode in settings.type_prior_modes:
        with np.errstate(divide="ignore"):
            ln_post = ln_z + np.log(settings.type_prior.weights(grid.type_code[templates]))
        if not np.any(np.isfinite(ln_post)):
            return None
        probability = np.exp(ln_post - logsumexp(ln_post))
    fitted = model + marginal.offset[:, None]
    if ext is not None:
        fitted = fitted + marginal.av[:, None] * ext[columns][None, :]
    return _Fit(np.asarray(columns), np.asarray(templates), marginal, probability, fitted, flat)


#: Half-width [subtypes] of the window of sequence rows whose leave-one-out residuals give the
#: sequence's own colour uncertainty at a type (:func:`sequence_colour_scatter`; 2 subtypes: a
#: choice, common practice, no source - five rows where the rows are whole subtypes, nine where half).
SEQUENCE_SCATTER_WINDOW = 2.0


def colour_scatter_nodes(scatter_range) -> np.ndarray:
    """Per-band template scatters [mag] of the colours-only scale mixture: :data:`COLOUR_SCATTER_NODES`
    midpoints of equal steps in ln sigma over ``scatter_range`` (low, high), equal weights (log-uniform prior)."""
    lo, hi = (float(v) for v in scatter_range)
    if hi == lo:
        return np.array([lo])
    edges = np.linspace(math.log(lo), math.log(hi), COLOUR_SCATTER_NODES + 1)
    return np.exp(0.5 * (edges[1:] + edges[:-1]))


def sequence_colour_scatter(grid: TemplateGrid, templates, columns, template_scatter: float) -> np.ndarray:
    """Per-template, per-band template scatter of the colours-only mode, ndarray[n_templates, n_bands] [mag].

    The template scatter (``template_scatter``, the colours of individual
    dwarfs about the mean) plus, in quadrature, the uncertainty of the mean
    sequence itself at that type, measured from the sequence's own rows
    (Notes). Only differences between bands matter with the offset free, so
    only that part of the rows' residuals is counted.

    Notes
    -----
    For each row the leave-one-out residuals r_b (the tabulated value minus
    the interpolant through the other rows, :meth:`DwarfSequence.interpolation_residuals`)
    in the n bands used, minus their mean over those bands (the part a common
    offset absorbs), give d_b. For a template at type t, the rows within
    :data:`SEQUENCE_SCATTER_WINDOW` subtypes of t that have all n residuals
    give s_b^2 = mean(d_b^2) * n / (n - 1) / 1.5: the factor n / (n - 1)
    undoes the mean subtraction, 1/1.5 the interpolation error of the
    left-out row (for independent errors of the tabulated values and an
    interpolant that is locally the average of the two neighbours, the
    residual has 1 + 1/4 + 1/4 = 1.5 times their variance; PCHIP is close to
    that for smooth slopes). Where the rows are smooth (J, H, Ks of G-M dwarfs,
    s <~ 0.04 mag; L dwarfs up to ~0.09 mag) this changes little; where the
    tabulated J, H, K means jitter from row to row (T dwarfs: H - Ks changes
    by up to 0.6 mag between neighbouring rows, the source's M_J and M_Ks
    being tabulated separately from its colours) the template is uncertain
    by that much, and the likelihood says so instead of reading the jitter
    as information. With fewer than two bands, or no row in the window,
    nothing is added.
    """
    base = float(template_scatter)
    cols = np.asarray(columns)
    t = grid.type_code[np.asarray(templates)]
    out = np.full((t.size, cols.size), base)
    row_codes, residuals = grid.extra["row_residuals"]
    residuals = np.asarray(residuals)[:, cols]
    rows = np.all(np.isfinite(residuals), axis=1)
    n = cols.size
    if n < 2 or not rows.any():
        return out
    d = residuals[rows] - residuals[rows].mean(axis=1, keepdims=True)
    d2 = d**2 * n / (n - 1) / 1.5                                    # [n_rows, n_bands]
    codes = np.asarray(row_codes)[rows]
    near = np.abs(t[:, None] - codes[None, :]) <= SEQUENCE_SCATTER_WINDOW + 1e-9   # [n_t, n_rows]
    count = near.sum(axis=1)
    var = (near.astype(float) @ d2) / np.maximum(count, 1)[:, None]
    return np.sqrt(base**2 + np.where(count[:, None] > 0, var, 0.0))


def _rank(grid: TemplateGrid, obs: _Observations, mode: str, settings: ClassifySettings, ext,
          notes: list) -> Ranking | None:
    """One ranking of one source in one mode, or None (with a note) when impossible."""
    eligible = np.flatnonzero(grid.absolute) if mode == "distance" else np.arange(grid.n_templates)
    if eligible.size == 0:
        return None
    covered = grid.covered[eligible]
    any_cov = covered.any(axis=0)
    if not any_cov.any():
        notes.append(f"{grid.source}: covers none of the observed bands")
        return None
    full = np.flatnonzero(any_cov)
    shared = np.flatnonzero(covered.all(axis=0))
    need = _needed(mode, settings)
    names = np.array(obs.names)
    own_notes = []
    covers_full = covered[:, full].all(axis=1)
    columns, templates = full, eligible[covers_full]
    if not covers_full.all():
        extra = [n for n in names[full] if n not in names[shared]]
        first = (_fit(grid, obs, mode, settings, shared, eligible, ext)
                 if obs.detected[shared].sum() >= need else None)
        if first is not None:
            lost = float(first.probability[~covers_full].sum())
            if lost > EXCLUSION_TOLERANCE:
                columns, templates = shared, eligible
                own_notes.append(
                    f"band(s) {', '.join(extra)} not used: templates that do not cover them carry "
                    f"{lost:.0%} of the probability from the bands all templates share")
            else:
                own_notes.append(
                    f"{(~covers_full).sum()} templates ({_span(grid, eligible[~covers_full])}) left out: no "
                    f"value in {', '.join(extra)}; from the shared bands they had {lost:.1%} of the probability")
        else:
            own_notes.append(
                f"{(~covers_full).sum()} templates ({_span(grid, eligible[~covers_full])}) left out: no value "
                f"in {', '.join(extra)}")
    n_det = int(obs.detected[columns].sum())
    if templates.size == 0 or n_det < need:
        notes.append(f"{grid.source}, {mode} mode: not ranked ({n_det} detection(s) in the covered bands "
                     f"{', '.join(names[columns])}; {need} needed)")
        return None
    fit = _fit(grid, obs, mode, settings, columns, templates, ext)
    if fit is None:
        notes.append(f"{grid.source}, {mode} mode: no template has a finite likelihood")
        return None
    dof = n_det - (1 if mode == "colours" else 0) - int(ext is not None)
    if mode == "colours" and grid.kind == "sequence" and "row_residuals" in grid.extra:
        total = sequence_colour_scatter(grid, templates, columns, settings.template_scatter)
        extra = np.sqrt(np.clip(total**2 - settings.template_scatter**2, 0.0, None))
        i, j = np.unravel_index(int(np.argmax(extra)), extra.shape)
        rng = settings.colour_scatter_range
        per_band = (f"{settings.template_scatter:g} mag per band" if rng is None else
                    f"per band an unknown of the object, log-uniform on {rng[0]:g}-{rng[1]:g} mag and marginalised "
                    f"(a scale mixture; chi2 and fit quality at {settings.template_scatter:g} mag)")
        own_notes.append(
            f"template scatter of the colours-only mode: {per_band}, plus, in "
            "quadrature, the mean sequence's own uncertainty measured from its rows (leave-one-out, "
            f"sequence_colour_scatter): at most {extra[i, j]:.2f} mag ({names[columns][j]} at "
            f"{type_label(grid.type_code[templates][i])}), median {np.median(extra):.3f} mag")
    rows, arrays = build_rows(grid, fit, obs, mode, dof)
    unused = tuple(n for i, n in enumerate(obs.names) if i not in set(columns.tolist()))
    return Ranking(
        source=grid.source, kind=grid.kind, mode=mode, bands=tuple(names[columns]),
        template_bands=tuple(np.array(grid.template_bands)[columns]), unused_bands=unused,
        rows=rows, grid=arrays, labels=tuple(grid.labels[i] for i in templates), dof=dof,
        notes=tuple(own_notes), extra={k: v[templates] if isinstance(v, np.ndarray) and v.ndim else v
                                       for k, v in grid.extra.items()},
    )


def _span(grid: TemplateGrid, idx) -> str:
    codes = grid.type_code[idx]
    if np.all(np.isfinite(codes)) and codes.size:
        return f"{type_label(codes.min())}-{type_label(codes.max())}" if codes.size > 1 else type_label(codes[0])
    return ", ".join(grid.labels[i] for i in idx[:3]) + (" ..." if len(idx) > 3 else "")


def classify(photometry, settings: ClassifySettings | None = None, library=None,
             boundness=False) -> Classification:
    """Rank spectral types (and Teff) of a companion from its photometry.

    Parameters
    ----------
    photometry : CalibratedPhotometry
        From :func:`motes.photometry.calibrate`.
    settings : ClassifySettings, optional
    library : SpectralLibrary, optional
        A user library (:func:`motes.companion.read_library`).
    boundness : bool, BoundnessSettings or dict, optional
        Also run the photometric boundness test ("is it bound?",
        :func:`motes.companion.boundness.photometric_boundness`), as
        ``motes classify`` does: ``True`` with the default
        :class:`~motes.companion.BoundnessSettings`, or those settings (a dict
        is read as a ``[boundness]`` table). It needs the host's distance.
        Default False (it takes a few seconds): the result's ``boundness`` is
        then None and the printed report says how to run it.

    Returns
    -------
    Classification

    Raises
    ------
    FitError
        All bands are upper limits; too few detections for any ranking; no
        template covers any band; a distance-known mode without a distance.
    InputError
        Malformed photometry or a mapping naming an unknown band.

    Notes
    -----
    See the module notes and :mod:`motes.companion.likelihood` for the
    likelihood, priors and band-set rules.
    """
    settings = settings or ClassifySettings()
    obs = _observations(photometry)
    modes = _modes(settings, obs)
    mapping = dict(settings.band_map)
    for observed in mapping:
        if observed not in obs.names:
            raise InputError(f"band mapping names {observed!r}, which is not in the photometry "
                             f"({', '.join(obs.names)})")
    notes: list[str] = []
    flags: list[str] = mapping_pivot_warnings(obs.bands, mapping)
    ext = None
    if settings.extinction:
        ext = extinction_coefficients(obs.bands, settings.extinction_law, settings.rv)
        notes.append(f"extinction fitted: {settings.extinction_law} law, R_V = {settings.rv:g}, A_V uniform "
                     f"on [0, {settings.av_max:g}] mag ({settings.av_steps} nodes)")
    grids = []
    if settings.use_sequence:
        sequence = (read_dwarf_sequence_file(settings.sequence_file) if settings.sequence_file
                    else load_dwarf_sequence())
        grids.append(sequence.grid(obs.bands, mapping, step=settings.type_step, code_range=settings.type_range))
        _check_prior(settings.type_prior, grids[-1])
        if settings.type_prior.name != "flat":
            used = " and ".join("colours-only" if m == "colours" else "distance-known"
                                for m in settings.type_prior_modes)
            flat = [m for m in ("distance", "colours") if m not in settings.type_prior_modes]
            notes.append(settings.type_prior.describe() + f" - in the {used} mode"
                         + (f"; the {'distance-known' if flat == ['distance'] else 'colours-only'} mode "
                            "takes a flat prior (type_prior_modes)" if flat else ""))
        else:
            notes.append(settings.type_prior.describe())
        # what to cite for the sequence (its CITE section, or a request to cite a file that has none) is
        # listed once, by motes.report.run_citations.classification_citations, not repeated in the notes
    if library is not None:
        grids.append(library.grid(obs.bands, mapping))
    rankings = []
    for grid in grids:
        notes.extend(grid.notes)
        for mode in modes:
            ranking = _rank(grid, obs, mode, settings, ext, notes)
            if ranking is not None:
                rankings.append(ranking)
    used = {b for r in rankings for b in r.bands}
    uncovered = [n for n in obs.names if n not in used]
    blackbody_used = False
    if settings.blackbody == "always" or (settings.blackbody == "auto" and (uncovered or not rankings)):
        bb = BlackbodySet(radius_rjup=settings.blackbody_radius_rjup).grid(obs.bands)
        bb_modes = modes if settings.blackbody_radius_rjup is not None else ("colours",)
        for mode in bb_modes:
            ranking = _rank(bb, obs, mode, settings, ext, notes)
            if ranking is not None:
                rankings.append(ranking)
                blackbody_used = True
        if blackbody_used:
            why = (f"band(s) {', '.join(uncovered)} are used by no other template" if uncovered
                   else "requested" if settings.blackbody == "always" else "no other template could be ranked")
            notes.append(f"blackbody fallback used ({why}); blackbodies give a colour temperature, not a type"
                         + ("" if settings.blackbody_radius_rjup is not None
                            else ", and with no radius given they are colours-only"))
    if uncovered and not blackbody_used:
        notes.append(f"band(s) {', '.join(uncovered)} used by no ranking")
    if not rankings:
        raise FitError(
            "no ranking possible: " + ("; ".join(notes) if notes else "no template covers the observed bands")
            + ". Map instrument bands to standard ones (band_map / --treat-as), add a spectral library, "
            "or allow blackbodies"
        )
    estimates = tuple(e for e in (_estimate(r, settings, sequence if settings.use_sequence else None, obs)
                                  for r in rankings) if e is not None)
    headline = _headline(rankings, estimates)
    check = None
    colour_rank = next((r for r in rankings if r.mode == "colours" and r.kind == "sequence"), None) \
        or next((r for r in rankings if r.mode == "colours" and r.kind == "library"
                 and np.all(np.isfinite(r.grid["distance_pc"]))), None)
    if colour_rank is not None and math.isfinite(obs.mu):
        check = distance_check(colour_rank, obs.mu, obs.mu_error, obs.distance_pc, settings)
        if not check.consistent:
            flags.append(check.message)
    for r in rankings:
        if r.kind == "blackbody":
            continue
        chi2 = float(np.nanmin(r.grid["chi2"]))
        p = _chi2_p(chi2, r.dof)
        if p < FIT_P_THRESHOLD:
            flags.append(f"{r.source}, {r.mode} mode: no template fits (best chi2 = {chi2:.1f} for {r.dof} dof, "
                         f"p = {p:.1e}): its type is the least-bad template, not an answer - not a normal field "
                         "dwarf? (youth, binarity, extinction, a background star, or a photometry problem)"
                         + ("; rows on the other J/H/K system were not compared (see notes): if it is not a "
                            "T9.5-Y dwarf, map the bands to the 2MASS ones (--treat-as mko_j=2mass_j,...)"
                            if any("system only and are not compared" in n for n in notes) else ""))
    for e in estimates:
        if len(e.peaks) > 1:
            flags.append(f"{e.source}, {_MODE_WORDS[e.mode]}: the posterior has {len(e.peaks)} separate peaks "
                         f"({'; '.join(pk.label for pk in e.peaks)}); " + _separating_text(e))
    if headline is not None and headline.at_range_edge:
        flags.append(f"the type estimate reaches the end of the template range ({headline.source}): it may "
                     "be truncated")
    _mode_notes(notes, modes, obs, settings)
    approx = [r.band.name for r in photometry.rows if r.band.approximate]
    if approx:
        notes.append(f"approximate band(s) (top-hat/Gaussian): {', '.join(approx)}")
    result = Classification(
        target=getattr(photometry, "target", ""), modes=modes, rankings=tuple(rankings), estimate=headline,
        estimates=estimates, distance_check=check, blackbody_used=blackbody_used, flags=tuple(flags),
        notes=tuple(dict.fromkeys(notes)), caveats=CAVEATS, photometry=photometry, settings=settings,
    )
    if boundness is not None and boundness is not False:
        from .boundness import BoundnessSettings, with_boundness

        if boundness is True:
            boundness = BoundnessSettings()
        elif isinstance(boundness, dict):
            boundness = BoundnessSettings.from_mapping(boundness)
        elif not isinstance(boundness, BoundnessSettings):
            raise InputError(f"boundness must be True, False, a BoundnessSettings or a dict, got {boundness!r}",
                             where="boundness")
        if not math.isfinite(obs.mu):
            raise InputError("the photometric boundness test needs the host's distance (parallax_mas or "
                             "distance_pc in the target's [host]); leave boundness out without one",
                             where="boundness")
        result = with_boundness(result, boundness)
    return result


_MODE_WORDS = {"distance": "distance-known mode", "colours": "colours-only mode"}


def _check_prior(prior: TypePrior, grid: TemplateGrid) -> None:
    """Refuse a type prior that gives no template of the sequence grid any weight."""
    weights = prior.weights(grid.type_code)
    if not np.any(weights > 0):
        span = f"{type_label(grid.type_code.min())}-{type_label(grid.type_code.max())}"
        raise InputError(f"the type prior ({prior.describe()}) gives zero weight to every template of the "
                         f"sequence ({span}, after type_range): it excludes every template; give knots that "
                         "overlap the sequence's types with a positive weight", where="type_prior")


def _estimate(ranking, settings, sequence, obs):
    """Type estimate of a ranking with the settings' prior, the flat-prior one beside it, and the bands
    that would separate its peaks."""
    from dataclasses import replace

    prior = (settings.type_prior if ranking.kind == "sequence" and ranking.mode in settings.type_prior_modes
             else parse_type_prior("flat"))
    est = type_estimate(ranking, prior=prior.name, luminosity_scatter=settings.luminosity_scatter)
    if est is None:
        return None
    if ranking.kind == "sequence" and prior.name != "flat":
        flat = type_estimate(ranking, "probability_flat", "flat", settings.luminosity_scatter)
        est = replace(est, flat=flat)
    if len(est.peaks) > 1 and sequence is not None:
        est = replace(est, separating_bands=separating_bands(sequence, ranking, est, obs.mu))
    return est


def separating_bands(sequence, ranking, estimate, mu: float = math.nan, min_difference: float = 0.3):
    """Bands that would tell the two most probable peaks of a sequence posterior apart.

    For every band the sequence tabulates at both peaks' median types but the
    ranking did not use, the predicted apparent magnitude under each peak is
    M_band(type) + its best offset (the distance modulus in the colours-only
    mode; mu + delta in the distance-known mode), each peak taken at the
    template nearest its median. Returned when the two differ by at least
    ``min_difference`` mag (0.3 = three times the default template scatter).

    Returns
    -------
    tuple of (band name, difference [mag]), largest |difference| first
        difference = magnitude under the less probable peak - under the most probable.
    """
    from .sequence import SEQUENCE_BANDS

    first, second = sorted(estimate.peaks, key=lambda pk: -pk.probability)[:2]
    g = ranking.grid
    offsets = []
    for pk in (first, second):
        i = int(np.argmin(np.abs(g["type_code"] - pk.median)))
        offsets.append(float(g["offset"][i]) + (mu if ranking.mode == "distance" else 0.0))
    used = set(ranking.template_bands)
    out = []
    for band in SEQUENCE_BANDS:
        if band in used:
            continue
        m = sequence.absolute_magnitudes([first.median, second.median], [band])[:, 0]
        if np.all(np.isfinite(m)):
            diff = float((m[1] + offsets[1]) - (m[0] + offsets[0]))
            if abs(diff) >= min_difference:
                out.append((band, diff))
    out.sort(key=lambda t: -abs(t[1]))
    return tuple(out)


def _separating_text(estimate) -> str:
    if estimate.separating_bands:
        parts = ", ".join(f"{b} ({d:+.1f} mag)" for b, d in estimate.separating_bands[:4])
        return (f"a measurement in one of {parts} would separate the two most probable peaks (predicted "
                "magnitude of the second minus the first; the sequence has no L', M' or methane band - a "
                "spectral library through those bands can test them too)")
    return ("no band of the sequence separates them by >= 0.3 mag at both peaks' types (W1/W2 stop at T2, "
            "optical bands at L4-L8): an L', methane or visible measurement compared with a spectral library "
            "would")


def _headline(rankings, estimates):
    order = [("sequence", "distance"), ("sequence", "colours"), ("library", "distance"), ("library", "colours")]
    for kind, mode in order:
        for e in estimates:
            r = next((r for r in rankings if r.source == e.source and r.mode == e.mode), None)
            if r is not None and r.kind == kind and r.mode == mode:
                return e
    return None


def _chi2_p(chi2: float, dof: int) -> float:
    from scipy.stats import chi2 as chi2_dist

    if dof <= 0 or not math.isfinite(chi2):
        return 1.0
    return float(chi2_dist.sf(chi2, dof))


def _mode_notes(notes, modes, obs, settings):
    if "distance" in modes:
        notes.append(
            f"distance-known mode: host distance modulus {obs.mu:.3f} ± {obs.mu_error:.3f} mag; offset prior "
            f"N(0, {math.hypot(obs.mu_error, settings.luminosity_scatter):.3f} mag) = distance error and "
            f"{settings.luminosity_scatter:g} mag luminosity scatter in quadrature")
    if "colours" in modes:
        notes.append(
            f"colours-only mode: offset flat over {OFFSET_PRIOR_WIDTH:g} mag (distance modulus "
            f"{OFFSET_PRIOR_LOWER:g} to {OFFSET_PRIOR_LOWER + OFFSET_PRIOR_WIDTH:g} mag for absolutely "
            "calibrated templates)")
    rng = settings.colour_scatter_range
    mixed = "colours" in modes and rng is not None and settings.use_sequence
    notes.append(f"template scatter {settings.template_scatter:g} mag per band added to the observed errors"
                 + (f" (the dwarf sequence in the colours-only mode: marginalised over {rng[0]:g}-{rng[1]:g} mag, "
                    "see colour_scatter_range)" if mixed else ""))
