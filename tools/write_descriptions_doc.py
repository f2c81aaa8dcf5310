"""Write ``docs/descriptions.md``: every section and key of motes' TOML description files.

Run from the repository root after a reader accepts a new key::

    .venv/bin/python tools/write_descriptions_doc.py

What each key *is* comes from the code where the code declares it:

* the key sets are those the readers pass to :func:`motes.tomlcheck.check_keys`
  (module constants such as ``motes.dust.model.description.MODEL_KEYS``);
* unit, allowed range, default and meaning of the model parameters (``porosity``,
  ``a_min``, ``q``, ``a_max``, ``angle``, ``systematic``) come from
  :data:`motes.parameters.PARAMETERS`;
* the settings tables that are dataclasses (``[settings]``, ``[sampler]``,
  ``[classify]``) take their defaults from the fields and type, unit and meaning
  from the class docstring (``name : float [mag]`` lines);
* everything else is described in :data:`DESCRIBED` below.

A key a reader accepts but nothing here describes is written with the meaning
``NOT DESCRIBED`` and listed by :func:`undescribed`; ``tests/test_descriptions_doc.py``
fails on it, on a described key no reader accepts, and on a stale page.
"""

from __future__ import annotations

import dataclasses
import math
import re
import sys
from dataclasses import dataclass
from pathlib import Path

OUTPUT = Path(__file__).resolve().parents[1] / "docs" / "descriptions.md"
UNDESCRIBED = "NOT DESCRIBED"


@dataclass(frozen=True)
class Key:
    """One key of one table: TOML type, unit, default, allowed values, meaning."""

    type: str
    unit: str = ""
    default: str = ""
    allowed: str = ""
    meaning: str = UNDESCRIBED


@dataclass(frozen=True)
class Section:
    """One table of a description file."""

    file: str          # heading of the file kind it belongs to
    table: str         # as written in the file, e.g. "[geometry]"
    keys: tuple        # the key names the reader accepts, in the reader's order
    described: dict    # key -> Key
    note: str = ""


# ------------------------------------------------------------------ helpers
def _um(text: str) -> str:
    return text.replace("um", "µm")


def _param(name: str, type_: str = "number", default: str | None = None, meaning: str | None = None) -> Key:
    """A key that is one of motes.parameters.PARAMETERS."""
    from motes.parameters import PARAMETERS

    p = PARAMETERS[name]
    if default is None:
        default = "" if p.default is None else f"{p.default:g}"
    return Key(type_, _um(p.unit_text), default, p.interval, meaning or p.meaning)


def _choice(values) -> str:
    return ", ".join(f'`"{v}"`' for v in values)


_TYPES = {"float": "number", "int": "integer", "bool": "boolean", "str": "string"}


def _docstring_keys(cls) -> dict:
    """``name : type [unit]`` entries of a numpydoc Parameters section, with the field defaults."""
    doc = cls.__doc__ or ""
    lines = doc.splitlines()
    out: dict = {}
    entry = None
    for line in lines:
        m = re.match(r"^    ([A-Za-z_][\w, ]*) : (.+)$", line)
        if m:
            names = [n.strip() for n in m.group(1).split(",")]
            type_text = m.group(2).strip()
            unit = ""
            u = re.search(r"\[([^\]]+)\]\s*$", type_text)
            if u:
                unit = u.group(1)
                type_text = type_text[:u.start()].strip()
            entry = {"names": names, "type": type_text, "unit": unit, "text": []}
            for n in names:
                out[n] = entry
        elif entry is not None and line.startswith("        "):
            entry["text"].append(line.strip())
        elif line.strip() and not line.startswith("        "):
            entry = None
    fields = {f.name: f for f in dataclasses.fields(cls)}
    keys = {}
    for name, f in fields.items():
        e = out.get(name)
        if f.default is not dataclasses.MISSING:
            default = f.default
        elif f.default_factory is not dataclasses.MISSING:
            default = f.default_factory()
        else:
            default = None
        if e is None:
            keys[name] = Key(_TYPES.get(type(default).__name__, ""), default=_show(default))
            continue
        type_text = e["type"]
        choices = re.fullmatch(r"\{(.+)\}", type_text)
        if choices:
            allowed = ", ".join(f"`{c.strip()}`" for c in choices.group(1).split(","))
            type_ = "string"
        else:
            allowed = ""
            base = type_text.split(" or ")[0].split()[0]
            type_ = _TYPES.get(base, type_text)
        meaning = _plain(" ".join(e["text"])) or UNDESCRIBED
        keys[name] = Key(type_, _um(e["unit"]), _show(default), allowed, meaning)
    return keys


