"""Grids of dust mixtures: every point's best scale and chi-square, resumable.

- :mod:`~motes.dust.grid.spec` — the grid description and its axes;
- :mod:`~motes.dust.grid.compositions` — exact enumeration of the simplex;
- :mod:`~motes.dust.grid.store` — the crash-safe Parquet store;
- :mod:`~motes.dust.grid.workers` — evaluation in processes or on Dask;
- :mod:`~motes.dust.grid.run` — :func:`run_grid`, the whole job;
- :mod:`~motes.dust.grid.summary` — best mixtures and per-material profiles.
"""

from __future__ import annotations

from .compositions import SimplexGrid, count_compositions
from .run import GridRunResult, GridRunSettings, run_grid
from .spec import GridSpec, parse_grid_description, read_grid_description
from .store import GridStore
from .summary import GridSummary, summarize_grid

__all__ = [
    "GridRunResult",
    "GridRunSettings",
    "GridSpec",
    "GridStore",
    "GridSummary",
    "SimplexGrid",
    "count_compositions",
    "parse_grid_description",
    "read_grid_description",
    "run_grid",
    "summarize_grid",
]
