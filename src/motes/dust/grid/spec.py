"""Grid descriptions: which dust mixtures a grid covers, and their stable integer keys.

A grid description is a TOML file. The sections that describe the star, the
materials, the mixing rule and the scattering geometry are the same as in a fit
description and are read by :mod:`motes.dust.model.description`; the data to compare
against are named in ``[data]``; the grid axes are in ``[grid]``::

    [data]
    photometry = "disk_photometry.ecsv"     # read by motes.dust.observations

    [star]
    teff = 5600.0

    [[materials]]
    name = "silica"
    ...                                     # one table per material

    [mixing]
    rule = "bruggeman"

    [geometry]
    angles_deg = [90.0]

    [grid]
    fraction_step = 0.1                     # or "1/12"; 1/step must be a whole number
    porosity = [0.0, 0.3, 0.6]              # vacuum fraction of the grain volume
    a_min = { start = 0.5, stop = 8.0, num = 5, spacing = "log" }   # [um]
    q = [3.5]                               # optional, default [3.5]
    a_max = [1000.0]                        # [um], optional, default [model] a_max (1000)
    chunk_size = 200                        # optional: points per store part
    # f_max = [0.4, 0.8]                    # hollow-sphere grains only ([model] grains = "hollow spheres"):
                                            #   largest vacuum-core volume fraction, an axis (fastest digit)

    [grid.fraction_bounds]                  # optional, per material, as fractions
    water_ice = [0.0, 0.5]

Any other table or key is refused with the nearest valid name (a misspelt
``[grdi]`` is an error, not ignored).

Every point has an integer key in ``0 .. n_points - 1``: the composition rank
(see :mod:`motes.dust.grid.compositions`) is the slowest digit, then porosity,
a_min, q and a_max (fastest), so ``key = ((((c * n_p + i_p) * n_amin + i_amin)
* n_q + i_q) * n_amax + i_amax)``; a grid of hollow-sphere grains with an
``f_max`` axis has it as a last, fastest digit (``key * n_fmax + i_fmax``). Keys are the same on every machine and in
every run of the same description; chunks of consecutive keys are the units of
work and of storage.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import tomllib
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path

import numpy as np

from ...errors import GridError, InputError, quoted_names
from ...parameters import GRAIN_PARAMETERS, MIXTURE_PARAMETERS, PARAMETERS, accepts_quantities
from ...tomlcheck import check_keys, check_tables, get_table
from ..model.description import MODEL_TABLES, ModelDescription, parse_model_description
from .compositions import SimplexGrid

__all__ = [
    "GridSpec",
    "GridPoints",
    "AXES",
    "GRID_KEYS",
    "DEFAULT_MAX_POINTS",
    "read_grid_description",
    "parse_grid_description",
    "default_chunk_size",
]

#: Grids with more points than this need an explicit confirmation (``--yes``).
DEFAULT_MAX_POINTS = 1_000_000

#: The non-composition axes, slowest first.
AXES = MIXTURE_PARAMETERS   # porosity, a_min, q, a_max (motes.parameters)

_AXIS_DEFAULTS = {"q": (PARAMETERS["q"].default,)}   # q = 3.5 (Dohnanyi 1969); a_max defaults to [model] a_max
_GRID_KEYS = ("fraction_step", "fraction_bounds", *AXES, *GRAIN_PARAMETERS, "chunk_size")
_GRID_TABLES = ("data", "grid")
#: Keys each grid section accepts, by table (docs/descriptions.md lists them); ``axis range``
#: is an axis written as a table, e.g. ``a_min = { start = 0.5, stop = 8.0, num = 5 }``.
GRID_KEYS = {
    "data": ("photometry",),
    "grid": _GRID_KEYS,
    "axis range": ("start", "stop", "num", "spacing"),
}
_MAX_CHUNK = 1000
_MIN_CHUNK = 16


@dataclass(frozen=True)
class GridPoints:
    """A batch of grid points.

    Attributes
    ----------
    keys : ndarray[N] of int64
    fractions : ndarray[N, K]
        Volume fractions of the solid (rows sum to 1).
    porosity, a_min, q, a_max : ndarray[N]
        Vacuum fraction; minimum and maximum grain size [um]; size slope.
    f_max : ndarray[N] or None
        Largest vacuum-core volume fraction (a grid with an f_max axis; else None).
    """

    keys: np.ndarray
    fractions: np.ndarray
    porosity: np.ndarray
    a_min: np.ndarray
    q: np.ndarray
    a_max: np.ndarray
    f_max: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.keys.size)


@dataclass(frozen=True)
class GridSpec:
    """A parsed grid description.

    Attributes
    ----------
    description : ModelDescription
        The parsed model sections (star, materials, mixing, geometry, bands,
        ``[model]``; :mod:`motes.dust.model.description`).
    base_dir : pathlib.Path
        Folder against which relative paths in the description are resolved.
    materials : tuple of str
        Material names, in the order of the ``[[materials]]`` tables.
    simplex : SimplexGrid
        The composition grid.
    porosity, a_min, q, a_max : tuple of float
        Values of the other axes.
    f_max : tuple of float
        Values of the f_max axis (hollow-sphere grains, ``[grid] f_max``);
        empty: no such axis.
    chunk_size : int
        Points per unit of work and per store part.
    photometry : pathlib.Path
        The disk photometry file.
    digest : str
        SHA-256 of the description and of the content of every file it names;
        a store accepts only points from the description with its digest.
    source : str
        Path of the description file (for messages), or ``"<string>"``.
    text : str
        The description as written.
    """

    description: ModelDescription
    base_dir: Path
    materials: tuple[str, ...]
    simplex: SimplexGrid
    porosity: tuple[float, ...]
    a_min: tuple[float, ...]
    q: tuple[float, ...]
    a_max: tuple[float, ...]
    chunk_size: int
    photometry: Path
    digest: str
    source: str = "<string>"
    text: str = field(default="", repr=False)
    f_max: tuple[float, ...] = ()

    @property
    def axis_names(self) -> tuple[str, ...]:
        """The non-composition axes, slowest first: :data:`AXES`, then ``f_max`` if the grid has it."""
        return AXES + (("f_max",) if self.f_max else ())

    @property
    def axis_values(self) -> dict[str, tuple[float, ...]]:
        return {name: getattr(self, name) for name in self.axis_names}

    @property
    def n_compositions(self) -> int:
        return self.simplex.size

    @property
    def n_other(self) -> int:
        """Product of the lengths of the non-composition axes."""
        return math.prod(len(v) for v in self.axis_values.values())

    @property
    def n_points(self) -> int:
        """Total number of points (exact int)."""
        return self.n_compositions * self.n_other

    @property
    def n_chunks(self) -> int:
        return -(-self.n_points // self.chunk_size)

    def chunk_keys(self, chunk: int) -> np.ndarray:
        """Keys of chunk ``chunk``: ``[chunk * chunk_size, min(n_points, ...))``."""
        if not 0 <= chunk < self.n_chunks:
            raise GridError(f"chunk {chunk} is outside 0..{self.n_chunks - 1}")
        start = chunk * self.chunk_size
        return np.arange(start, min(start + self.chunk_size, self.n_points), dtype=np.int64)

    def points(self, keys) -> GridPoints:
        """Decode keys into mixtures and axis values.

        Parameters
        ----------
        keys : array_like of int, shape (N,)

        Returns
        -------
        GridPoints
        """
        keys = np.atleast_1d(np.asarray(keys, dtype=np.int64))
        if keys.size and (keys.min() < 0 or keys.max() >= self.n_points):
            raise GridError(f"grid key out of range 0..{self.n_points - 1}")
        rem = keys.copy()
        index = {}
        for name in reversed(self.axis_names):
            size = len(getattr(self, name))
            index[name] = rem % size
            rem //= size
        parts = self.simplex.unrank(rem)
        values = {name: np.asarray(getattr(self, name), dtype=float)[index[name]] for name in self.axis_names}
        return GridPoints(keys=keys, fractions=parts / self.simplex.divisions, **values)

    def key_of(self, parts, porosity_index, a_min_index, q_index=0, a_max_index=0, f_max_index=0) -> np.ndarray:
        """Keys of points given integer compositions and axis indices (inverse of :meth:`points`)."""
        key = self.simplex.rank(parts)
        for name, idx in zip(self.axis_names, (porosity_index, a_min_index, q_index, a_max_index, f_max_index)):
            key = key * len(getattr(self, name)) + np.asarray(idx, dtype=np.int64)
        return np.asarray(key, dtype=np.int64)

    @accepts_quantities
    def nearest_key(self, fractions, porosity, a_min, q=None, a_max=None, f_max=None) -> int:
        """Key of the grid point nearest to a parameter vector.

        Fractions are rounded by largest remainders, porosity and q to the
        nearest value, a_min and a_max to the nearest value in log.
        """
        parts = self.simplex.nearest(fractions)[0]

        def pick(values, x, log=False):
            v = np.asarray(values, dtype=float)
            if x is None:
                return 0
            return int(np.argmin(np.abs(np.log(v) - np.log(x)) if log else np.abs(v - x)))

        return int(self.key_of(parts, pick(self.porosity, porosity), pick(self.a_min, a_min, True),
                               pick(self.q, q), pick(self.a_max, a_max, True),
                               pick(self.f_max, f_max) if self.f_max else 0)[0])

    def describe_count(self) -> str:
        """The point count written as its product, e.g. ``1771 mixtures x 3 porosity x ...``."""
        k, n = len(self.materials), self.simplex.divisions
        bounded = any(lo > 0 or hi < n for lo, hi in zip(self.simplex.lower, self.simplex.upper))
        how = "within the fraction bounds" if bounded else f"= C({n} + {k} - 1, {k} - 1)"
        axes = " x ".join(f"{len(getattr(self, a))} {a}" for a in self.axis_names)
        return f"{self.n_points:,} points = {self.n_compositions:,} mixtures ({how}) x {axes}"


def default_chunk_size(n_points: int) -> int:
    """Points per chunk when the description does not say: about 64 chunks, 16..1000 points each."""
    return int(min(_MAX_CHUNK, max(_MIN_CHUNK, -(-n_points // 64))))


def read_grid_description(path) -> GridSpec:
    """Read a grid description file.

    Parameters
    ----------
    path : str or os.PathLike
        TOML file (format in the module docstring).

    Returns
    -------
    GridSpec

    Raises
    ------
    motes.errors.InputError
        When the file is missing, is not valid TOML, or a field is malformed.
    motes.errors.GridError
        When the grid has no points.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("grid description not found", path=path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the grid description ({exc})", path=path) from None
    return parse_grid_description(text, base_dir=path.parent, source=str(path))


def parse_grid_description(text: str, base_dir=".", source: str = "<string>") -> GridSpec:
    """Parse a grid description from TOML text (see :func:`read_grid_description`)."""
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", path=source) from None
    check_tables(doc, _GRID_TABLES + MODEL_TABLES, path=source, arrays=("materials",))
    base_dir = Path(base_dir)
    materials = _material_names(doc, source)
    grid = get_table(doc, "grid", path=source, required=True, expected="fraction_step, porosity, a_min, ...")
    check_keys(grid, GRID_KEYS["grid"], path=source, where="[grid]")
    divisions = _divisions(grid.get("fraction_step"), source)
    bounds = _bounds(grid.get("fraction_bounds", {}), materials, divisions, source)
    try:
        simplex = SimplexGrid.from_step(len(materials), divisions, bounds)
    except GridError as exc:
        raise InputError(str(exc), path=source, where="[grid] fraction_step") from None
    model = doc.get("model", {})
    if isinstance(model, dict) and "a_max" in model and "a_max" in grid:
        raise InputError("a_max is given both in [model] and in [grid]; keep one (a list in [grid] makes it an axis)",
                         path=source, where="[grid] a_max")
    axes = {name: _axis(grid, name, source) for name in AXES if name != "a_max"}
    if "a_max" in grid:
        axes["a_max"] = _axis(grid, "a_max", source)
    has_f_max = isinstance(grid, dict) and "f_max" in grid
    description = parse_model_description(doc, base_dir=base_dir, source=source,
                                          f_max_elsewhere="[grid] f_max" if has_f_max else None)
    if has_f_max:
        axes["f_max"] = _axis(grid, "f_max", source)
    if "a_max" not in grid:   # the description's single value
        axes["a_max"] = (description.a_max,)
    if max(axes["a_min"]) >= min(axes["a_max"]):
        raise InputError(f"every a_min must be below every a_max; the largest a_min is {max(axes['a_min']):g} um, "
                         f"the smallest a_max {min(axes['a_max']):g} um",
                         path=source, where="[grid] a_min")
    spec_args = dict(description=description, base_dir=base_dir, materials=materials, simplex=simplex, **axes)
    n_points = simplex.size * math.prod(len(v) for v in axes.values())
    if n_points == 0:
        raise GridError(f"{source}: the grid has no points: no mixture satisfies the fraction bounds "
                        f"{dict(zip(materials, bounds))} (in steps of 1/{divisions}); "
                        "their lower bounds must sum to at most 1 and their upper bounds to at least 1")
    chunk = grid.get("chunk_size", default_chunk_size(n_points))
    if not isinstance(chunk, int) or isinstance(chunk, bool) or chunk < 1:
        raise InputError(f"chunk_size must be a positive integer, got {chunk!r}", path=source, where="[grid]")
    photometry = _photometry_path(doc, base_dir, source)
    digest = _digest(doc, base_dir)
    return GridSpec(**spec_args, chunk_size=chunk, photometry=photometry, digest=digest,
                    source=source, text=text)


def _material_names(doc, source) -> tuple[str, ...]:
    mats = doc.get("materials")
    if not isinstance(mats, list) or not mats:
        raise InputError("no [[materials]] tables: a grid needs at least one material", path=source)
    names = []
    for i, m in enumerate(mats):
        name = m.get("name") if isinstance(m, dict) else None
        if not isinstance(name, str) or not name.strip():
            raise InputError("each material needs a name = \"...\"", path=source, where=f"[[materials]] #{i + 1}")
        if name in names:
            raise InputError(f"material '{name}' is listed twice", path=source, where=f"[[materials]] #{i + 1}")
        if not re.fullmatch(r"[A-Za-z0-9_.+-]+", name):
            raise InputError(f"material name '{name}' may contain only letters, digits and _ . + -",
                             path=source, where=f"[[materials]] #{i + 1}")
        names.append(name)
    return tuple(names)


def _divisions(step, source) -> int:
    where = "[grid] fraction_step"
    if step is None:
        raise InputError("missing fraction_step (e.g. 0.1, or \"1/12\")", path=source, where="[grid]")
    try:
        if isinstance(step, str):
            value = Fraction(step.strip())
        elif isinstance(step, (int, float)) and not isinstance(step, bool):
            value = Fraction(step).limit_denominator(10**6)
        else:
            raise ValueError
    except (ValueError, ZeroDivisionError):
        raise InputError(f"expected a number or a string like \"1/12\", got {step!r}", path=source, where=where) from None
    if not 0 < value <= 1:
        raise InputError(f"must be in (0, 1], got {step!r}", path=source, where=where)
    inverse = 1 / value
    if inverse.denominator != 1:
        raise InputError(f"1/{step} = {float(inverse):.4g} is not a whole number of steps; "
                         "use e.g. 0.1, 0.05, 0.025 or \"1/12\"", path=source, where=where)
    return int(inverse)


def _bounds(table, materials, n, source):
    where = "[grid.fraction_bounds]"
    if not isinstance(table, dict):
        raise InputError("expected a table of material = [min, max]", path=source, where=where)
    unknown = set(table) - set(materials)
    if unknown:
        raise InputError(f"unknown material(s) {quoted_names(sorted(unknown))}; the materials are "
                         f"{quoted_names(materials)}",
                         path=source, where=where)
    out = []
    for name in materials:
        lo, hi = table.get(name, (0.0, 1.0))
        if not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in (lo, hi)) \
                or not 0 <= lo <= hi <= 1:
            raise InputError(f"{name} = {table.get(name)!r}: expected [min, max] with 0 <= min <= max <= 1",
                             path=source, where=where)
        # tolerance keeps 0.3 * 10 = 3.0000000000000004 at 3 steps
        out.append((math.ceil(lo * n - 1e-9), math.floor(hi * n + 1e-9)))
        if out[-1][0] > out[-1][1]:
            raise InputError(f"{name} = [{lo}, {hi}] contains no multiple of the step 1/{n}",
                             path=source, where=where)
    return out