def _plain(text: str) -> str:
    """reStructuredText roles and literals of a docstring as Markdown code."""
    text = re.sub(r":[a-z]+:`~?([^`]+)`", r"`\1`", text)
    return text.replace("``", "`")


def _show(value) -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'`"{value}"`'
    if isinstance(value, float):
        return "none" if math.isnan(value) else f"{value:g}"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, (tuple, list, dict)) and not value:
        return "none"
    if isinstance(value, (tuple, list)) and all(isinstance(v, (bool, int, float, str)) for v in value):
        return "`[" + ", ".join(_toml_scalar(v) for v in value) + "]`"      # as written in the TOML
    return f"`{value!r}`"


def _toml_scalar(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, float):
        text = f"{value:g}"
        return text if any(c in text for c in ".en") else text + ".0"    # a float stays a float in TOML
    return str(value)


def _merge(base: dict, override: dict) -> dict:
    """``base`` with the fields of ``override`` entries replacing its own."""
    out = dict(base)
    for name, fields in override.items():
        out[name] = dataclasses.replace(out.get(name, Key("")), **fields)
    return out


# ------------------------------------------------------------------ the sections
TARGET = "Target file (`motes classify TARGET.toml`, `motes photometry`, `motes motion`)"
CLASSIFY = "Classification settings (`motes classify --settings FILE`)"
MODEL = "Dust-model sections (mixture, fit and grid files)"
MIXTURE = "Mixture file (`motes optics MIXTURE.toml`)"
FIT = "Fit description (`motes fit FIT.toml`)"
GRID = "Grid description (`motes grid run GRID.toml`)"
LIBRARY = "Spectral-library index (`motes-library.toml` in a library folder)"

_BAND_COMMON = {
    "shape": Key("string", allowed=_choice(("top-hat", "gaussian", "curve")), meaning="how the band is given"),
    "counting": Key("string", default="the file's counting mode", allowed=_choice(("photon", "energy")),
                    meaning="detector counting mode of this band"),
    "note": Key("string", default='`""`', meaning="free text shown with the band in outputs"),
}
_SPECTRUM_FILE = {
    "file": Key("string (path)", meaning="two columns, wavelength and flux density; relative to this file"),
    "wavelength_unit": Key("string", default='`"um"`', allowed="any astropy length unit",
                           meaning="unit of the wavelength column"),
    "flux": Key("string", default='`"f_lambda"`', allowed=_choice(("f_lambda", "f_nu")),
                meaning="what the second column is, in any unit (only colours are used)"),
}


