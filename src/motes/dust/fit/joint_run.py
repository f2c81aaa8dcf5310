"""``motes fit`` with thermal data: building the joint problem, its results, the verdicts by data set.

A fit description with ``[data] thermal`` (:mod:`motes.dust.fit.thermal_spec`)
fits every model of the comparison to the scattered-light colours and the
thermal SED together (:class:`motes.dust.fit.joint.JointProblem`). What is
tied and what is free is :data:`motes.dust.fit.joint.TIED` /
:data:`~motes.dust.fit.joint.FREE`. The ranking and the verdicts use the joint
evidence. With ``[thermal] verdicts_by_data = true`` (the default) every model
is also run on the scattered light alone and on the thermal data alone (three
evidence runs per model), and each verdict gives the three ln B and which data
drove it (:func:`driven_by`).

Per model, beside the files of a scattered-light fit: ``thermal.ecsv`` (data
[Jy], the model photosphere, posterior model fluxes [Jy] and the best fit's,
and in its meta the best fit's L_dust/L_star, r / r_blackbody, dust
temperature and sublimation flags, from the exact path at the best fit), and
``by_data/scattered`` and ``by_data/thermal`` (the runs on one data set).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ...errors import InputError
from ..thermal_observations import read_thermal_photometry
from .joint import FREE, TIED, JointProblem, thermal_excess_photometry, tied_text

__all__ = ["build_joint_problem", "check_thermal_coverage", "read_fit_thermal", "postprocess_joint",
           "postprocess_part", "by_data_columns", "driven_by", "joint_notes", "JOINT_NOTES", "DRIVEN_BY_RULE"]

#: Notes printed with every joint fit.
JOINT_NOTES = (
    f"Joint fit: tied between scattered light and thermal emission: {TIED}; free: {FREE}.",
    "A ring radius constrained by the SED alone is degenerate with a_min (smaller, hotter grains further "
    "out give nearly the SED of larger, cooler grains further in): a free ring_radius needs its prior from "
    "imaging, and a_min and ring_radius posteriors from a joint fit lean on the scattered light.",
)


def joint_notes(thermal_settings=None) -> tuple[str, ...]:
    """:data:`JOINT_NOTES` for a ring; for a belt (``thermal_settings.belt_au``) what is tied names it.

    Parameters
    ----------
    thermal_settings : motes.dust.fit.thermal_spec.ThermalFitSettings, optional
    """
    belt = getattr(thermal_settings, "belt_au", None)
    if belt is None:
        return JOINT_NOTES
    tied = tied_text(thermal_settings)           # the settings carry belt_au and surface_density_index
    return (f"Joint fit: tied between scattered light and thermal emission: {tied}; free: {FREE}.",
            "The belt's edges and surface density index are fixed, not fitted (from the SED alone they are "
            "degenerate with a_min, like a ring radius); r / r_bb uses its cross-section-weighted mean radius.")


#: How :func:`driven_by` words which data set decided a verdict.
DRIVEN_BY_RULE = (
    "Which data drove a verdict: a data set 'speaks' when its own |ln B| >= 1 (modest evidence or more); "
    "'scattered' or 'thermal' when only that one speaks, 'both' when both speak with the sign of the joint "
    "ln B, 'conflict' when they speak with opposite signs, 'joint only' when neither speaks alone.")


def read_fit_thermal(spec):
    """The thermal table of a fit (:class:`motes.dust.thermal_observations.ThermalPhotometry`)."""
    return read_thermal_photometry(spec.thermal.path, spec.description.custom_bands or None, spec.thermal.shown)


def check_thermal_coverage(spec, thermal) -> None:
    """Refuse thermal bands outside a material's optical constants when it has no extrapolation rule.

    Raises
    ------
    motes.errors.InputError
        Naming the band, its range, the material, its data's range and what to add.
    """
    for i, mat in enumerate(spec.description.materials):
        if mat.extrapolation is not None:
            continue
        lo, hi = mat.wavelength_range
        for band in thermal.bands:
            if band.wavelength_min < lo or band.wavelength_max > hi:
                raise InputError(
                    f"thermal band '{band.name}' ({band.wavelength_min:.4g}-{band.wavelength_max:.4g} um) lies "
                    f"outside the optical constants of '{mat.name}' ({lo:.4g}-{hi:.4g} um), which name no "
                    "extrapolation rule: add extrapolation = \"dielectric\" (n constant, k ∝ 1/lambda beyond the "
                    "data) or \"conductor\" (Hagen-Rubens) to its table, or give a file that covers the band",
                    spec.source, f"[[materials]] #{i + 1} ({mat.name})")


def build_joint_problem(spec, model, scattered, part: str = "joint") -> JointProblem:
    """The :class:`JointProblem` of one model (the scattered-light problem already built)."""
    from ..model.thermal_belt import ThermalBeltModel
    from ..model.thermal_fast import ThermalRingModel

    data = read_fit_thermal(spec)
    check_thermal_coverage(spec, data)
    desc = spec.description.subset(model.materials)
    thermal_model = ThermalRingModel(desc, data.bands, distance_pc=spec.thermal.distance_pc)
    if spec.thermal.belt_au is not None:
        thermal_model = ThermalBeltModel(thermal_model, spec.thermal.belt_au, spec.thermal.surface_density_index,
                                         spec.thermal.radial_nodes)
    obs = thermal_excess_photometry(data.bands, data.flux_jy, data.error_jy, thermal_model.star_flux,
                                    path=data.path, is_limit=data.is_limit, limit_sigma=data.limit_sigma)
    problem = JointProblem(scattered, thermal_model, obs, None, spec.thermal.scale, spec.thermal.calibration,
                           which=part)
    problem.thermal_data = data
    return problem


# ------------------------------------------------------------ results
def _exact_best(spec, model, problem, best_theta, t_scale):
    """L_dust/L_star, r/r_bb, T_dust and flags of the best fit, from the exact path."""
    from ..model.mixture import MixtureParameters
    from ..model.thermal import ThermalSettings, compute_thermal

    desc = spec.description.subset(model.materials)
    p = problem.space.unpack(best_theta)
    fr = [float(v) for v in p["fractions"][0]]
    par = {n: float(p[n][0]) for n in ("porosity", "a_min", "q", "a_max")}
    data = problem.thermal_data
    belt = spec.thermal.belt_au
    where = ((float(problem.thermal.radius(p)[0]),), None) if belt is None else (tuple(belt),
                                                                                 spec.thermal.surface_density_index)
    settings = ThermalSettings(*where, tuple(data.bands), None, float(t_scale), spec.thermal.distance_pc,
                               dict(spec.thermal.sublimation_k))
    res = compute_thermal(desc, MixtureParameters(tuple(fr), par["porosity"], par["a_min"], par["q"], par["a_max"]),
                          settings)
    extra = {} if belt is None else {"belt_au": [float(v) for v in belt],
                                     "surface_density_index": float(spec.thermal.surface_density_index),
                                     "radius_kind": "cross-section-weighted mean radius of the belt"}
    return {**extra, "fractional_luminosity": float(res.fractional_luminosity), "radius_au": float(res.mean_radius),
            "blackbody_radius_au": float(res.blackbody_radius), "radius_over_blackbody_radius": float(res.radius_ratio),
            "dust_temperature_K": float(res.dust_temperature), "flags": list(res.flags),
            "exact_band_flux_jy": [float(v) for v in res.band_disk], "notes": list(res.notes)}


def postprocess_joint(handle, run, spec, obs, folder: Path, sessions):
    """Results of one model's joint run (the files of a scattered-light fit plus ``thermal.ecsv``)."""
    from astropy.table import Table

    from .evidence import parameter_unit, summarise_posterior
    from ...errors import FitError
    from .results import ModelResult, write_result_json, write_result_table
    from .run import _N_BEST_CANDIDATES, _N_PREDICTIVE

    problem = handle.build()
    space = problem.space
    rng = np.random.default_rng([int(spec.sampler.seed), 7, len(handle.model.materials)])
    eq = run.equal_weight_samples(spec.sampler.n_posterior, rng)
    scale = problem.scattered.posterior_scale(eq, rng)
    t_scale = problem.thermal.posterior_scale(eq, rng)
    names = space.names
    sample_names = names + ("scale", "thermal_scale")
    samples = np.column_stack([eq, scale, t_scale])

    top = np.argsort(run.ln_l)[-_N_BEST_CANDIDATES:]
    s_best, chi2_s, lnl_s = problem.scattered.best_scale_fit(run.samples[top])
    t_best, chi2_t, lnl_t = problem.thermal.best_scale_fit(run.samples[top])
    i = int(np.argmax(lnl_s + lnl_t))
    best = {n: float(v) for n, v in zip(names, run.samples[top][i])}
    best["scale"], best["thermal_scale"] = float(s_best[i]), float(t_best[i])
    dof = problem.n_detections - problem.n_effective

    summary = summarise_posterior(samples, sample_names)
    pick = rng.choice(samples.shape[0], size=min(_N_PREDICTIVE, samples.shape[0]), replace=False)
    best_theta = run.samples[top][i][None, :]
    colours = obs.to_table()
    pred = problem.scattered.model_ratios(eq[pick]) * scale[pick][:, None]
    for name, row in zip(("model_median", "model_lo68", "model_hi68", "model_lo95", "model_hi95"),
                         np.percentile(pred, [50, 16, 84, 2.5, 97.5], axis=0)):
        colours[name] = row
    colours["model_best"] = problem.scattered.model_ratios(best_theta)[0] * s_best[i]
    for name in ("model_median", "model_lo68", "model_hi68", "model_lo95", "model_hi95", "model_best"):
        colours[name].unit = colours["value"].unit
    colours.meta["model"] = handle.model.name

    data = problem.thermal_data
    thermal = Table()
    thermal["band"] = list(data.band_names)
    thermal["pivot_wavelength"] = [b.pivot_wavelength for b in data.bands]
    thermal["pivot_wavelength"].unit = "um"
    thermal["value"], thermal["error"] = data.flux_jy, data.error_jy
    thermal["is_limit"], thermal["limit_sigma"] = data.is_limit, data.limit_sigma
    thermal["star_flux"] = problem.thermal_model.star_flux
    t_pred = problem.thermal.model_fluxes(eq[pick]) * t_scale[pick][:, None]
    for name, row in zip(("model_median", "model_lo68", "model_hi68", "model_lo95", "model_hi95"),
                         np.percentile(t_pred, [50, 16, 84, 2.5, 97.5], axis=0)):
        thermal[name] = row
    thermal["model_best"] = problem.thermal.model_fluxes(best_theta)[0] * t_best[i]
    for name in ("value", "error", "star_flux", "model_median", "model_lo68", "model_hi68", "model_lo95",
                 "model_hi95", "model_best"):
        thermal[name].unit = "Jy"
    derived = _exact_best(spec, handle.model, problem, best_theta, t_best[i])
    derived.update({"best_chi2_scattered": float(chi2_s[i]), "best_chi2_thermal": float(chi2_t[i]),
                    "calibration": spec.thermal.calibration, "distance_pc": spec.thermal.distance_pc,
                    "tied": problem.tied, "free": FREE})
    thermal.meta.update({k: v for k, v in derived.items() if k != "exact_band_flux_jy"})
    thermal.meta["model"] = handle.model.name
    thermal.meta["note"] = ("model fluxes from the fast path (posterior median, 68% and 95% bands, best fit); "
                            "L_dust/L_star, r/r_bb, T_dust and flags: the exact path at the best fit")
    result = ModelResult(
        name=handle.model.name, materials=handle.model.materials, ln_z=run.ln_z, ln_z_err=run.ln_z_err,
        n_calls=run.n_calls, n_iterations=run.n_iterations, information=run.information,
        parameter_names=names, sample_names=sample_names, samples=samples, best=best,
        best_chi2=float(chi2_s[i] + chi2_t[i]), dof=int(dof), best_ln_l=float(lnl_s[i] + lnl_t[i]),
        summary=summary, colours=colours, sessions=tuple(sessions), folder=folder,
        thermal=derived, thermal_fluxes=thermal,
    )
    bad = [k for k, v in (("ln Z", run.ln_z), ("ln Z error", run.ln_z_err), *best.items()) if not np.isfinite(v)]
    if bad or not np.all(np.isfinite(samples)):
        raise FitError(f"{spec.source}: model '{handle.model.name}': the joint fit produced non-finite values "
                       f"({', '.join(bad) or 'posterior samples'}); nothing was written for it")
    table = Table(samples, names=sample_names)
    for n in sample_names:
        if parameter_unit(n):
            table[n].unit = parameter_unit(n)
    table.meta["model"] = handle.model.name
    table.meta["note"] = ("equally weighted posterior samples; scale and thermal_scale drawn from "
                          "p(scale | parameters, data) of their own data set")
    provenance = spec.description.subset(handle.model.materials).provenance()
    provenance["fitted_parameters"] = ", ".join(names)
    for tab in (table, summary, colours, thermal):
        tab.meta.update({k: v for k, v in provenance.items() if k not in tab.meta})
    write_result_table(table, folder / "samples.ecsv")
    write_result_table(summary, folder / "parameters.ecsv")
    write_result_table(colours, folder / "colours.ecsv")
    write_result_table(thermal, folder / "thermal.ecsv")
    write_result_json(folder / "result.json", result.to_json())   # last: marks the model finished
    return result


