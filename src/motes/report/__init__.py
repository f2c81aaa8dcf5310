"""Figures and texts: formatting of results computed elsewhere.

Fitters and models return results; the command line and the demo call this
package for every figure and every formatted text. Modules are named for their
job: ``*_text`` renders a result as text and writes its tables
(``photometry_text``, ``companion_text``, ``fit_text``, ``optics_text``,
``grid_text``), ``*_figures`` draws it
(``band_figures``, ``companion_figures``, ``optics_figures``, ``fit_figures``,
``grid_figures``, ``materials_figures``). Nothing here computes physics.

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
    "save_figure": "figure_files",
    "classification_file_stem": "companion_text",
    "format_classification": "companion_text",
    "write_classification": "companion_text",
    "plot_colours": "fit_figures",
    "plot_corner": "fit_figures",
    "plot_evidence": "fit_figures",
    "write_fit_figures": "fit_figures",
    "format_fit_report": "fit_text",
    "write_fit_report": "fit_text",
    "plot_axis_profiles": "grid_figures",
    "plot_best_models": "grid_figures",
    "plot_fraction_profiles": "grid_figures",
    "write_grid_figures": "grid_figures",
    "format_grid_verdicts": "grid_text",
    "plot_optical_constants": "materials_figures",
    "motion_figure_name": "motion_figures",
    "plot_motion": "motion_figures",
    "format_masses_at_age": "motion_text",
    "format_motion_test": "motion_text",
    "plot_efficiencies": "optics_figures",
    "plot_reflectance": "optics_figures",
    "format_mixture_optics": "optics_text",
    "format_photometry": "photometry_text",
    "photometry_file_stem": "photometry_text",
    "target_slug": "photometry_text",
    "write_photometry": "photometry_text",
    "write_mixture_outputs": "optics_text",
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
