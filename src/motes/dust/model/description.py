"""Dust-model descriptions in TOML: star, materials, mixing, geometry, bands.

The same sections (:data:`MODEL_TABLES`) are shared by ``motes optics`` (a
mixture file), ``motes fit`` and ``motes grid`` descriptions; each command adds
its own sections (data, priors, grid axes) and refuses a table it does not
know, naming the nearest valid one. Relative paths are resolved against the
folder of the description file::

    [star]
    teff = 5800.0                   # [K] blackbody (or give a spectrum)
    spectrum = "star.txt"           # optional: wavelength [um], F_lambda columns
                                    #   or { file = "...", wavelength_unit = "nm", flux = "f_nu" }
    luminosity = 1.0                # [L_sun] optional, for the blow-out size
    mass = 1.0                      # [M_sun] optional, for the blow-out size

    [[materials]]                   # one table per solid component, in order
    name = "silicate"               # label used in tables (letters, digits, _ . + -)
    source = "silica_amorphous"     # optional: bundled name or file path; default: name
    density = 2.2                   # optional override [g cm^-3]
    extrapolation = "constant"      # optional: allow an explicit extrapolation rule
    wavelength_unit = "um"          # optional, for files without a header

    [mixing]
    rule = "bruggeman"              # or "maxwell_garnett"
    matrix = "silicate"             # maxwell_garnett only: a material name or "vacuum"

    [geometry]
    angles_deg = [90.0]             # scattering angles, averaged; or
    inclination_deg = 60.0          #   a ring at this inclination (angles over 90 +- i)
    phase = "mie"                   # or "hg" (Henyey-Greenstein with Mie's g)

    [model]
    bands = ["2mass_j", "2mass_h", "nb_3.1"]   # optional when the bands come from the data
    a_max = 1000.0                  # [um]
    method = "fast"                 # or "exact"
    wavelength_nodes = 8            # Gauss nodes per band
    grains = "spheres"              # or "hollow spheres" (Min, Hovenier & de Koter 2005), then
                                    #   f_max = 0.8: largest vacuum-core volume fraction, in [0, 1)

    [bands."nb_3.1"]                # user bands: same format as target descriptions
    shape = "top-hat"
    centre_um = 3.1
    width_um = 0.1

Every problem is an :class:`~motes.errors.InputError` naming the file and the
TOML field.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from ...errors import InputError, MotesError, quoted_names
from ...parameters import PARAMETERS, STAR_TEFF, accepts_quantities
from ...optics.constants import Material, load_material
from ...photometry.bands import Band, get_band
from ...tomlcheck import check_keys, check_tables, read_number
from .colours import GRAINS, METHODS, PHASES, DiskColourModel, ScatteringGeometry

__all__ = [
    "MODEL_TABLES",
    "MODEL_KEYS",
    "StarDescription",
    "ModelDescription",
    "parse_model_description",
    "read_model_description",
    "model_from_description",
]

_NAME_RE = re.compile(r"[A-Za-z0-9_.+-]+")
_STAR_KEYS = {"teff", "spectrum", "luminosity", "mass"}
_MATERIAL_KEYS = {"name", "source", "density", "extrapolation", "wavelength_unit"}
_MIXING_KEYS = {"rule", "matrix"}
_GEOMETRY_KEYS = {"angles_deg", "inclination_deg", "n_azimuths", "phase"}
_MODEL_KEYS = {"bands", "a_max", "method", "wavelength_nodes", "grains", "f_max"}

#: Top-level tables of a model description; the file of each command adds its own
#: (``[mixture]``, ``[data]``, ``[grid]``, ...) and refuses any other.
MODEL_TABLES = ("star", "materials", "mixing", "geometry", "model", "bands")

_STAR_SPECTRUM_KEYS = ("file", "wavelength_unit", "flux")
#: Keys each model section accepts, by table (docs/descriptions.md lists them; user
#: bands ``[bands.NAME]`` are those of :data:`motes.photometry.targets.USER_BAND_KEYS`).
MODEL_KEYS = {
    "star": _STAR_KEYS,
    "star.spectrum": _STAR_SPECTRUM_KEYS,
    "materials": _MATERIAL_KEYS,
    "mixing": _MIXING_KEYS,
    "geometry": _GEOMETRY_KEYS,
    "model": _MODEL_KEYS,
}


@accepts_quantities
@dataclass(frozen=True)
class StarDescription:
    """The star of a dust-model description.

    Attributes
    ----------
    teff : float or None [K]
    spectrum : (ndarray, ndarray) or None
        Wavelength [um] and F_lambda.
    luminosity : float or None [L_sun]
    mass : float or None [M_sun]
    spectrum_file : str or None
        The spectrum file as the description names it (for the tables' provenance).
    """

    teff: float | None
    spectrum: tuple | None
    luminosity: float | None
    mass: float | None
    spectrum_file: str | None = None

    @property
    def has_luminosity_and_mass(self) -> bool:
        return self.luminosity is not None and self.mass is not None


@accepts_quantities
@dataclass(frozen=True)
class ModelDescription:
    """A parsed dust-model description (see the module docstring for the format).

    Attributes
    ----------
    star : StarDescription
    materials : tuple of Material
        Named by their ``[[materials]] name`` labels.
    mixing : str
    matrix : str or None
    geometry : ScatteringGeometry
    bands : tuple of Band
        From ``[model] bands`` (empty if not given).
    custom_bands : dict of str to Band
        User bands from ``[bands.NAME]`` tables.
    a_max : float [um]
    method : str
    wavelength_nodes : int
    source : str
        File the description came from (for messages).
    grains : str
        ``"spheres"`` or ``"hollow spheres"`` (``[model] grains``).
    f_max : float or None
        Largest vacuum-core volume fraction of hollow spheres (None for spheres,
        and for hollow spheres whose f_max is fitted or a grid axis).
    f_max_tables : str or None
        ``"nodes"`` (f_max fitted: ``[parameters] f_max``) or ``"values"`` (a grid
        axis: ``[grid] f_max``); None when f_max is one value per run.
    """

    star: StarDescription
    materials: tuple[Material, ...]
    mixing: str
    matrix: str | None
    geometry: ScatteringGeometry
    bands: tuple[Band, ...]
    custom_bands: dict
    a_max: float
    method: str
    wavelength_nodes: int
    source: str
    grains: str = "spheres"
    f_max: float | None = None
    f_max_tables: str | None = None

    @property
    def grain_summary(self) -> str:
        """Which grain model the description selects, as text."""
        if self.grains == "spheres":
            return "spheres"
        if self.f_max is None:
            return "hollow spheres (f_max " + ("fitted" if self.f_max_tables == "nodes" else "a grid axis") + ")"
        return f"hollow spheres (f_max = {self.f_max:g})"

    @property
    def material_names(self) -> tuple[str, ...]:
        return tuple(m.name for m in self.materials)

    def provenance(self) -> dict:
        """What produced a table computed from this description, for its ``meta``.

        Returns
        -------
        dict
            ``motes_version``, ``mixing`` (rule and Maxwell Garnett matrix),
            ``phase_function``, ``scattering_angles_deg``, ``star`` (Teff [K] or
            the spectrum file), ``grains``, ``size_distribution`` (power law
            dn/da ∝ a^-q from a_min to a_max [um]), ``materials`` (name and
            optical-constants source: ``optical_constants``), ``description`` (its file).
        """
        from ... import __version__

        star = (f"spectrum file {self.star.spectrum_file}" if self.star.spectrum is not None and self.star.spectrum_file
                else "spectrum (given in Python)" if self.star.spectrum is not None
                else f"blackbody Teff = {self.star.teff:g} K")
        mixing = self.mixing + (f" (matrix {self.matrix})" if self.matrix else "")
        return {
            "motes_version": __version__,
            "mixing": mixing,
            "phase_function": self.geometry.phase,
            "scattering_angles_deg": [float(a) for a in self.geometry.angles_deg],
            "star": star,
            "grains": self.grain_summary,
            "size_distribution": "power law dn/da ∝ a^-q from a_min to a_max (values: the table's a_min, q and "
                                 "a_max columns, keys or priors)",
            "optical_constants": [f"{m.name}: {_short_provenance(m.provenance)}" for m in self.materials],
            "description": str(self.source),
        }

    def subset(self, names) -> "ModelDescription":
        """The same description with only the materials ``names``, in description order.

        Parameters
        ----------
        names : iterable of str
            Labels of ``[[materials]]`` tables (e.g. one model of a fit).

        Raises
        ------
        motes.errors.InputError
            An unknown name, an empty subset, or a Maxwell Garnett matrix left out.
        """
        wanted = set(names)
        unknown = sorted(wanted - set(self.material_names))
        if unknown:
            raise InputError(f"unknown material(s) {quoted_names(unknown)}; the description has "
                             f"{quoted_names(self.material_names)}",
                             path=self.source, where="[[materials]]")
        if not wanted:
            raise InputError("a model needs at least one material", path=self.source, where="[[materials]]")
        if self.matrix not in (None, "vacuum") and self.matrix not in wanted:
            raise InputError(f"the Maxwell Garnett matrix '{self.matrix}' cannot be left out of a model",
                             path=self.source, where="[mixing] matrix")
        return dataclasses.replace(self, materials=tuple(m for m in self.materials if m.name in wanted))

    def build_model(self, bands=None, method: str | None = None, intensities=None) -> DiskColourModel:
        """The :class:`DiskColourModel` described.

        Parameters
        ----------
        bands : sequence of Band or str, optional
            Bands to use (e.g. those of the data); names are looked up among the
            description's user bands first. Default: ``[model] bands``.
        method : {"fast", "exact"}, optional
            Overrides ``[model] method``.
        intensities : sequence of {"total", "polarised"}, optional
            What each band's column holds (e.g. the data's ``intensity``);
            default all total.
        """
        if intensities is not None and "polarised" in tuple(intensities) and self.geometry.phase != "mie":
            raise InputError("the photometry has polarised-intensity rows, but the description's phase function "
                             "is Henyey-Greenstein, which carries no polarisation; set [geometry] phase = 'mie' "
                             "or leave the polarised rows out", path=self.source, where="[geometry] phase")
        if bands is None:
            bands = self.bands
        else:
            bands = tuple(b if isinstance(b, Band) else _band(b, self.custom_bands, self.source, "bands")
                          for b in bands)
        if not bands:
            raise InputError("no bands: list them in [model] bands = [...] or give the data's bands",
                             path=self.source, where="[model] bands")
        try:
            return DiskColourModel(
                self.materials, bands, star_teff=self.star.teff, star_spectrum=self.star.spectrum,
                mixing=self.mixing, matrix=self.matrix, geometry=self.geometry,
                method=method or self.method, a_max=self.a_max, wavelength_nodes=self.wavelength_nodes,
                intensities=intensities, grains=self.grains, f_max=self.f_max, f_max_tables=self.f_max_tables)
        except InputError as exc:
            if exc.path is not None:
                raise
            raise InputError(exc.reason, path=self.source, where=exc.where) from None


def _short_provenance(text: str) -> str:
    """One line of a material's provenance: its ``reference:`` line, else its first line."""
    lines = [line.strip() for line in (text or "").splitlines() if line.strip()]
    if not lines:
        return "no provenance recorded"
    ref = next((line for line in lines if line.startswith("reference:")), None)
    return ref[len("reference:"):].strip() if ref else lines[0]


