"""The built-in empirical sequence of mean dwarf properties (G0 to T9).

The data live in ``motes/data/dwarf_sequence.txt``: the published mean dwarf
sequence of E. Mamajek (version 2024.05.15; Pecaut & Mamajek 2013, ApJS 208, 9),
exported by ``tools/export_dwarf_sequence.py`` (header: source, what to cite,
photometric systems). This module reads the file once, derives absolute
magnitudes in every tabulated band from the stored magnitudes and colours, and
interpolates them to any type code. A user's own table in the same format is
read by :func:`read_dwarf_sequence_file`.

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

import dataclasses
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
    "read_dwarf_sequence",
    "read_dwarf_sequence_file",
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
    "johnson_v", "gaia_bp", "gaia_g", "cousins_r", "gaia_rp", "cousins_i",
    "2mass_j", "2mass_h", "2mass_ks", "wise_w1", "wise_w2",
)

_COLUMNS = ("spt", "teff", "log_l", "mass", "m_v", "v_rc", "v_ic", "m_g", "bp_rp", "g_rp",
            "m_j", "j_h", "h_ks", "ks_w1", "w1_w2")
#: Format 2 adds ``m_ks`` (absolute Ks as tabulated) after ``h_ks``; format 1 files still read.
_COLUMNS_2 = _COLUMNS[:13] + ("m_ks",) + _COLUMNS[13:]
#: After either column set a user's table may add absolute magnitudes in any other band, one column
#: ``abs_<band id>`` each (e.g. ``abs_mko_lp`` for MKO L'), the band id one that motes knows.
EXTRA_PREFIX = "abs_"


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
    citation : str
        What to cite for the sequence (the header's ``CITE`` section; empty
        when the file has none).
    """

    labels: tuple[str, ...]
    codes: np.ndarray
    columns: dict
    uncertain: dict
    header: str
    path: str
    citation: str = ""
    kind: str = "sequence"
    name: str = "mean dwarf sequence"
    _interp: dict = field(default_factory=dict, repr=False)
    extra_bands: tuple = ()

    @property
    def bands(self) -> tuple[str, ...]:
        """Band ids the sequence can tabulate: :data:`SEQUENCE_BANDS` and the file's ``abs_<band>`` columns."""
        return SEQUENCE_BANDS + tuple(self.extra_bands)

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
            if name in self.columns and name in self.bands:
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
            :attr:`bands` or when ``mapping`` maps its name to one.
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
                if target not in self.bands:
                    import difflib

                    close = difflib.get_close_matches(target, self.bands, n=2, cutoff=0.6)
                    hint = f" (did you mean {' or '.join(repr(c) for c in close)}?)" if close else ""
                    raise InputError(
                        f"cannot map {band.name!r} to {target!r}{hint}: the dwarf sequence tabulates only "
                        f"{', '.join(self.bands)}"
                    )
                notes.append(f"{band.name} compared with the sequence's {target} (explicit user mapping)")
            names.append(target if target in self.bands else "")
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
        flags[name] = np.logical_or.reduce([unc[s] if s in unc else flags[s] for s in sources])

    put("johnson_v", raw["m_v"], "m_v")
    put("cousins_r", raw["m_v"] - raw["v_rc"], "m_v", "v_rc")
    put("cousins_i", raw["m_v"] - raw["v_ic"], "m_v", "v_ic")
    put("gaia_g", raw["m_g"], "m_g")
    put("gaia_rp", raw["m_g"] - raw["g_rp"], "m_g", "g_rp")
    put("gaia_bp", raw["m_g"] - raw["g_rp"] + raw["bp_rp"], "m_g", "g_rp", "bp_rp")
    put("2mass_j", raw["m_j"], "m_j")
    put("2mass_h", raw["m_j"] - raw["j_h"], "m_j", "j_h")
    # Ks as tabulated where the file gives m_ks (format 2), else from H - Ks
    tabulated = np.isfinite(raw["m_ks"])
    cols["2mass_ks"] = np.where(tabulated, raw["m_ks"], cols["2mass_h"] - raw["h_ks"])
    flags["2mass_ks"] = np.where(tabulated, unc["m_ks"], flags["2mass_h"] | unc["h_ks"])
    put("wise_w1", cols["2mass_ks"] - raw["ks_w1"], "2mass_ks", "ks_w1")
    put("wise_w2", cols["wise_w1"] - raw["w1_w2"], "wise_w1", "w1_w2")
    for name in ("teff", "log_l", "mass"):
        put(name, raw[name], name)
    put("bc_ks", (M_BOL_SUN - 2.5 * raw["log_l"]) - cols["2mass_ks"], "log_l", "2mass_ks")
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
            fixed = next((c for c in (_COLUMNS_2, _COLUMNS) if tuple(names[:len(c)]) == c), None)
            if fixed is None or not all(n.startswith(EXTRA_PREFIX) for n in names[len(fixed):]):
                raise InputError(f"expected the columns {' '.join(_COLUMNS_2)} (format 2) or "
                                 f"{' '.join(_COLUMNS)} (format 1), then optionally columns "
                                 f"{EXTRA_PREFIX}<band id> (absolute magnitudes in other bands)", path,
                                 f"line {number}")
            extra = _extra_bands(names[len(fixed):], path, number)
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
    if "m_ks" not in raw:
        raw["m_ks"], unc["m_ks"] = np.full(len(rows), np.nan), np.zeros(len(rows), bool)
    cols, flags = _derive(raw, unc)
    for name in extra:
        cols[name], flags[name] = raw[EXTRA_PREFIX + name], unc[EXTRA_PREFIX + name]
    return DwarfSequence(labels, codes, cols, flags, "\n".join(header), path, _citation(header),
                         extra_bands=tuple(extra))


