"""Companion typing: templates (dwarf sequence, spectral libraries, blackbodies) and the classifier.

Typical use::

    from motes.photometry import read_target, calibrate
    from motes.companion import classify, ClassifySettings
    from motes.report import format_classification
    result = classify(calibrate(read_target("target.toml")), ClassifySettings(mode="both"))
    print(format_classification(result))

The text and files of a classification are written by :mod:`motes.report`.
"""

from __future__ import annotations

from .band_mapping import MAPPING_PIVOT_TOLERANCE, mapping_pivot_warnings
from .blackbody import BlackbodySet, blackbody_magnitudes
from .boundness import BoundnessSettings, BoundnessTest, photometric_boundness, with_boundness
from .galaxy import GalacticModel
from .astrometry import DATE_COLUMNS, RelativeAstrometry, offsets_from_separation, read_astrometry
from .classify import CAVEATS, MODES, ClassifySettings, classify
from .inputs import photometry_from_magnitudes
from .library import LibrarySpectrum, SpectralLibrary, read_library, read_spectrum_file
from .likelihood import FlatOffset, GaussianOffset, OffsetMarginal, offset_marginal
from .magnitude_cache import MagnitudeCache
from .evolution import MONTE_CARLO_SEED, EvolutionTable, MassAtAge, mass_at_age, masses_at_age, read_evolution_table
from .motion import (
    BACKGROUND_PM_SIGMA_MAS_YR,
    BAYES_FACTOR_THRESHOLD,
    VERDICTS,
    BackgroundTrack,
    HostMotion,
    MotionSettings,
    MotionTest,
    background_track,
    common_proper_motion,
    earth_barycentric_au,
    host_displacement,
)
from .results import (Classification, DistanceCheck, QuantityEstimate, RankedTemplate, Ranking, TypeEstimate,
                      TypePeak)
from .type_posterior import hdr_intervals, posterior_peaks
from .type_prior import FIELD_DENSITY, TypePrior, parse_type_prior
from .sequence import SEQUENCE_BANDS, DwarfSequence, load_dwarf_sequence, read_dwarf_sequence_file
from .spectral_types import type_code, type_label
from .templates import TemplateGrid, TemplateSource

__all__ = [
    "DATE_COLUMNS",
    "RelativeAstrometry",
    "offsets_from_separation",
    "read_astrometry",
    "MONTE_CARLO_SEED",
    "EvolutionTable",
    "MassAtAge",
    "mass_at_age",
    "masses_at_age",
    "read_evolution_table",
    "BACKGROUND_PM_SIGMA_MAS_YR",
    "BAYES_FACTOR_THRESHOLD",
    "VERDICTS",
    "BackgroundTrack",
    "HostMotion",
    "MotionSettings",
    "MotionTest",
    "background_track",
    "common_proper_motion",
    "earth_barycentric_au",
    "host_displacement",
    "MAPPING_PIVOT_TOLERANCE",
    "mapping_pivot_warnings",
    "BoundnessSettings",
    "BoundnessTest",
    "GalacticModel",
    "photometric_boundness",
    "with_boundness",
    "BlackbodySet",
    "blackbody_magnitudes",
    "CAVEATS",
    "MODES",
    "ClassifySettings",
    "classify",
    "photometry_from_magnitudes",
    "LibrarySpectrum",
    "SpectralLibrary",
    "read_library",
    "read_spectrum_file",
    "FlatOffset",
    "GaussianOffset",
    "OffsetMarginal",
    "offset_marginal",
    "MagnitudeCache",
    "Classification",
    "DistanceCheck",
    "QuantityEstimate",
    "RankedTemplate",
    "Ranking",
    "TypeEstimate",
    "TypePeak",
    "TypePrior",
    "parse_type_prior",
    "FIELD_DENSITY",
    "hdr_intervals",
    "posterior_peaks",
    "SEQUENCE_BANDS",
    "DwarfSequence",
    "load_dwarf_sequence",
    "read_dwarf_sequence_file",
    "type_code",
    "type_label",
    "TemplateGrid",
    "TemplateSource",
]