def _band(name, custom, source, where) -> Band:
    if not isinstance(name, str):
        raise InputError(f"band names must be strings, got {name!r}", path=source, where=where)
    try:
        return get_band(name, custom)
    except MotesError as exc:
        raise InputError(str(exc), path=source, where=where) from None


def _read_star(doc, source, base_dir) -> StarDescription:
    star = doc.get("star", {})
    check_keys(star, _STAR_KEYS, path=source, where="[star]")
    teff = (read_number(star["teff"], path=source, where="[star] teff", what=f"Teff [K] in {STAR_TEFF.interval}",
                        lo=STAR_TEFF.lo, hi=STAR_TEFF.hi) if "teff" in star else None)
    spectrum = None
    if "spectrum" in star:
        from ...photometry.targets import read_host_spectrum

        spec = star["spectrum"]
        if isinstance(spec, str):
            spec = {"file": spec}
        check_keys(spec, _STAR_SPECTRUM_KEYS, path=source, where="[star] spectrum")
        if not isinstance(spec.get("file"), str):
            raise InputError('expected spectrum = "PATH" or { file = "PATH", wavelength_unit = "um", '
                             'flux = "f_lambda" }', path=source, where="[star] spectrum")
        path = base_dir / spec["file"]
        if not path.is_file():
            raise InputError(f"spectrum file {str(path)!r} not found", path=source, where="[star] spectrum")
        s = read_host_spectrum(path, str(spec.get("wavelength_unit", "um")), str(spec.get("flux", "f_lambda")))
        spectrum = (s.wavelength, s.flux_lambda)
    if teff is None and spectrum is None:
        raise InputError("the star needs teff = ... [K] or a spectrum file", path=source, where="[star]")
    lum = mass = None
    if "luminosity" in star:
        lum = read_number(star["luminosity"], path=source, where="[star] luminosity", positive=True)
    if "mass" in star:
        mass = read_number(star["mass"], path=source, where="[star] mass", positive=True)
    return StarDescription(teff, spectrum, lum, mass, spectrum_file=spec["file"] if spectrum is not None else None)


