"""Fit descriptions: what to fit, with which priors, comparing which models.

A fit description is a TOML file. The sections describing the star, the
materials, the mixing rule, the scattering geometry and user bands are shared
with grid descriptions and read by :mod:`motes.dust.model.description`; the fit adds
``[data]``, ``[parameters]``, ``[scale]``, ``[models]`` and ``[sampler]``::

    [data]
    photometry = "disk_photometry.csv"      # read by motes.dust.observations
    # thermal = "disk_sed.csv"              # optional: a joint fit with the thermal SED; then also
    #                                       #   [parameters] ring_radius and [thermal] (motes.dust.fit.thermal_spec)

    [star]                                  # see motes.dust.model.description
    teff = 5400.0
    luminosity = 0.8                        # [L_sun], for a_min tied to the blow-out size
    mass = 0.9                              # [M_sun]

    [[materials]]                           # one table per candidate material
    name = "silica"
    ...

    [parameters]                            # number = fixed; table = prior
    porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }
    a_min = { prior = "log-uniform", lower = 0.3, upper = 20.0 }   # [um]
    # a_min = { prior = "log-uniform", lower = 1.0, upper = 10.0, relative_to = "blowout" }
    q = { prior = "uniform", lower = 3.0, upper = 4.5 }
    a_max = 1000.0                          # [um]
    angle = 90.0                            # scattering angle [deg]; free only if the model allows it
    systematic = { prior = "uniform", lower = 0.0, upper = 0.1 }   # fractional error term

    [scale]                                 # flux scale: log-uniform, the same in every model
    lower = 1e-12
    upper = 1.0
    treatment = "marginalise"               # or "sample"

    [models]
    set = "each-removed"                    # "all-subsets" | "each-removed" | "list"
    keep = ["silica"]                       # optional: in every model, never removed
    # list = [["silica", "water_ice"], ["silica"]]   # for set = "list"

    [sampler]
    kind = "static"                         # or "dynamic"
    nlive = 250
    dlogz = 0.1
    bound = "multi"
    sample = "rwalk"
    seed = 1
    checkpoint_every = 30                   # [s]
    checkpoint_iterations = 500             # or after this many iterations, whichever first

Defaults (every key is optional except ``[data] photometry`` and the model
sections) are those of :class:`SamplerSettings` and :class:`ParameterSpace`.
Any other table or key is refused with the nearest valid name (a misspelt
``[sampeler]`` is an error, not ignored).
"""

from __future__ import annotations

import hashlib
import itertools
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ...errors import FitError, InputError, quoted_names
from ...parameters import GRAIN_PARAMETERS, PARAMETERS, PRIOR_PARAMETERS
from ...tomlcheck import check_keys, check_tables, get_table
from ..model.description import MODEL_TABLES, ModelDescription, parse_model_description
from .priors import ParameterSpace, Prior, parse_prior
from .thermal_spec import THERMAL_FIT_KEYS, ThermalFitSettings, parse_thermal_fit
from ..likelihood import ScalePrior

__all__ = [
    "SamplerSettings",
    "ModelSpec",
    "FitSpec",
    "MODEL_SETS",
    "FIT_KEYS",
    "read_fit_description",
    "parse_fit_description",
    "build_model_set",
]

#: Accepted values of ``[models] set``.
MODEL_SETS = ("all-subsets", "each-removed", "list")
_SAMPLER_KINDS = ("static", "dynamic")
_BOUNDS = ("none", "single", "multi", "balls", "cubes")
_SAMPLES = ("auto", "unif", "rwalk", "slice", "rslice")
_FIT_TABLES = ("data", "parameters", "scale", "models", "sampler", "thermal")
_PARAMETERS = PRIOR_PARAMETERS   # declared once, in motes.parameters


