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
        Per-template arrays ("type_code", "teff", "mass", "probability",
        "ln_evidence", "chi2", "offset", "offset_error", "av", "distance_pc")
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
    """Median and 68% interval (16th-84th percentiles) of a posterior quantity."""

    median: float
    lower: float
    upper: float
    unit: str = ""

    def format(self, spec: str = ".0f") -> str:
        if not math.isfinite(self.median):
            return "n/a"
        unit = f" {self.unit}" if self.unit else ""
        return f"{self.median:{spec}}{unit} (68%: {self.lower:{spec}}-{self.upper:{spec}})"


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

    @property
    def label(self) -> str:
        """e.g. ``"L1.3 (68%: M9.6-L2.4)"``."""
        return (f"{type_label(self.median)} (68%: {type_label(self.lower)}-{type_label(self.upper)})")


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
                                "av", "bands")}
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
        t = Table()
        units = {"teff": u.K, "mass": u.M_sun, "offset": u.mag, "offset_error": u.mag, "distance": u.pc,
                 "av": u.mag}
        for name, values in cols.items():
            t[name] = np.array(values, dtype=float) * units[name] if name in units else values
        descriptions = {
            "probability": "posterior probability within its (mode, source) ranking",
            "offset": "colours mode: implied distance modulus; distance mode: deviation from the host's",
            "chi2": "minimum over the offset (limits enter as -2 ln P; distance mode includes the prior term)",
            "ln_evidence": "ln marginal likelihood over the offset, normalisation terms included",
            "bands": "observed bands used by this ranking",
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
            "distance_check": self.distance_check.message if self.distance_check else "not run",
            "flags": list(self.flags),
            "notes": list(self.notes),
            "caveats": list(self.caveats),
            "motes_version": __version__,
        })
        return t
