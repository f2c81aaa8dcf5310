"""Photometry: bands and zero points, reading targets, calibrating photometry.

Typical use::

    from motes.photometry import read_target, calibrate
    from motes.report import format_photometry, write_photometry
    result = calibrate(read_target("companion_target.toml"))
    print(format_photometry(result))
    write_photometry(result, "out/")
"""

from __future__ import annotations

from .band_names import MKO_HALF_POWER_UM, RENAMED, BandEntry, band_entries, band_entry, display_name
from .band_search import IndexedBand, band_index, find_bands, search_bands
from .bands import (
    COUNTING_MODES,
    VEGA_REFERENCE,
    Band,
    band_from_curve,
    canonical_band_name,
    gaussian_band,
    get_band,
    read_band_curve,
    standard_band_names,
    top_hat_band,
    vega_spectrum,
)
from .catalogue import band_table, format_band, format_band_table
from .conversions import (
    MAG_PER_LN,
    ZERO_POINT_FRACTIONAL_ERROR,
    delta_mag_to_ratio,
    distance_from_parallax,
    distance_modulus,
    distance_modulus_error,
    flux_to_magnitude,
    magnitude_to_flux,
    ratio_to_delta_mag,
    zero_point_error,
)
from .measurement_table import INPUT_KINDS, Measurement, parse_flux_unit, read_photometry_table
from .measurements import BandPhotometry, CalibratedPhotometry, calibrate
from .spectra import blackbody_flux_lambda
from .table_schema import COMPANION_KINDS, DISK_KINDS, KINDS, RENAMED_KINDS, check_kind
from .synthesis import SynthesisedMagnitude, nearest_reference_band, spectrum_colour, synthesise_host_magnitude
from .targets import (
    DEFAULT_SYNTHESIS_SYSTEMATIC_MAG,
    CalibrationSettings,
    HostMagnitude,
    HostSpectrum,
    HostStar,
    Target,
    read_host_spectrum,
    read_target,
    read_user_bands,
    user_bands_from_document,
)

__all__ = [
    # bands
    "Band",
    "COUNTING_MODES",
    "VEGA_REFERENCE",
    "band_from_curve",
    "canonical_band_name",
    "gaussian_band",
    "get_band",
    "read_band_curve",
    "standard_band_names",
    "top_hat_band",
    "vega_spectrum",
    "band_table",
    "BandEntry",
    "MKO_HALF_POWER_UM",
    "RENAMED",
    "band_entries",
    "band_entry",
    "display_name",
    "IndexedBand",
    "band_index",
    "find_bands",
    "search_bands",
    "format_band",
    "format_band_table",
    # conversions
    "MAG_PER_LN",
    "ZERO_POINT_FRACTIONAL_ERROR",
    "delta_mag_to_ratio",
    "distance_from_parallax",
    "distance_modulus",
    "distance_modulus_error",
    "flux_to_magnitude",
    "magnitude_to_flux",
    "ratio_to_delta_mag",
    "zero_point_error",
    # targets and calibration
    "DEFAULT_SYNTHESIS_SYSTEMATIC_MAG",
    "INPUT_KINDS",
    "KINDS",
    "COMPANION_KINDS",
    "DISK_KINDS",
    "RENAMED_KINDS",
    "check_kind",
    "CalibrationSettings",
    "HostMagnitude",
    "HostSpectrum",
    "HostStar",
    "Measurement",
    "Target",
    "parse_flux_unit",
    "read_host_spectrum",
    "read_photometry_table",
    "read_target",
    "read_user_bands",
    "user_bands_from_document",
    "BandPhotometry",
    "CalibratedPhotometry",
    "calibrate",
    # spectra and synthesis
    "blackbody_flux_lambda",
    "SynthesisedMagnitude",
    "nearest_reference_band",
    "spectrum_colour",
    "synthesise_host_magnitude",
]
