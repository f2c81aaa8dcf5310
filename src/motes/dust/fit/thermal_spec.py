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
    # belt_au = [40.0, 90.0]              # instead of ring_radius: a belt r_in-r_out [au], fixed edges,
    # surface_density_index = -1.0        #   Sigma ∝ r^p (default -1),
    # radial_nodes = 6                    #   Gauss nodes in ln r of its fast path
    distance_pc = 20.0                    # the star's distance (the model photosphere in Jy): required
    calibration = 0.1                     # optional: fractional calibration error of the thermal fluxes
    cross_section_lower = 1e-6            # optional: log-uniform prior of the thermal scale [au^2]
    cross_section_upper = 1e6
    verdicts_by_data = true               # optional: also run every model on each data set alone

Refused, naming the field: thermal data without ``[star] luminosity`` or
``[thermal] distance_pc``, neither ``ring_radius`` nor ``belt_au`` (or both),
a radius <= 0 or inside the sublimation radius (:func:`sublimation_radius`;
for a belt its inner edge), a radius (prior upper bound, belt outer edge) beyond
:func:`cold_radius`, a belt with r_out <= r_in, ``surface_density_index``
or ``radial_nodes`` without a belt, ``[scale] treatment = "sample"`` (a joint
fit marginalises both scales), and ``ring_radius`` or ``[thermal]`` without
thermal data.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ...errors import FitError, InputError
from ...optics.thermal import TEMPERATURE_RANGE, blackbody_radius
from ...parameters import PARAMETERS, accepts_quantities
from ...tomlcheck import check_keys, read_number
from ..likelihood import ScalePrior
from ..model.thermal_belt import FAST_RADIAL_NODES
from .priors import Prior, parse_prior

__all__ = ["THERMAL_FIT_KEYS", "SUBLIMATION_K", "ThermalFitSettings", "sublimation_radius", "cold_radius",
           "parse_thermal_fit"]