def postprocess_part(handle, run, spec, obs, folder: Path, sessions):
    """Results of one model's run on one data set alone: evidence, samples, posterior summary."""
    from astropy.table import Table

    from .evidence import summarise_posterior
    from .results import ModelResult, write_result_json, write_result_table

    problem = handle.build()
    rng = np.random.default_rng([int(spec.sampler.seed), 11, len(handle.model.materials)])
    eq = run.equal_weight_samples(spec.sampler.n_posterior, rng)
    names = problem.space.names
    summary = summarise_posterior(eq, names)
    i = int(np.argmax(run.ln_l))
    best = {n: float(v) for n, v in zip(names, run.samples[i])}
    side = problem.scattered if handle.part == "scattered" else problem.thermal
    _, chi2, lnl = side.best_scale_fit(run.samples[i][None, :])
    result = ModelResult(
        name=handle.model.name, materials=handle.model.materials, ln_z=run.ln_z, ln_z_err=run.ln_z_err,
        n_calls=run.n_calls, n_iterations=run.n_iterations, information=run.information,
        parameter_names=names, sample_names=names, samples=eq, best=best, best_chi2=float(chi2[0]),
        dof=int(problem.n_detections - problem.n_effective), best_ln_l=float(lnl[0]), summary=summary,
        colours=Table(), sessions=tuple(sessions), folder=folder, data_set=handle.part,
    )
    table = Table(eq, names=names)
    table.meta.update({"model": handle.model.name, "data_set": handle.part})
    summary.meta.update({"model": handle.model.name, "data_set": handle.part})
    write_result_table(table, folder / "samples.ecsv")
    write_result_table(summary, folder / "parameters.ecsv")
    write_result_table(Table(), folder / "colours.ecsv")
    write_result_json(folder / "result.json", result.to_json())
    return result


