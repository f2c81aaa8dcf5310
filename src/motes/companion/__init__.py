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

from .blackbody import BlackbodySet, blackbody_magnitudes
from .classify import CAVEATS, MODES, ClassifySettings, classify
from .inputs import photometry_from_magnitudes
from .library import LibrarySpectrum, SpectralLibrary, read_library, read_spectrum_file
from .likelihood import FlatOffset, GaussianOffset, OffsetMarginal, offset_marginal
from .magnitude_cache import MagnitudeCache
from .results import Classification, DistanceCheck, QuantityEstimate, RankedTemplate, Ranking, TypeEstimate
from .sequence import SEQUENCE_BANDS, DwarfSequence, load_dwarf_sequence
from .spectral_types import type_code, type_label
from .templates import TemplateGrid, TemplateSource

__all__ = [
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
    "SEQUENCE_BANDS",
    "DwarfSequence",
    "load_dwarf_sequence",
    "type_code",
    "type_label",
    "TemplateGrid",
    "TemplateSource",
]