#: Keys of a fit's ``[thermal]`` table.
THERMAL_FIT_KEYS = ("belt_au", "surface_density_index", "radial_nodes", "distance_pc", "calibration",
                    "cross_section_lower", "cross_section_upper", "verdicts_by_data", "sublimation_k")
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
def cold_radius(luminosity) -> float:
    """Distance [au] beyond which a blackbody grain is colder than the temperature table's lower end.

    ``TEMPERATURE_RANGE[0]`` (:mod:`motes.optics.thermal`), with T = 278 K (L/L_sun)^(1/4) (r/au)^(-1/2)
    (common practice, no source). Beyond it grains near blackbodies fall below the table, and the
    fast path refuses every batch holding such a point (zero likelihood for all its points, measured:
    a 60 au point batched with a 1e5 au one), so a fit refuses a ring, prior or belt reaching there.
    Small grains run hotter than blackbodies and pass further out; a mixture colder than a blackbody
    within this radius is not caught here.

    Examples
    --------
    >>> print(f"{cold_radius(1.0):.0f}")
    8608
    """
    return float(blackbody_radius(luminosity, TEMPERATURE_RANGE[0]))


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
    ring_radius : Prior or None
        Prior of ``ring_radius`` [au] (None for a belt).
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
    belt_au : (float, float) or None [au]
        A belt's fixed inner and outer edge instead of a ring (``[thermal] belt_au``).
    surface_density_index : float or None
        The belt's p of Sigma ∝ r^p (None for a ring).
    radial_nodes : int
        Gauss nodes in ln r of the belt's fast path.
    """

    path: Path
    shown: str
    ring_radius: Prior | None
    distance_pc: float
    calibration: float = 0.0
    scale: ScalePrior = ScalePrior(1e-6, 1e6)
    verdicts_by_data: bool = True
    sublimation_k: dict = field(default_factory=dict)
    belt_au: tuple | None = None
    surface_density_index: float | None = None
    radial_nodes: int = FAST_RADIAL_NODES

    @property
    def geometry(self) -> str:
        """Where the grains are, in one line (the joint fit's notes and report say it in their own words)."""
        if self.belt_au is None:
            return f"ring at ring_radius ({self.ring_radius.describe()} au)"
        return (f"belt {self.belt_au[0]:g}-{self.belt_au[1]:g} au (fixed edges), surface density ∝ "
                f"r^{self.surface_density_index:g}")


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
    belt, p, n_r = _parse_belt(table, params, path)
    radius = None
    if belt is None:
        if "ring_radius" not in params:
            raise InputError("thermal data need the ring radius: ring_radius = R [au], or a prior table "
                             "{ prior = \"uniform\", lower = ..., upper = ... }; or a belt, [thermal] belt_au = "
                             "[r_in, r_out]", path, "[parameters] ring_radius")
        radius = parse_prior(params["ring_radius"], "ring_radius", path)
        where = "[parameters] ring_radius"
        lo = radius.value if radius.kind == "fixed" else radius.lower
        hi = radius.value if radius.kind == "fixed" else radius.upper
        what = f"the ring radius reaches {lo:g} au"
        far = f"the ring radius reaches {hi:g} au"
        if not PARAMETERS["ring_radius"].contains(lo):
            raise InputError(f"the ring radius must be > 0 au, got {radius.describe()}", path, where)
    else:
        lo, where, what = belt[0], "[thermal] belt_au", f"the belt's inner edge is at {belt[0]:g} au"
        hi, far = belt[1], f"the belt's outer edge is at {belt[1]:g} au"
    r_sub = sublimation_radius(lum)
    if lo <= r_sub:
        raise InputError(f"{what}, inside the sublimation radius {r_sub:.3g} au of "
                         f"this star (where a blackbody grain reaches {SUBLIMATION_K:g} K, L = {lum:g} L_sun): no "
                         "dust survives there; move the ring (or its prior's lower bound, or the belt's inner "
                         "edge) out", path, where)
    r_cold = cold_radius(lum)
    if hi > r_cold:
        raise InputError(f"{far}, beyond {r_cold:.4g} au, where a blackbody grain of this star (L = {lum:g} "
                         f"L_sun) is colder than {TEMPERATURE_RANGE[0]:g} K, the lower end of the temperature "
                         "table: move the ring (or its prior's upper bound, or the belt's outer edge) in",
                         path, where)
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
                              sublimation_k=sub, belt_au=belt, surface_density_index=p, radial_nodes=n_r)


def _parse_belt(table: dict, params: dict, path):
    """``[thermal] belt_au``, ``surface_density_index``, ``radial_nodes``: (belt or None, p, nodes)."""
    if "belt_au" not in table:
        extra = [k for k in ("surface_density_index", "radial_nodes") if k in table]
        if extra:
            raise InputError(f"{extra[0]} is for a belt: add belt_au = [r_in, r_out] [au] (or leave it out for a "
                             "ring)", path, f"[thermal] {extra[0]}")
        return None, None, FAST_RADIAL_NODES
    where = "[thermal] belt_au"
    if "ring_radius" in params:
        raise InputError("give either a ring ([parameters] ring_radius) or a belt ([thermal] belt_au), not both",
                         path, where)
    raw = table["belt_au"]
    if not (isinstance(raw, list) and len(raw) == 2):
        raise InputError(f"belt_au must be [r_in, r_out] [au], got {raw!r}", path, where)
    declared = PARAMETERS["ring_radius"]
    belt = tuple(read_number(v, path=path, where=where, what="a distance from the star [au]", positive=True)
                 for v in raw)
    if not all(declared.contains(v) for v in belt) or not belt[0] < belt[1]:
        raise InputError(f"a belt needs 0 < r_in < r_out [au], got {list(belt)}", path, where)
    declared = PARAMETERS["surface_density_index"]
    p = read_number(table.get("surface_density_index", declared.default), path=path,
                    where="[thermal] surface_density_index",
                    what=f"the index p of Sigma ∝ r^p, in {declared.interval}", lo=declared.lo, hi=declared.hi)
    n_r = read_number(table.get("radial_nodes", FAST_RADIAL_NODES), path=path, where="[thermal] radial_nodes",
                      integer=True, lo=2, hi=64)
    return belt, float(p), int(n_r)