def _extra_bands(columns, path, number) -> list[str]:
    """Band ids of the ``abs_<band id>`` columns, each a band motes knows and none a standard column's."""
    from ..photometry.bands import get_band

    out = []
    for column in columns:
        name = column[len(EXTRA_PREFIX):]
        if name in SEQUENCE_BANDS:
            raise InputError(f"column {column!r}: {name} is derived from the standard columns; give it there",
                             path, f"line {number}")
        if name in out:
            raise InputError(f"column {column!r} appears twice", path, f"line {number}")
        try:
            get_band(name)
        except InputError as exc:
            raise InputError(f"column {column!r}: {exc.reason}", path, f"line {number}") from None
        out.append(name)
    return out


def _citation(header: list[str]) -> str:
    """The header lines after a ``CITE`` line, up to the next empty one, joined ("" if none)."""
    out, inside = [], False
    for line in header:
        if line.strip().upper() == "CITE":
            inside = True
        elif inside and line.strip() and not line.strip().isupper():
            out.append(line.strip())
        elif inside:
            break
    return " ".join(out)


def read_dwarf_sequence_file(path) -> DwarfSequence:
    """A user's own sequence table, in the bundled file's format.

    Parameters
    ----------
    path : str or Path
        A text file: ``#`` comment lines (a ``# CITE`` line followed by
        lines up to an empty comment line gives what to cite), a column line, then one row per
        spectral type in increasing order (``-`` = missing, a trailing ``:``
        = uncertain). Either column set is accepted:
        ``spt teff log_l mass m_v v_rc v_ic m_g bp_rp g_rp m_j j_h h_ks m_ks ks_w1 w1_w2``
        or the same without ``m_ks``, followed optionally by absolute magnitudes
        in other bands, one column ``abs_<band id>`` each (``abs_mko_lp`` for
        MKO L′, ``abs_mko_mp`` for M′; the id must be a band motes knows).

    Returns
    -------
    DwarfSequence
        Named after the file.

    Raises
    ------
    InputError
        The file cannot be read or is malformed (the message names the line).
    """
    from pathlib import Path

    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the dwarf sequence file: {exc}", path) from None
    seq = read_dwarf_sequence(text, str(path))
    return dataclasses.replace(seq, name=f"dwarf sequence {path.name}", _interp={})


@functools.lru_cache(maxsize=1)
def load_dwarf_sequence() -> DwarfSequence:
    """The bundled mean dwarf sequence (read once, cached).

    Returns
    -------
    DwarfSequence
    """
    ref = resources.files("motes.data").joinpath(SEQUENCE_FILE)
    return read_dwarf_sequence(ref.read_text(encoding="utf-8"), str(ref))