def _read_materials(doc, source, base_dir) -> tuple[Material, ...]:
    mats = doc.get("materials")
    if not isinstance(mats, list) or not mats:
        raise InputError("no [[materials]] tables: name at least one material", path=source)
    out, names = [], []
    for i, entry in enumerate(mats):
        where = f"[[materials]] #{i + 1}"
        check_keys(entry, _MATERIAL_KEYS, path=source, where=where)
        name = entry.get("name")
        if not isinstance(name, str) or not _NAME_RE.fullmatch(name):
            raise InputError(f'name must be a label of letters, digits, _ . + - (got {name!r})',
                             path=source, where=f"{where} name")
        if name in names:
            raise InputError(f"material '{name}' is listed twice", path=source, where=f"{where} name")
        names.append(name)
        src = entry.get("source", name)
        if not isinstance(src, str):
            raise InputError(f"source must be a material name or a file path, got {src!r}",
                             path=source, where=f"{where} source")
        candidate = base_dir / src
        kw = {}
        for key in ("extrapolation", "wavelength_unit"):
            if key in entry:
                kw[key] = entry[key]
        if "density" in entry:
            kw["density"] = read_number(entry["density"], path=source, where=f"{where} density", positive=True)
        try:
            mat = load_material(candidate if candidate.is_file() else src, **kw)
        except MotesError as exc:
            raise InputError(str(exc), path=source, where=f"{where} source") from None
        out.append(dataclasses.replace(mat, name=name))
    return tuple(out)


