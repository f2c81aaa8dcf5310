"""Reading evidences: model ranking, Bayes factors, per-material verdicts, summaries.

Bayes factor of model A over model B: ln B = ln Z_A - ln Z_B, with
uncertainty sigma = sqrt(sigma_A^2 + sigma_B^2) (independent runs).

Strength scale: Kass & Raftery (1995, JASA 90, 773, sec. 3.2) read 2 ln B
with breaks at 2, 6 and 10, i.e. ln B = 1, 3, 5. motes words the four bins as

=============  ==================
ln B           reading
=============  ==================
< 1            hardly any
1 to 3         modest
3 to 5         firm
>= 5           overwhelming
=============  ==================

Verdict per material (the rule printed with every verdict)
    ln B = ln Z(with the material) - ln Z(without it), sigma its uncertainty.
    "needed"      when ln B - 2 sigma >= 3,
    "not needed"  when ln B + 2 sigma <= -1,
    "undecided"   otherwise.
A verdict is *borderline* when its statistic (ln B - 2 sigma for "needed",
ln B + 2 sigma for "not needed", the nearer of the two for "undecided") lies
closer to its threshold than the seed-to-seed scatter of ln B,
``SEED_SCATTER_FACTOR`` x sigma: a run with another seed may then give
another verdict. The verdict itself is unchanged; the flag says how firm it is.

Which pair of models: for a set with "each material removed in turn" (or any
set holding the full set and the full set minus that material) the pair is
(full set, full set without the material). Otherwise (all subsets, explicit
lists) it is the best model containing the material against the best model
without it. A material in every model (or in none) cannot be judged: "not
tested".
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "VERDICT_RULE",
    "SEED_SCATTER_FACTOR",
    "STRENGTH_SCALE",
    "strength_of",
    "ModelEvidence",
    "Verdict",
    "rank_models",
    "material_verdicts",
    "parameter_unit",
    "summarise_posterior",
    "EVIDENCE_VS_PROFILE_NOTE",
    "NEEDED_LN_B",
    "NOT_NEEDED_LN_B",
    "BestFitContrast",
    "best_fit_contrasts",
]

#: The verdict rule, as printed with the verdicts.
VERDICT_RULE = (
    "Verdict rule: ln B = ln Z(with material) - ln Z(without), sigma its uncertainty; "
    "'needed' if ln B - 2 sigma >= 3, 'not needed' if ln B + 2 sigma <= -1, otherwise "
    "'undecided'. Pair: full set vs full set without the material when both were run, "
    "else the best model with vs the best model without it. "
    "Strength of ln B (Kass & Raftery 1995 breaks at ln B = 1, 3, 5): "
    "hardly any / modest / firm / overwhelming. "
    "'borderline': the verdict's statistic lies within 1.1 sigma (the seed-to-seed scatter of ln B) of "
    "its threshold, so another seed may give another verdict."
)

#: Seed-to-seed scatter of ln Z in units of its quoted error: about 1.1, measured on repeated runs of the
#: demo fit with different seeds (reported in the project's issue 15; not re-measured by the tests).
SEED_SCATTER_FACTOR = 1.1

#: (upper edge of ln B, reading) in increasing order.
STRENGTH_SCALE = ((1.0, "hardly any"), (3.0, "modest"), (5.0, "firm"), (math.inf, "overwhelming"))

_NEEDED, _NOT_NEEDED = 3.0, -1.0
#: The ln B thresholds of VERDICT_RULE: "needed" when ln B - 2 sigma >= NEEDED_LN_B, "not needed" when
#: ln B + 2 sigma <= NOT_NEEDED_LN_B.
NEEDED_LN_B, NOT_NEEDED_LN_B = _NEEDED, _NOT_NEEDED


def strength_of(ln_b: float) -> str:
    """Reading of |ln B| on the strength scale (module notes); the sign says which side."""
    x = abs(float(ln_b))
    for edge, label in STRENGTH_SCALE:
        if x < edge:
            return label
    return STRENGTH_SCALE[-1][1]


@dataclass(frozen=True)
class ModelEvidence:
    """What the ranking needs from one model's run."""

    name: str
    materials: tuple[str, ...]
    ln_z: float
    ln_z_err: float


