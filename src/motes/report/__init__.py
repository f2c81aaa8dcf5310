"""Figures and texts: formatting of results computed elsewhere.

Fitters and models return results; the command line and the demo call this
package for every figure and every formatted text. Modules are named for their
job: ``*_text`` renders a result as text and writes its tables
(``photometry_text``, ``companion_text``, ``fit_text``, ``optics_text``,
``grid_text``), ``*_figures`` draws it
(``band_figures``, ``companion_figures``, ``optics_figures``, ``fit_figures``,
``grid_figures``, ``materials_figures``); ``html_page`` writes the one
self-contained report page of a classify, fit or grid-summary run and
``run_citations`` lists what that run asks a paper to cite. Nothing here
computes physics. Every figure
is drawn in one house style (:mod:`motes.report.figure_style`).

Figures are drawn with matplotlib's object-oriented API
(:class:`matplotlib.figure.Figure`, no pyplot): importing or using motes never
selects or switches the user's plotting backend.

The names below are re-exported lazily: ``motes.report.plot_band`` imports
:mod:`motes.report.band_figures` on first use only, so that drawing a band's
curve does not load the dust model (and its compiled Mie code).
"""

from __future__ import annotations

import importlib

#: public name -> the module of this package that defines it
_EXPORTS = {
    "plot_band": "band_figures",
    "plot_companion_sed": "companion_figures",
    "plot_type_probability": "companion_figures",
    "write_companion_figures": "companion_figures",
    "draw_companion_sed": "companion_sed",
    "draw_type_probability": "companion_types",
    "probable_type_range": "companion_types",
    "place_labels": "label_placement",
    "artist_boxes": "label_placement",
    "boxes_overlap": "label_placement",
    "marker_boxes": "label_placement",
    "curve_boxes": "label_placement",
    "save_figure": "figure_files",
    "figure_paths": "figure_files",
    "page_preview": "figure_files",
    "check_formats": "figure_files",
    "figure_band_name": "figure_style",
    "ONE_COLUMN_IN": "figure_style",
    "TWO_COLUMN_IN": "figure_style",
    "HOUSE_RC": "figure_style",
    "HOUSE_COLOUR_MAP": "figure_style",
    "SERIES_COLOURS": "figure_style",
    "DATA_COLOUR": "figure_style",
    "TRUTH_COLOUR": "figure_style",
    "FIGURE_FORMATS": "figure_style",
    "PNG_DPI": "figure_style",
    "house_style": "figure_style",
    "new_figure": "figure_style",
    "series_style": "figure_style",
    "colour_map": "figure_style",
    "classification_file_stem": "companion_text",
    "format_classification": "companion_text",
    "format_boundness": "companion_text",
    "plot_colour_magnitude": "companion_figures",
    "default_cmd_bands": "companion_figures",
    "write_classification": "companion_text",
    "write_classification_report": "companion_text",
    "plot_colours": "fit_figures",
    "plot_corner": "fit_figures",
    "plot_evidence": "fit_figures",
    "plot_thermal_fit": "fit_figures",
    "write_fit_figures": "fit_figures",
    "draw_colours": "colours_figure",
    "scattering_angles_text": "colours_figure",
    "draw_corner": "corner_figure",
    "credible_levels": "corner_figure",
    "CORNER_LEVELS": "corner_figure",
    "format_fit_report": "fit_text",
    "write_fit_report": "fit_text",
    "plot_axis_profiles": "grid_figures",
    "plot_best_models": "grid_figures",
    "plot_fraction_profiles": "grid_figures",
    "write_grid_figures": "grid_figures",
    "format_grid_verdicts": "grid_text",
    "format_grid_summary": "grid_text",
    "plot_optical_constants": "materials_figures",
    "motion_figure_name": "motion_figures",
    "plot_motion": "motion_figures",
    "format_masses_at_age": "motion_text",
    "format_motion_test": "motion_text",
    "plot_efficiencies": "optics_figures",
    "plot_reflectance": "optics_figures",
    "plot_polarisation": "optics_figures",
    "format_mixture_optics": "optics_text",
    "format_photometry": "photometry_text",
    "photometry_file_stem": "photometry_text",
    "target_slug": "photometry_text",
    "write_photometry": "photometry_text",
    "write_mixture_outputs": "optics_text",
    "format_thermal": "thermal_text",
    "scattered_flux_ratio": "thermal_text",
    "write_thermal_outputs": "thermal_text",
    "plot_thermal": "thermal_figures",
    "SECTION_IDS": "html_page",
    "PageTable": "html_page",
    "render_page": "html_page",
    "write_classification_page": "html_page",
    "write_fit_page": "html_page",
    "write_grid_page": "html_page",
    "classification_citations": "run_citations",
    "fit_citations": "run_citations",
    "grid_citations": "run_citations",
    "format_citations": "run_citations",
}

__all__ = list(_EXPORTS)


def __getattr__(name: str):
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}") from None
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