def _read_geometry(doc, source) -> ScatteringGeometry:
    geo = doc.get("geometry", {})
    check_keys(geo, _GEOMETRY_KEYS, path=source, where="[geometry]")
    phase = geo.get("phase", "mie")
    if phase not in PHASES:
        raise InputError(f"phase must be one of {quoted_names(PHASES)}, got {phase!r}", path=source, where="[geometry] phase")
    try:
        if "inclination_deg" in geo:
            if "angles_deg" in geo:
                raise InputError("give angles_deg or inclination_deg, not both", path=source, where="[geometry]")
            n = read_number(geo.get("n_azimuths", 8), path=source, where="[geometry] n_azimuths",
                            integer=True, positive=True)
            inc = read_number(geo["inclination_deg"], path=source, where="[geometry] inclination_deg")
            return ScatteringGeometry.ring(inc, n, phase)
        angles = geo.get("angles_deg", [90.0])
        angles = angles if isinstance(angles, list) else [angles]
        angles = [read_number(a, path=source, where="[geometry] angles_deg", positive=True) for a in angles]
        return ScatteringGeometry(tuple(angles), phase)
    except InputError as exc:
        if exc.path is not None:
            raise
        raise InputError(exc.reason, path=source, where=f"[geometry] {exc.where or ''}".strip()) from None


