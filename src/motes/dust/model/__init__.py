"""The forward model: disk colours of porous dust mixtures.

Reads as the data flow of one model evaluation:

- :mod:`~motes.dust.model.description` — the typed description of a model
  (materials, mixing, star, geometry, size limits) read from TOML;
- :mod:`~motes.dust.model.geometry` — scattering angles and phase-function choice;
- :mod:`~motes.dust.model.sampling` — size and band quadrature rules;
- :mod:`~motes.dust.model.colours` — :class:`DiskColourModel`, the exact path
  and the interface of the fast one;
- :mod:`~motes.dust.model.tables` and :mod:`~motes.dust.model.tablebuild` —
  the fast path's lookup tables, their build and cache;
- :mod:`~motes.dust.model.mixture` — the optics of one mixture (``motes optics``);
- :mod:`~motes.dust.model.thermal` — the same mixture's thermal emission.
"""

from __future__ import annotations

from .colours import FRACTIONS_NOTE, METHODS, MIE_SPHERES_NOTE, BandOptics, DiskColourModel
from .description import (
    MODEL_TABLES,
    ModelDescription,
    StarDescription,
    model_from_description,
    parse_model_description,
    read_model_description,
)
from .geometry import PHASES, ScatteringGeometry
from .mixture import MixtureOptics, MixtureParameters, compute_mixture_optics, read_mixture_file
from .sampling import SizeSampling, size_parameter_rule, weighted_gauss_nodes
from .tables import LookupTable, TableSpec, cache_directory, table_for_model
from .thermal import ThermalResult, ThermalSettings, compute_thermal, read_thermal_settings

__all__ = [
    "BandOptics",
    "DiskColourModel",
    "FRACTIONS_NOTE",
    "LookupTable",
    "METHODS",
    "MIE_SPHERES_NOTE",
    "MODEL_TABLES",
    "MixtureOptics",
    "MixtureParameters",
    "ModelDescription",
    "PHASES",
    "ScatteringGeometry",
    "SizeSampling",
    "StarDescription",
    "TableSpec",
    "ThermalResult",
    "ThermalSettings",
    "cache_directory",
    "compute_mixture_optics",
    "compute_thermal",
    "model_from_description",
    "parse_model_description",
    "read_mixture_file",
    "read_thermal_settings",
    "read_model_description",
    "size_parameter_rule",
    "table_for_model",
    "weighted_gauss_nodes",
]
