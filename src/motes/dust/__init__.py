"""Dust: the forward model of disk colours, its fast path, fits and grids.

The forward model (:mod:`motes.dust.model`), its description format
(:mod:`motes.dust.description`), quadrature rules (:mod:`motes.dust.sampling`)
and lookup tables (:mod:`motes.dust.tables`) are re-exported here; fits and
grids live in their own modules.
"""

from __future__ import annotations

from .description import (
    ModelDescription,
    StarDescription,
    model_from_description,
    parse_model_description,
    read_model_description,
)
from .model import (
    FRACTIONS_NOTE,
    METHODS,
    MIE_SPHERES_NOTE,
    PHASES,
    BandOptics,
    DiskColourModel,
    ScatteringGeometry,
)
from .mixture import (
    MixtureOptics,
    MixtureParameters,
    compute_mixture_optics,
    format_mixture_optics,
    read_mixture_file,
    write_mixture_outputs,
)
from .sampling import SizeSampling, size_parameter_rule, weighted_gauss_nodes
from .tables import LookupTable, TableSpec, cache_directory, table_for_model
from .compositions import count_compositions
from .grid import GridSpec, SimplexGrid, read_grid_description
from .gridrun import GridRunResult, GridRunSettings, run_grid
from .gridstore import GridStore
from .gridsummary import GridSummary, summarize_grid
from .observations import DiskPhotometry, chi_square_with_best_scale, read_disk_photometry
from .scale import ScalePrior
from .fitspec import FitSpec, read_fit_description
from .fit import FitRunSettings, run_fit
from .fitresults import FitResult, ModelResult
from .evidence import VERDICT_RULE

__all__ = [
    "DiskPhotometry",
    "chi_square_with_best_scale",
    "read_disk_photometry",
    "ScalePrior",
    "FitSpec",
    "read_fit_description",
    "FitRunSettings",
    "run_fit",
    "FitResult",
    "ModelResult",
    "VERDICT_RULE",
    "GridRunResult",
    "GridRunSettings",
    "GridSpec",
    "GridStore",
    "GridSummary",
    "SimplexGrid",
    "count_compositions",
    "read_grid_description",
    "run_grid",
    "summarize_grid",
    "BandOptics",
    "DiskColourModel",
    "FRACTIONS_NOTE",
    "LookupTable",
    "METHODS",
    "MIE_SPHERES_NOTE",
    "MixtureOptics",
    "MixtureParameters",
    "ModelDescription",
    "PHASES",
    "ScatteringGeometry",
    "SizeSampling",
    "StarDescription",
    "TableSpec",
    "cache_directory",
    "compute_mixture_optics",
    "format_mixture_optics",
    "model_from_description",
    "parse_model_description",
    "read_mixture_file",
    "read_model_description",
    "size_parameter_rule",
    "table_for_model",
    "weighted_gauss_nodes",
    "write_mixture_outputs",
]
