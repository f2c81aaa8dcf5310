"""Dust optics: optical constants, effective-medium mixing, Mie scattering, size distributions.

Mie scattering covers homogeneous spheres (``mie``), coated spheres
(``coated``), their polarisation (``polarisation``) and the distribution of
hollow spheres for irregular grains (``hollow``); see ``docs/optics.md``.

Thermal emission of grains (absorption efficiencies, radiative-equilibrium
temperatures, thermal spectra) is in ``thermal``.

Optical constants and mixing (``material``, ``constants``, ``mixing``) are re-exported
here; see ``docs/materials.md`` for the file format, the bundled materials
and the fraction/porosity definitions.
"""

from __future__ import annotations

# --- optical constants and mixing (materials engineer) -----------------------
from .constants import (
    EXTRAPOLATION_RULES,
    MATERIALS_PATH_VARIABLE,
    VACUUM,
    IndexSample,
    Material,
    bundled_material_names,
    check_optical_constants,
    list_materials,
    load_material,
    read_optical_constants,
    user_material_names,
)
from .mixing import (
    bruggeman_epsilon,
    maxwell_garnett_epsilon,
    mix_refractive_index,
    mixture_density,
    whole_grain_fractions,
)

_MATERIALS_NAMES = [
    "EXTRAPOLATION_RULES",
    "MATERIALS_PATH_VARIABLE",
    "VACUUM",
    "IndexSample",
    "Material",
    "bundled_material_names",
    "check_optical_constants",
    "list_materials",
    "load_material",
    "read_optical_constants",
    "user_material_names",
    "bruggeman_epsilon",
    "maxwell_garnett_epsilon",
    "mix_refractive_index",
    "mixture_density",
    "whole_grain_fractions",
]

# --- Mie scattering and size distributions (Mie/model engineer) --------------
from .mie import (
    MieEfficiencies,
    check_index,
    efficiencies,
    efficiencies_at,
    phase_function,
    polarised_phase_function,
    scattered_intensity,
    scattering_amplitudes,
    solver_summary,
)
from .sizes import (
    BlowoutResult,
    LogNormal,
    PowerLaw,
    blowout_size,
    find_blowout_size,
    gauss_legendre_log,
    power_law_cross_section,
    radiation_pressure_beta,
)

_MIE_NAMES = [
    "MieEfficiencies",
    "check_index",
    "efficiencies",
    "efficiencies_at",
    "phase_function",
    "polarised_phase_function",
    "scattered_intensity",
    "scattering_amplitudes",
    "solver_summary",
    "BlowoutResult",
    "LogNormal",
    "PowerLaw",
    "blowout_size",
    "find_blowout_size",
    "gauss_legendre_log",
    "power_law_cross_section",
    "radiation_pressure_beta",
]

# --- coated spheres, polarisation and hollow-sphere grains (issue 12) -------
from .coated import check_core_fraction, coated_efficiencies, coated_intensities, coated_scattering_amplitudes
from .hollow import (
    DEFAULT_F_NODES,
    check_f_max,
    hollow_efficiencies,
    hollow_intensities,
    hollow_polarisation,
    hollow_sphere_nodes,
)
from .polarisation import (
    ScatteringElements,
    coated_polarisation,
    degree_of_polarisation,
    polarised_intensity,
    scattering_elements,
    sphere_polarisation,
)

_GRAIN_NAMES = [
    "check_core_fraction",
    "coated_efficiencies",
    "coated_intensities",
    "coated_scattering_amplitudes",
    "DEFAULT_F_NODES",
    "check_f_max",
    "hollow_efficiencies",
    "hollow_intensities",
    "hollow_polarisation",
    "hollow_sphere_nodes",
    "ScatteringElements",
    "coated_polarisation",
    "degree_of_polarisation",
    "polarised_intensity",
    "scattering_elements",
    "sphere_polarisation",
]

# --- thermal emission: absorption efficiencies, grain temperatures (issue 13) --
from .thermal import (
    absorption_efficiency,
    blackbody_temperature,
    equilibrium_temperature,
    planck_lambda,
    planck_nu,
    stellar_luminosity_density,
    thermal_flux_density,
    thermal_wavelength_grid,
)

_THERMAL_NAMES = [
    "absorption_efficiency",
    "blackbody_temperature",
    "equilibrium_temperature",
    "planck_lambda",
    "planck_nu",
    "stellar_luminosity_density",
    "thermal_flux_density",
    "thermal_wavelength_grid",
]

__all__ = _MATERIALS_NAMES + _MIE_NAMES + _GRAIN_NAMES + _THERMAL_NAMES
