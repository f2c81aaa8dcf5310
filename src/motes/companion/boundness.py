"""Is it bound? The photometric test: at the host's distance, or anywhere along the line of sight.

Two hypotheses for the companion's photometry (detections and upper limits), both
evaluated with the templates of the dwarf sequence (type code t on a regular grid)
and the likelihood of :mod:`motes.companion.likelihood`:

``bound``
    at the host's distance d_h: magnitudes M_t + mu_h + A_V(d_h) k + delta, with
    delta ~ N(0, sigma_mu^2 + sigma_lum^2) (parallax error and the sequence's
    luminosity scatter; the distance-known mode of ``classify``);
``background`` (unrelated: behind or in front of the host)
    at any distance d along the line of sight, with prior density
    p(d) ∝ rho(d) d^2 on [D_MIN_PC, d_max] (stars in the cone of the companion's
    pixel) and the mean reddening A_V(d) of that sight line; delta ~ N(0, sigma_lum^2).

Both use the same type prior pi(t), the classification's (``ClassifySettings.type_prior``,
default the field population of :mod:`motes.companion.type_prior`), so that the Bayes factor measures what the photometry says about the distance, not a
difference of type priors::

    Z_bound = sum_t pi(t) L(m | t, d_h),    Z_bg = sum_t pi(t) sum_d w(d) L(m | t, d),
    B = Z_bound / Z_bg.

Distance priors
---------------
``galaxy`` (default when the Galactic coordinates are known): rho from the thin disk, thick
disk and halo of Jurić et al. 2008 (ApJ 673, 864, Table 10, from memory; see
:class:`GalacticModel`), normalised to 1 at the Sun, on [1 pc, 30 kpc].
``uniform`` (default without coordinates): rho = 1 out to ``distance_limit_pc`` (default
1 kpc, about three thin-disk scale heights). In a uniform prior B grows about as the cube of
the limit (the prior density at the distances that fit falls as 1/d_max^3): the output prints
B for half and twice the limit (for ``galaxy``: half and twice every scale height and length).

Reddening on the background reading
-----------------------------------
A_V(d) = a_V ∫_0^d exp(-|z_sun + s sin b| / h_dust) ds: a_V = :data:`AV_PER_KPC` in the
plane through a dust layer of scale height :data:`DUST_SCALE_HEIGHT_PC`; without
coordinates |b| = 30° (half the sky lies nearer the plane). The mean, not a spread: patchy
dust makes real sight lines differ by factors of 2 (common practice, no source). The law is
that of :mod:`motes.companion.extinction`.

Prior odds
----------
O = P(bound) / P(unrelated) before the photometry is looked at, from the expected number of
unrelated sources at least as bright as the companion within its separation rho:
N = pi rho^2 Sigma(<m), the chance of at least one such source p = 1 - exp(-N), and
O = (1 - p) / p. Sigma is the user's (the best choice: count a catalogue around the host)
or :func:`cumulative_surface_density`, the same Galactic model and field population counted
to the companion's magnitude (the test's templates only, G0-T9 for 2MASS bands: giants and earlier dwarfs are missing, so
at bright magnitudes it undercounts). P(bound) = B O / (1 + B O).

Verdict (one rule, printed with the result)
-------------------------------------------
``bound`` when B >= the threshold (:data:`motes.companion.motion.BAYES_FACTOR_THRESHOLD`,
the proper-motion test's, B = 150, "very strong" on the Kass & Raftery 1995 scale) and,
when the prior odds are known, P(bound) >= :data:`CONFIDENT_PROBABILITY`;
``background`` when B <= 1/threshold or P(bound) <= 1 - CONFIDENT_PROBABILITY;
``ambiguous`` otherwise. A large P(bound) that rests on the prior odds while the
photometry is not decisive is said so, and is not called bound.

One more condition guards ``bound``: the colours themselves must not prefer a place away from
the host. When the background reading (its most probable type and distance) puts the
companion elsewhere — its 68% distance interval clear of the host's — fits acceptably, and
fits better than every template at the host's distance by more than its one extra free
parameter (the distance) buys — chi2_bound - chi2_background > :data:`EXTRA_PARAMETER_CHI2` = 2,
the Akaike information criterion's penalty per parameter (Akaike 1974, IEEE Trans. Autom.
Control 19, 716) — the verdict is ``ambiguous`` however large B is. In that case B is large only because the line-of-sight prior
spreads its probability over a large volume (the prior density at any one distance is small,
and B grows as the cube of the limit), not because the photometry points to the host: in JHK
an early-M dwarf ten times farther than a nearby host and a late-M dwarf at the host have
nearly the same colours and magnitudes. Both readings are printed with the bands that would
separate them. The margin is the criterion's, not tuned to any case: smaller differences
(e.g. a mid-M dwarf at the host against a K dwarf seven times farther, chi2 1.7 against 0.9) are
what one extra free parameter buys by chance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import astropy.units as u
import numpy as np
from scipy.special import logsumexp
from scipy.stats import chi2 as chi2_dist

from ..errors import FitError, InputError
from ..parameters import BoundaryQuantity, accepts_quantities
from ..tomlcheck import check_keys
from .extinction import extinction_coefficients
from .galaxy import (
    AV_PER_KPC,
    D_MIN_PC,
    DEFAULT_B_DEG,
    DUST_SCALE_HEIGHT_PC,
    GalacticModel,
    _DISTANCE,
    _SKY,
    cumulative_surface_density,
    distance_prior_weights,
    extinction_along_sight,
    field_type_density,
    prior_odds,
)
from .likelihood import GaussianOffset, offset_marginal
from .motion import BAYES_FACTOR_THRESHOLD
from .results import QuantityEstimate
from .sequence import SEQUENCE_BANDS, load_dwarf_sequence, read_dwarf_sequence_file
from .spectral_types import type_label
from .summary_stats import weighted_quantiles

__all__ = [
    "BoundnessSettings",
    "Reading",
    "BoundnessTest",
    "CONFIDENT_PROBABILITY",
    "DEGENERATE_TYPE_DIFFERENCE",
    "EXTRA_PARAMETER_CHI2",
    "DISTANCE_PRIORS",
    "LEFT_OUT_Z",
    "photometric_boundness",
    "with_boundness",
]

#: P(bound) needed to call a companion bound (and 1 - it to call it unrelated).
CONFIDENT_PROBABILITY = 0.99
#: Readings this many subtypes apart that both fit are reported as a degeneracy.
DEGENERATE_TYPE_DIFFERENCE = 3.0
DISTANCE_PRIORS = ("auto", "galaxy", "uniform")
#: Fit acceptable: chi2 p-value above this (the level ``classify`` flags, 1e-3).
_FIT_P = 1e-3
#: Unobserved bands whose predictions differ by at least this much separate the readings [mag].
_SEPARATING_MAG = 0.3
#: A detected band left out of B contradicts a reading beyond this many sigma (common practice, no source:
#: large because the prediction is the reading's best template alone, without its type uncertainty).
LEFT_OUT_Z = 5.0
#: chi2 improvement that one extra free parameter buys by chance (the Akaike information criterion's
#: 2 per parameter; Akaike 1974): a background reading must fit better than this to veto ``bound``.
EXTRA_PARAMETER_CHI2 = 2.0


_SETTING_QUANTITIES = {
    "separation_mas": BoundaryQuantity(u.mas, "angular separation", u.arcsec),
    "galactic_l_deg": _SKY,
    "galactic_b_deg": _SKY,
    "distance_limit_pc": _DISTANCE,
    "dust_scale_height_pc": _DISTANCE,
    "source_density_arcsec2": BoundaryQuantity(u.arcsec**-2, "surface density", u.deg**-2),
}


@accepts_quantities(extra=_SETTING_QUANTITIES)
@dataclass(frozen=True)
class BoundnessSettings:
    """Choices of the photometric boundness test (TOML: a ``[boundness]`` table).

    Parameters
    ----------
    separation_mas : float [mas]
        Companion-host separation; needed for the prior odds (nan: B only).
    galactic_l_deg, galactic_b_deg : float [deg]
        Galactic coordinates of the host (the command line derives them from the
        target's ``ra_deg``/``dec_deg``).
    source_density_arcsec2 : float [arcsec^-2]
        Sigma(<m): sources per arcsec^2 at least as bright as the companion in
        ``count_band``; nan: the built-in counts model.
    count_band : str or None
        Band of the counts (default: the detected band nearest 2.2 µm).
    distance_prior : {"auto", "galaxy", "uniform"}
        ``auto`` = galaxy when the coordinates are known, else uniform.
    distance_limit_pc : float [pc]
        Far end of the line-of-sight prior (nan: 30 kpc for galaxy, 1 kpc for uniform).
    type_prior : str, mapping or None
        Weights of the types (both hypotheses); None: the classification's
        ``type_prior`` (default "field"); otherwise any value
        :func:`motes.companion.type_prior.parse_type_prior` reads.
    av_per_kpc : float [mag/kpc]
    dust_scale_height_pc : float [pc]
    distance_nodes : int
    type_step : float
    bayes_factor_threshold : float
    galaxy : GalacticModel
    """

    separation_mas: float = math.nan
    galactic_l_deg: float = math.nan
    galactic_b_deg: float = math.nan
    source_density_arcsec2: float = math.nan
    count_band: str | None = None
    distance_prior: str = "auto"
    distance_limit_pc: float = math.nan
    type_prior: object = None
    av_per_kpc: float = AV_PER_KPC
    dust_scale_height_pc: float = DUST_SCALE_HEIGHT_PC
    distance_nodes: int = 240
    type_step: float = 0.2
    bayes_factor_threshold: float = BAYES_FACTOR_THRESHOLD
    galaxy: GalacticModel = field(default_factory=GalacticModel)

    def __post_init__(self):
        if self.distance_prior not in DISTANCE_PRIORS:
            raise InputError(f"distance_prior must be one of {', '.join(DISTANCE_PRIORS)}, got {self.distance_prior!r}")
        if self.type_prior is not None:
            from .type_prior import parse_type_prior

            object.__setattr__(self, "type_prior", parse_type_prior(self.type_prior))
        for name, lo in (("separation_mas", 0.0), ("source_density_arcsec2", 0.0), ("distance_limit_pc", D_MIN_PC)):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and (math.isnan(v) or v > lo)):
                raise InputError(f"{name} must be a number > {lo:g} (or left out), got {v!r}")
        if not (isinstance(self.galactic_b_deg, (int, float)) and (math.isnan(self.galactic_b_deg)
                                                                    or -90 <= self.galactic_b_deg <= 90)):
            raise InputError(f"galactic_b_deg must be in [-90, 90], got {self.galactic_b_deg!r}")
        if math.isnan(self.galactic_l_deg) != math.isnan(self.galactic_b_deg):
            raise InputError("give both galactic_l_deg and galactic_b_deg, or neither")
        if self.distance_prior == "galaxy" and math.isnan(self.galactic_b_deg):
            raise InputError("distance_prior 'galaxy' needs the Galactic coordinates (galactic_l_deg, "
                             "galactic_b_deg, or ra_deg/dec_deg in the target's [host])")
        for name in ("av_per_kpc", "dust_scale_height_pc", "type_step", "bayes_factor_threshold"):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and math.isfinite(v) and v >= 0):
                raise InputError(f"{name} must be a number >= 0, got {v!r}")
        if not self.type_step > 0 or not self.bayes_factor_threshold > 1:
            raise InputError("type_step must be > 0 and bayes_factor_threshold > 1")
        if not (isinstance(self.distance_nodes, int) and self.distance_nodes >= 20):
            raise InputError(f"distance_nodes must be an integer >= 20, got {self.distance_nodes!r}")

    @property
    def prior_kind(self) -> str:
        """The distance prior actually used."""
        if self.distance_prior != "auto":
            return self.distance_prior
        return "uniform" if math.isnan(self.galactic_b_deg) else "galaxy"

    @property
    def limit_pc(self) -> float:
        """Far end of the line-of-sight prior [pc]."""
        if math.isfinite(self.distance_limit_pc):
            return float(self.distance_limit_pc)
        return 30000.0 if self.prior_kind == "galaxy" else 1000.0

    @classmethod
    def from_mapping(cls, doc: dict, path=None, target=None) -> "BoundnessSettings":
        """From a ``[boundness]`` table; ``separation_arcsec`` and ``source_density_deg2`` are accepted too.

        With ``target`` (a :class:`motes.photometry.Target`) whose ``[host]`` gives
        ``ra_deg``/``dec_deg``, the Galactic coordinates are taken from them
        when the table gives none (so that the Galactic distance prior is used).
        """
        allowed = {f.name for f in fields(cls)} - {"galaxy"} | {"separation_arcsec", "source_density_deg2"}
        check_keys(doc, allowed, path=path, where="[boundness]", noun="setting")
        doc = dict(doc)
        host = getattr(target, "host", None)
        if ("galactic_b_deg" not in doc and "galactic_l_deg" not in doc and host is not None
                and math.isfinite(getattr(host, "ra_deg", math.nan))
                and math.isfinite(getattr(host, "dec_deg", math.nan))):
            from astropy.coordinates import SkyCoord

            gal = SkyCoord(host.ra_deg * u.deg, host.dec_deg * u.deg, frame="icrs").galactic
            doc["galactic_l_deg"], doc["galactic_b_deg"] = float(gal.l.deg), float(gal.b.deg)
        try:
            for key, new_key, scale in (("separation_arcsec", "separation_mas", 1000.0),
                                        ("source_density_deg2", "source_density_arcsec2", 1.0 / 3600.0**2)):
                if key in doc:
                    value = doc.pop(key)
                    if not (isinstance(value, (int, float)) and not isinstance(value, bool)
                            and math.isfinite(value) and value > 0):
                        raise InputError(f"{key} must be a number > 0, got {value!r}")
                    doc[new_key] = float(value) * scale
            return cls(**doc)
        except InputError as exc:
            raise InputError(exc.reason, path, "[boundness]") from None
        except (TypeError, ValueError) as exc:
            raise InputError(f"bad setting: {exc}", path, "[boundness]") from None

    @classmethod
    def from_toml(cls, path, target=None) -> "BoundnessSettings":
        """The ``[boundness]`` table of a settings file (defaults when it has none); ``target`` as in
        :meth:`from_mapping`."""
        import tomllib
        from pathlib import Path

        try:
            doc = tomllib.loads(Path(path).read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"malformed TOML: {exc}", path) from None
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"cannot read settings: {exc}", path) from None
        return cls.from_mapping(doc.get("boundness", {}), path, target)


@dataclass(frozen=True)
class Reading:
    """One hypothesis of the test, summarised.

    Attributes
    ----------
    name : {"bound", "background"}
    ln_evidence : float
    type : QuantityEstimate
        Type code: median and 68% interval (16th-84th percentiles) of its posterior.
    best_type_code : float
        Type of the most probable template (and distance, for the background).
    distance : QuantityEstimate [pc]
        The host's for ``bound``; the posterior of the line-of-sight distance otherwise.
    best_distance : float [pc]
    av : float [mag]
        Mean A_V at ``best_distance``.
    chi2 : float
        Minimum chi2 of the reading (offset prior term included); ``dof`` its degrees of freedom.
    dof : int
    p_value : float
    """

    name: str
    ln_evidence: float
    type: QuantityEstimate
    best_type_code: float
    distance: QuantityEstimate
    best_distance: float
    av: float
    chi2: float
    dof: int
    p_value: float

    @property
    def fits(self) -> bool:
        """The best template's chi2 p-value is above 1e-3."""
        return self.p_value >= _FIT_P

    def describe(self) -> str:
        where = ("at the host's distance" if self.name == "bound"
                 else f"at {self.distance.format('.3g')}, A_V {self.av:.2f} mag at the best distance")
        return (f"{type_label(self.type.median)} (68%: {type_label(self.type.lower)}-{type_label(self.type.upper)}) "
                f"{where}; best chi2 {self.chi2:.1f} for {self.dof} dof (p = {self.p_value:.2g})")


@dataclass(frozen=True, eq=False)
class BoundnessTest:
    """Result of :func:`photometric_boundness`.

    Attributes
    ----------
    bound, background : Reading
    ln_bayes_factor : float
        ln B = ln Z_bound - ln Z_background.
    expected_number : float
        N = pi rho^2 Sigma(<m) (nan without a separation).
    surface_density : float [arcsec^-2]
        Sigma(<m) used; ``surface_density_source`` says whose.
    count_band, count_magnitude : str, float
    prior_odds : float
        O (nan without a separation).
    p_bound : float
        B O / (1 + B O) (nan without a separation).
    verdict : {"bound", "background", "ambiguous"}
    rule : str
    sensitivity : tuple of (str, float)
        (description of the alternative prior, ln B with it).
    degenerate : bool
        Both readings fit with types at least :data:`DEGENERATE_TYPE_DIFFERENCE` apart.
    separating_bands : tuple of (str, float, float)
        (band, predicted magnitude bound, background), largest difference first; bands
        not observed.
    bands : tuple of str
    notes, flags : tuple of str
    prior : str
        The distance prior, in words.
    settings : BoundnessSettings
    left_out_checks : tuple of (str, float, float, float, float, float, float)
        Detected sequence bands left out of B (some types have no value in them):
        (band, observed magnitude, error, predicted bound, predicted background,
        z bound, z background), predictions from each reading's most probable
        template; a reading contradicted by more than :data:`LEFT_OUT_Z` sigma
        (while the other is not) is flagged, the verdict is not changed.
    colours_prefer_background : bool
        The background reading lies away from the host (68% interval clear of the host's
        distance), fits, and fits better than any template at the host by more than
        :data:`EXTRA_PARAMETER_CHI2`: never ``bound``.
    """

    bound: Reading
    background: Reading
    ln_bayes_factor: float
    expected_number: float
    surface_density: float
    surface_density_source: str
    count_band: str
    count_magnitude: float
    prior_odds: float
    p_bound: float
    verdict: str
    rule: str
    sensitivity: tuple
    degenerate: bool
    separating_bands: tuple
    bands: tuple
    notes: tuple
    flags: tuple
    prior: str
    settings: object = field(repr=False, default=None)
    left_out_checks: tuple = ()
    colours_prefer_background: bool = False

    @property
    def bayes_factor(self) -> float:
        """B (inf/0 when ln B overflows)."""
        return math.exp(min(self.ln_bayes_factor, 700.0)) if self.ln_bayes_factor > -700 else 0.0

    def to_table(self):
        """One row of numeric columns (with units) and the verdict; notes in ``meta``."""
        from astropy.table import Table

        b, g = self.bound, self.background
        row = {
            "verdict": [self.verdict], "ln_bayes_factor": [self.ln_bayes_factor],
            "log10_bayes_factor": [self.ln_bayes_factor / math.log(10)],
            "prior_odds": [self.prior_odds], "p_bound": [self.p_bound],
            "expected_number": [self.expected_number],
            "separation": [self.settings.separation_mas / 1000.0] * u.arcsec,
            "surface_density": [self.surface_density] * u.arcsec**-2,
            "count_band": [self.count_band], "count_magnitude": [self.count_magnitude] * u.mag,
            "galactic_l": [self.settings.galactic_l_deg] * u.deg,
            "galactic_b": [self.settings.galactic_b_deg] * u.deg,
            "distance_prior": [self.settings.prior_kind], "distance_limit": [self.settings.limit_pc] * u.pc,
        }
        for prefix, r in (("bound", b), ("background", g)):
            row.update({
                f"{prefix}_type_code": [r.type.median], f"{prefix}_type_code_lower": [r.type.lower],
                f"{prefix}_type_code_upper": [r.type.upper], f"{prefix}_type": [type_label(r.type.median)],
                f"{prefix}_best_type_code": [r.best_type_code],
                f"{prefix}_distance": [r.distance.median] * u.pc,
                f"{prefix}_distance_lower": [r.distance.lower] * u.pc,
                f"{prefix}_distance_upper": [r.distance.upper] * u.pc,
                f"{prefix}_av": [r.av] * u.mag, f"{prefix}_chi2": [r.chi2], f"{prefix}_dof": [r.dof],
                f"{prefix}_p_value": [r.p_value], f"{prefix}_ln_evidence": [r.ln_evidence],
            })
        for i, (text, ln_b) in enumerate(self.sensitivity, 1):
            row[f"ln_bayes_factor_alt{i}"] = [ln_b]
        row["degenerate"] = [self.degenerate]
        row["colours_prefer_background"] = [self.colours_prefer_background]
        t = Table(row)
        t["ln_bayes_factor"].description = "ln Z(at the host's distance) - ln Z(anywhere on the line of sight)"
        t["p_bound"].description = "B O / (1 + B O); nan without a separation"
        t["expected_number"].description = "pi rho^2 Sigma(<m): unrelated sources expected within the separation"
        for i, (text, _) in enumerate(self.sensitivity, 1):
            t[f"ln_bayes_factor_alt{i}"].description = text
        t.meta.update({"rule": self.rule, "distance_prior": self.prior, "surface_density_source":
                       self.surface_density_source, "bands": list(self.bands),
                       "separating_bands": [f"{n}: {a:.2f} (bound) vs {c:.2f} (background)"
                                            for n, a, c in self.separating_bands],
                       "left_out_checks": [f"{n}: observed {m:.2f} +- {e:.2f}, bound {pb:.2f} ({zb:+.1f} sigma), "
                                           f"background {pg:.2f} ({zg:+.1f} sigma)"
                                           for n, m, e, pb, pg, zb, zg in self.left_out_checks],
                       "notes": list(self.notes), "flags": list(self.flags)})
        return t


# ----------------------------------------------------------------------- the test
def _observations(photometry):
    from .classify import _observations as observations   # one reading of the photometry

    return observations(photometry)


def _sequence(classify_settings):
    path = getattr(classify_settings, "sequence_file", None)
    return read_dwarf_sequence_file(path) if path else load_dwarf_sequence()


def _evidence(model, obs, cols, scatter, sigma_offset, ext_shift):
    """Marginal likelihood of every row of ``model`` [n, n_cols] (+ ext_shift [n, n_cols])."""
    det = obs.detected[cols]
    kwargs = {}
    if not det.all():
        kwargs.update(limit_flux=obs.limit_flux[cols], limit_noise=obs.limit_noise[cols],
                      zero_point=obs.zero_point[cols])
    sigma = np.where(det, obs.sigma[cols], 1.0)
    out_ln, out_chi2, out_off = [], [], []
    chunk = 4000 if det.all() else 800
    for start in range(0, model.shape[0], chunk):
        m = model[start:start + chunk] + ext_shift[start:start + chunk]
        r = offset_marginal(m, obs.mag[cols], sigma, det, scatter, GaussianOffset(sigma_offset), **kwargs)
        out_ln.append(r.ln_evidence)
        out_chi2.append(r.chi2)
        out_off.append(r.offset)
    return np.concatenate(out_ln), np.concatenate(out_chi2), np.concatenate(out_off)


def _quantiles(values, weights, half_width=0.0, log=False):
    v = np.log(values) if log else values
    q = weighted_quantiles(v, weights, (0.5, 0.16, 0.84), half_width)
    return np.exp(q) if log else q


def photometric_boundness(photometry, settings: BoundnessSettings | None = None,
                          classify_settings=None) -> BoundnessTest:
    """Bayes factor of "at the host's distance" against "anywhere along the line of sight".

    Parameters
    ----------
    photometry : CalibratedPhotometry
        With the host's distance.
    settings : BoundnessSettings, optional
    classify_settings : ClassifySettings, optional
        Band mappings, template and luminosity scatter, type range, extinction law and R_V,
        and a user sequence file are taken from it (defaults otherwise).

    Returns
    -------
    BoundnessTest

    Raises
    ------
    FitError
        No host distance; no band the sequence covers; fewer than one detection.

    Notes
    -----
    See the module notes for the hypotheses, priors, odds and the verdict rule.
    """
    from .classify import ClassifySettings

    settings = settings or BoundnessSettings()
    cs = classify_settings or ClassifySettings()
    obs = _observations(photometry)
    if not math.isfinite(obs.mu):
        raise FitError("the boundness test needs the host's distance (parallax or distance in the target)")
    mapping = dict(cs.band_map)
    seq = _sequence(cs)
    grid = seq.grid(obs.bands, mapping, step=settings.type_step, code_range=cs.type_range)
    from .type_prior import parse_type_prior

    type_prior = parse_type_prior(settings.type_prior if settings.type_prior is not None
                                  else getattr(cs, "type_prior", "field"))
    keep_t = np.isfinite(grid.type_code) & (type_prior.weights(grid.type_code) > 0)
    if not keep_t.any():
        raise InputError("the type prior excludes every template of the sequence")
    covered = grid.covered[keep_t]
    shared = np.flatnonzero(covered.all(axis=0))
    full = np.flatnonzero(covered.any(axis=0))
    notes = []
    if shared.size == 0 or not obs.detected[shared].any():
        raise FitError("the boundness test needs at least one detected band that the dwarf sequence covers "
                       "for every type (map instrument bands with band_map / --treat-as)")
    cols = shared
    if full.size > shared.size:
        # as classify does: use every covered band and drop the templates that miss one, unless those
        # templates carry more than EXCLUSION_TOLERANCE of the bound reading's probability from the
        # shared bands
        from .classify import EXCLUSION_TOLERANCE

        ok_full = covered[:, full].all(axis=1)
        pi0 = type_prior.weights(grid.type_code[keep_t])
        ln_l0, _, _ = _evidence(grid.magnitudes[keep_t][:, shared] + obs.mu, obs, shared, cs.template_scatter,
                                math.hypot(obs.mu_error if math.isfinite(obs.mu_error) else 0.0,
                                           cs.luminosity_scatter), np.zeros((ok_full.size, shared.size)))
        w0 = np.log(pi0) + ln_l0
        lost = float(np.exp(logsumexp(w0[~ok_full]) - logsumexp(w0))) if (~ok_full).any() else 0.0
        extra = [obs.names[i] for i in full if i not in set(shared.tolist())]
        if lost <= EXCLUSION_TOLERANCE and ok_full.any():
            cols = full
            idx = np.flatnonzero(keep_t)
            keep_t = np.zeros_like(keep_t)
            keep_t[idx[ok_full]] = True
            dropped = grid.type_code[idx[~ok_full]]
            notes.append(f"types {type_label(dropped.min())}-{type_label(dropped.max())} left out of the boundness "
                         f"test (no value in {', '.join(extra)}; {lost:.1%} of the bound reading's probability "
                         "from the shared bands)")
        else:
            notes.append(f"band(s) {', '.join(extra)} not used by the boundness test: the types that lack them "
                         f"carry {lost:.0%} of the bound reading's probability, and evidences over different "
                         "bands cannot be compared (each reading is checked against them instead)")
    unused = [obs.names[i] for i in range(len(obs.names)) if i not in set(cols.tolist())]
    if unused:
        notes.append(f"band(s) {', '.join(unused)} not used by the boundness test (no sequence value)"
                     if not any("not used by the boundness" in n for n in notes) else
                     f"observed band(s) not used by the boundness test: {', '.join(unused)}")
    codes = grid.type_code[keep_t]
    absmag = grid.magnitudes[keep_t][:, cols]
    step = settings.type_step
    pi_t = type_prior.weights(codes)
    ln_pi = np.log(pi_t / pi_t.sum())
    n_t, n_b = absmag.shape
    bands = tuple(obs.bands[i] for i in cols)
    k = extinction_coefficients(bands, cs.extinction_law, cs.rv)
    kind = settings.prior_kind
    limit = settings.limit_pc
    l_deg = settings.galactic_l_deg if math.isfinite(settings.galactic_l_deg) else 90.0
    b_deg = settings.galactic_b_deg if math.isfinite(settings.galactic_b_deg) else DEFAULT_B_DEG
    z_sun = settings.galaxy.z_sun_pc if kind == "galaxy" else 0.0

    def av_of(d):
        return extinction_along_sight(d, b_deg, settings.av_per_kpc, settings.dust_scale_height_pc, z_sun)

    # bound: at the host's distance
    d_host = obs.distance_pc
    mu_err = obs.mu_error if math.isfinite(obs.mu_error) else 0.0
    av_host = float(av_of(d_host))
    ln_l_b, chi2_b, off_b = _evidence(absmag + obs.mu, obs, cols, cs.template_scatter,
                                      math.hypot(mu_err, cs.luminosity_scatter),
                                      np.broadcast_to(av_host * k, (n_t, n_b)))
    ln_post_b = ln_pi + ln_l_b
    ln_z_b = float(logsumexp(ln_post_b))
    # background: every distance node (out to twice the limit, for the sensitivity)
    d = np.geomspace(D_MIN_PC, 2.0 * limit, settings.distance_nodes)
    mu_d = 5.0 * np.log10(d / 10.0)
    av_d = av_of(d)
    model = (absmag[:, None, :] + mu_d[None, :, None]).reshape(-1, n_b)
    shift = np.broadcast_to((av_d[:, None] * k[None, :])[None, :, :], (n_t, d.size, n_b)).reshape(-1, n_b)
    ln_l, chi2_g, off_g = _evidence(model, obs, cols, cs.template_scatter, cs.luminosity_scatter, shift)
    ln_l = ln_l.reshape(n_t, d.size)
    chi2_g = chi2_g.reshape(n_t, d.size)

    def ln_z_background(kind_, limit_, galaxy_):
        w = distance_prior_weights(d, kind_, limit=limit_, l_deg=l_deg, b_deg=b_deg, galaxy=galaxy_)
        with np.errstate(divide="ignore"):
            joint = ln_pi[:, None] + np.log(w)[None, :] + ln_l
        return float(logsumexp(joint)), joint

    ln_z_g, joint = ln_z_background(kind, limit, settings.galaxy)
    ln_b = ln_z_b - ln_z_g
    if kind == "uniform":
        variants = [(f"uniform in volume out to {f * limit:.4g} pc", kind, f * limit, settings.galaxy)
                    for f in (0.5, 2.0)]
    else:
        variants = [(f"Galactic model with every scale height and length x{f:g}", kind, limit,
                     settings.galaxy.scaled(f)) for f in (0.5, 2.0)]
    sensitivity = tuple((text, ln_z_b - ln_z_background(kd, lim, gal)[0]) for text, kd, lim, gal in variants)
    # readings
    n_det = int(obs.detected[cols].sum())
    p_b = np.exp(ln_post_b - ln_z_b)
    ib = int(np.argmax(p_b))
    tb = _quantiles(codes, p_b, 0.5 * step)
    d_err = float(getattr(photometry, "distance_pc_error", math.nan))
    d_err = d_err if math.isfinite(d_err) else 0.0
    host_q = QuantityEstimate(d_host, d_host - d_err, d_host + d_err, "pc")
    chi2_best_b = float(np.min(chi2_b))
    bound = Reading("bound", ln_z_b, QuantityEstimate(*map(float, tb)), float(codes[ib]), host_q, d_host, av_host,
                    chi2_best_b, n_det, _sf(chi2_best_b, n_det))
    p_g = np.exp(joint - ln_z_g)
    it, jd = np.unravel_index(int(np.argmax(p_g)), p_g.shape)
    tg = _quantiles(codes, p_g.sum(axis=1), 0.5 * step)
    dg = _quantiles(d, p_g.sum(axis=0), log=True)
    chi2_best_g = float(chi2_g[it, jd])   # at the most probable (type, distance), not the global minimum
    dof_g = max(n_det - 1, 1)
    background = Reading("background", ln_z_g, QuantityEstimate(*map(float, tg)), float(codes[it]),
                         QuantityEstimate(*map(float, dg), "pc"), float(d[jd]), float(av_d[jd]), chi2_best_g, dof_g,
                         _sf(chi2_best_g, dof_g))
    # prior odds
    count_band, count_mag, sigma, sigma_source = _counts(obs, cols, codes, absmag, k, pi_t, step, settings, kind,
                                                         limit, l_deg, b_deg)
    n_exp = math.nan
    odds = p_bound = math.nan
    if math.isfinite(settings.separation_mas) and math.isfinite(sigma):
        n_exp = math.pi * (settings.separation_mas / 1000.0) ** 2 * sigma
        odds = prior_odds(n_exp) if n_exp > 0 else math.inf
        bo = ln_b + math.log(odds) if odds > 0 else -math.inf
        p_bound = 1.0 / (1.0 + math.exp(-bo)) if bo > -700 else 0.0
    thr = settings.bayes_factor_threshold
    ln_thr = math.log(thr)
    known = math.isfinite(p_bound)
    elsewhere = background.distance.lower > d_host + d_err or background.distance.upper < d_host - d_err
    prefer_bg = bool(elsewhere and background.fits and bound.chi2 - background.chi2 > EXTRA_PARAMETER_CHI2)
    if ln_b <= -ln_thr or (known and p_bound <= 1.0 - CONFIDENT_PROBABILITY):
        verdict = "background"
    elif ln_b >= ln_thr and (not known or p_bound >= CONFIDENT_PROBABILITY) and not prefer_bg:
        verdict = "bound"
    else:
        verdict = "ambiguous"
    rule = (f"bound if B >= {thr:g}" + (f" and P(bound) >= {CONFIDENT_PROBABILITY:g}" if known else "")
            + f", unless a background reading away from the host fits better than every template at the host's "
              f"distance by chi2 > {EXTRA_PARAMETER_CHI2:g} (one extra free parameter, Akaike's criterion)"
            + f"; background if B <= 1/{thr:g}" + (f" or P(bound) <= {1 - CONFIDENT_PROBABILITY:.2g}" if known else "")
            + "; ambiguous otherwise")
    degenerate = bool(bound.fits and background.fits
                      and abs(bound.type.median - background.type.median) >= DEGENERATE_TYPE_DIFFERENCE)
    off_best_g = float(off_g.reshape(n_t, d.size)[it, jd])
    separating = _separating_bands(seq, obs, cols, mapping, cs, bound, background, off_b[ib], off_best_g, b_deg)
    left_out = _left_out_checks(seq, obs, cols, mapping, cs, bound, background, float(off_b[ib]), off_best_g)
    prior_text = (f"Galactic thin + thick disk + halo (Jurić et al. 2008), l = {l_deg:.1f}°, b = {b_deg:.1f}°, "
                  f"out to {limit:.4g} pc" if kind == "galaxy"
                  else f"uniform in volume out to {limit:.4g} pc (no Galactic coordinates)"
                  if math.isnan(settings.galactic_b_deg) else f"uniform in volume out to {limit:.4g} pc")
    notes.append(f"line-of-sight prior: {prior_text}; reddening {settings.av_per_kpc:g} mag/kpc in the plane, dust "
                 f"scale height {settings.dust_scale_height_pc:g} pc, at |b| = {abs(b_deg):.0f}°"
                 + (" (assumed: no coordinates)" if math.isnan(settings.galactic_b_deg) else "")
                 + f"; the classification's type prior ({_prior_label(type_prior)}) on both readings")
    if kind == "uniform":
        notes.append("with a uniform-in-volume prior B grows about as the cube of the distance limit (B for "
                     "half and twice the limit are printed)")
    flags = _flags(verdict, ln_b, p_bound, known, bound, background, degenerate, separating, thr,
                   prefer_bg and ln_b >= ln_thr)
    flags.extend(_left_out_flags(left_out))
    return BoundnessTest(bound, background, ln_b, n_exp, sigma, sigma_source, count_band, count_mag, odds, p_bound,
                         verdict, rule, sensitivity, degenerate, tuple(separating), tuple(obs.names[i] for i in cols),
                         tuple(notes), tuple(flags), prior_text, settings, tuple(left_out), prefer_bg)


def _left_out_flags(left_out) -> list[str]:
    """A flag for each reading that a band left out of B contradicts (|z| > LEFT_OUT_Z) while the other does not."""
    flags = []
    for name, m, s, app_b, app_g, z_b, z_g in left_out:
        for reading, z, z_other in (("background", z_g, z_b), ("bound", z_b, z_g)):
            if math.isfinite(z) and abs(z) > LEFT_OUT_Z and not (math.isfinite(z_other) and abs(z_other) > LEFT_OUT_Z):
                flags.append(f"photometric boundness: {name} ({m:.2f} ± {s:.2f}), left out of B because some types "
                             f"have no value in it, contradicts the {reading} reading's best template "
                             f"({(app_g if reading == 'background' else app_b):.2f}, {z:+.1f} sigma); the verdict "
                             "above rests on the shared bands only")
    return flags


def _sf(chi2: float, dof: int) -> float:
    return float(chi2_dist.sf(chi2, dof)) if dof > 0 and math.isfinite(chi2) else math.nan


def _fmt_b(ln_b: float) -> str:
    return f"{math.exp(ln_b):.3g}" if abs(ln_b) < 690 else f"10^{ln_b / math.log(10):.0f}"


def _counts(obs, cols, codes, absmag, k, pi_t, step, settings, kind, limit, l_deg, b_deg):
    """(band, companion magnitude, Sigma(<m) [arcsec^-2], whose) for the prior odds."""
    det_cols = [c for c in cols if obs.detected[c]]
    if settings.count_band is not None:
        match = [c for c in det_cols if obs.names[c] == settings.count_band]
        if not match:
            raise InputError(f"count_band {settings.count_band!r} is not a detected band of the test "
                             f"({', '.join(obs.names[c] for c in det_cols)})", where="[boundness]")
        col = match[0]
    else:
        col = min(det_cols, key=lambda c: abs(math.log(obs.bands[c].pivot_wavelength / 2.2)))
    j = list(cols).index(col)
    mag = float(obs.mag[col])
    if math.isfinite(settings.source_density_arcsec2):
        return obs.names[col], mag, float(settings.source_density_arcsec2), "given by the user"
    weights = field_type_density(codes) * step
    sigma = cumulative_surface_density(mag, absmag[:, j], weights, kind=kind, limit=limit, l_deg=l_deg, b_deg=b_deg,
                                       extinction_coeff=float(k[j]), av_per_kpc=settings.av_per_kpc,
                                       dust_scale_height_pc=settings.dust_scale_height_pc, galaxy=settings.galaxy)
    return (obs.names[col], mag, sigma,
            f"built-in counts model (field dwarfs {type_label(codes.min())}-{type_label(codes.max())}, the "
            "templates of the test, in the same Galactic model; giants and earlier types are "
            "missing, so it undercounts bright sources: give source_density for a paper)")


def _predicted(seq, name, cs, reading, offset, band=None):
    """Apparent magnitude in sequence band ``name`` of a reading's most probable template (nan if none)."""
    from ..errors import BandError
    from ..photometry.bands import get_band

    m = float(seq.value(name, reading.best_type_code))
    if not math.isfinite(m):
        return math.nan
    try:
        kk = float(extinction_coefficients([band if band is not None else get_band(name)], cs.extinction_law,
                                           cs.rv)[0])
    except (FitError, BandError, InputError):
        return math.nan
    return m + 5 * math.log10(reading.best_distance / 10) + offset + reading.av * kk


def _separating_bands(seq, obs, cols, mapping, cs, bound, background, off_b, off_g, b_deg):
    """Unobserved sequence bands in which the two best readings differ by >= _SEPARATING_MAG."""
    observed = {mapping.get(n, n) for n in obs.names}
    out = []
    for name in getattr(seq, "bands", SEQUENCE_BANDS):
        if name in observed:
            continue
        app_b = _predicted(seq, name, cs, bound, off_b)
        app_g = _predicted(seq, name, cs, background, off_g)
        if math.isfinite(app_b) and math.isfinite(app_g) and abs(app_b - app_g) >= _SEPARATING_MAG:
            out.append((name, app_b, app_g))
    out.sort(key=lambda x: -abs(x[1] - x[2]))
    return out


def _left_out_checks(seq, obs, cols, mapping, cs, bound, background, off_b, off_g):
    """Detected bands left out of B, against each reading's most probable template.

    A band that some types have no value in cannot enter the Bayes factor (evidences over different
    bands cannot be compared), but it can test each reading: (band, observed magnitude, its error,
    predicted bound, predicted background, z bound, z background), z = (observed - predicted) /
    sqrt(sigma^2 + template_scatter^2); nan where the reading's best template has no value.
    """
    in_b = set(int(c) for c in cols)
    out = []
    for i, name in enumerate(obs.names):
        if i in in_b or not obs.detected[i]:
            continue
        seq_name = mapping.get(name, name)
        if seq_name not in getattr(seq, "bands", SEQUENCE_BANDS):
            continue
        sigma = math.hypot(float(obs.sigma[i]), cs.template_scatter)
        app_b = _predicted(seq, seq_name, cs, bound, off_b, obs.bands[i])
        app_g = _predicted(seq, seq_name, cs, background, off_g, obs.bands[i])
        if not (math.isfinite(app_b) or math.isfinite(app_g)):
            continue
        m = float(obs.mag[i])
        out.append((name, m, float(obs.sigma[i]), app_b, app_g, (m - app_b) / sigma, (m - app_g) / sigma))
    return out


def _prior_label(type_prior) -> str:
    """A short name for the type prior (its full description is one of the classification's notes)."""
    if type_prior.name in ("field", "flat"):
        return f"'{type_prior.name}'"
    return "user knots"


def _flags(verdict, ln_b, p_bound, known, bound, background, degenerate, separating, thr, volume_only=False):
    flags = []
    b_text = f"B = {_fmt_b(ln_b)}"
    if verdict == "background":
        flags.append(f"photometric boundness: the photometry favours an unrelated object ({b_text}"
                     + (f", P(bound) = {p_bound:.3g}" if known else "") + f"): {background.describe()}")
    elif verdict == "ambiguous":
        why = (f"B is large only through the volume of the line-of-sight prior: the photometry fits better away "
               f"from the host (chi2 {background.chi2:.1f} as {type_label(background.best_type_code)} at "
               f"{background.best_distance:.3g} pc, against {bound.chi2:.1f} at the host's distance)"
               if volume_only else
               f"P(bound) = {p_bound:.3g} rests on the prior odds; the photometry alone is not decisive"
               if known and p_bound >= CONFIDENT_PROBABILITY else
               f"P(bound) = {p_bound:.3g}" if known else "no separation given, so no prior odds")
        flags.append(f"photometric boundness not decided ({b_text}, threshold {thr:g}; {why}): bound reading "
                     f"{bound.describe()}; background reading {background.describe()}")
    if degenerate and verdict != "bound":
        sep = ", ".join(f"{n} ({a:.1f} vs {c:.1f} mag)" for n, a, c in separating[:3])
        flags.append("both readings explain the photometry with very different types"
                     + (f"; {sep} would separate them" if sep else "")
                     + ("; a methane band (1.6 or 2.2 µm) marks a T dwarf" if max(bound.type.median,
                                                                                   background.type.median) >= 79.5
                        else "") + "; L′ (3.8 µm) or W1 also separate late-type from early-type dwarfs")
    return flags


def with_boundness(result, settings: BoundnessSettings | None = None):
    """The classification with the photometric boundness test added (its flags appended).

    Parameters
    ----------
    result : Classification
        From :func:`motes.companion.classify`, with the host's distance.
    settings : BoundnessSettings, optional

    Returns
    -------
    Classification
        A copy with ``boundness`` set.
    """
    import dataclasses

    test = photometric_boundness(result.photometry, settings, result.settings)
    return dataclasses.replace(result, boundness=test, flags=tuple(result.flags) + tuple(test.flags))
