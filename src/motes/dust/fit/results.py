"""Results of a fit: per-model results, the whole comparison and their files.

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

Whole run, in ``RUN/``: ``ranking.ecsv``, ``verdicts.ecsv`` and
``fit_state.json`` (format and package versions, description digest). The
report, ``summary.txt`` and the figures, is written beside them by
:func:`motes.report.fit_text.write_fit_report`.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ...errors import FitError, quoted_names
from ...files import atomic_write, format_stamp, stamp_problem, write_json_atomic
from .evidence import Verdict

__all__ = [
    "FIT_FORMAT_VERSION",
    "FIT_CAVEATS",
    "ModelResult",
    "FitResult",
    "write_result_json",
    "write_result_table",
    "read_model_result",
]

#: Version of the run-folder layout and result files (and of what a resumed sampler state may mix with):
#: 2 since the thermal fast path's likelihood changed (issue 13: Q_abs interpolation, far-infrared
#: quadrature; up to a few % in the mm fluxes), so a run or result of version 1 is not resumed or read.
FIT_FORMAT_VERSION = 2

#: Printed with every fit.
FIT_CAVEATS = (
    "Grains are modelled as Mie spheres; real grains are irregular, porous aggregates whose phase "
    "functions and colours differ, so fractions are those of equivalent spheres.",
    "Verdicts depend on the model: the candidate materials, their optical constants, the mixing rule, "
    "the size distribution and the priors. A material 'needed' here is needed by this model family.",
    "Carbon-rich (opaque) grains hide water ice: without a 3 um dip, ice can still be present; a "
    "missing dip does not rule ice out, which is why 'not needed' requires evidence against it.",
)


def write_result_json(path: Path, data: dict) -> None:
    """Write a run file as indented JSON (numpy numbers and paths included), atomically."""
    write_json_atomic(path, data, indent=2, sort_keys=False, default=_json_default)


def _json_default(value):
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def write_result_table(table, path: Path) -> None:
    """Write an astropy Table as ECSV, atomically (:func:`motes.files.atomic_write`)."""
    with atomic_write(path) as tmp:
        table.write(tmp, format="ascii.ecsv", overwrite=True)


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
    thermal : dict
        Joint fits only (empty otherwise): the best fit's L_dust/L_star, ring
        radius, blackbody radius, r / r_bb, dust temperature, sublimation flags
        and the per-data-set chi2 (:func:`motes.dust.fit.joint_run.postprocess_joint`).
    thermal_fluxes : astropy.table.Table or None
        Joint fits only: thermal data and model fluxes [Jy] per band (``thermal.ecsv``).
    data_set : str
        ``"joint"`` for a joint fit's main runs, ``"scattered"`` / ``"thermal"`` for
        its runs on one data set; ``""`` for a scattered-light fit.
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
    thermal: dict = field(default_factory=dict, repr=False)
    thermal_fluxes: object = field(default=None, repr=False)
    data_set: str = ""

    def column(self, name: str) -> np.ndarray:
        """Posterior samples of one column, ndarray[M]."""
        try:
            return self.samples[:, self.sample_names.index(name)]
        except ValueError:
            raise FitError(f"model '{self.name}' has no parameter '{name}'; it has "
                           f"{quoted_names(self.sample_names)}") from None

    def fraction_samples(self, material: str) -> np.ndarray:
        """Posterior samples of a material's volume fraction (zeros when absent), ndarray[M]."""
        if material not in self.materials:
            return np.zeros(self.samples.shape[0])
        if len(self.materials) == 1:
            return np.ones(self.samples.shape[0])
        return self.column(f"fraction_{material}")

    def to_json(self) -> dict:
        return {
            **format_stamp(FIT_FORMAT_VERSION),
            "name": self.name, "materials": list(self.materials), "ln_z": self.ln_z,
            "ln_z_err": self.ln_z_err, "n_calls": self.n_calls, "n_iterations": self.n_iterations,
            "information": self.information, "parameter_names": list(self.parameter_names),
            "sample_names": list(self.sample_names), "best": self.best, "best_chi2": self.best_chi2,
            "dof": self.dof, "best_ln_l": self.best_ln_l, "sessions": list(self.sessions),
            **({"thermal": self.thermal} if self.thermal else {}),
            **({"data_set": self.data_set} if self.data_set else {}),
        }


def read_model_result(folder: Path) -> ModelResult:
    """Read a finished model's files back (``result.json`` and the ECSV tables)."""
    from astropy.table import Table

    folder = Path(folder)
    try:
        info = json.loads((folder / "result.json").read_text())
        problem = stamp_problem(info, FIT_FORMAT_VERSION)
        if problem:
            raise FitError(f"{folder}: result.json has {problem}; start the fit afresh (--fresh)")
        samples_t = Table.read(folder / "samples.ecsv", format="ascii.ecsv")
        summary = Table.read(folder / "parameters.ecsv", format="ascii.ecsv")
        colours = Table.read(folder / "colours.ecsv", format="ascii.ecsv")
        thermal = (Table.read(folder / "thermal.ecsv", format="ascii.ecsv") if (folder / "thermal.ecsv").is_file()
                   else None)
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
        thermal=dict(info.get("thermal", {})), thermal_fluxes=thermal, data_set=str(info.get("data_set", "")),
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
    thermal_observations : ThermalPhotometry or None
        Joint fits: the thermal data (:mod:`motes.dust.thermal_observations`).
    by_data : dict
        Joint fits with ``verdicts_by_data``: ``{"scattered": {model: ModelResult}, "thermal": {...}}``,
        the runs on each data set alone (empty otherwise).
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
    thermal_observations: object = None
    by_data: dict = field(default_factory=dict)

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
