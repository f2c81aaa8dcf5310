"""The built-in empirical sequence of mean dwarf properties (G0 to T9).

The data live in ``motes/data/dwarf_sequence.txt`` (header: sources and the
caveat that the values were recalled from the literature). This module reads
the file once, derives absolute magnitudes in every tabulated band from the
stored magnitudes and colours, and interpolates them to any type code.

Interpolation
-------------
Each quantity is interpolated in the numeric type code (M0 = 60, L0 = 70;
:mod:`motes.companion.spectral_types`) with a monotone piecewise-cubic
Hermite interpolant (PCHIP; Fritsch & Carlson 1980, SIAM J. Numer. Anal. 17,
238) through the rows that have a value, so results are continuous with
continuous first derivatives, and never overshoot between two rows. Outside
the rows that tabulate a band the sequence does not cover that band (nan):
nothing is extrapolated.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from importlib import resources
from typing import Mapping, Sequence

import numpy as np
from scipy.interpolate import PchipInterpolator

from ..errors import InputError
from ..photometry.bands import Band
from .spectral_types import type_code, type_label
from .templates import TemplateGrid

__all__ = [
    "DwarfSequence",
    "load_dwarf_sequence",
    "SEQUENCE_BANDS",
    "SEQUENCE_FILE",
    "M_BOL_SUN",
]

#: Name of the bundled data file inside ``motes.data``.
SEQUENCE_FILE = "dwarf_sequence.txt"

#: Absolute bolometric magnitude of the Sun, IAU 2015 Resolution B2.
M_BOL_SUN = 4.74

#: Standard motes band names the sequence tabulates, in wavelength order.
SEQUENCE_BANDS = (
    "Johnson.V", "Gaia.BP", "Gaia.G", "Cousins.R", "Gaia.RP", "Cousins.I",
    "2MASS.J", "2MASS.H", "2MASS.Ks", "WISE.W1", "WISE.W2",
)

_COLUMNS = ("spt", "teff", "log_l", "mass", "m_v", "v_rc", "v_ic", "m_g", "bp_rp", "g_rp",
            "m_j", "j_h", "h_ks", "ks_w1", "w1_w2")


def _parse_value(text: str) -> tuple[float, bool]:
    """(value, uncertain) of one cell: '-' is missing, a trailing ':' marks uncertain."""
    if text in ("-", "...", "nan"):
        return math.nan, False
    uncertain = text.endswith(":")
    return float(text.rstrip(":")), uncertain


@dataclass(frozen=True, eq=False)
class DwarfSequence:
    """Mean dwarf properties per spectral type, interpolable in type code.

    Build it with :func:`load_dwarf_sequence`.

    Attributes
    ----------
    labels : tuple of str
        Tabulated spectral types (``"M0"``, ...).
    codes : ndarray[n_rows]
        Their type codes, increasing.
    columns : dict of str to ndarray[n_rows]
        ``"teff"`` [K], ``"log_l"``, ``"mass"`` [M_sun], ``"bc_ks"`` [mag] and
        absolute magnitudes keyed by standard band name; nan where not tabulated.
    uncertain : dict of str to ndarray[n_rows] of bool
        Cells marked ':' in the file (for a derived magnitude: any input marked).
    header : str
        The file's comment header (sources and caveats).
    path : str
    """

    labels: tuple[str, ...]
    codes: np.ndarray
    columns: dict
    uncertain: dict
    header: str
    path: str
    kind: str = "sequence"
    name: str = "mean dwarf sequence"
    _interp: dict = field(default_factory=dict, repr=False)

    # ------------------------------------------------------------ lookups
    @property
    def code_range(self) -> tuple[float, float]:
        """First and last tabulated type code."""
        return float(self.codes[0]), float(self.codes[-1])

    def band_range(self, band_name: str) -> tuple[float, float]:
        """Type-code range over which ``band_name`` is tabulated (nan, nan if never)."""
        values = self.columns.get(band_name)
        if values is None or not np.any(np.isfinite(values)):
            return math.nan, math.nan
        ok = np.flatnonzero(np.isfinite(values))
        return float(self.codes[ok[0]]), float(self.codes[ok[-1]])

    def value(self, quantity: str, code) -> np.ndarray:
        """Interpolated ``quantity`` at type ``code``.

        Parameters
        ----------
        quantity : str
            A key of :attr:`columns` (band name, ``"teff"``, ``"mass"``, ``"log_l"``, ``"bc_ks"``).
        code : float, str or array
            Type code(s) or a label such as ``"L3.5"``.

        Returns
        -------
        ndarray (shape of ``code``)
            nan outside the rows that tabulate ``quantity``.

        Examples
        --------
        >>> seq = load_dwarf_sequence()
        >>> f"{float(seq.value('teff', 'M0')):.0f}"
        '3850'
        """
        if quantity not in self.columns:
            raise InputError(
                f"the dwarf sequence has no quantity {quantity!r}; it has {', '.join(self.columns)}"
            )
        if isinstance(code, str):
            code = type_code(code)
        code = np.asarray(code, dtype=float)
        interp = self._interp.get(quantity)
        values = self.columns[quantity]
        ok = np.isfinite(values)
        if interp is None:
            if ok.sum() >= 2:
                interp = PchipInterpolator(self.codes[ok], values[ok], extrapolate=False)
            else:
                interp = False
            self._interp[quantity] = interp
        if interp is False:
            return np.full(code.shape, np.nan)
        out = np.asarray(interp(code), dtype=float)
        return out

    def absolute_magnitudes(self, code, band_names: Sequence[str]) -> np.ndarray:
        """Absolute magnitudes ndarray[n_codes, n_bands] (nan where not covered)."""
        code = np.atleast_1d(np.asarray(code, dtype=float))
        out = np.full((code.size, len(band_names)), np.nan)
        for j, name in enumerate(band_names):
            if name in self.columns and name in SEQUENCE_BANDS:
                out[:, j] = self.value(name, code)
        return out

    # ---------------------------------------------------------- template grid
    def grid(self, bands: Sequence[Band], mapping: Mapping[str, str] | None = None, *,
             step: float = 0.1, code_range: tuple[float, float] | None = None) -> TemplateGrid:
        """Templates at regular steps in type code, in the observed bands.

        Parameters
        ----------
        bands : sequence of Band
            Observed bands. A band is covered when its name is one of
            :data:`SEQUENCE_BANDS` or when ``mapping`` maps its name to one.
        mapping : dict of str to str, optional
            Explicit ``observed name -> sequence band name`` mappings.
        step : float
            Type-code step of the grid (0.1 = a tenth of a subtype).
        code_range : (float, float), optional
            Restrict the grid to these type codes (default: the whole sequence).

        Returns
        -------
        TemplateGrid
            Absolute magnitudes; ``extra["step"]`` holds the step.
        """
        mapping = dict(mapping or {})
        lo, hi = self.code_range
        if code_range is not None:
            lo, hi = max(lo, float(code_range[0])), min(hi, float(code_range[1]))
            if not hi > lo:
                raise InputError(f"type range {code_range} does not overlap the sequence "
                                 f"({type_label(self.code_range[0])}-{type_label(self.code_range[1])})")
        if not step > 0:
            raise InputError(f"sequence step must be positive, got {step!r}")
        n = int(round((hi - lo) / step)) + 1
        codes = np.round(lo + step * np.arange(n), 6)
        codes = codes[codes <= hi + 1e-9]
        names, used, notes = [], [], []
        for band in bands:
            target = mapping.get(band.name, band.name)
            if target != band.name:
                if target not in SEQUENCE_BANDS:
                    import difflib

                    close = difflib.get_close_matches(target, SEQUENCE_BANDS, n=2, cutoff=0.6)
                    hint = f" (did you mean {' or '.join(repr(c) for c in close)}?)" if close else ""
                    raise InputError(
                        f"cannot map {band.name!r} to {target!r}{hint}: the dwarf sequence tabulates only "
                        f"{', '.join(SEQUENCE_BANDS)}"
                    )
                notes.append(f"{band.name} compared with the sequence's {target} (explicit user mapping)")
            names.append(target if target in SEQUENCE_BANDS else "")
            used.append(band.name)
        mags = np.full((codes.size, len(bands)), np.nan)
        for j, name in enumerate(names):
            if name:
                mags[:, j] = self.value(name, codes)
        return TemplateGrid(
            source=self.name, kind="sequence",
            labels=tuple(type_label(c) for c in codes), type_code=codes,
            teff=self.value("teff", codes), mass=self.value("mass", codes),
            magnitudes=mags, absolute=np.ones(codes.size, bool),
            band_names=tuple(used), template_bands=tuple(names), notes=tuple(notes),
            extra={"step": step},
        )


def _derive(raw: dict[str, np.ndarray], unc: dict[str, np.ndarray]):
    """Absolute magnitudes per band and BC_Ks from the stored magnitudes and colours."""
    cols, flags = {}, {}

    def put(name, value, *sources):
        cols[name] = value
        flags[name] = np.logical_or.reduce([unc[s] for s in sources])

    put("Johnson.V", raw["m_v"], "m_v")
    put("Cousins.R", raw["m_v"] - raw["v_rc"], "m_v", "v_rc")
    put("Cousins.I", raw["m_v"] - raw["v_ic"], "m_v", "v_ic")
    put("Gaia.G", raw["m_g"], "m_g")
    put("Gaia.RP", raw["m_g"] - raw["g_rp"], "m_g", "g_rp")
    put("Gaia.BP", raw["m_g"] - raw["g_rp"] + raw["bp_rp"], "m_g", "g_rp", "bp_rp")
    put("2MASS.J", raw["m_j"], "m_j")
    put("2MASS.H", raw["m_j"] - raw["j_h"], "m_j", "j_h")
    put("2MASS.Ks", cols["2MASS.H"] - raw["h_ks"], "m_j", "j_h", "h_ks")
    put("WISE.W1", cols["2MASS.Ks"] - raw["ks_w1"], "m_j", "j_h", "h_ks", "ks_w1")
    put("WISE.W2", cols["WISE.W1"] - raw["w1_w2"], "m_j", "j_h", "h_ks", "ks_w1", "w1_w2")
    for name in ("teff", "log_l", "mass"):
        put(name, raw[name], name)
    put("bc_ks", (M_BOL_SUN - 2.5 * raw["log_l"]) - cols["2MASS.Ks"], "log_l", "m_j", "j_h", "h_ks")
    return cols, flags


def read_dwarf_sequence(text: str, path: str = SEQUENCE_FILE) -> DwarfSequence:
    """Parse the sequence file format (see the bundled file's header)."""
    header, rows, names = [], [], None
    for number, line in enumerate(text.splitlines(), 1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            header.append(stripped[1:].strip() if len(stripped) > 1 else "")
            continue
        parts = stripped.split()
        if names is None:
            names = parts
            if tuple(names) != _COLUMNS:
                raise InputError(f"expected the columns {' '.join(_COLUMNS)}", path, f"line {number}")
            continue
        if len(parts) != len(names):
            raise InputError(f"expected {len(names)} columns, found {len(parts)}", path, f"line {number}")
        try:
            rows.append((parts[0], [_parse_value(p) for p in parts[1:]]))
        except ValueError:
            raise InputError(f"cannot read numbers from {stripped!r}", path, f"line {number}") from None
    if names is None or len(rows) < 2:
        raise InputError("the sequence file needs a column line and at least two rows", path)
    labels = tuple(r[0] for r in rows)
    codes = np.array([type_code(lab) for lab in labels])
    if np.any(np.diff(codes) <= 0):
        raise InputError("rows must be in increasing spectral type", path)
    raw = {n: np.array([r[1][i][0] for r in rows]) for i, n in enumerate(names[1:])}
    unc = {n: np.array([r[1][i][1] for r in rows]) for i, n in enumerate(names[1:])}
    cols, flags = _derive(raw, unc)
    return DwarfSequence(labels, codes, cols, flags, "\n".join(header), path)


@functools.lru_cache(maxsize=1)
def load_dwarf_sequence() -> DwarfSequence:
    """The bundled mean dwarf sequence (read once, cached).

    Returns
    -------
    DwarfSequence
    """
    ref = resources.files("motes.data").joinpath(SEQUENCE_FILE)
    return read_dwarf_sequence(ref.read_text(encoding="utf-8"), str(ref))
