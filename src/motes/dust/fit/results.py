"""Results of a fit: per-model results, the whole comparison, files and the text report.

Per model, in ``RUN/models/<model>/``:

``result.json``
    ln Z, its error, calls, iterations, information, best fit (maximum
    likelihood over the scale: parameters, scale, chi2, dof), sessions run.
    Written last: its presence marks the model as finished.
``samples.ecsv``
    Equally weighted posterior samples (parameters and the flux scale).
``parameters.ecsv``
    Median, 68% and 95% intervals, 95% upper limit per parameter.
``colours.ecsv``
    Data and posterior model ratios per band (median, 68% band, best fit).
``sampler_state.dynesty``
    dynesty's checkpoint (its own pickle format; not a result).

Whole run, in ``RUN/``: ``ranking.ecsv``, ``verdicts.ecsv``, ``summary.txt``,
figures, and ``fit_state.json`` (format and package versions, description
digest).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ... import __version__
from ...errors import FitError
from .evidence import VERDICT_RULE, Verdict

__all__ = [
    "FIT_FORMAT_VERSION",
    "FIT_CAVEATS",
    "ModelResult",
    "FitResult",
    "write_json_atomic",
    "write_table_atomic",
    "read_model_result",
    "format_fit_report",
]

#: Version of the run-folder layout and result files.
FIT_FORMAT_VERSION = 1

#: Printed with every fit.
FIT_CAVEATS = (
    "Grains are modelled as Mie spheres; real grains are irregular, porous aggregates whose phase "
    "functions and colours differ, so fractions are those of equivalent spheres.",
    "Verdicts depend on the model: the candidate materials, their optical constants, the mixing rule, "
    "the size distribution and the priors. A material 'needed' here is needed by this model family.",
    "Carbon-rich (opaque) grains hide water ice: without a 3 um dip, ice can still be present; a "
    "missing dip does not rule ice out, which is why 'not needed' requires evidence against it.",
)


def write_json_atomic(path: Path, data: dict) -> None:
    """Write JSON to a temporary file, then rename it over ``path``."""
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(json.dumps(data, indent=2, sort_keys=False, default=_json_default))
    os.replace(tmp, path)


def _json_default(value):
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def write_table_atomic(table, path: Path) -> None:
    """Write an astropy Table as ECSV through a temporary file and a rename."""
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    table.write(tmp, format="ascii.ecsv", overwrite=True)
    os.replace(tmp, path)


@dataclass(frozen=True)
class ModelResult:
    """Everything kept about one model's run.

    Attributes
    ----------
    name : str
    materials : tuple of str
    ln_z, ln_z_err : float
        ln evidence and its 1-sigma uncertainty.
    n_calls, n_iterations : int
        Likelihood calls and iterations, over all sessions.
    information : float
        KL information of posterior vs prior [nats].
    parameter_names : tuple of str
        Names of the sampled parameters.
    sample_names : tuple of str
        Columns of ``samples`` (parameters, then ``scale``).
    samples : ndarray[M, len(sample_names)]
        Equally weighted posterior samples.
    best : dict of str to float
        Maximum-likelihood point (parameters and ``scale``).
    best_chi2 : float
        chi2 at ``best`` (best scale; systematic term included if sampled).
    dof : int
        Detections minus free parameters (scale included).
    best_ln_l : float
        ln L at ``best`` (normalised).
    summary : astropy.table.Table
        Posterior summary (see :func:`motes.dust.fit.evidence.summarise_posterior`).
    colours : astropy.table.Table
        Data and posterior model ratios per band.
    sessions : tuple of dict
        Per session: resumed (bool), wall_time [s], processes (number of
        processes that evaluated the likelihood).
    folder : pathlib.Path
    """

    name: str
    materials: tuple[str, ...]
    ln_z: float
    ln_z_err: float
    n_calls: int
    n_iterations: int
    information: float
    parameter_names: tuple[str, ...]
    sample_names: tuple[str, ...]
    samples: np.ndarray = field(repr=False)
    best: dict = field(repr=False)
    best_chi2: float = math.nan
    dof: int = 0
    best_ln_l: float = math.nan
    summary: object = field(default=None, repr=False)
    colours: object = field(default=None, repr=False)
    sessions: tuple = ()
    folder: Path | None = None

    def column(self, name: str) -> np.ndarray:
        """Posterior samples of one column, ndarray[M]."""
        try:
            return self.samples[:, self.sample_names.index(name)]
        except ValueError:
            raise FitError(f"model '{self.name}' has no parameter {name!r}; it has {list(self.sample_names)}") from None

    def fraction_samples(self, material: str) -> np.ndarray:
        """Posterior samples of a material's volume fraction (zeros when absent), ndarray[M]."""
        if material not in self.materials:
            return np.zeros(self.samples.shape[0])
        if len(self.materials) == 1:
            return np.ones(self.samples.shape[0])
        return self.column(f"fraction_{material}")

    def to_json(self) -> dict:
        return {
            "format_version": FIT_FORMAT_VERSION, "motes_version": __version__,
            "name": self.name, "materials": list(self.materials), "ln_z": self.ln_z,
            "ln_z_err": self.ln_z_err, "n_calls": self.n_calls, "n_iterations": self.n_iterations,
            "information": self.information, "parameter_names": list(self.parameter_names),
            "sample_names": list(self.sample_names), "best": self.best, "best_chi2": self.best_chi2,
            "dof": self.dof, "best_ln_l": self.best_ln_l, "sessions": list(self.sessions),
        }