@dataclass(frozen=True)
class Verdict:
    """The data's verdict on one material.

    Attributes
    ----------
    material : str
    verdict : {"needed", "not needed", "undecided", "not tested"}
    ln_b, ln_b_err : float
        ln Z(with) - ln Z(without) and its 1-sigma uncertainty (nan if not tested).
    with_model, without_model : str
        The two models compared ("" if not tested).
    pairing : str
        "removed in turn" or "best with vs best without".
    strength : str
        Reading of |ln B| on the strength scale.
    borderline : bool
        The verdict's statistic lies within the seed-to-seed scatter of its
        threshold (module notes): another seed may give another verdict.
    """

    material: str
    verdict: str
    ln_b: float
    ln_b_err: float
    with_model: str
    without_model: str
    pairing: str
    strength: str
    borderline: bool = False

    def sentence(self) -> str:
        """One readable line, e.g. ``water_ice: needed (ln B = 7.9 ± 0.3, firm ...)``."""
        if self.verdict == "not tested":
            return f"{self.material}: not tested (it is in every model, or in none)"
        side = "for" if self.ln_b >= 0 else "against"
        text = (f"{self.material}: {self.verdict} (ln B = {self.ln_b:+.2f} ± {self.ln_b_err:.2f}, "
                f"{self.strength} evidence {side} it; {self.with_model} vs {self.without_model})")
        if self.borderline:
            text += (f" - borderline: within the seed-to-seed scatter of ln B "
                     f"(about ±{SEED_SCATTER_FACTOR * self.ln_b_err:.2f}) of the rule's threshold; "
                     "another seed may give another verdict")
        return text


def rank_models(models, full_name: str | None = None):
    """Rank models by ln Z.

    Parameters
    ----------
    models : sequence of ModelEvidence
    full_name : str, optional
        Name of the model with every material (Bayes factors against it).

    Returns
    -------
    astropy.table.Table
        Columns rank, model, n_materials, ln_z, ln_z_err, ln_b_best, ln_b_best_err,
        strength_vs_best, ln_b_full, ln_b_full_err (nan without a full set),
        posterior_probability (equal prior odds over the models).
    """
    from astropy.table import Table

    models = sorted(models, key=lambda m: -m.ln_z)
    best = models[0]
    full = next((m for m in models if m.name == full_name), None)
    ln_z = np.array([m.ln_z for m in models])
    prob = np.exp(ln_z - ln_z.max())
    prob /= prob.sum()
    rows = []
    for i, m in enumerate(models):
        lb = m.ln_z - best.ln_z
        lbe = 0.0 if m is best else math.hypot(m.ln_z_err, best.ln_z_err)
        lf = m.ln_z - full.ln_z if full is not None else math.nan
        lfe = (0.0 if m is full else math.hypot(m.ln_z_err, full.ln_z_err)) if full is not None else math.nan
        rows.append((i + 1, m.name, len(m.materials), m.ln_z, m.ln_z_err, lb, lbe,
                     "best" if m is best else strength_of(lb), lf, lfe, prob[i]))
    names = ("rank", "model", "n_materials", "ln_z", "ln_z_err", "ln_b_best", "ln_b_best_err",
             "strength_vs_best", "ln_b_full", "ln_b_full_err", "posterior_probability")
    table = Table(rows=rows, names=names)
    table.meta["note"] = ("ln_b_best = ln Z - ln Z(best); ln_b_full = ln Z - ln Z(full set); "
                          "posterior_probability assumes equal prior odds for the models")
    return table


def material_verdicts(models, materials, full_name: str | None = None) -> tuple[Verdict, ...]:
    """Per-material verdicts by the rule in the module notes.

    Parameters
    ----------
    models : sequence of ModelEvidence
    materials : sequence of str
        Candidate materials, in description order.
    full_name : str, optional
        Name of the full-set model (enables the "removed in turn" pairing).

    Returns
    -------
    tuple of Verdict
    """
    by_set = {frozenset(m.materials): m for m in models}
    full = next((m for m in models if m.name == full_name), None)
    out = []
    for mat in materials:
        with_m = [m for m in models if mat in m.materials]
        without = [m for m in models if mat not in m.materials]
        pair = None
        if full is not None and mat in full.materials:
            partner = by_set.get(frozenset(full.materials) - {mat})
            if partner is not None:
                pair = (full, partner, "removed in turn")
        if pair is None and with_m and without:
            pair = (max(with_m, key=lambda m: m.ln_z), max(without, key=lambda m: m.ln_z),
                    "best with vs best without")
        if pair is None:
            out.append(Verdict(mat, "not tested", math.nan, math.nan, "", "", "", ""))
            continue
        a, b, how = pair
        ln_b = a.ln_z - b.ln_z
        err = math.hypot(a.ln_z_err, b.ln_z_err)
        if ln_b - 2 * err >= _NEEDED:
            verdict = "needed"
        elif ln_b + 2 * err <= _NOT_NEEDED:
            verdict = "not needed"
        else:
            verdict = "undecided"
        out.append(Verdict(mat, verdict, ln_b, err, a.name, b.name, how, strength_of(ln_b),
                           borderline=_is_borderline(verdict, ln_b, err)))
    return tuple(out)


def _is_borderline(verdict: str, ln_b: float, err: float) -> bool:
    """True when the verdict's statistic is within SEED_SCATTER_FACTOR * err of its threshold."""
    lo, hi = ln_b - 2 * err, ln_b + 2 * err
    if verdict == "needed":
        margin = lo - _NEEDED
    elif verdict == "not needed":
        margin = _NOT_NEEDED - hi
    else:
        margin = min(_NEEDED - lo, hi - _NOT_NEEDED)
    return bool(margin < SEED_SCATTER_FACTOR * err)


