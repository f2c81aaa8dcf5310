"""``motes fit``: nested-sampling fits of disk colours and evidence ranking of compositions.

:func:`run_fit` takes a fit description (:mod:`motes.dust.fit.spec`), runs one
nested-sampling fit per model of the comparison (:mod:`motes.dust.fit.sampler`),
and writes per-model results, a ranking by evidence and per-material verdicts
(:mod:`motes.dust.fit.evidence`) into a run folder (:mod:`motes.dust.fit.results`).
It returns the results; the report (``summary.txt`` and the figures) is
written by :func:`motes.report.fit_text.write_fit_report`.

Resume: the run folder records the description's digest. Run again on the
same folder, a fit skips finished models (``result.json`` present), resumes the
interrupted one from its sampler checkpoint, and runs the rest. A folder from
another description is refused (``fresh=True`` starts over, deleting the
previous run's files, its report included).

Likelihood (per model): Gaussian detections and normal-CDF upper limits
(:mod:`motes.dust.observations`), the flux scale integrated out under a
log-uniform prior that is the same in every model (:mod:`motes.dust.likelihood`),
priors as in :mod:`motes.dust.fit.priors`.
"""

from __future__ import annotations

import json
import math
import shutil
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import FitError, MotesError
from ...progress import remaining_estimate
from ...files import default_output_folder, format_stamp, stamp_problem, write_text_atomic
from .evidence import ModelEvidence, material_verdicts, parameter_unit, rank_models, summarise_posterior
from .problem import ProblemHandle, HandleLikelihood, HandlePriorTransform, read_fit_photometry, reset_traces
from .results import (FIT_CAVEATS, FIT_FORMAT_VERSION, FitResult, ModelResult, read_model_result,
                      write_result_json, write_result_table)
from .scale_check import check_scale_prior, scale_bound_notes
from .spec import FitSpec, read_fit_description
from .sampler import open_pool, run_nested_model

__all__ = ["FitRunSettings", "run_fit", "prepare_fit", "FitResult", "ModelResult"]

_STATE = "fit_state.json"
_RUN_FILES = ("ranking.ecsv", "verdicts.ecsv", "summary.txt", "description.toml")
_N_PREDICTIVE = 300
_N_BEST_CANDIDATES = 300


@dataclass(frozen=True)
class FitRunSettings:
    """How to run a fit (the description says *what* to fit).

    Parameters
    ----------
    output : pathlib.Path or None
        Run folder; default ``./<description stem>_fit`` in the current folder (a
        run folder beside the description, the earlier default, is still resumed).
    workers : int
        Processes evaluating the likelihood (1 = in this process).
    resume : bool
        Continue a run found in ``output`` (True) or refuse to touch it.
    fresh : bool
        Delete a previous run's files in ``output`` and start over.
    progress : bool
        Progress line per model on stderr.
    """

    output: Path | None = None
    workers: int = 1
    resume: bool = True
    fresh: bool = False
    progress: bool = True

    def __post_init__(self):
        if int(self.workers) < 1:
            raise FitError(f"workers must be >= 1, got {self.workers}")


# ------------------------------------------------------------ validation
def _without_context(text: str, spec: FitSpec, model) -> str:
    """``text`` less a leading "FILE: " and "model 'NAME': ", which the caller adds once."""
    prefixes = (f"{spec.source}: ", f"model '{model.name}': ")
    while text.startswith(prefixes):
        text = text.removeprefix(prefixes[0]) if text.startswith(prefixes[0]) else text.removeprefix(prefixes[1])
    return text