# ------------------------------------------------------------ verdicts by data set
def driven_by(ln_b_joint: float, ln_b_scattered: float, ln_b_thermal: float) -> str:
    """Which data drove a verdict (the rule is :data:`DRIVEN_BY_RULE`).

    Examples
    --------
    >>> driven_by(6.0, 0.3, 5.5), driven_by(4.0, 2.0, -2.5), driven_by(1.5, 0.4, 0.5)
    ('thermal', 'conflict', 'joint only')
    """
    s, t = ln_b_scattered, ln_b_thermal
    if not (math.isfinite(s) and math.isfinite(t)):
        return "-"
    speak_s, speak_t = abs(s) >= 1.0, abs(t) >= 1.0
    if speak_s and speak_t:
        if np.sign(s) != np.sign(t):
            return "conflict"
        return "both"
    if speak_s:
        return "scattered"
    if speak_t:
        return "thermal"
    return "joint only"


def by_data_columns(verdicts, parts: dict) -> dict:
    """Columns of the verdict table for the runs on each data set alone.

    Parameters
    ----------
    verdicts : sequence of Verdict
        The joint verdicts (their model pairs are reused).
    parts : dict
        ``{"scattered": {model name: ModelResult}, "thermal": {...}}``.

    Returns
    -------
    dict of str to list
        ``ln_b_scattered``, ``ln_b_scattered_err``, ``ln_b_thermal``, ``ln_b_thermal_err``
        (same pair of models as the joint verdict; nan where not tested) and ``driven_by``.
    """
    out = {f"ln_b_{k}{e}": [] for k in ("scattered", "thermal") for e in ("", "_err")}
    out["driven_by"] = []
    for v in verdicts:
        values = {}
        for k in ("scattered", "thermal"):
            a, b = parts.get(k, {}).get(v.with_model), parts.get(k, {}).get(v.without_model)
            if v.verdict == "not tested" or a is None or b is None:
                values[k] = (math.nan, math.nan)
            else:
                values[k] = (a.ln_z - b.ln_z, math.hypot(a.ln_z_err, b.ln_z_err))
            out[f"ln_b_{k}"].append(values[k][0])
            out[f"ln_b_{k}_err"].append(values[k][1])
        out["driven_by"].append(driven_by(v.ln_b, values["scattered"][0], values["thermal"][0]))
    return out