#: Why an evidence verdict and a chi-square profile (``motes grid``) can disagree on one material.
EVIDENCE_VS_PROFILE_NOTE = (
    "Evidence vs best fit: a chi-square profile (as motes grid reports) asks how much the BEST fit "
    "worsens without a material; ln B asks how the likelihood AVERAGED over the prior changes, so a "
    "material that improves the best fit a little but adds a fraction with a wide prior pays an Occam "
    "factor and can stay 'undecided'. ln B = Delta ln L_max + Delta ln(Occam factor), "
    "ln(Occam factor) = ln Z - ln L_max. A grid's profile is also conditional on its axes (a fixed q, "
    "a few a_min and porosity values), which a fit explores continuously."
)


@dataclass(frozen=True)
class BestFitContrast:
    """One verdict split into its best-fit and its prior-volume parts.

    Attributes
    ----------
    material : str
    delta_chi2 : float
        Best chi2 without the material minus best chi2 with it (a profile).
    delta_ln_l_max : float
        ln L_max(with) - ln L_max(without).
    occam : float
        ln(Occam factor)(with) - ln(Occam factor)(without), ``ln Z - ln L_max`` per model;
        ``ln B = delta_ln_l_max + occam``.
    ln_b : float
    """

    material: str
    delta_chi2: float
    delta_ln_l_max: float
    occam: float
    ln_b: float

    def sentence(self) -> str:
        return (f"{self.material}: leaving it out changes the best chi2 by {self.delta_chi2:+.2f} "
                f"(Delta ln L_max = {self.delta_ln_l_max:+.2f}); the Occam factors (ln Z - ln L_max) differ "
                f"by {self.occam:+.2f} (negative: the prior volume of its fraction costs evidence); "
                f"ln B = {self.ln_b:+.2f}")


def best_fit_contrasts(verdicts, models) -> tuple[BestFitContrast, ...]:
    """Each tested verdict's ln B split into Delta ln L_max and the Occam-factor difference.

    Parameters
    ----------
    verdicts : sequence of Verdict
    models : sequence of objects with ``name``, ``ln_z``, ``best_ln_l`` and ``best_chi2``
        (:class:`motes.dust.fit.results.ModelResult`).

    Returns
    -------
    tuple of BestFitContrast
        One per verdict whose two models both have a finite best fit. The best
        fits are the best of the sampled points (an upper bound on each model's
        true chi2 minimum), so ``delta_chi2`` is approximate at the level of the
        sampling.
    """
    by_name = {m.name: m for m in models}
    out = []
    for v in verdicts:
        a, b = by_name.get(v.with_model), by_name.get(v.without_model)
        if v.verdict == "not tested" or a is None or b is None:
            continue
        values = (a.best_ln_l, b.best_ln_l, a.best_chi2, b.best_chi2, a.ln_z, b.ln_z)
        if not all(np.isfinite(x) for x in values):
            continue
        d_lnl = a.best_ln_l - b.best_ln_l
        occam = (a.ln_z - a.best_ln_l) - (b.ln_z - b.best_ln_l)
        out.append(BestFitContrast(v.material, b.best_chi2 - a.best_chi2, d_lnl, occam, a.ln_z - b.ln_z))
    return tuple(out)


def parameter_unit(name: str) -> str:
    """The unit of a sampled parameter as written in tables (``"um"``; ``""`` if it has none).

    Fractions (``f_<material>``) and the flux scale are pure numbers; every
    other name is looked up in :data:`motes.parameters.PARAMETERS`.

    Examples
    --------
    >>> print(parameter_unit("a_min"), repr(parameter_unit("f_ice")))
    um ''
    """
    from ...parameters import PARAMETERS

    p = PARAMETERS.get(name)
    return p.unit_text if p is not None else ""


def summarise_posterior(samples, names):
    """Median, 68% and 95% central intervals, and 95% upper limit per parameter.

    Parameters
    ----------
    samples : ndarray[M, P]
        Equally weighted posterior samples.
    names : sequence of str
        Parameter names (P).

    Returns
    -------
    astropy.table.Table
        Columns parameter, unit (:func:`parameter_unit`: ``"um"`` for grain
        sizes, ``"deg"`` for the angle, empty for pure numbers), median, lo68,
        hi68, lo95, hi95, upper95 (the 95th percentile: the one-sided 95% upper
        limit, used for fractions of unfavoured materials), every number in
        that row's unit.
    """
    from astropy.table import Table

    samples = np.atleast_2d(np.asarray(samples, dtype=float))
    q = np.percentile(samples, [50, 16, 84, 2.5, 97.5, 95], axis=0)
    table = Table()
    table["parameter"] = list(names)
    table["unit"] = [parameter_unit(n) for n in names]   # one unit per row: the rows are different quantities
    for i, col in enumerate(("median", "lo68", "hi68", "lo95", "hi95", "upper95")):
        table[col] = q[i]
    return table