def prepare_fit(spec: FitSpec, model_factory=None):
    """Check a fit before running it; return the data and one handle per model.

    Raises
    ------
    motes.errors.FitError
        Fewer detections than free parameters, materials that do not cover
        the bands, a_min bounds reaching a_max, data that need a flux scale
        outside the ``[scale]`` prior
        (:func:`~motes.dust.fit.scale_check.check_scale_prior`), and similar
        problems, each naming the model.
    """
    obs = read_fit_photometry(spec)
    if spec.thermal is not None:
        from .joint_run import check_thermal_coverage, read_fit_thermal

        check_thermal_coverage(spec, read_fit_thermal(spec))     # one clear message, before any model
    a_min, a_max = spec.parameters.get("a_min"), spec.parameters.get("a_max")
    if a_min is not None and a_min.relative_to is None:
        hi_min = a_min.value if a_min.kind == "fixed" else a_min.upper
        lo_max = (a_max.value if a_max.kind == "fixed" else a_max.lower) if a_max is not None else None
        if lo_max is not None and hi_min >= lo_max:
            raise FitError(f"{spec.source}: the a_min prior reaches {hi_min:g} um, not below a_max "
                           f"({lo_max:g} um); lower a_min's upper bound")
    handles = []
    for i, model in enumerate(spec.models):
        handle = ProblemHandle(spec, model, model_factory=model_factory)
        try:
            problem = handle.build()
            prepare = getattr(problem.colour_model, "prepare", None)
            if prepare is not None:
                _prepare_tables(prepare, problem.space)   # once, before any worker starts
            if spec.thermal is not None:
                _prepare_tables(problem.thermal_model.prepare, problem.space)
        except MotesError as exc:
            raise FitError(f"{spec.source}: model '{model.name}': {_without_context(str(exc), spec, model)}") from None
        need = problem.space.n_effective
        if spec.thermal is not None:
            need, n_det = problem.n_effective, problem.n_detections
            if n_det < need:
                raise FitError(
                    f"{spec.source}: model '{model.name}' has {need} free parameters (two flux scales included) "
                    f"but the scattered-light and thermal data have only {n_det} detected bands together; fix "
                    "some parameters or add bands")
            check_scale_prior(problem.scattered, model.name, spec.source)
            check_scale_prior(problem.thermal, model.name, spec.source, "[thermal]",
                              ("cross_section_lower", "cross_section_upper"))
            handles.append(handle)
            continue
        if obs.n_detections < need:
            raise FitError(
                f"{spec.source}: model '{model.name}' has {need} free parameters (fractions "
                f"{max(len(model.materials) - 1, 0)}, others {need - 1 - max(len(model.materials) - 1, 0)}, "
                f"flux scale 1) but the data have only {obs.n_detections} detected bands; "
                "fix some parameters or add bands")
        check_scale_prior(problem, model.name, spec.source)
        handles.append(handle)
    return obs, tuple(handles)


#: Prior draws whose mixtures decide which lookup tiles a fit builds before sampling (see _prepare_tables).
_N_PREPARE_DRAWS = 2000


def _prepare_tables(prepare, space) -> None:
    """Build or load the fast path's tiles for mixtures drawn from the model's prior.

    Only the tiles the prior's mixtures reach are made ready (2,000 draws, a
    fixed seed); tiles the sampler needs later are built then (and cached), with
    bit-identical values (:mod:`motes.dust.model.tables`). On the demo fit this
    builds 326 of the 374 tiles of the 10% lattice with porosity 0-0.95, and
    far fewer of its most expensive, weakly absorbing ones; the sampler then
    needs about 16 more. Forward models whose ``prepare`` takes no mixtures
    get ``prepare()``.
    """
    import inspect

    try:
        takes_mixtures = "fractions" in inspect.signature(prepare).parameters
    except (TypeError, ValueError):
        takes_mixtures = False
    if not takes_mixtures:
        prepare()
        return
    u = np.random.default_rng(20260).uniform(size=(_N_PREPARE_DRAWS, space.ndim))
    theta = space.transform(u) if space.a_min.relative_to is None else None
    if theta is None:
        prepare()              # a_min tied to the blow-out size: drawing it needs every draw's blow-out
        return
    p = space.unpack(theta, _raw_a_min=True)
    prepare(fractions=p["fractions"], porosity=p["porosity"])


# ---------------------------------------------------------- run folder
def _default_output(spec: FitSpec) -> Path:
    """``./<description stem>_fit`` (:func:`motes.files.default_output_folder`).

    A run folder left beside the description by an earlier version (the
    default before the one rule) is still found and resumed when the current
    folder holds none.
    """
    folder = default_output_folder(spec.source, "fit")
    stem = Path(spec.source).stem if spec.source != "<string>" else "fit"
    earlier = spec.base_dir / f"{stem}_fit"
    if not folder.exists() and (earlier / _STATE).is_file():
        return earlier
    return folder


