"""Figures and tables: formatting of results computed elsewhere.

Each module is named for the results it draws (``companion_figures``,
``optics_figures``, ``fit_figures``, ``grid_figures``, ...). Nothing here
computes physics.
"""

__all__: list[str] = []
