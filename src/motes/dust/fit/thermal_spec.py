"""The thermal side of a fit description: ``[data] thermal``, ``[thermal]`` and ``[parameters] ring_radius``.

A fit description that names a thermal photometry table fits the scattered-light
colours and the thermal SED of the same grains together (:mod:`motes.dust.fit.joint`)::

    [data]
    photometry = "disk_colours.csv"       # scattered light (motes.dust.observations)
    thermal = "disk_sed.csv"              # flux densities, kind "flux" (motes.dust.thermal_observations)

    [star]
    teff = 5800.0
    luminosity = 1.0                      # [L_sun]: required with thermal data

    [parameters]
    ring_radius = 60.0                    # [au] fixed, or a prior table:
    # ring_radius = { prior = "uniform", lower = 40.0, upper = 80.0 }

    [thermal]
    distance_pc = 20.0                    # the star's distance (the model photosphere in Jy): required
    calibration = 0.1                     # optional: fractional calibration error of the thermal fluxes
    cross_section_lower = 1e-6            # optional: log-uniform prior of the thermal scale [au^2]
    cross_section_upper = 1e6
    verdicts_by_data = true               # optional: also run every model on each data set alone

Refused, naming the field: thermal data without ``[star] luminosity`` or
``[thermal] distance_pc``, no ``ring_radius``, a radius <= 0 or inside the
sublimation radius (:func:`sublimation_radius`), ``[scale] treatment =
"sample"`` (a joint fit marginalises both scales), and ``ring_radius`` or
``[thermal]`` without thermal data.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ...errors import FitError, InputError
from ...optics.thermal import blackbody_radius
from ...parameters import PARAMETERS, accepts_quantities
from ...tomlcheck import check_keys, read_number
from ..likelihood import ScalePrior
from .priors import Prior, parse_prior

__all__ = ["THERMAL_FIT_KEYS", "SUBLIMATION_K", "ThermalFitSettings", "sublimation_radius", "parse_thermal_fit"]

#: Keys of a fit's ``[thermal]`` table.
THERMAL_FIT_KEYS = ("distance_pc", "calibration", "cross_section_lower", "cross_section_upper",
                    "verdicts_by_data", "sublimation_k")
#: Temperature [K] above which no refractory grain (silicate, carbon, iron) survives long: ~1500 K for
#: silicates (from memory; the dust sublimation temperature used for the inner rims of protoplanetary
#: disks). The sublimation radius is where a blackbody grain reaches it.
SUBLIMATION_K = 1500.0


@accepts_quantities
def sublimation_radius(luminosity) -> float:
    """Distance [au] at which a blackbody grain reaches :data:`SUBLIMATION_K` (luminosity [L_sun]).

    Examples
    --------
    >>> print(f"{sublimation_radius(1.0):.4f}")
    0.0344
    """
    return float(blackbody_radius(luminosity, SUBLIMATION_K))


@accepts_quantities
@dataclass(frozen=True)
class ThermalFitSettings:
    """What a fit description says about its thermal data.

    Attributes
    ----------
    path : pathlib.Path
        The thermal photometry table (absolute).
    shown : str
        The table as the user named it (messages).
    ring_radius : Prior
        Prior of ``ring_radius`` [au].
    distance_pc : float [pc]
    calibration : float
        Fractional calibration error added in quadrature to every thermal detection.
    scale : ScalePrior
        Log-uniform prior of the thermal scale (total grain cross-section [au^2]).
    verdicts_by_data : bool
        Also run every model on the scattered light alone and on the thermal data alone
        (three evidence runs per model instead of one).
    sublimation_k : dict of str to float
        Extra sublimation temperatures [K] by material name, for the ice flag.
    """

    path: Path
    shown: str
    ring_radius: Prior
    distance_pc: float
    calibration: float = 0.0
    scale: ScalePrior = ScalePrior(1e-6, 1e6)
    verdicts_by_data: bool = True
    sublimation_k: dict = field(default_factory=dict)


def parse_thermal_fit(doc: dict, data: dict, params: dict, description, base_dir: Path, path):
    """The :class:`ThermalFitSettings` of a fit document, or None without ``[data] thermal``.

    Parameters
    ----------
    doc : dict
        The parsed TOML.
    data, params : dict
        Its ``[data]`` and ``[parameters]`` tables.
    description : ModelDescription
    base_dir : pathlib.Path
    path : str
        The description, for messages.
    """
    table = doc.get("thermal")
    if "thermal" not in data:
        if "ring_radius" in params:
            raise InputError("ring_radius is the radius of the thermal side: it needs a thermal table, "
                             "[data] thermal = \"FILE\"", path, "[parameters] ring_radius")
        if table is not None:
            raise InputError("a [thermal] table needs thermal data: add [data] thermal = \"FILE\"", path, "[thermal]")
        return None
    if not isinstance(data["thermal"], str):
        raise InputError("thermal must be a file name (the thermal photometry table)", path, "[data] thermal")
    if not isinstance(table, dict):
        raise InputError("thermal data need a [thermal] table with distance_pc = ... [pc] (the star's distance)",
                         path, "[thermal]")
    check_keys(table, THERMAL_FIT_KEYS, path=path, where="[thermal]", required=("distance_pc",))
    lum = description.star.luminosity
    if lum is None:
        raise InputError("thermal data ([data] thermal) need the star's luminosity: add luminosity = ... "
                         "[L_sun] to [star]", path, "[star] luminosity")
    if "ring_radius" not in params:
        raise InputError("thermal data need the ring radius: ring_radius = R [au], or a prior table "
                         "{ prior = \"uniform\", lower = ..., upper = ... }", path, "[parameters] ring_radius")
    radius = parse_prior(params["ring_radius"], "ring_radius", path)
    where = "[parameters] ring_radius"
    lo, hi = (radius.value, radius.value) if radius.kind == "fixed" else (radius.lower, radius.upper)
    declared = PARAMETERS["ring_radius"]
    if not declared.contains(lo):
        raise InputError(f"the ring radius must be > 0 au, got {radius.describe()}", path, where)
    r_sub = sublimation_radius(lum)
    if lo <= r_sub:
        raise InputError(f"the ring radius reaches {lo:g} au, inside the sublimation radius {r_sub:.3g} au of "
                         f"this star (where a blackbody grain reaches {SUBLIMATION_K:g} K, L = {lum:g} L_sun): no "
                         "dust survives there; move the ring (or its prior's lower bound) out", path, where)
    distance = read_number(table["distance_pc"], path=path, where="[thermal] distance_pc",
                           what="the star's distance [pc]", positive=True)
    calibration = read_number(table.get("calibration", 0.0), path=path, where="[thermal] calibration",
                              what="a fractional error (0.1 = 10%)", lo=0.0, hi=10.0)
    try:
        scale = ScalePrior(float(table.get("cross_section_lower", 1e-6)), float(table.get("cross_section_upper", 1e6)))
    except (TypeError, ValueError, FitError) as exc:
        raise InputError(f"cross_section_lower and cross_section_upper must be numbers > 0, lower < upper ({exc})",
                         path, "[thermal]") from None
    by_data = table.get("verdicts_by_data", True)
    if not isinstance(by_data, bool):
        raise InputError(f"verdicts_by_data must be true or false, got {by_data!r}", path, "[thermal] verdicts_by_data")
    sub = table.get("sublimation_k", {})
    if not isinstance(sub, dict):
        raise InputError("sublimation_k must be a table { material = T [K], ... }", path, "[thermal] sublimation_k")
    unknown = sorted(set(sub) - set(description.material_names))
    if unknown:
        raise InputError(f"unknown material(s) {unknown}; the materials are {list(description.material_names)}",
                         path, "[thermal] sublimation_k")
    sub = {k: read_number(v, path=path, where=f"[thermal] sublimation_k.{k}", positive=True) for k, v in sub.items()}
    given = base_dir / data["thermal"]
    return ThermalFitSettings(path=given.resolve(), shown=str(given), ring_radius=radius, distance_pc=distance,
                              calibration=calibration, scale=scale, verdicts_by_data=by_data,
                              sublimation_k=sub)