def parse_model_description(doc: dict, base_dir=".", source: str = "<string>",
                            f_max_elsewhere: str | None = None) -> ModelDescription:
    """Parse the dust-model sections of a description already loaded from TOML.

    Parameters
    ----------
    doc : dict
        The whole TOML document (other commands' sections are ignored).
    base_dir : path
        Folder against which relative file names are resolved.
    source : str
        File name used in messages.
    f_max_elsewhere : str, optional
        Where f_max is given instead of ``[model] f_max``: ``"[parameters] f_max"``
        (fitted) or ``"[grid] f_max"`` (a grid axis); ``[model] grains`` must
        then be ``"hollow spheres"`` and ``[model] f_max`` is refused.

    Returns
    -------
    ModelDescription
    """
    base_dir = Path(base_dir)
    if not isinstance(doc, dict):
        raise InputError("expected a TOML document", path=source)
    star = _read_star(doc, source, base_dir)
    materials = _read_materials(doc, source, base_dir)
    mixing = doc.get("mixing", {})
    check_keys(mixing, _MIXING_KEYS, path=source, where="[mixing]")
    rule = mixing.get("rule", "bruggeman")
    if rule not in ("bruggeman", "maxwell_garnett"):
        raise InputError(f"rule must be 'bruggeman' or 'maxwell_garnett', got {rule!r}",
                         path=source, where="[mixing] rule")
    matrix = mixing.get("matrix")
    names = [m.name for m in materials]
    if matrix is not None and matrix != "vacuum" and matrix not in names:
        raise InputError(f"matrix must be one of the materials {quoted_names(names)} or 'vacuum', got {matrix!r}",
                         path=source, where="[mixing] matrix")
    if matrix is not None and rule != "maxwell_garnett":
        raise InputError("matrix is used by rule = 'maxwell_garnett' only", path=source, where="[mixing] matrix")
    geometry = _read_geometry(doc, source)
    try:
        from ...photometry.targets import user_bands_from_document  # shared [bands.NAME] format

        custom = user_bands_from_document(doc, Path(source) if source != "<string>" else base_dir / "description.toml",
                                  "photon")
    except MotesError as exc:
        raise InputError(getattr(exc, "reason", str(exc)), path=source, where=getattr(exc, "where", None)) from None
    model = doc.get("model", {})
    check_keys(model, _MODEL_KEYS, path=source, where="[model]")
    band_names = model.get("bands", [])
    if not isinstance(band_names, list):
        raise InputError("bands must be a list of band names", path=source, where="[model] bands")
    bands = tuple(_band(b, custom, source, "[model] bands") for b in band_names)
    a_max = read_number(model.get("a_max", PARAMETERS["a_max"].default), path=source, where="[model] a_max",
                        positive=True)
    method = model.get("method", "fast")
    if method not in METHODS:
        raise InputError(f"method must be one of {quoted_names(METHODS)}, got {method!r}", path=source, where="[model] method")
    nodes = read_number(model.get("wavelength_nodes", 8), path=source, where="[model] wavelength_nodes",
                        integer=True, lo=1, hi=64)
    grains, f_max = _read_grains(model, source, f_max_elsewhere)
    tables = None if f_max_elsewhere is None else ("values" if f_max_elsewhere.startswith("[grid]") else "nodes")
    return ModelDescription(star, materials, rule, matrix, geometry, bands, custom, a_max, method, nodes, source,
                            grains, f_max, tables)


