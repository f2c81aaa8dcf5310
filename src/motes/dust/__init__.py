"""Dust: what a scattered-light debris disk is made of.

The package reads as the data flow::

    model/          forward model of disk colours (description, geometry, quadrature,
                    exact and tabulated Mie paths, one mixture's optics)
    observations    the measured disk/star ratios
    thermal_observations  a disk's thermal flux densities (joint fits)
    likelihood      the one noise model: detections, upper limits, systematic term,
                    flux-scale prior and its marginalisation
    fit/            nested sampling per model and the evidence ranking
    grid/           grids of mixtures: spec, enumeration, store, workers, summary

Formatted text and figures are in :mod:`motes.report`.
"""

from __future__ import annotations

from .model import (
    FRACTIONS_NOTE,
    METHODS,
    MIE_SPHERES_NOTE,
    PHASES,
    BandOptics,
    DiskColourModel,
    LookupTable,
    MixtureOptics,
    MixtureParameters,
    ModelDescription,
    ScatteringGeometry,
    SizeSampling,
    StarDescription,
    TableSpec,
    cache_directory,
    compute_mixture_optics,
    model_from_description,
    parse_model_description,
    read_mixture_file,
    read_model_description,
    size_parameter_rule,
    table_for_model,
    weighted_gauss_nodes,
)
from .observations import DiskPhotometry, read_disk_photometry
from .likelihood import ScalePrior, chi_square_with_best_scale
from .fit import VERDICT_RULE, FitResult, FitRunSettings, FitSpec, ModelResult, read_fit_description, run_fit
from .grid import (
    GridRunResult,
    GridRunSettings,
    GridSpec,
    GridStore,
    GridSummary,
    SimplexGrid,
    count_compositions,
    read_grid_description,
    run_grid,
    summarize_grid,
)

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
    "model_from_description",
    "parse_model_description",
    "read_mixture_file",
    "read_model_description",
    "size_parameter_rule",
    "table_for_model",
    "weighted_gauss_nodes",
]