def read_model_result(folder: Path) -> ModelResult:
    """Read a finished model's files back (``result.json`` and the ECSV tables)."""
    from astropy.table import Table

    folder = Path(folder)
    try:
        info = json.loads((folder / "result.json").read_text())
        if info.get("format_version") != FIT_FORMAT_VERSION:
            raise FitError(f"{folder}: result format {info.get('format_version')} is not "
                           f"{FIT_FORMAT_VERSION}; start the fit afresh (--fresh)")
        samples_t = Table.read(folder / "samples.ecsv", format="ascii.ecsv")
        summary = Table.read(folder / "parameters.ecsv", format="ascii.ecsv")
        colours = Table.read(folder / "colours.ecsv", format="ascii.ecsv")
    except (OSError, ValueError, KeyError) as exc:
        raise FitError(f"{folder}: cannot read the finished model's files ({exc}); "
                       "start the fit afresh (--fresh)") from None
    names = tuple(info["sample_names"])
    samples = np.column_stack([np.asarray(samples_t[n], dtype=float) for n in names])
    return ModelResult(
        name=info["name"], materials=tuple(info["materials"]), ln_z=float(info["ln_z"]),
        ln_z_err=float(info["ln_z_err"]), n_calls=int(info["n_calls"]),
        n_iterations=int(info["n_iterations"]), information=float(info["information"]),
        parameter_names=tuple(info["parameter_names"]), sample_names=names, samples=samples,
        best=dict(info["best"]), best_chi2=float(info["best_chi2"]), dof=int(info["dof"]),
        best_ln_l=float(info["best_ln_l"]), summary=summary, colours=colours,
        sessions=tuple(info.get("sessions", ())), folder=folder,
    )


