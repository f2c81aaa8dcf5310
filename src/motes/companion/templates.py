"""The template interface shared by every kind of companion template.

A *template source* (the built-in dwarf sequence, a user spectral library, a
set of blackbodies) turns a list of observed bands into a
:class:`TemplateGrid`: one row per template, one column per observed band,
holding the template's Vega magnitude in that band, or nan where the template
does not cover it. :func:`motes.companion.classify` only ever sees grids.

Two rules are enforced here, once, for all sources:

* **No silent band substitution.** A source covers an observed band only if
  it can compute it through that band's own curve (synthetic photometry) or
  tabulates a band of exactly that name. The tabulated sequence also accepts
  an explicit user mapping ``observed name -> standard name``; the grid
  records the template band used for every column (``template_bands``), so
  the output can say so.
* **Absolute or not.** ``absolute[t]`` is True when row ``t`` holds absolute
  magnitudes (at 10 pc); otherwise only colours are meaningful and the
  template takes part in colours-only fits alone.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping, Protocol, Sequence, runtime_checkable

import numpy as np

from ..photometry.bands import Band

__all__ = ["TemplateGrid", "TemplateSource", "TEMPLATE_KINDS"]

#: Kinds of template source.
TEMPLATE_KINDS = ("sequence", "library", "blackbody")


@dataclass(frozen=True, eq=False)
class TemplateGrid:
    """Magnitudes of a set of templates in the observed bands.

    Attributes
    ----------
    source : str
        Human-readable name of the source (e.g. ``"mean dwarf sequence"``).
    kind : {"sequence", "library", "blackbody"}
    labels : tuple of str, length n_t
        Template labels (spectral type, file name, ``"BB 1200 K"``).
    type_code : ndarray[n_t]
        Numeric spectral type (see :mod:`motes.companion.spectral_types`); nan if none.
    teff : ndarray[n_t] [K]
        nan if unknown.
    mass : ndarray[n_t] [M_sun]
        nan if unknown.
    magnitudes : ndarray[n_t, n_b] [mag]
        Vega magnitudes in the observed bands (absolute at 10 pc where
        ``absolute``), nan where a template does not cover a band.
    absolute : ndarray[n_t] of bool
        Whether each row has an absolute scale.
    band_names : tuple of str, length n_b
        The observed bands, in column order.
    template_bands : tuple of str, length n_b
        The band each column was taken from ("" where no template covers
        the band); differs from ``band_names`` only for explicit mappings.
    notes : tuple of str
        Statements the output must carry (mappings used, fallbacks, ...).
    extra : dict
        Source-specific data for plotting (e.g. library spectra), not used by fits.
    """

    source: str
    kind: str
    labels: tuple[str, ...]
    type_code: np.ndarray
    teff: np.ndarray
    mass: np.ndarray
    magnitudes: np.ndarray
    absolute: np.ndarray
    band_names: tuple[str, ...]
    template_bands: tuple[str, ...]
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict, repr=False)

    def __post_init__(self):
        mags = np.asarray(self.magnitudes, dtype=float)
        n_t = len(self.labels)
        if mags.shape != (n_t, len(self.band_names)):
            raise ValueError(
                f"magnitudes has shape {mags.shape}, expected ({n_t}, {len(self.band_names)}) "
                "= (templates, bands)"
            )
        for name in ("type_code", "teff", "mass"):
            arr = np.asarray(getattr(self, name), dtype=float)
            if arr.shape != (n_t,):
                raise ValueError(f"{name} has shape {arr.shape}, expected ({n_t},)")
            object.__setattr__(self, name, arr)
        absolute = np.broadcast_to(np.asarray(self.absolute, dtype=bool), (n_t,)).copy()
        object.__setattr__(self, "magnitudes", mags)
        object.__setattr__(self, "absolute", absolute)

    @property
    def n_templates(self) -> int:
        """Number of templates (rows)."""
        return len(self.labels)

    @property
    def covered(self) -> np.ndarray:
        """ndarray[n_t, n_b] of bool: which template covers which band."""
        return np.isfinite(self.magnitudes)

    def subset(self, rows) -> "TemplateGrid":
        """A grid with only the given rows (index array or boolean mask)."""
        rows = np.asarray(rows)
        if rows.dtype == bool:
            rows = np.flatnonzero(rows)
        return TemplateGrid(
            self.source, self.kind, tuple(self.labels[i] for i in rows), self.type_code[rows],
            self.teff[rows], self.mass[rows], self.magnitudes[rows], self.absolute[rows],
            self.band_names, self.template_bands, self.notes,
            {k: (v[rows] if isinstance(v, np.ndarray) and v.shape[:1] == (self.n_templates,) else v)
             for k, v in self.extra.items()},
        )


@runtime_checkable
class TemplateSource(Protocol):
    """What every template source provides.

    Attributes
    ----------
    kind : str
        One of :data:`TEMPLATE_KINDS`.
    name : str
        Human-readable name used in the output.
    """

    kind: str
    name: str

    def grid(self, bands: Sequence[Band], mapping: Mapping[str, str] | None = None) -> TemplateGrid:
        """Template magnitudes in ``bands``.

        Parameters
        ----------
        bands : sequence of Band
            The observed bands, in column order.
        mapping : dict of str to str, optional
            Explicit ``observed band name -> standard band name`` mappings
            (used only by sources that tabulate standard bands).
        """
        ...  # pragma: no cover