def _axis(grid, name, source) -> tuple[float, ...]:
    where = f"[grid] {name}"
    if name not in grid:
        if name in _AXIS_DEFAULTS:
            return _AXIS_DEFAULTS[name]
        raise InputError(f"missing {name} (a list of values, or {{start, stop, num, spacing}})",
                         path=source, where="[grid]")
    raw = grid[name]
    if isinstance(raw, dict):
        values = _axis_range(raw, source, where)
    else:
        raw = raw if isinstance(raw, list) else [raw]
        if not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in raw):
            raise InputError(f"expected numbers, got {grid[name]!r}", path=source, where=where)
        values = [float(x) for x in raw]
    if not values:
        raise GridError(f"{source}, {where}: the grid has no points: the list of values is empty")
    if len(set(values)) != len(values):
        raise InputError(f"repeated values in {values}", path=source, where=where)
    v = np.asarray(values)
    if not np.all(np.isfinite(v)):
        raise InputError(f"values must be finite, got {values}", path=source, where=where)
    declared = PARAMETERS[name]
    if name == "porosity" and not declared.contains(v).all():
        raise InputError(f"porosity is the vacuum volume fraction, in {declared.interval}; got {values}",
                         path=source, where=where)
    if name in ("q", "f_max") and not declared.contains(v).all():
        raise InputError(f"{name} ({declared.meaning}) must be in {declared.interval}, got {values}",
                         path=source, where=where)
    if declared.physical_type == "length" and not declared.contains(v).all():   # a_min, a_max
        raise InputError(f"grain sizes [{declared.unit_text}] must be positive, got {values}", path=source, where=where)
    return tuple(values)