def _prepare_run_dir(run_dir: Path, spec: FitSpec, settings: FitRunSettings, echo) -> None:
    state_path = run_dir / _STATE
    if run_dir.exists() and not run_dir.is_dir():
        raise FitError(f"output {run_dir} exists and is not a folder")
    if state_path.exists():
        try:
            state = json.loads(state_path.read_text())
        except (OSError, ValueError):
            state = {}
        same = state.get("digest") == spec.digest and stamp_problem(state, FIT_FORMAT_VERSION) is None
        if settings.fresh:
            _clear_run(run_dir)
        elif not same:
            raise FitError(
                f"{run_dir} holds a fit of another description (or another format); "
                "use --fresh to delete it and start over, or choose another --output")
        elif not settings.resume:
            raise FitError(f"{run_dir} already holds this fit; use --resume to continue it or --fresh to restart")
        else:
            echo(f"resuming the fit in {run_dir}")
    elif run_dir.exists() and any(run_dir.iterdir()):
        raise FitError(f"{run_dir} is not empty and holds no motes fit; choose another --output")
    run_dir.mkdir(parents=True, exist_ok=True)
    (run_dir / "models").mkdir(exist_ok=True)
    if not state_path.exists():
        write_text_atomic(run_dir / "description.toml", spec.text)
        write_result_json(state_path, {
            **format_stamp(FIT_FORMAT_VERSION),
            "dynesty_version": _dynesty_version(), "digest": spec.digest, "source": spec.source,
            "models": [m.name for m in spec.models],
        })


def _clear_run(run_dir: Path) -> None:
    shutil.rmtree(run_dir / "models", ignore_errors=True)
    for name in (_STATE,) + _RUN_FILES:
        (run_dir / name).unlink(missing_ok=True)
    for png in run_dir.glob("*.png"):
        png.unlink()


def _dynesty_version() -> str:
    import dynesty

    return dynesty.__version__


# -------------------------------------------------------- one model
def _postprocess(handle: ProblemHandle, run, spec: FitSpec, obs, folder: Path, sessions) -> ModelResult:
    from astropy.table import Table

    problem = handle.build()
    space = problem.space
    rng = np.random.default_rng([int(spec.sampler.seed), 7, len(handle.model.materials)])
    eq = run.equal_weight_samples(spec.sampler.n_posterior, rng)
    scale = problem.posterior_scale(eq, rng) if not space.sample_scale else space.unpack(eq)["scale"]
    names = space.names
    sample_names = names + (() if space.sample_scale else ("scale",))
    samples = eq if space.sample_scale else np.column_stack([eq, scale])

    # maximum likelihood over (parameters, scale): profile the best dead points over the scale
    top = np.argsort(run.ln_l)[-_N_BEST_CANDIDATES:]
    s_best, chi2, ln_l = problem.best_scale_fit(run.samples[top])
    i = int(np.argmax(ln_l))
    best = {n: float(v) for n, v in zip(names, run.samples[top][i]) if n != "scale"}
    best["scale"] = float(s_best[i])
    dof = obs.n_detections - space.n_effective

    summary = summarise_posterior(samples, sample_names)
    pick = rng.choice(samples.shape[0], size=min(_N_PREDICTIVE, samples.shape[0]), replace=False)
    pred = problem.model_ratios(eq[pick]) * scale[pick][:, None]
    best_theta = run.samples[top][i][None, :]
    best_model = problem.model_ratios(best_theta)[0] * s_best[i]
    colours = obs.to_table()
    q = np.percentile(pred, [50, 16, 84, 2.5, 97.5], axis=0)
    for name, row in zip(("model_median", "model_lo68", "model_hi68", "model_lo95", "model_hi95"), q):
        colours[name] = row
    colours["model_best"] = best_model
    for name in ("model_median", "model_lo68", "model_hi68", "model_lo95", "model_hi95", "model_best"):
        colours[name].unit = colours["value"].unit      # the data's: none for flux ratios, 1/arcsec2 for SB
    colours.meta["model"] = handle.model.name

    result = ModelResult(
        name=handle.model.name, materials=handle.model.materials, ln_z=run.ln_z, ln_z_err=run.ln_z_err,
        n_calls=run.n_calls, n_iterations=run.n_iterations, information=run.information,
        parameter_names=names, sample_names=sample_names, samples=samples, best=best,
        best_chi2=float(chi2[i]), dof=int(dof), best_ln_l=float(ln_l[i]), summary=summary,
        colours=colours, sessions=tuple(sessions), folder=folder,
    )
    # last check before anything is written: a result with a non-finite evidence or best fit is meaningless
    bad = [k for k, v in (("ln Z", run.ln_z), ("ln Z error", run.ln_z_err), ("best chi2", chi2[i]),
                          *best.items()) if not np.isfinite(v)]
    if bad or not np.all(np.isfinite(samples)):
        raise FitError(f"{spec.source}: model '{handle.model.name}': the fit produced non-finite values "
                       f"({', '.join(bad) or 'posterior samples'}); nothing was written for it. The model is "
                       "NaN somewhere in the prior: check the priors and the data")
    table = Table(samples, names=sample_names)
    for n in sample_names:
        if parameter_unit(n):
            table[n].unit = parameter_unit(n)
    table.meta["model"] = handle.model.name
    table.meta["note"] = "equally weighted posterior samples; scale drawn from p(scale | parameters, data)"
    # what produced the tables: version, mixing rule, geometry, star, grain model, size distribution
    provenance = spec.description.subset(handle.model.materials).provenance()
    provenance["fitted_parameters"] = ", ".join(names)
    for tab in (table, summary, colours):
        tab.meta.update({k: v for k, v in provenance.items() if k not in tab.meta})
    write_result_table(table, folder / "samples.ecsv")
    write_result_table(summary, folder / "parameters.ecsv")
    write_result_table(colours, folder / "colours.ecsv")
    write_result_json(folder / "result.json", result.to_json())   # last: marks the model finished
    return result