@dataclass(frozen=True)
class SamplerSettings:
    """Nested-sampling settings (dynesty).

    Parameters
    ----------
    kind : {"static", "dynamic"}
        Static nested sampling (the evidence is the target) or dynamic.
    nlive : int
        Live points (static) or initial live points (dynamic).
    dlogz : float
        Stop when the remaining evidence estimate is below this (ln units).
    bound, sample : str
        dynesty bounding and sampling methods.
    maxcall : int or None
        Cap on likelihood calls per model (None = no cap).
    seed : int
        Seed of the samplers' random generators (one stream per model).
    checkpoint_every : float
        Seconds between checkpoints.
    checkpoint_iterations : int
        Iterations between checkpoints: a checkpoint is written after this
        many iterations or ``checkpoint_every`` seconds, whichever comes first.
    n_posterior : int
        Equal-weight posterior samples written per model (at most).
    nlive_batch, maxbatch : int
        Dynamic sampling: live points per batch and number of batches.
    pfrac : float
        Dynamic sampling: weight on the posterior (vs the evidence), 0..1.
    """

    kind: str = "static"
    nlive: int = 250
    dlogz: float = 0.1
    bound: str = "multi"
    sample: str = "rwalk"
    maxcall: int | None = None
    seed: int = 1
    checkpoint_every: float = 30.0
    checkpoint_iterations: int = 500
    n_posterior: int = 4000
    nlive_batch: int = 100
    maxbatch: int = 4
    pfrac: float = 0.5

    def __post_init__(self):
        for name in ("nlive", "seed", "n_posterior", "nlive_batch", "maxbatch", "maxcall"):
            value = getattr(self, name)
            if not (isinstance(value, int) and not isinstance(value, bool)) and not (name == "maxcall" and value is None):
                raise FitError(f"{name} must be a whole number, got {value!r}")
        for name in ("dlogz", "checkpoint_every", "pfrac"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise FitError(f"{name} must be a number, got {value!r}")
        if self.kind not in _SAMPLER_KINDS:
            raise FitError(f"kind must be one of {quoted_names(_SAMPLER_KINDS)}, got {self.kind!r}")
        if self.bound not in _BOUNDS:
            raise FitError(f"bound must be one of {quoted_names(_BOUNDS)}, got {self.bound!r}")
        if self.sample not in _SAMPLES:
            raise FitError(f"sample must be one of {quoted_names(_SAMPLES)}, got {self.sample!r}")
        for name in ("nlive", "n_posterior", "nlive_batch"):
            if int(getattr(self, name)) < 10:
                raise FitError(f"sampler {name} must be >= 10, got {getattr(self, name)!r}")
        if not self.dlogz > 0:
            raise FitError(f"sampler dlogz must be > 0, got {self.dlogz!r}")
        if not self.checkpoint_every > 0:
            raise FitError(f"sampler checkpoint_every must be > 0 s, got {self.checkpoint_every!r}")
        if isinstance(self.checkpoint_iterations, bool) or not isinstance(self.checkpoint_iterations, int) \
                or self.checkpoint_iterations < 1:
            raise FitError(f"sampler checkpoint_iterations must be a whole number >= 1, "
                           f"got {self.checkpoint_iterations!r}")
        if not 0 <= self.pfrac <= 1:
            raise FitError(f"sampler pfrac must lie in [0, 1], got {self.pfrac!r}")
        if self.maxcall is not None and self.maxcall < 1:
            raise FitError(f"sampler maxcall must be >= 1, got {self.maxcall!r}")


@dataclass(frozen=True)
class ModelSpec:
    """One model of the comparison: a subset of the candidate materials.

    Parameters
    ----------
    name : str
        Label used in tables and folder names (materials joined by ``+``).
    materials : tuple of str
        Materials in the order of the description.
    """

    name: str
    materials: tuple[str, ...]

    @property
    def folder_name(self) -> str:
        """A file-system-safe version of :attr:`name`."""
        return re.sub(r"[^A-Za-z0-9_.+-]", "_", self.name)


def _model(materials, order) -> ModelSpec:
    mats = tuple(m for m in order if m in set(materials))
    return ModelSpec("+".join(mats), mats)


def build_model_set(kind: str, materials, keep=(), explicit=None) -> tuple[ModelSpec, ...]:
    """The models to compare.

    Parameters
    ----------
    kind : {"all-subsets", "each-removed", "list"}
        ``all-subsets``: every non-empty subset of the materials containing
        ``keep``; ``each-removed``: the full set, then the full set with each
        material (not in ``keep``) removed in turn; ``list``: ``explicit``.
    materials : sequence of str
        Candidate materials, in description order.
    keep : sequence of str
        Materials present in every model.
    explicit : sequence of sequence of str
        Models for ``kind = "list"``.

    Returns
    -------
    tuple of ModelSpec
        The full set first when it is part of the set.

    Raises
    ------
    motes.errors.FitError
        Unknown kind or material, or an empty model set.
    """
    materials = tuple(materials)
    unknown = [m for m in keep if m not in materials]
    if unknown:
        raise FitError(f"[models] keep names unknown material(s) {quoted_names(unknown)}; "
                       f"the materials are {quoted_names(materials)}")
    free = [m for m in materials if m not in keep]
    if kind == "all-subsets":
        out = []
        for r in range(len(free), -1, -1):
            for combo in itertools.combinations(free, r):
                chosen = set(combo) | set(keep)
                if chosen:
                    out.append(_model(chosen, materials))
    elif kind == "each-removed":
        out = [_model(materials, materials)]
        if len(materials) > 1:
            out += [_model(set(materials) - {m}, materials) for m in free]
    elif kind == "list":
        out = []
        for i, entry in enumerate(explicit or ()):
            if isinstance(entry, str):
                entry = [entry]
            names = list(entry)
            bad = [m for m in names if m not in materials]
            if bad:
                raise FitError(f"[models] list entry {i + 1} names unknown material(s) {quoted_names(bad)}; "
                               f"the materials are {quoted_names(materials)}")
            if not names:
                raise FitError(f"[models] list entry {i + 1} is empty")
            out.append(_model(set(names) | set(keep), materials))
    else:
        raise FitError(f"[models] set must be one of {quoted_names(MODEL_SETS)}, got {kind!r}")
    seen, unique = set(), []
    for m in out:
        if m.materials not in seen:
            seen.add(m.materials)
            unique.append(m)
    if not unique:
        raise FitError("the model set is empty: name at least one model with at least one material")
    return tuple(unique)


@dataclass(frozen=True)
class FitSpec:
    """A parsed fit description.

    Parameters
    ----------
    description : ModelDescription
        The parsed model sections (star, materials, mixing, geometry, bands,
        ``[model]``); :meth:`ModelDescription.subset` gives one model's.
    base_dir : pathlib.Path
        Folder against which relative paths are resolved.
    materials : tuple of str
        Candidate materials, in ``[[materials]]`` order.
    photometry_path : pathlib.Path
    parameters : dict of str to Prior
        Priors of porosity, a_min, q, a_max, angle, systematic.
    scale : ScalePrior
    sample_scale : bool
    model_set : str
    keep : tuple of str
    models : tuple of ModelSpec
    sampler : SamplerSettings
    source : str
        Path of the description file, or ``"<string>"``.
    text : str
        The description as written.
    digest : str
        SHA-256 of the description text, the photometry file and every file
        the description names (materials, spectrum, filter curves); a run
        folder only resumes a run with the same digest.
    photometry_given : str
        The photometry file as written, joined to the description's folder as
        the user gave it (for messages; ``photometry_path`` is absolute).
    thermal : ThermalFitSettings or None
        The thermal side of a joint fit (``[data] thermal``; :mod:`motes.dust.fit.thermal_spec`),
        None for a scattered-light fit.
    """

    description: ModelDescription
    base_dir: Path
    materials: tuple[str, ...]
    photometry_path: Path
    parameters: dict
    scale: ScalePrior
    sample_scale: bool
    model_set: str
    keep: tuple[str, ...]
    models: tuple[ModelSpec, ...]
    sampler: SamplerSettings
    source: str = "<string>"
    text: str = field(default="", repr=False)
    digest: str = ""
    photometry_given: str = ""
    thermal: ThermalFitSettings | None = None

    @property
    def photometry_shown(self) -> str:
        """The photometry file as the user named it (folder of the description + ``[data] photometry``)."""
        return self.photometry_given or str(self.photometry_path)

    @property
    def full_model(self) -> ModelSpec | None:
        """The model with every candidate material, if it is in the set."""
        for m in self.models:
            if m.materials == self.materials:
                return m
        return None

    def parameter_space(self, model: ModelSpec, blowout=None) -> ParameterSpace:
        """The :class:`ParameterSpace` of one model."""
        try:
            extra = ({} if self.thermal is None or self.thermal.ring_radius is None
                     else {"ring_radius": self.thermal.ring_radius})
            return ParameterSpace(materials=model.materials, scale=self.scale, sample_scale=self.sample_scale,
                                  blowout=blowout, **self.parameters, **extra)
        except FitError as exc:
            raise FitError(f"{self.source}: model '{model.name}': {exc}") from None


#: Keys each fit section accepts, by table (docs/descriptions.md lists them; a prior
#: table's keys are :data:`motes.dust.fit.priors.PRIOR_KEYS`).
FIT_KEYS = {
    "data": ("photometry", "thermal"),
    "parameters": _PARAMETERS + GRAIN_PARAMETERS + ("ring_radius",),
    "scale": ("lower", "upper", "treatment"),
    "models": ("set", "keep", "list"),
    "sampler": tuple(SamplerSettings.__dataclass_fields__),
    "thermal": THERMAL_FIT_KEYS,
}


def parse_fit_description(text: str, base_dir=".", source: str = "<string>") -> FitSpec:
    """Parse a fit description from TOML text.

    Parameters
    ----------
    text : str
    base_dir : str or os.PathLike
        Folder for relative paths.
    source : str
        Name used in messages.

    Returns
    -------
    FitSpec

    Raises
    ------
    motes.errors.InputError
        Malformed TOML, missing or malformed sections, naming the field.
    motes.errors.FitError
        An empty model set, bad priors (lower >= upper), unknown materials.
    """
    path = source
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", path) from None
    check_tables(doc, _FIT_TABLES + MODEL_TABLES, path=path, arrays=("materials",))
    base_dir = Path(base_dir)
    data = get_table(doc, "data", path=path)
    if "photometry" not in data or not isinstance(data["photometry"], str):
        raise InputError("needs photometry = \"FILE\" (the disk photometry table)", path, "[data]")
    check_keys(data, FIT_KEYS["data"], path=path, where="[data]")
    photometry_path = (base_dir / data["photometry"]).resolve()

    mats = doc.get("materials")
    if not isinstance(mats, list) or not mats:
        raise InputError("needs at least one [[materials]] table with a name", path, "[[materials]]")
    materials = []
    for i, m in enumerate(mats):
        if not isinstance(m, dict) or not isinstance(m.get("name"), str) or not m["name"].strip():
            raise InputError("every [[materials]] table needs name = \"...\"", path, f"[[materials]] #{i + 1}")
        if m["name"] in materials:
            raise InputError(f"material name {m['name']!r} is used twice", path, f"[[materials]] #{i + 1}")
        materials.append(m["name"])
    materials = tuple(materials)

    params = check_keys(get_table(doc, "parameters", path=path), FIT_KEYS["parameters"], path=path,
                        where="[parameters]")
    parameters = {}
    for name in _PARAMETERS:
        if name in params:
            parameters[name] = parse_prior(params[name], name, path, allow_relative=(name == "a_min"))
    f_max_prior = parse_prior(params["f_max"], "f_max", path) if "f_max" in params else None
    description = parse_model_description(doc, base_dir=base_dir, source=source,
                                          f_max_elsewhere=None if f_max_prior is None else "[parameters] f_max")
    if f_max_prior is not None:
        description = _fitted_f_max(f_max_prior, description, parameters, path)
    if "a_max" not in parameters:
        parameters["a_max"] = Prior("fixed", value=description.a_max)
    for name in ("a_min", "a_max"):
        p = parameters.get(name)
        if p is not None and p.relative_to is None:
            lo = p.value if p.kind == "fixed" else p.lower
            if not PARAMETERS[name].contains(lo):
                raise InputError(f"{name} must be > 0 {PARAMETERS[name].unit_text}, got {p.describe()}", path,
                                 f"[parameters] {name}")
    for name in ("porosity", "q"):   # refused here, naming the field, rather than once per model
        p, declared = parameters.get(name), PARAMETERS[name]
        if p is not None and not declared.contains([p.value] if p.kind == "fixed" else [p.lower, p.upper]).all():
            raise InputError(f"{name} must lie in {declared.interval} ({declared.meaning}), got {p.describe()}",
                             path, f"[parameters] {name}")
    a_min = parameters.get("a_min")
    if a_min is not None and a_min.relative_to == "blowout" and not description.star.has_luminosity_and_mass:
        raise InputError('relative_to = "blowout" needs the blow-out size, hence [star] luminosity and mass',
                         path, "[parameters] a_min")

    scale_t = check_keys(get_table(doc, "scale", path=path), FIT_KEYS["scale"], path=path,
                         where="[scale]")
    treatment = str(scale_t.get("treatment", "marginalise")).lower()
    treatment = {"marginalize": "marginalise"}.get(treatment, treatment)
    if treatment not in ("marginalise", "sample"):
        raise InputError(f"treatment must be \"marginalise\" or \"sample\", got {treatment!r}", path, "[scale]")
    thermal = parse_thermal_fit(doc, data, params, description, base_dir, path)
    if thermal is not None and treatment == "sample":
        raise InputError("a joint fit with thermal data marginalises both flux scales: use treatment = "
                         "\"marginalise\"", path, "[scale] treatment")
    try:
        scale = ScalePrior(float(scale_t.get("lower", ScalePrior.lower)), float(scale_t.get("upper", ScalePrior.upper)))
    except FitError as exc:
        raise InputError(str(exc), path, "[scale]") from None
    except (TypeError, ValueError):
        raise InputError("lower and upper must be numbers", path, "[scale]") from None

    models_t = check_keys(get_table(doc, "models", path=path), FIT_KEYS["models"], path=path, where="[models]")
    kind = str(models_t.get("set", "each-removed")).lower().replace("_", "-")
    keep = models_t.get("keep", [])
    if isinstance(keep, str):
        keep = [keep]
    if not isinstance(keep, list) or not all(isinstance(k, str) for k in keep):
        raise InputError("keep must be a list of material names", path, "[models]")
    explicit = models_t.get("list")
    if kind == "list" and not explicit:
        raise FitError(f"{path}: [models] set = \"list\" needs list = [[...], ...] with at least one model")
    if explicit is not None and not isinstance(explicit, list):
        raise InputError("list must be a list of lists of material names", path, "[models]")
    matrix = description.matrix
    if description.mixing == "maxwell_garnett" and matrix in materials and matrix not in keep:
        keep = list(keep) + [matrix]     # a Maxwell Garnett matrix cannot be removed from a model
    try:
        models = build_model_set(kind, materials, tuple(keep), explicit)
    except FitError as exc:
        raise FitError(f"{path}: {exc}") from None

    sampler_t = check_keys(get_table(doc, "sampler", path=path), FIT_KEYS["sampler"],
                           path=path, where="[sampler]")
    try:
        sampler = SamplerSettings(**sampler_t)
    except TypeError as exc:
        raise InputError(str(exc), path, "[sampler]") from None
    except FitError as exc:
        raise InputError(str(exc), path, "[sampler]") from None

    digest = hashlib.sha256(text.encode())
    try:
        digest.update(photometry_path.read_bytes())
    except OSError:
        raise InputError(f"cannot read the photometry file {base_dir / data['photometry']}", path,
                         "[data] photometry") from None
    if thermal is not None:
        try:
            digest.update(thermal.path.read_bytes())
        except OSError:
            raise InputError(f"cannot read the thermal photometry file {thermal.shown}", path,
                             "[data] thermal") from None
    for extra in _referenced_files(doc, base_dir):
        digest.update(extra.read_bytes())
    return FitSpec(
        description=description, base_dir=base_dir, materials=materials, photometry_path=photometry_path,
        parameters=parameters, scale=scale, sample_scale=(treatment == "sample"), model_set=kind,
        keep=tuple(keep), models=models, sampler=sampler, source=source, text=text,
        digest=digest.hexdigest(), photometry_given=str(base_dir / data["photometry"]), thermal=thermal,
    )


def _fitted_f_max(prior: Prior, description: ModelDescription, parameters: dict, path) -> ModelDescription:
    """Check ``[parameters] f_max``; a free prior joins ``parameters``, a fixed value goes to the model."""
    import dataclasses

    from ..model.tables import F_MAX_FAST_RANGE

    declared, where = PARAMETERS["f_max"], "[parameters] f_max"
    ends = [prior.value] if prior.kind == "fixed" else [prior.lower, prior.upper]
    if not declared.contains(ends).all():
        raise InputError(f"f_max ({declared.meaning}) must lie in {declared.interval}, got {prior.describe()}",
                         path, where)
    if prior.kind == "fixed":     # one value per run, as [model] f_max = ... would give it
        return dataclasses.replace(description, f_max=float(prior.value), f_max_tables=None)
    lo, hi = F_MAX_FAST_RANGE
    if description.method == "fast" and (min(ends) < lo or max(ends) > hi):
        raise InputError(f"the fast path interpolates a fitted f_max between tables for f_max in [{lo:g}, {hi:g}] "
                         f"only (below {lo:g} it misses the fast change of weak absorbers, docs/optics.md); give "
                         f"bounds within it, or [model] method = 'exact', got {prior.describe()}", path, where)
    a_min = parameters.get("a_min")
    if a_min is not None and a_min.relative_to == "blowout":
        raise InputError("a_min tied to the blow-out size needs one f_max per run (the blow-out size of hollow "
                         "spheres depends on it): fix f_max or give a_min in um", path, where)
    parameters["f_max"] = prior
    return description


def _referenced_files(doc, base_dir: Path):
    """Files the description names (material, spectrum and filter-curve files), for the digest."""
    names = []
    for m in doc.get("materials", []) if isinstance(doc.get("materials"), list) else []:
        if isinstance(m, dict) and isinstance(m.get("source"), str):
            names.append(m["source"])
    star = doc.get("star", {}) if isinstance(doc.get("star"), dict) else {}
    spec = star.get("spectrum")
    names.append(spec.get("file") if isinstance(spec, dict) else spec)
    bands = doc.get("bands", {}) if isinstance(doc.get("bands"), dict) else {}
    names += [b.get("file") for b in bands.values() if isinstance(b, dict)]
    out = []
    for name in names:
        if isinstance(name, str) and (base_dir / name).is_file():
            out.append(base_dir / name)
    return out


def read_fit_description(path) -> FitSpec:
    """Read a fit description file (see the module notes for the format)."""
    path = Path(path)
    try:
        text = path.read_text()
    except FileNotFoundError:
        raise InputError("fit description not found", path) from None
    except OSError as exc:
        raise InputError(f"cannot read the fit description ({exc.strerror or exc})", path) from None
    except UnicodeDecodeError:
        raise InputError("cannot read the fit description: it is not UTF-8 text", path) from None
    return parse_fit_description(text, base_dir=path.parent, source=str(path))