def _axis_range(raw, source, where) -> list[float]:
    check_keys(raw, GRID_KEYS["axis range"], path=source, where=where, required=("start", "stop", "num"))
    start, stop, num = raw["start"], raw["stop"], raw["num"]
    spacing = raw.get("spacing", "linear")
    if not isinstance(num, int) or isinstance(num, bool) or num < 0 or spacing not in ("linear", "log"):
        raise InputError(f"num must be a non-negative integer and spacing 'linear' or 'log'; got {raw!r}",
                         path=source, where=where)
    if spacing == "log":
        if start <= 0 or stop <= 0:
            raise InputError("a log range needs positive start and stop", path=source, where=where)
        return [float(x) for x in np.geomspace(start, stop, num)]
    return [float(x) for x in np.linspace(start, stop, num)]


def _photometry_path(doc, base_dir, source) -> Path:
    data = doc.get("data")
    if not isinstance(data, dict) or not isinstance(data.get("photometry"), str):
        raise InputError("missing [data] photometry = \"FILE\" (the disk photometry to compare against)",
                         path=source)
    check_keys(data, GRID_KEYS["data"], path=source, where="[data]")
    typed = Path(base_dir) / data["photometry"]
    if not typed.is_file():   # named as the user gave it, not as the resolved absolute path
        raise InputError(f"cannot read the photometry file {typed}", path=source, where="[data] photometry")
    return typed.resolve()


def _digest(doc, base_dir) -> str:
    """SHA-256 of the parsed description plus the bytes of every existing file it names."""
    files = {}

    def walk(node):
        if isinstance(node, dict):
            for v in node.values():
                walk(v)
        elif isinstance(node, list):
            for v in node:
                walk(v)
        elif isinstance(node, str) and 0 < len(node) < 4096:
            try:
                candidate = base_dir / node
                if candidate.is_file():
                    files[node] = hashlib.sha256(candidate.read_bytes()).hexdigest()
            except (OSError, ValueError):
                pass

    walk(doc)
    canonical = json.dumps({"description": doc, "files": files}, sort_keys=True, default=str)
    return hashlib.sha256(canonical.encode()).hexdigest()