def sections() -> list[Section]:
    """Every table of every description file, with its accepted keys (read from the code)."""
    from motes.companion.classify import ClassifySettings
    from motes.companion import library
    from motes.companion.extinction import EXTINCTION_LAWS
    from motes.dust.fit.priors import PRIOR_KEYS, PRIOR_KINDS, ParameterSpace, Prior
    from motes.dust.fit.spec import FIT_KEYS, MODEL_SETS, SamplerSettings
    from motes.dust.grid.spec import GRID_KEYS
    from motes.dust.model import mixture, thermal
    from motes.dust.model.colours import GRAINS, METHODS
    from motes.dust.model.description import MODEL_KEYS
    from motes.dust.model.geometry import PHASES
    from motes.optics.material import EXTRAPOLATION_RULES
    from motes.parameters import PARAMETERS, STAR_TEFF
    from motes.photometry.targets import TARGET_KEYS, USER_BAND_KEYS, CalibrationSettings

    pair = "array [value, 1-sigma]"
    space_defaults = {f.name: f.default.describe() for f in dataclasses.fields(ParameterSpace)
                      if isinstance(f.default, Prior)}
    out = [
        Section(TARGET, "[companion]", TARGET_KEYS["companion"], {
            "name": Key("string", meaning="name of the companion, used in outputs and output file names (required)"),
            "photometry": Key("string (path)", meaning="the photometry table, CSV or ECSV, relative to this file "
                                                       "(required; columns in docs/photometry.md)"),
        }),
        Section(TARGET, "[host]", TARGET_KEYS["host"], {
            "name": Key("string", default='`"host"`', meaning="name of the host star"),
            "distance_pc": Key(pair, "pc", "none", "d > 0, error > 0",
                               "distance; give this or parallax_mas (neither: no absolute magnitudes)"),
            "parallax_mas": Key(pair, "mas", "none", "ϖ > 0, error > 0", "parallax; give this or distance_pc"),
            "teff_k": Key("number", "K", "none", STAR_TEFF.interval,
                          "effective temperature, for blackbody synthesis of missing host magnitudes"),
            "magnitudes": Key("table", meaning="catalogue magnitudes, `BAND = [mag, 1-sigma]` or a table "
                                               "(see [host.magnitudes] BAND)"),
            "spectrum": Key("table", meaning="a host spectrum for synthesis (see [host.spectrum]); wins over teff_k"),
            "ra_deg": Key("number", "deg", "none", "[0, 360)", "ICRS right ascension (only `motes motion`)"),
            "dec_deg": Key("number", "deg", "none", "[-90, 90]", "ICRS declination (only `motes motion`)"),
            "pm_ra_mas_yr": Key(pair, "mas / yr", "none", "error > 0",
                                "proper motion in right ascension, μα* = μα cos δ (only `motes motion`)"),
            "pm_dec_mas_yr": Key(pair, "mas / yr", "none", "error > 0",
                                 "proper motion in declination (only `motes motion`)"),
        }),
        Section(TARGET, "[host.spectrum]", TARGET_KEYS["host.spectrum"], _SPECTRUM_FILE),
        Section(TARGET, "[host.magnitudes] BAND", TARGET_KEYS["host.magnitudes"], {
            "mag": Key("number", "mag", allowed="[-50, 50]", meaning="catalogue magnitude (required)"),
            "error": Key("number", "mag", allowed="> 0", meaning="1-sigma uncertainty (required)"),
            "system": Key("string", default="the band's catalogue system", allowed=_choice(("Vega", "AB")),
                          meaning="magnitude system"),
        }, note="The long form of a host magnitude, `\"2mass_ks\" = { mag = 6.95, error = 0.02 }`; "
                "the short form is `\"2mass_ks\" = [6.95, 0.02]` in the band's catalogue system."),
        Section(TARGET, "[settings]", TARGET_KEYS["settings"], _merge(_docstring_keys(CalibrationSettings), {
            "synthesis_systematic_mag": {"unit": "mag", "allowed": ">= 0"},
            "zero_point_errors": {"type": "table", "allowed": ">= 0 each"},
        })),
    ]
    for shape, keys in USER_BAND_KEYS.items():
        described = dict(_BAND_COMMON)
        described.update({
            "centre_um": Key("number", "µm", allowed="> 0", meaning="centre wavelength (required)"),
            "width_um": Key("number", "µm", allowed="> 0", meaning="full width of the top-hat (required)"),
            "fwhm_um": Key("number", "µm", allowed="> 0", meaning="full width at half maximum (required)"),
            "file": Key("string (path)", meaning="filter curve: two columns, wavelength and throughput "
                                                 "(relative to this file; required)"),
            "wavelength_unit": Key("string", default='`"um"` or the file\'s `# wavelength_unit:`',
                                   allowed="any astropy length unit", meaning="unit of the wavelength column"),
            "response": Key("string", default='`"photon"`', allowed=_choice(("photon", "energy")),
                            meaning="`energy`: the curve is already multiplied by λ"),
            "vega_magnitude": Key("number", "mag", default="0", meaning="magnitude of Vega in this band"),
        })
        out.append(Section(TARGET, f'[bands.NAME] shape = "{shape}"', keys, described,
                           note="User bands; the same tables are read in mixture, fit and grid files."
                           if shape == "top-hat" else ""))

    classify = _docstring_keys(ClassifySettings)
    out.append(Section(CLASSIFY, "[classify]", tuple(f.name for f in dataclasses.fields(ClassifySettings)),
                       _merge(classify, {
                           "band_map": {"type": "table", "meaning": "explicit band mappings, "
                                        "`{ OBSERVED = STANDARD }` (e.g. `{ \"NIRC2.Kp\" = \"2mass_ks\" }`); "
                                        "nothing is mapped otherwise"},
                           "type_range": {"type": "array of 2 strings",
                                          "meaning": "restrict the sequence, e.g. `[\"M0\", \"T9\"]`"},
                           "rv": {"unit": "", "allowed": "the law's R_V range", "meaning": "R_V of the extinction law"},
                           "extinction_law": {"allowed": _choice(EXTINCTION_LAWS),
                                              "meaning": "extinction curve (dust_extinction's average curves)"},
                           "av_max": {"unit": "mag", "allowed": "> 0",
                                      "meaning": "upper end of the uniform A_V prior [0, av_max]"},
                           "av_steps": {"allowed": ">= 3", "meaning": "grid points of the A_V marginalisation"},
                           "template_scatter": {"allowed": ">= 0"},
                           "colour_scatter_range": {"type": "array of 2 numbers", "allowed": "0 < low <= high",
                                                    "meaning": "colours-only mode: the dwarf sequence's per-band "
                                                    "template scatter is marginalised over a log-uniform prior "
                                                    "on [low, high] (a scale mixture; default 0.02-0.30, argued "
                                                    "in docs/companion.md); chi2 and fit quality stay at "
                                                    "`template_scatter`; equal bounds give one fixed scatter"},
                           "luminosity_scatter": {"allowed": ">= 0"},
                           "type_step": {"unit": "subtypes", "allowed": "> 0"},
                           "sequence_file": {"type": "string (path)"},
                           "type_prior": {"type": "string or table"},
                       }),
                       note="Keys of the `[classify]` table of a settings file (or the whole file if it has "
                            "no such table); command-line flags override them."))

    from motes.companion.boundness import BoundnessSettings

    boundness = _merge(_docstring_keys(BoundnessSettings), {   # what the docstring leaves out
        "type_prior": {"type": "string or table"},
        "av_per_kpc": {"allowed": ">= 0", "meaning": "mean visual extinction per kpc in the Galactic plane"},
        "dust_scale_height_pc": {"allowed": ">= 0", "meaning": "scale height of the Galactic dust layer"},
        "distance_nodes": {"allowed": ">= 20", "meaning": "nodes of the line-of-sight distance integral"},
        "type_step": {"unit": "subtypes", "allowed": "> 0", "meaning": "step of the type grid"},
        "bayes_factor_threshold": {"allowed": "> 1", "meaning": "Bayes factor B beyond which one hypothesis "
                                                                "(bound or background) is called"},
    })
    out.append(Section(CLASSIFY, "[boundness]",
                       tuple(f.name for f in dataclasses.fields(BoundnessSettings) if f.name != "galaxy")
                       + ("separation_arcsec", "source_density_deg2"),
                       {**{k: v for k, v in boundness.items() if k != "galaxy"},
                        "separation_arcsec": Key("number", "arcsec", "none", "> 0",
                                                 "separation_mas given in arcsec"),
                        "source_density_deg2": Key("number", "deg⁻²", "none", "> 0",
                                                   "source_density_arcsec2 given per square degree")},
                       note="Settings of the photometric boundness test, a `[boundness]` table in the same settings "
                            "file; flags (`--separation`, ...) override them."))

    out += [
        Section(MODEL, "[star]", MODEL_KEYS["star"], {
            "teff": Key("number", "K", "none", STAR_TEFF.interval,
                        "effective temperature of a blackbody star (give this or spectrum)"),
            "spectrum": Key("string (path) or table", meaning="a stellar spectrum, `\"star.txt\"` "
                                                              "(wavelength [µm], F_λ) or a table (see [star] spectrum)"),
            "luminosity": Key("number", "L_sun", "none", "> 0", "for the radiation-pressure blow-out size"),
            "mass": Key("number", "M_sun", "none", "> 0", "for the radiation-pressure blow-out size"),
        }),
        Section(MODEL, "[star] spectrum", MODEL_KEYS["star.spectrum"], _SPECTRUM_FILE,
                note='Written `spectrum = { file = "star.txt", wavelength_unit = "nm", flux = "f_nu" }`.'),
        Section(MODEL, "[[materials]]", _sorted(MODEL_KEYS["materials"], ("name", "source", "density",
                                                                         "extrapolation", "wavelength_unit")), {
            "name": Key("string", allowed="letters, digits, `_ . + -`", meaning="label of the material in "
                                                                                 "tables and fractions (required)"),
            "source": Key("string", default="the name", meaning="a bundled material (`motes materials`) or an "
                                                                "n,k file path relative to this file"),
            "density": Key("number", "g / cm³", "the file's `# density:`", "> 0",
                           "bulk density of the solid, for the blow-out size"),
            "extrapolation": Key("string", default="none (refused)", allowed=_choice(EXTRAPOLATION_RULES),
                                 meaning="allow the optical constants beyond the tabulated range by this rule "
                                         "(docs/materials.md, \"Extrapolation policy\"); values computed with it "
                                         "are flagged"),
            "wavelength_unit": Key("string", default='`"um"` or the file header', allowed="any astropy length unit",
                                   meaning="wavelength unit of an n,k file without a header"),
        }, note="One table per solid component, in order; fractions follow this order."),
        Section(MODEL, "[mixing]", _sorted(MODEL_KEYS["mixing"], ("rule", "matrix")), {
            "rule": Key("string", default='`"bruggeman"`', allowed=_choice(("bruggeman", "maxwell_garnett")),
                        meaning="effective-medium rule (docs/materials.md, \"Mixing rules\")"),
            "matrix": Key("string", default="none", allowed='a material name or `"vacuum"`',
                          meaning="the matrix of a Maxwell Garnett mixture (that rule only); "
                                  "it cannot be left out of a model"),
        }),
        Section(MODEL, "[geometry]", _sorted(MODEL_KEYS["geometry"], ("angles_deg", "inclination_deg",
                                                                        "n_azimuths", "phase")), {
            "angles_deg": Key("number or array", "deg", "[90]", "each > 0",
                              "scattering angles, averaged with equal weights (not with inclination_deg)"),
            "inclination_deg": Key("number", "deg", "none", "[0, 90)",
                                   "a circular ring at this inclination (0 = face-on): angles "
                                   "θ = arccos(sin i cos φ) spread over 90° ± i (not with angles_deg)"),
            "n_azimuths": Key("integer", "", "8", ">= 1",
                              "azimuths over a half-turn sampled by inclination_deg"),
            "phase": Key("string", default='`"mie"`', allowed=_choice(PHASES),
                         meaning="phase function: Mie, or Henyey-Greenstein with Mie's asymmetry parameter"),
        }),
        Section(MODEL, "[model]", _sorted(MODEL_KEYS["model"], ("bands", "a_max", "method", "wavelength_nodes",
                                                                "grains", "f_max")), {
            "bands": Key("array of strings", default="the data's bands", allowed="band identifiers or "
                                                                                "[bands.NAME] names",
                         meaning="bands to model (`motes optics` needs them; fit and grid take the data's)"),
            "a_max": _param("a_max"),
            "method": Key("string", default='`"fast"`', allowed=_choice(METHODS),
                          meaning="`fast`: lookup tables (built once, cached); `exact`: Mie at every node"),
            "wavelength_nodes": Key("integer", "", "8", "[1, 64]",
                                    "Gauss quadrature nodes per band (band average against filter × star)"),
            "grains": Key("string", default='`"spheres"`', allowed=_choice(GRAINS),
                          meaning="grain model: homogeneous Mie spheres, or a distribution of hollow spheres "
                                  "(Min, Hovenier & de Koter 2005) averaged over vacuum-core fractions 0–f_max "
                                  "at fixed material volume (docs/optics.md)"),
            "f_max": _param("f_max", default="required with hollow spheres, unless fitted or a grid axis",
                            meaning="largest vacuum-core volume fraction of the hollow spheres (one value per "
                                    "run; not with spheres; 0.8 is common practice, no source; or a prior in "
                                    "[parameters] f_max, or an axis in [grid] f_max)"),
        }),
        Section(MIXTURE, "[mixture]", _sorted(mixture._MIXTURE_KEYS,
                                              ("fractions", "porosity", "a_min", "q", "a_max", "reference_band")), {
            "fractions": Key("table", "", "0 for a material left out", "[0, 1] each, sum 1",
                             "volume fractions of the solid, `{ material = fraction }`"),
            "porosity": _param("porosity", default="required"),
            "a_min": _param("a_min", default="required"),
            "q": _param("q", default="required"),
            "a_max": _param("a_max", default="[model] a_max"),
            "reference_band": Key("string", default="the first band", allowed="one of [model] bands",
                                  meaning="colours are magnitudes relative to this band"),
        }, note="A mixture file is the dust-model sections plus `[mixture]`."),
        Section(MIXTURE, "[thermal]", _sorted(thermal.THERMAL_KEYS, (
            "radius_au", "surface_density_index", "bands", "dust_mass_mearth", "cross_section_au2",
            "distance_pc", "sublimation_k", "sizes_per_efold", "flux_sizes_per_efold", "radial_nodes")), {
            "radius_au": Key("number or [r_in, r_out]", "au", "required", "> 0, r_in < r_out",
                             "a ring's radius, or a belt's inner and outer radius"),
            "surface_density_index": _param("surface_density_index", meaning="belt only: surface density "
                                                                             "Σ ∝ r^p (-1: common practice, no source)"),
            "bands": Key("array of strings", default="required", allowed="band identifiers or [bands.NAME] names",
                         meaning="bands of the thermal fluxes (photon-counting averages, no colour correction)"),
            "dust_mass_mearth": Key("number", "M_earth", "one of the two", "> 0",
                                    "the amount of dust as a mass (needs every material's density)"),
            "cross_section_au2": Key("number", "au^2", "one of the two", "> 0",
                                     "the amount of dust as the total grain cross-section"),
            "distance_pc": Key("number", "pc", "none: fluxes at 1 pc", "> 0",
                               "distance to the observer, for fluxes in Jy (disk/star ratios need none)"),
            "sublimation_k": Key("table", "K", "water and methane ice only", "> 0 each",
                                 "`{ material = T }`: flag grains above these sublimation temperatures"),
            "sizes_per_efold": Key("integer", "", "4", "[2, 16]",
                                   "Gauss nodes in ln a per e-fold for the grain temperatures"),
            "flux_sizes_per_efold": Key("integer", "", "32", "[2, 128]",
                                        "Gauss nodes in ln a per e-fold for the flux integrals"),
            "radial_nodes": Key("integer", "", "12", "[2, 64]", "Gauss nodes in ln r across a belt"),
        }, note="Optional: the same grains' thermal emission (needs [star] luminosity; docs/optics.md)."),
        Section(FIT, "[data]", FIT_KEYS["data"], {
            "photometry": Key("string (path)", meaning="the disk photometry table, CSV or ECSV, relative to this "
                                                       "file (required; columns in docs/fit.md)"),
            "thermal": Key("string (path)", default="none", meaning="a thermal photometry table (rows of kind "
                                                                    "`flux` with a unit) fitted jointly with the "
                                                                    "scattered light (docs/fit.md, \"Joint fit\")"),
        }),
        Section(FIT, "[parameters]", FIT_KEYS["parameters"], {
            name: _param(name, type_="number or prior table",
                         default=("[model] a_max" if name == "a_max" else
                                  "none (required with [data] thermal; outside the sublimation radius)"
                                  if name == "ring_radius" else space_defaults.get(name)))
            for name in FIT_KEYS["parameters"]
        } | {"f_max": _param("f_max", type_="number or prior table", default="[model] f_max",
                             meaning="largest vacuum-core volume fraction of hollow-sphere grains, fitted "
                                     "(hollow spheres only, not with [model] f_max; fast path: bounds in [0.1, 0.9])")},
            note="A number fixes the parameter; a table (below) gives its prior. "
                "Volume fractions always have a uniform prior on the simplex."),
        Section(FIT, "[parameters] prior table", PRIOR_KEYS, {
            "prior": Key("string", default='`"fixed"`', allowed=_choice(PRIOR_KINDS), meaning="kind of prior"),
            "lower": Key("number", "the parameter's", allowed="< upper; > 0 for log-uniform",
                         meaning="lower bound (uniform, log-uniform)"),
            "upper": Key("number", "the parameter's", allowed="> lower", meaning="upper bound"),
            "value": Key("number", "the parameter's", meaning="the value of a fixed parameter"),
            "relative_to": Key("string", default="none", allowed='`"blowout"` (a_min only)',
                               meaning="lower and upper are multiples of the blow-out size "
                                       "(needs [star] luminosity and mass)"),
        }, note='Written `porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }`.'),
        Section(FIT, "[thermal] (fit)", FIT_KEYS["thermal"], {
            "belt_au": Key("[r_in, r_out]", "au", "none (a ring: [parameters] ring_radius)",
                           "0 < r_in < r_out, r_in outside the sublimation radius",
                           "a belt with fixed edges instead of a ring (not with ring_radius)"),
            "surface_density_index": _param("surface_density_index", meaning="belt only: surface density "
                                                                             "Σ ∝ r^p (-1: common practice, no source)"),
            "radial_nodes": Key("integer", "", "6", "[2, 64]", "belt only: Gauss nodes in ln r of the fast path"),
            "distance_pc": Key("number", "pc", "none", "> 0", "the star's distance, for the model photosphere in Jy "
                                                              "(required with [data] thermal)"),
            "calibration": Key("number", "", "0", "[0, 10]", "fractional calibration error added in quadrature to "
                                                             "every thermal detection"),
            "cross_section_lower": Key("number", "au²", "1e-06", "> 0", "lower end of the log-uniform prior of the "
                                                                     "thermal scale (total grain cross-section)"),
            "cross_section_upper": Key("number", "au²", "1e+06", "> lower", "upper end of that prior"),
            "verdicts_by_data": Key("boolean", default="true", meaning="also run every model on the scattered light "
                                                                       "alone and on the thermal data alone (ln B per "
                                                                       "data set; three evidence runs per model)"),
            "sublimation_k": Key("table", "K", "{}", "> 0 each", "sublimation temperatures of more materials, "
                                                                 "`{ material = T }`, for the ice flag"),
        }, note="A fit's thermal side (only with [data] thermal; docs/fit.md, \"Joint fit\")."),
        Section(FIT, "[scale]", FIT_KEYS["scale"], {
            "lower": Key("number", "", "1e-12", "> 0", "lower end of the log-uniform flux-scale prior"),
            "upper": Key("number", "", "1", "> lower", "upper end of the flux-scale prior"),
            "treatment": Key("string", default='`"marginalise"`', allowed='`"marginalise"` (or `"marginalize"`), '
                                                                         '`"sample"`',
                             meaning="integrate the scale out analytically, or sample it"),
        }),
        Section(FIT, "[models]", FIT_KEYS["models"], {
            "set": Key("string", default='`"each-removed"`', allowed=_choice(MODEL_SETS),
                       meaning="which material subsets are compared by their evidence"),
            "keep": Key("array of strings", default="[]", allowed="material names",
                        meaning="materials in every model, never removed"),
            "list": Key("array of arrays of strings", default="none", allowed="material names",
                        meaning="the models of `set = \"list\"`"),
        }),
        Section(FIT, "[sampler]", FIT_KEYS["sampler"], _merge(_docstring_keys(SamplerSettings), {
            "kind": {"meaning": "static nested sampling (the evidence is the target) or dynamic"},
            "bound": {"allowed": _choice(("none", "single", "multi", "balls", "cubes")),
                      "meaning": "dynesty bounding method"},
            "sample": {"allowed": _choice(("auto", "unif", "rwalk", "slice", "rslice")),
                       "meaning": "dynesty sampling method"},
            "nlive": {"allowed": ">= 10"}, "n_posterior": {"allowed": ">= 10"},
            "dlogz": {"allowed": "> 0"}, "checkpoint_every": {"unit": "s", "allowed": "> 0",
                                                              "meaning": "time between checkpoints"},
            "checkpoint_iterations": {"allowed": ">= 1", "meaning": "iterations between checkpoints (a "
                                      "checkpoint comes after this many iterations or checkpoint_every "
                                      "seconds, whichever first)"},
            "pfrac": {"allowed": "[0, 1]"}, "maxcall": {"allowed": ">= 1"},
            "nlive_batch": {"allowed": ">= 10", "meaning": "dynamic sampling: live points per batch"},
            "maxbatch": {"meaning": "dynamic sampling: number of batches"},
        })),
        Section(GRID, "[data]", GRID_KEYS["data"], {
            "photometry": Key("string (path)", meaning="the disk photometry to compare against, relative to this "
                                                       "file (required)"),
        }),
        Section(GRID, "[grid]", GRID_KEYS["grid"], {
            "fraction_step": Key("number or string", allowed='(0, 1], 1/step a whole number (`0.1`, `"1/12"`)',
                                 meaning="step of the volume fractions of the solid (required)"),
            "fraction_bounds": Key("table", default="[0, 1] each",
                                   meaning="`{ material = [min, max] }`, fractions of the solid"),
            **{name: _param(name, type_="array or axis range",
                            default=("required" if PARAMETERS[name].default is None
                                     else "[model] a_max" if name == "a_max"
                                     else f"[{PARAMETERS[name].default:g}]"),
                            meaning=PARAMETERS[name].meaning + " (a grid axis)")
               for name in GRID_KEYS["grid"] if name in PARAMETERS},
            "f_max": _param("f_max", type_="array or axis range", default="[model] f_max",
                            meaning="largest vacuum-core volume fraction, a grid axis (hollow spheres only, not "
                                    "with [model] f_max; one fast-path table per value)"),
            "chunk_size": Key("integer", default="chosen from the grid size", allowed=">= 1",
                              meaning="points per store part (unit of work and storage)"),
        }),
        Section(GRID, "[grid] axis range", GRID_KEYS["axis range"], {
            "start": Key("number", "the axis'", meaning="first value (required)"),
            "stop": Key("number", "the axis'", meaning="last value, included (required)"),
            "num": Key("integer", allowed=">= 0", meaning="number of values (required)"),
            "spacing": Key("string", default='`"linear"`', allowed=_choice(("linear", "log")),
                           meaning="`log`: geometric spacing (start, stop > 0)"),
        }, note='An axis written as a table, `a_min = { start = 0.5, stop = 8.0, num = 5, spacing = "log" }`.'),
        Section(LIBRARY, "[library]", ("name", *library._KEYS), _library_keys(library, defaults=True),
                note="Defaults for every spectrum of the folder (all optional)."),
        Section(LIBRARY, "[[spectrum]]", ("file", *library._KEYS), _library_keys(library, defaults=False),
                note="One table per spectrum file; a file's own header may set the same keys."),
    ]
    return out