@dataclass(frozen=True)
class FitResult:
    """The outcome of ``motes fit``.

    Attributes
    ----------
    source : str
        The fit description.
    run_dir : pathlib.Path
    observations : DiskPhotometry
    models : tuple of ModelResult
        In ranking order (highest ln Z first).
    ranking : astropy.table.Table
    verdicts : tuple of Verdict
    verdict_table : astropy.table.Table
    full_model : str or None
    priors : tuple of (str, str)
        Parameter and prior text (for reports).
    notes : tuple of str
        Data and model notes (approximate bands, extrapolations, prior bounds reached...).
    caveats : tuple of str
    files : tuple of pathlib.Path
    """

    source: str
    run_dir: Path
    observations: object
    models: tuple
    ranking: object
    verdicts: tuple
    verdict_table: object
    full_model: str | None
    priors: tuple = ()
    notes: tuple = ()
    caveats: tuple = FIT_CAVEATS
    files: tuple = ()

    @property
    def best(self) -> ModelResult:
        """The model with the highest ln Z."""
        return self.models[0]

    def model(self, name: str) -> ModelResult:
        """One model's result by name."""
        for m in self.models:
            if m.name == name:
                return m
        raise FitError(f"no model named {name!r}; models are {[m.name for m in self.models]}")

    def verdict(self, material: str) -> Verdict:
        """The verdict on one material."""
        for v in self.verdicts:
            if v.material == material:
                return v
        raise FitError(f"no verdict for {material!r}")


def _fmt(x, digits=3):
    if x is None or not np.isfinite(x):
        return "-"
    ax = abs(x)
    if ax != 0 and (ax < 1e-2 or ax >= 1e4):
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}g}" if ax < 1 else f"{x:.{max(digits - int(math.log10(ax)) - 1, 0) + 1}f}"


def format_fit_report(result: FitResult) -> str:
    """The text summary printed by ``motes fit`` and written to ``summary.txt``."""
    obs = result.observations
    lines = [f"motes fit of {result.source}",
             f"data: {len(obs.bands)} bands ({obs.n_detections} detections), {obs.normalisation} "
             f"from {obs.path}", ""]
    lines.append("Models ranked by evidence (ln B = ln Z - ln Z(best), and vs the full set):")
    lines.append(f"  {'rank':>4}  {'model':<40} {'ln Z':>9} {'±':>5}  {'ln B best':>9}  {'reading':<13}"
                 f" {'ln B full':>9}  {'P(model)':>8}")
    for row in result.ranking:
        lines.append(f"  {row['rank']:>4}  {row['model']:<40} {row['ln_z']:9.2f} {row['ln_z_err']:5.2f}  "
                     f"{row['ln_b_best']:9.2f}  {row['strength_vs_best']:<13} "
                     f"{_fmt(row['ln_b_full']):>9}  {row['posterior_probability']:8.3f}")
    lines += ["", "Verdicts per material:"]
    for v, row in zip(result.verdicts, result.verdict_table):
        text = "  " + v.sentence()
        if v.verdict in ("not needed", "undecided") and np.isfinite(row["fraction_upper95"]):
            text += f"; its fraction in {v.with_model}: 95% upper limit {row['fraction_upper95']:.3f}"
        lines.append(text)
    lines.append("  " + VERDICT_RULE)
    for m in result.models[: min(2, len(result.models))]:
        lines += ["", f"Model {m.name}: posterior median, 68% and 95% intervals"]
        for row in m.summary:
            lines.append(f"  {row['parameter']:<28} {_fmt(row['median']):>9}  "
                         f"[{_fmt(row['lo68'])}, {_fmt(row['hi68'])}]  [{_fmt(row['lo95'])}, {_fmt(row['hi95'])}]"
                         f"  95% upper {_fmt(row['upper95'])}")
        best = ", ".join(f"{k} = {_fmt(v)}" for k, v in m.best.items())
        lines.append(f"  maximum likelihood: chi2 = {m.best_chi2:.2f} for {m.dof} dof; {best}")
    if result.priors:
        lines += ["", "Priors:"] + [f"  {name}: {text}" for name, text in result.priors]
    lines += ["", "Caveats:"] + [f"  - {c}" for c in result.caveats]
    if result.notes:
        lines += ["", "Notes:"] + [f"  - {n}" for n in result.notes]
    if result.files:
        lines += ["", "Files written:"] + [f"  {p}" for p in result.files]
    return "\n".join(lines)