def _read_grains(model, source, elsewhere=None):
    """``[model] grains`` and ``f_max``: spheres (default) or hollow spheres with their f_max."""
    grains = model.get("grains", "spheres")
    if grains not in GRAINS:
        raise InputError(f"grains must be one of {quoted_names(GRAINS)}, got {grains!r}", path=source,
                         where="[model] grains")
    declared = PARAMETERS["f_max"]
    if elsewhere is not None:
        if grains != "hollow spheres":
            raise InputError(f"{elsewhere} is used by hollow-sphere grains only; add [model] grains = "
                             f"'hollow spheres' or remove {elsewhere}", path=source, where=elsewhere)
        if "f_max" in model:
            raise InputError(f"f_max is given both in [model] and in {elsewhere}; keep one", path=source,
                             where="[model] f_max")
        return grains, None
    if grains == "spheres":
        if "f_max" in model:
            raise InputError("f_max is used by grains = 'hollow spheres' only; add that line or remove f_max",
                             path=source, where="[model] f_max")
        return grains, None
    if "f_max" not in model:
        raise InputError(f"grains = 'hollow spheres' needs f_max = ..., the largest vacuum-core volume fraction "
                         f"in {declared.interval} (0.8 is common practice, no source)", path=source,
                         where="[model] f_max")
    value = model["f_max"]
    if isinstance(value, (list, dict)):
        raise InputError("[model] f_max is one number per run; to fit it give a prior in [parameters] f_max, "
                         f"for a grid axis list it in [grid] f_max (values in {declared.interval})", path=source,
                         where="[model] f_max")
    f_max = read_number(value, path=source, where="[model] f_max",
                        what=f"the largest vacuum-core volume fraction, in {declared.interval}")
    if not declared.contains(f_max):
        raise InputError(f"f_max ({declared.meaning}) must be in {declared.interval}, got {f_max:g}",
                         path=source, where="[model] f_max")
    return grains, float(f_max)


def read_model_description(path, extra_tables=None) -> ModelDescription:
    """Read a dust-model (mixture) description from a TOML file.

    Parameters
    ----------
    path : str or os.PathLike
    extra_tables : sequence of str, optional
        The file's tables besides :data:`MODEL_TABLES` (e.g. ``("mixture",)``):
        any other table is refused, naming the nearest valid one. None reads
        the model sections of any file and ignores its other tables.
    """
    path = Path(path)
    try:
        text = path.read_text()
    except FileNotFoundError:
        raise InputError("description file not found", path=path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the description ({exc})", path=path) from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", path=path) from None
    if extra_tables is not None:
        check_tables(doc, MODEL_TABLES + tuple(extra_tables), path=path, arrays=("materials",))
    return parse_model_description(doc, base_dir=path.parent, source=str(path))


def model_from_description(doc_or_path, bands=None, method=None, base_dir=".") -> DiskColourModel:
    """Build a :class:`DiskColourModel` from a TOML file or an already-parsed dict.

    Parameters
    ----------
    doc_or_path : dict, str or Path
    bands : sequence of Band or str, optional
        Bands to model (default: ``[model] bands``).
    method : {"fast", "exact"}, optional
    base_dir : path
        For a dict: folder against which relative paths are resolved.
    """
    if isinstance(doc_or_path, dict):
        desc = parse_model_description(doc_or_path, base_dir=base_dir)
    else:
        desc = read_model_description(doc_or_path)
    return desc.build_model(bands=bands, method=method)