def _run_model(index, handle, spec, obs, run_dir, settings, echo, *, folder=None, postprocess=None,
               seed_key=None, label=None) -> ModelResult:
    model = handle.model
    folder = run_dir / "models" / model.folder_name if folder is None else folder
    postprocess = _postprocess if postprocess is None else postprocess
    seed_key = index if seed_key is None else seed_key
    label = model.name if label is None else label
    if (folder / "result.json").exists():
        echo(f"[{index + 1}/{len(spec.models)}] {label}: finished earlier, read from {folder}")
        return read_model_result(folder)
    folder.mkdir(parents=True, exist_ok=True)
    trace = folder / "processes"
    shutil.rmtree(trace, ignore_errors=True)
    reset_traces(trace)
    traced = ProblemHandle(spec, model, model_factory=handle.model_factory, trace_dir=trace, part=handle.part)
    checkpoint = folder / "sampler_state.dynesty"
    previous = []
    if (folder / "sessions.json").exists():
        try:
            previous = json.loads((folder / "sessions.json").read_text())
        except (OSError, ValueError):
            previous = []
    verb = "resuming" if checkpoint.exists() else "running"
    echo(f"[{index + 1}/{len(spec.models)}] {label}: {verb} nested sampling "
         f"({handle.space.ndim} dimensions, {settings.workers} worker{'s' if settings.workers > 1 else ''})")
    with open_pool(settings.workers, HandleLikelihood(traced), HandlePriorTransform(traced)) as pool:
        run = run_nested_model(handle.space.ndim, spec.sampler, checkpoint, pool=pool,
                               workers=settings.workers, seed_key=seed_key, resume=True,
                               progress=settings.progress, label=label)
    n_proc = len(list(trace.glob("*"))) if trace.exists() else 0
    sessions = previous + [{"resumed": run.resumed, "wall_time": round(run.wall_time, 2), "processes": n_proc}]
    write_result_json(folder / "sessions.json", sessions)
    return postprocess(handle, run, spec, obs, folder, sessions)


