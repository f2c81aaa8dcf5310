"""Result records of :func:`motes.companion.classify` (frozen dataclasses).

A :class:`Classification` holds one :class:`Ranking` per (template source,
mode) that could be computed, a continuous :class:`TypeEstimate`, a
:class:`DistanceCheck` when both modes ran, and the notes and caveats that
must travel with the numbers. :meth:`Classification.to_table` gives the
rankings as one astropy Table (written as ECSV by the command line).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .. import __version__
from .spectral_types import type_label

__all__ = [
    "RankedTemplate",
    "Ranking",
    "TypeEstimate",
    "QuantityEstimate",
    "TypePeak",
    "DistanceCheck",
    "Classification",
]


@dataclass(frozen=True)
class RankedTemplate:
    """One row of a ranked table.

    Attributes
    ----------
    label : str
        Spectral type (sequence bins: the integer subtype), file or blackbody label.
    type_code : float
        Numeric type (nan for blackbodies).
    teff : float [K]
    mass : float [M_sun]
    chi2 : float
        Minimum over the offset of the fit statistic (see :mod:`motes.companion.likelihood`).
    dof : int
        Degrees of freedom of ``chi2``.
    probability : float
        Posterior probability within the ranking (a sequence bin sums the grid
        points within half a subtype of its label).
    ln_evidence : float
        ln of the marginal likelihood (normalisation terms included).
    offset : float [mag]
        Best offset delta: the distance modulus in the colours-only mode, the
        deviation from the host's distance modulus in the distance-known mode.
    offset_error : float [mag]
    distance_pc : float [pc]
        Distance implied by the offset (nan for templates with no absolute scale).
    av : float [mag]
        Best A_V (0 when extinction is not fitted).
    """

    label: str
    type_code: float
    teff: float
    mass: float
    chi2: float
    dof: int
    probability: float
    ln_evidence: float
    offset: float
    offset_error: float
    distance_pc: float
    av: float = 0.0

    @property
    def type(self) -> str:
        """Spectral-type label of ``type_code`` ("" for blackbodies)."""
        return type_label(self.type_code) if math.isfinite(self.type_code) else ""


@dataclass(frozen=True, eq=False)
class Ranking:
    """Templates of one source ranked in one mode, over one band set.

    Attributes
    ----------
    source : str
    kind : {"sequence", "library", "blackbody"}
    mode : {"distance", "colours"}
    bands : tuple of str
        Observed bands used (every template of the ranking covers all of them).
    template_bands : tuple of str
        Band each used column was taken from (differs for explicit mappings).
    unused_bands : tuple of str
        Observed bands not used by this ranking.
    rows : tuple of RankedTemplate
        Display rows, most probable first.
    grid : dict of str to ndarray[n_t]
        Per-template arrays ("type_code", "teff", "mass", "probability" (with
        the type prior), "probability_flat" (flat type prior), "ln_evidence",
        "chi2", "offset", "offset_error", "av", "distance_pc")
        and "model" ndarray[n_t, n_used] (template magnitudes in the frame of
        the observations, best offset and A_V applied), for estimates and figures.
    labels : tuple of str
        Per-template labels (same order as ``grid``).
    dof : int
    notes : tuple of str
    """

    source: str
    kind: str
    mode: str
    bands: tuple[str, ...]
    template_bands: tuple[str, ...]
    unused_bands: tuple[str, ...]
    rows: tuple[RankedTemplate, ...]
    grid: dict
    labels: tuple[str, ...]
    dof: int
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict, repr=False)

    @property
    def best(self) -> RankedTemplate:
        """The most probable display row."""
        return self.rows[0]

    def top_templates(self, n: int = 3) -> np.ndarray:
        """Indices into ``grid`` of the n most probable individual templates."""
        return np.argsort(-self.grid["probability"], kind="stable")[:n]


@dataclass(frozen=True)
class QuantityEstimate:
    """Median and 68% interval of a posterior quantity.

    Attributes
    ----------
    median, lower, upper : float
        Posterior median and the 68% interval. With ``intervals`` given,
        ``lower``/``upper`` bound the most probable of them (an interval
        never spans a gap of the posterior); without, they are the 16th/84th
        percentiles.
    unit : str
    intervals : tuple of (lower, upper, probability)
        The 68% highest-density intervals, computed in this variable (empty:
        percentiles only).
    """

    median: float
    lower: float
    upper: float
    unit: str = ""
    intervals: tuple = ()

    def format(self, spec: str = ".0f") -> str:
        if not math.isfinite(self.median):
            return "n/a"
        unit = f" {self.unit}" if self.unit else ""
        if len(self.intervals) > 1:
            parts = ", ".join(f"{lo:{spec}}-{hi:{spec}} ({p:.0%})" for lo, hi, p in self.intervals)
            return f"{self.median:{spec}}{unit} (68% HDI: {parts})"
        return f"{self.median:{spec}}{unit} (68%: {self.lower:{spec}}-{self.upper:{spec}})"


@dataclass(frozen=True)
class TypePeak:
    """One separate peak of a type posterior (type codes).

    Attributes
    ----------
    mode : float
        Type code of highest density in the peak.
    lower, upper : float
        Extent of the peak (its run of the 95% highest-density region).
    probability : float
        Posterior probability between the density minima that bound it.
    median : float
        Median of the posterior within the peak.
    """

    mode: float
    lower: float
    upper: float
    probability: float
    median: float

    @property
    def label(self) -> str:
        """e.g. ``"M4.1 (M2.3-M6.0, p = 0.62)"``."""
        return (f"{type_label(self.median)} ({type_label(self.lower)}-{type_label(self.upper)}, "
                f"p = {self.probability:.2f})")


@dataclass(frozen=True)
class TypeEstimate:
    """Continuous spectral-type estimate from one ranking.

    Attributes
    ----------
    median, lower, upper : float
        Type codes: posterior median and the 16th/84th percentiles.
    most_probable : float
        Type code of the most probable template.
    teff : QuantityEstimate [K]
    mass : QuantityEstimate [M_sun]
    source, mode : str
        The ranking it comes from.
    at_range_edge : bool
        The 68% interval touches an end of the template range (the estimate
        may be truncated).
    intervals : tuple of (lower, upper, probability)
        68% highest-density intervals on the type code (sequence rankings;
        ``lower``/``upper`` are then the most probable one). Empty for
        libraries, whose ``lower``/``upper`` are 16th/84th percentiles.
    peaks : tuple of TypePeak
        Separate peaks of the posterior (one when unimodal).
    point : float
        Median within the most probable peak (see :attr:`reported`).
    prior : str
        Description of the type prior used.
    fit_p_value : float
        chi2 p-value of the best-fitting template over the bands used (nan
        when not testable, dof <= 0).
    poor_fit : bool
        ``fit_p_value`` below :data:`motes.companion.summary_stats.FIT_P_THRESHOLD`.
    best_fit : str
        Label of the template with the smallest chi2; ``best_chi2``, ``dof`` its fit.
    distance : QuantityEstimate or None [pc]
        Photometric distance (colours-only mode with an absolute template scale).
    separating_bands : tuple of (str, float)
        With separate peaks: bands the sequence tabulates but the photometry
        lacks, with the predicted magnitude difference between the two most
        probable peaks [mag], largest first.
    flat : TypeEstimate or None
        The same estimate under a flat type prior (when another prior was used).
    """

    median: float
    lower: float
    upper: float
    most_probable: float
    teff: QuantityEstimate
    mass: QuantityEstimate
    source: str
    mode: str
    at_range_edge: bool = False
    intervals: tuple = ()
    peaks: tuple = ()
    point: float = math.nan
    prior: str = "flat"
    fit_p_value: float = math.nan
    poor_fit: bool = False
    best_fit: str = ""
    best_chi2: float = math.nan
    dof: int = 0
    distance: QuantityEstimate | None = None
    separating_bands: tuple = ()
    flat: "TypeEstimate | None" = None

    @property
    def reported(self) -> float:
        """The type code reported: the median within the most probable peak
        (the overall median when the posterior has one peak)."""
        return self.point if math.isfinite(self.point) else self.median

    @property
    def label(self) -> str:
        """e.g. ``"L1.3 (68%: M9.6-L2.4)"``; separate peaks are listed; a poor
        fit is labelled as the least-bad template, not an answer."""
        if len(self.peaks) > 1:
            text = "separate peaks: " + " or ".join(p.label for p in
                                                    sorted(self.peaks, key=lambda p: -p.probability))
        elif len(self.intervals) > 1:
            parts = ", ".join(f"{type_label(lo)}-{type_label(hi)}" for lo, hi, _ in self.intervals)
            text = f"{type_label(self.reported)} (68% HDI: {parts})"
        else:
            text = f"{type_label(self.reported)} (68%: {type_label(self.lower)}-{type_label(self.upper)})"
        if self.poor_fit:
            return (f"least-bad template {self.best_fit} - no template fits (chi2 = {self.best_chi2:.1f} for "
                    f"{self.dof} dof, p = {self.fit_p_value:.1e}); posterior {text}")
        return text

    @property
    def fit_text(self) -> str:
        """Goodness of fit of the best template, in words."""
        if not math.isfinite(self.fit_p_value):
            return (f"best template {self.best_fit}: fit not testable ({self.dof} degrees of freedom)"
                    if self.best_fit else "fit not testable")
        verdict = "POOR FIT" if self.poor_fit else "fits"
        return (f"best template {self.best_fit} {verdict}: chi2 = {self.best_chi2:.2f} for {self.dof} dof, "
                f"p = {self.fit_p_value:.2g}")


@dataclass(frozen=True)
class DistanceCheck:
    """Colours-only distance versus the host's distance.

    Attributes
    ----------
    host_distance_pc : float
    host_distance_modulus, host_distance_modulus_error : float [mag]
    colour_distance : QuantityEstimate [pc]
        Distance implied by the colours-only fit (template luminosity scatter included).
    colour_distance_modulus : QuantityEstimate [mag]
    tension_sigma : float
        (DM_colours - DM_host) / combined 1-sigma.
    consistent : bool
    message : str
    """

    host_distance_pc: float
    host_distance_modulus: float
    host_distance_modulus_error: float
    colour_distance: QuantityEstimate
    colour_distance_modulus: QuantityEstimate
    tension_sigma: float
    consistent: bool
    message: str


@dataclass(frozen=True, eq=False)
class Classification:
    """Everything :func:`motes.companion.classify` found.

    Attributes
    ----------
    target : str
    modes : tuple of str
        Modes run ("distance", "colours").
    rankings : tuple of Ranking
    estimate : TypeEstimate or None
        The headline estimate (sequence, distance-known mode when available).
    estimates : tuple of TypeEstimate
        One per ranking with spectral types.
    distance_check : DistanceCheck or None
    blackbody_used : bool
    flags : tuple of str
        Warnings about this result (poor fit, tension with the host distance, ...).
    notes : tuple of str
        Statements about how it was computed (bands, mappings, priors, fallbacks).
    caveats : tuple of str
        General limits of photometric typing, always printed.
    photometry : object
        The :class:`~motes.photometry.CalibratedPhotometry` classified.
    settings : object
        The :class:`~motes.companion.ClassifySettings` used.
    boundness : object
        The photometric boundness test
        (:class:`~motes.companion.boundness.BoundnessTest`), when run
        (:func:`motes.companion.boundness.with_boundness`); None otherwise.
    """

    target: str
    modes: tuple[str, ...]
    rankings: tuple[Ranking, ...]
    estimate: TypeEstimate | None
    estimates: tuple[TypeEstimate, ...]
    distance_check: DistanceCheck | None
    blackbody_used: bool
    flags: tuple[str, ...]
    notes: tuple[str, ...]
    caveats: tuple[str, ...]
    photometry: object = field(repr=False, default=None)
    settings: object = field(repr=False, default=None)
    boundness: object = field(repr=False, default=None)

    def ranking(self, kind: str, mode: str) -> Ranking | None:
        """The ranking of a source kind in a mode, or None."""
        for r in self.rankings:
            if r.kind == kind and r.mode == mode:
                return r
        return None

    def to_table(self):
        """All ranked rows as an astropy Table with units; summary in ``meta``.

        Returns
        -------
        astropy.table.Table
        """
        import astropy.units as u
        from astropy.table import Table

        cols = {k: [] for k in ("mode", "source", "rank", "label", "type", "type_code", "teff", "mass", "chi2",
                                "dof", "probability", "ln_evidence", "offset", "offset_error", "distance",
                                "av", "bands", "p_value", "poor_fit")}
        for r in self.rankings:
            for i, row in enumerate(r.rows, 1):
                cols["mode"].append(r.mode)
                cols["source"].append(r.source)
                cols["rank"].append(i)
                cols["label"].append(row.label)
                cols["type"].append(row.type)
                for name in ("type_code", "teff", "mass", "chi2", "probability", "ln_evidence", "offset",
                             "offset_error", "av"):
                    cols[name].append(float(getattr(row, name)))
                cols["dof"].append(int(row.dof))
                cols["distance"].append(float(row.distance_pc))
                cols["bands"].append(" ".join(r.bands))
                p = _chi2_p(row.chi2, row.dof)
                cols["p_value"].append(p)
                cols["poor_fit"].append(bool(math.isfinite(p) and p < _fit_threshold()))
        t = Table()
        units = {"teff": u.K, "mass": u.M_sun, "offset": u.mag, "offset_error": u.mag, "distance": u.pc,
                 "av": u.mag}
        for name, values in cols.items():
            t[name] = np.array(values, dtype=float) * units[name] if name in units else values
        descriptions = {
            "probability": "posterior probability within its (mode, source) ranking",
            "offset": "colours mode: implied distance modulus; distance mode: deviation from the host's",
            "chi2": "minimum over the offset (limits enter as -2 ln P; distance mode includes the prior term)",
            "ln_evidence": "ln marginal likelihood over the offset (and over colour_scatter_range in the "
                           "colours-only mode for the dwarf sequence), normalisation terms included",
            "bands": "observed bands used by this ranking",
            "p_value": "chi2 survival probability of this row's fit (nan: not testable)",
            "poor_fit": "p_value below the poor-fit threshold: this template does not fit",
        }
        for name, text in descriptions.items():
            t[name].description = text
        est = self.estimate
        t.meta.update({
            "target": self.target,
            "modes": list(self.modes),
            "type_estimate": est.label if est else "none",
            "type_estimate_source": f"{est.source}, {est.mode} mode" if est else "",
            "teff_estimate": est.teff.format() if est else "",
            "mass_estimate": est.mass.format(".3f") if est else "",
            "type_code_reported": float(est.reported) if est else math.nan,
            "type_code_hdi": [list(iv[:2]) for iv in est.intervals] if est else [],
            "type_prior": est.prior if est else "",
            "fit": est.fit_text if est else "",
            "poor_fit": bool(est.poor_fit) if est else False,
            "distance_check": self.distance_check.message if self.distance_check else "not run",
            "flags": list(self.flags),
            "notes": list(self.notes),
            "caveats": list(self.caveats),
            "motes_version": __version__,
        })
        return t

    def estimates_table(self):
        """One row per type estimate (and its flat-prior twin) with numeric columns.

        Columns: ``mode``, ``source``, ``type_prior``, ``estimate`` (the text),
        ``type_reported``, ``type_median``, ``type_hdi_lower``/``upper`` (the
        most probable 68% HDI), ``type_hdi`` (all, as text), ``n_intervals``,
        ``n_peaks`` and ``peak1..3_type``/``lower``/``upper``/``probability``
        (most probable first; nan when absent), ``teff``/``mass``/``distance``
        median, lower, upper (K, M_sun, pc; distance: colours-only photometric
        distance), ``best_template``, ``best_chi2``, ``dof``, ``fit_p_value``,
        ``poor_fit``, ``separating_bands``. Type values are type codes
        (:func:`motes.companion.type_code`).

        Returns
        -------
        astropy.table.Table
        """
        import astropy.units as u
        from astropy.table import Table

        rows = []
        for est in self.estimates:
            rows.append(_estimate_row(est))
            if est.flat is not None:
                rows.append(_estimate_row(est.flat))
        names = list(rows[0]) if rows else list(_estimate_row(None))
        t = Table()
        units = {"teff": u.K, "mass": u.M_sun, "distance": u.pc}
        for name in names:
            values = [r[name] for r in rows]
            unit = next((v for k, v in units.items() if name.startswith(k + "_")), None)
            if unit is not None:
                t[name] = np.array(values, dtype=float) * unit
            else:
                t[name] = values if values else np.array([], dtype=float if name not in _TEXT_COLUMNS else str)
        t.meta.update({"target": self.target, "motes_version": __version__,
                       "type_codes": "10 x class index (O=0 ... G=4 K=5 M=6 L=7 T=8 Y=9) + subtype"})
        return t


_TEXT_COLUMNS = ("mode", "source", "type_prior", "estimate", "type_hdi", "best_template", "separating_bands")
_N_PEAKS = 3


def _estimate_row(est) -> dict:
    """Columns of one estimate (``None``: the column names with empty values)."""
    nan = math.nan
    if est is None:
        from types import SimpleNamespace

        q = QuantityEstimate(nan, nan, nan)
        est = SimpleNamespace(mode="", source="", prior="", label="", reported=nan, median=nan, lower=nan,
                              upper=nan, intervals=(), peaks=(), teff=q, mass=q, distance=None, best_fit="",
                              best_chi2=nan, dof=0, fit_p_value=nan, poor_fit=False, separating_bands=())
    row = {"mode": est.mode, "source": est.source, "type_prior": est.prior, "estimate": est.label,
           "type_reported": float(est.reported), "type_median": float(est.median),
           "type_hdi_lower": float(est.lower), "type_hdi_upper": float(est.upper),
           "type_hdi": ", ".join(f"{type_label(lo)}-{type_label(hi)}" for lo, hi, _ in est.intervals),
           "n_intervals": len(est.intervals), "n_peaks": len(est.peaks)}
    peaks = sorted(est.peaks, key=lambda pk: -pk.probability)
    for k in range(_N_PEAKS):
        pk = peaks[k] if k < len(peaks) else None
        row[f"peak{k + 1}_type"] = pk.median if pk else nan
        row[f"peak{k + 1}_lower"] = pk.lower if pk else nan
        row[f"peak{k + 1}_upper"] = pk.upper if pk else nan
        row[f"peak{k + 1}_probability"] = pk.probability if pk else nan
    dist = est.distance or QuantityEstimate(nan, nan, nan)
    for name, q in (("teff", est.teff), ("mass", est.mass), ("distance", dist)):
        row[f"{name}_median"], row[f"{name}_lower"], row[f"{name}_upper"] = q.median, q.lower, q.upper
    row.update({"best_template": est.best_fit, "best_chi2": float(est.best_chi2), "dof": int(est.dof),
                "fit_p_value": float(est.fit_p_value), "poor_fit": bool(est.poor_fit),
                "separating_bands": ", ".join(f"{b} {d:+.2f}" for b, d in est.separating_bands)})
    return row


def _chi2_p(chi2: float, dof: int) -> float:
    from scipy.stats import chi2 as chi2_dist

    if dof <= 0 or not math.isfinite(chi2):
        return math.nan
    return float(chi2_dist.sf(chi2, dof))


def _fit_threshold() -> float:
    from .summary_stats import FIT_P_THRESHOLD

    return FIT_P_THRESHOLD