def _sorted(keys, order) -> tuple:
    """``keys`` in the documented order, keys not described last, alphabetically (sets have no order)."""
    return tuple(k for k in order if k in keys) + tuple(sorted(k for k in keys if k not in order))


def _library_keys(library, defaults: bool) -> dict:
    return {
        "name": Key("string", default="the folder name", meaning="name of the library in outputs"),
        "file": Key("string (path)", allowed=", ".join(f"`{s}`" for s in library.SPECTRUM_SUFFIXES) + " (+ `.gz`)",
                    meaning="the spectrum file, relative to the folder (required)"),
        "spectral_type": Key("string", allowed="e.g. `\"M5\"`, `\"L3.5\"`, `\"T6\"`",
                             meaning="spectral-type label (required for every spectrum)"),
        "teff_k": Key("number", "K", "none", "> 0", "effective temperature"),
        "mass_msun": Key("number", "M_sun", "none", "> 0", "mass"),
        "calibration": Key("string", default='`"relative"`', allowed=_choice(library.CALIBRATIONS),
                           meaning="what the flux scale means (module motes.companion.library, \"Calibration\")"),
        "distance_pc": Key("number", "pc", "none", "> 0", "distance, for `calibration = \"observed\"`"),
        "radius_rjup": Key("number", "R_Jup", "none", "> 0", "object radius, for `calibration = \"surface\"`"),
        "wavelength_unit": Key("string", default="the file's", allowed="any astropy length unit",
                               meaning="unit of the wavelength column"),
        "flux_unit": Key("string", default="the file's", allowed='an astropy flux-density unit, `"f_lambda"` or '
                                                                  '`"f_nu"`',
                         meaning="unit of the flux column (`f_lambda`/`f_nu`: arbitrary units)"),
    }