# --------------------------------------------------------------- run
def run_fit(spec, settings: FitRunSettings = FitRunSettings(), *, model_factory=None, echo=print) -> FitResult:
    """Run (or resume) a fit: every model of the comparison, then ranking and verdicts.

    Parameters
    ----------
    spec : FitSpec, str or os.PathLike
        A parsed description or the path of a fit description file.
    settings : FitRunSettings
    model_factory : callable, optional
        ``model_factory(spec, materials, bands) -> colour model`` (picklable);
        default: the description's :class:`~motes.dust.model.colours.DiskColourModel`.
    echo : callable
        Where progress lines go.

    Returns
    -------
    FitResult
        Its ``files`` are the run's tables and per-model folders;
        :func:`motes.report.fit_text.write_fit_report` adds the report's.
    """
    if not isinstance(spec, FitSpec):
        spec = read_fit_description(spec)
    obs, handles = prepare_fit(spec, model_factory)
    run_dir = Path(settings.output) if settings.output is not None else _default_output(spec)
    _prepare_run_dir(run_dir, spec, settings, echo)

    results, timed = [], []
    for i, h in enumerate(handles):
        fresh = not (run_dir / "models" / h.model.folder_name / "sampler_state.dynesty").exists() and not (
            run_dir / "models" / h.model.folder_name / "result.json").exists()
        start = time.perf_counter()
        results.append(_run_model(i, h, spec, obs, run_dir, settings, echo, **_joint_run_options(spec)))
        if fresh:   # sampled from start to end now: its rate is this session's
            timed.append((results[-1].n_calls, time.perf_counter() - start))
        line = remaining_estimate(timed, [r.n_calls for r in results], len(handles) - len(results))
        if line and settings.progress:
            echo(f"  {line}")
    by_data = _run_by_data(spec, handles, obs, run_dir, settings, echo)
    full = spec.full_model.name if spec.full_model is not None else None
    evid = [ModelEvidence(r.name, r.materials, r.ln_z, r.ln_z_err) for r in results]
    ranking = rank_models(evid, full)
    verdicts = material_verdicts(evid, spec.materials, full)
    by_name = {r.name: r for r in results}
    verdict_table = _verdict_table(verdicts, by_name)
    ordered = tuple(by_name[n] for n in ranking["model"])
    notes = list(obs.notes) + _model_notes(handles) + _bound_notes(ordered, handles)
    thermal_obs = None
    if spec.thermal is not None:
        from .joint_run import by_data_columns, joint_notes, read_fit_thermal

        thermal_obs = read_fit_thermal(spec)
        notes = list(joint_notes(spec.thermal)) + list(thermal_obs.notes) + notes
        for name, values in by_data_columns(verdicts, by_data).items() if by_data else ():
            verdict_table[name] = values
        for part, models in by_data.items():
            ranking[f"ln_z_{part}"] = [models[n].ln_z for n in ranking["model"]]
            ranking[f"ln_z_{part}_err"] = [models[n].ln_z_err for n in ranking["model"]]
        if by_data:
            from .joint_run import DRIVEN_BY_RULE

            verdict_table.meta["driven_by_rule"] = DRIVEN_BY_RULE
            verdict_table.meta["note_by_data"] = ("ln_b: both data sets (joint); ln_b_scattered / ln_b_thermal: "
                                                  "the same pair of models run on one data set alone")

    files = [run_dir / "ranking.ecsv", run_dir / "verdicts.ecsv"]
    write_result_table(ranking, files[0])
    write_result_table(verdict_table, files[1])
    files += [m.folder for m in ordered]
    return FitResult(source=spec.source, run_dir=run_dir, observations=obs, models=ordered,
                     ranking=ranking, verdicts=verdicts, verdict_table=verdict_table, full_model=full,
                     priors=tuple(handles[0].space.describe()) + _thermal_priors(spec) if handles else (),
                     notes=tuple(dict.fromkeys(notes)), caveats=_caveats(spec.description), files=tuple(files),
                     thermal_observations=thermal_obs, by_data=by_data)


def _caveats(description) -> tuple:
    """FIT_CAVEATS, with the grain-model caveat of the hollow spheres when they ran."""
    if getattr(description, "grains", "spheres") == "spheres":   # f_max is None too when it is fitted
        return FIT_CAVEATS
    hollow = (f"Grains are modelled as a distribution of {description.grain_summary} (Min, Hovenier & de "
              "Koter 2005), an idealisation of irregular grains; fractions are those of that grain model.")
    return tuple(hollow if c.startswith("Grains are modelled as Mie spheres") else c for c in FIT_CAVEATS)