# ------------------------------------------------------------------ checks and output
def undescribed(secs=None) -> list[str]:
    """``"[table] key"`` for every accepted key without a meaning."""
    secs = sections() if secs is None else secs
    return [f"{s.file}: {s.table} {k}" for s in secs for k in s.keys
            if s.described.get(k, Key("")).meaning == UNDESCRIBED]


def stale(secs=None) -> list[str]:
    """``"[table] key"`` for every described key no reader accepts (the description is out of date)."""
    secs = sections() if secs is None else secs
    shared = {"name", "file"}   # the library's two tables share one description
    return [f"{s.file}: {s.table} {k}" for s in secs for k in s.described
            if k not in s.keys and not (s.file == LIBRARY and k in shared)
            and not s.table.startswith("[bands.NAME]") and s.described is not _SPECTRUM_FILE]


def _cell(text: str) -> str:
    return (text or "—").replace("|", "\\|")


INTRO = """\
# Description files: every table and key

<!-- Generated by tools/write_descriptions_doc.py from the readers' key sets; do not edit by hand.
     tests/test_descriptions_doc.py regenerates this page and fails when it differs. -->

motes reads its inputs from TOML files. This page lists every table and key each
file accepts, with its TOML type, unit, default, allowed values and meaning. It is
written from the code: the keys are those the readers accept, the model
parameters' units and ranges those of `motes.parameters.PARAMETERS`. Worked
examples of whole files are in [photometry.md](photometry.md) (target file),
[companion.md](companion.md) (classification settings), [optics.md](optics.md) and
[materials.md](materials.md) (mixtures), [fit.md](fit.md) and [grid.md](grid.md).

Every reader refuses a table or key it does not know, naming the nearest valid one
(a misspelt `[geometry] inclinaton_deg` is an error, not ignored). Relative paths
are relative to the folder of the file that names them. "—" means none or not
applicable; "required" means the file must give the key.

Grain sizes are radii in µm, angles in degrees, temperatures in K; numbers without
a unit are pure numbers.
"""