def _verdict_table(verdicts, by_name):
    from astropy.table import Table

    rows = []
    for v in verdicts:
        upper = median = math.nan
        if v.with_model:
            frac = by_name[v.with_model].fraction_samples(v.material)
            upper, median = float(np.percentile(frac, 95)), float(np.median(frac))
        rows.append((v.material, v.verdict, v.ln_b, v.ln_b_err, v.strength, v.with_model, v.without_model,
                     v.pairing, median, upper, v.borderline))
    table = Table(rows=rows, names=("material", "verdict", "ln_b", "ln_b_err", "strength", "with_model",
                                    "without_model", "pairing", "fraction_median", "fraction_upper95",
                                    "borderline"))
    from .evidence import VERDICT_RULE

    table.meta["rule"] = VERDICT_RULE
    table.meta["note"] = "fraction_median / fraction_upper95: that material's volume fraction in with_model"
    return table


def _model_notes(handles) -> list[str]:
    notes = []
    for h in handles:   # the Mie-spheres note is already a caveat
        problem = h.build()
        notes.extend(n for n in getattr(problem.colour_model, "notes", ()) if "Mie spheres" not in n)
        notes.extend(getattr(getattr(problem, "thermal_model", None), "notes", ()))
    return notes


def _thermal_priors(spec) -> tuple:
    """Prior rows of a joint fit's thermal side (none for a scattered-light fit)."""
    if spec.thermal is None:
        return ()
    t = spec.thermal
    return (("thermal_scale", f"log-uniform [{t.scale.lower:g}, {t.scale.upper:g}] au^2 (total grain cross-section), "
                              "marginalised numerically"),
            ("thermal calibration", f"fractional error {t.calibration:g} added in quadrature to every thermal "
                                    "detection"))


def _joint_run_options(spec) -> dict:
    """_run_model's options for a joint fit's main runs (none for a scattered-light fit)."""
    if spec.thermal is None:
        return {}
    from .joint_run import postprocess_joint

    return {"postprocess": postprocess_joint}


#: Offsets of the seed streams of the runs on one data set (the joint runs keep the model's index).
_PART_SEED_OFFSET = {"scattered": 1000, "thermal": 2000}


def _run_by_data(spec, handles, obs, run_dir, settings, echo) -> dict:
    """Every model run on the scattered light alone and on the thermal data alone (``verdicts_by_data``)."""
    if spec.thermal is None or not spec.thermal.verdicts_by_data:
        return {}
    from .joint_run import postprocess_part

    out = {}
    for part in ("scattered", "thermal"):
        out[part] = {}
        for i, h in enumerate(handles):
            ph = ProblemHandle(spec, h.model, model_factory=h.model_factory, part=part)
            folder = run_dir / "models" / h.model.folder_name / "by_data" / part
            res = _run_model(i, ph, spec, obs, run_dir, settings, echo, folder=folder, postprocess=postprocess_part,
                             seed_key=i + _PART_SEED_OFFSET[part], label=f"{h.model.name} ({part} alone)")
            out[part][h.model.name] = res
    return out


def _bound_notes(models, handles) -> list[str]:
    """Notes where a scale-prior bound cuts into the scale's likelihood at the best fit (see scale_check)."""
    by_name = {h.model.name: h for h in handles}
    out = []
    for m in models:
        handle = by_name.get(m.name)
        if handle is None or not all(n in m.best for n in handle.space.names):
            continue
        theta = np.array([m.best[n] for n in handle.space.names])
        problem = handle.build()
        if hasattr(problem, "thermal"):      # a joint fit: both scales
            out += scale_bound_notes(problem.scattered, m.name, theta, m.best.get("scale", math.nan))
            out += scale_bound_notes(problem.thermal, m.name, theta, m.best.get("thermal_scale", math.nan),
                                     "[thermal] cross_section_lower/upper")
            continue
        out += scale_bound_notes(problem, m.name, theta, m.best.get("scale", math.nan))
    return out