def render(secs=None) -> str:
    """The page as Markdown."""
    secs = sections() if secs is None else secs
    parts = [INTRO]
    current = None
    for s in secs:
        if s.file != current:
            current = s.file
            parts.append(f"## {current}\n")
            if current == MODEL:
                parts.append("These tables are shared by `motes optics`, `motes fit` and `motes grid` files; "
                             "each command adds its own tables (`[mixture]`, `[data]`, `[parameters]`, `[grid]`, "
                             "...) and refuses any other. User bands `[bands.NAME]` are those of the target "
                             "file (above).\n")
        parts.append(f"### `{s.table}`\n")
        if s.note:
            parts.append(s.note + "\n")
        rows = ["| key | type | unit | default | allowed | meaning |", "|---|---|---|---|---|---|"]
        for k in _sorted(s.keys, tuple(s.described)):
            d = s.described.get(k, Key(""))
            rows.append(f"| `{k}` | {_cell(d.type)} | {_cell(d.unit)} | {_cell(d.default)} | "
                        f"{_cell(d.allowed)} | {_cell(d.meaning)} |")
        parts.append("\n".join(rows) + "\n")
    return "\n".join(parts)


def main() -> int:
    secs = sections()
    OUTPUT.write_text(render(secs), encoding="utf-8")
    missing = undescribed(secs)
    print(f"wrote {OUTPUT.relative_to(Path.cwd()) if OUTPUT.is_relative_to(Path.cwd()) else OUTPUT}")
    if missing:
        print("keys accepted by a reader but not described (add them to tools/write_descriptions_doc.py):")
        for m in missing:
            print("  " + m)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
