"""The built-in empirical sequence of mean dwarf properties (G0 to Y4).

The data live in ``motes/data/dwarf_sequence.txt``: the published mean dwarf
sequence of E. Mamajek (version 2024.05.15; Pecaut & Mamajek 2013, ApJS 208, 9),
exported by ``tools/export_dwarf_sequence.py`` (header: source, what to cite,
photometric systems). This module reads the file once, derives absolute
magnitudes in every tabulated band from the stored magnitudes and colours, and
interpolates them to any type code. A user's own table in the same format is
read by :func:`read_dwarf_sequence_file`.

Photometric systems
-------------------
Each row names the system of its J, H, K columns (``jhk_sys``, format 3):
``2mass`` rows give 2MASS J, H, Ks (``2mass_j``, ``2mass_h``, ``2mass_ks``),
``mko`` rows MKO J, H, K (``mko_j``, ``mko_h``, ``mko_k``); the built-in
sequence is on 2MASS to T9 and on MKO from T9.5 (the source's late-T/Y rows,
see the bundled file's header). A band is tabulated only by the rows of its
own system: nothing is converted between systems, so 2MASS measurements meet
only the 2MASS rows and MKO measurements only the MKO rows (a user who accepts
the difference maps one onto the other explicitly, ``band_map``).

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
    "2mass_j", "mko_j", "mko_h", "2mass_h", "2mass_ks", "mko_k", "wise_w1", "wise_w2",
)

#: Values of the per-row system column and the (J, H, K) bands each one gives.
JHK_SYSTEMS = {"2mass": ("2mass_j", "2mass_h", "2mass_ks"), "mko": ("mko_j", "mko_h", "mko_k")}
#: Name of that column (format 3).
SYSTEM_COLUMN = "jhk_sys"

_COLUMNS = ("spt", "teff", "log_l", "mass", "m_v", "v_rc", "v_ic", "m_g", "bp_rp", "g_rp",
            "m_j", "j_h", "h_ks", "ks_w1", "w1_w2")
#: Format 2 adds ``m_ks`` (absolute Ks as tabulated) after ``h_ks``; format 1 files still read.
_COLUMNS_2 = _COLUMNS[:13] + ("m_ks",) + _COLUMNS[13:]
#: Format 3 adds the per-row J, H, K system (:data:`SYSTEM_COLUMN`) after ``w1_w2``; without it every
#: row is 2MASS.
_COLUMNS_3 = _COLUMNS_2 + (SYSTEM_COLUMN,)
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
    systems : tuple of str
        J, H, K system of each row, ``"2mass"`` or ``"mko"`` (the ``jhk_sys``
        column; all ``"2mass"`` for a file without it).
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
    systems: tuple = ()

    @property
    def bands(self) -> tuple[str, ...]:
        """Band ids the sequence can tabulate: :data:`SEQUENCE_BANDS` and the file's ``abs_<band>`` columns."""
        return tuple(dict.fromkeys(SEQUENCE_BANDS + tuple(self.extra_bands)))

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

    def interpolation_residuals(self, band_names: Sequence[str]) -> np.ndarray:
        """Leave-one-out residuals of the tabulated rows, ndarray[n_rows, n_bands] [mag].

        For every band and every row with a value, except the band's first and
        last row: the row's value minus the interpolant (PCHIP, as
        :meth:`value`) through the band's other rows; nan elsewhere (and for a
        band name that is empty or not tabulated, or tabulated by fewer than
        four rows). They measure how well the rows around a type predict its
        mean magnitudes: the uncertainty of the interpolated template, which
        :mod:`motes.companion.classify` adds to the template scatter in the
        colours-only mode.
        """
        out = np.full((self.codes.size, len(band_names)), np.nan)
        for j, name in enumerate(band_names):
            key = ("leave-one-out", name)
            if key not in self._interp:   # cached beside the interpolants
                self._interp[key] = self._leave_one_out(name)
            out[:, j] = self._interp[key]
        return out

    def _leave_one_out(self, name: str) -> np.ndarray:
        out = np.full(self.codes.size, np.nan)
        values = self.columns.get(name) if name else None
        if values is None:
            return out
        ok = np.flatnonzero(np.isfinite(values))
        if ok.size < 4:
            return out
        for k in range(1, ok.size - 1):
            keep = np.delete(ok, k)
            f = PchipInterpolator(self.codes[keep], values[keep], extrapolate=False)
            out[ok[k]] = values[ok[k]] - float(f(self.codes[ok[k]]))
        return out

    # ---------------------------------------------------------- template grid
    def _rows_for(self, targets, lo: float, hi: float, code_range) -> tuple[float, float, list[str]]:
        """The part of [lo, hi] spanned by the rows whose J, H, K system the observed ``targets`` use, and
        notes on the rows left out for being on the other system.

        The system in use is MKO when the targets name MKO J/H/K and no 2MASS band, both when they name
        both, else 2MASS (also for targets without any J, H, K: then nothing changes for a sequence on
        one system). Nothing is trimmed when no row is on the system in use (a format-1/2 table with
        ``abs_mko_*`` columns).
        """
        systems = np.array(self.systems if self.systems else ("2mass",) * self.codes.size)
        known = {t for t in targets if t in self.bands}
        named = {s for s, system_bands in JHK_SYSTEMS.items() if known & set(system_bands)}
        in_use = named or {"2mass"}
        mine = np.isin(systems, sorted(in_use))
        if not mine.any() or mine.all():
            return lo, hi, []
        first, last = float(self.codes[mine][0]), float(self.codes[mine][-1])
        inside = (self.codes >= lo - 1e-9) & (self.codes <= hi + 1e-9)
        notes = []
        for system in JHK_SYSTEMS:
            theirs = inside & (systems == system) & ~mine
            if named and theirs.any():
                span = (f"{type_label(self.codes[theirs][0])}-{type_label(self.codes[theirs][-1])}"
                        if theirs.sum() > 1 else type_label(self.codes[theirs][0]))
                notes.append(
                    f"{self.name}: rows {span} give J/H/K on the {'MKO' if system == 'mko' else '2MASS'} system "
                    f"only and are not compared with the {'2MASS' if system == 'mko' else 'MKO'} measurements ("
                    + ("no published 2MASS-MKO transformation covers these types; MKO J/K measurements "
                       "would be compared with them" if system == "mko" else
                       "to compare them, map the bands explicitly (band_map / --treat-as), accepting a "
                       "system difference of up to 0.4 mag in J for T dwarfs, Stephens & Leggett 2004")
                    + ")")
        lo, hi = max(lo, first), min(hi, last)
        if hi < lo:
            raise InputError(f"type range {code_range} holds no row on the {'/'.join(sorted(in_use))} system of "
                             f"the observed band(s) ({type_label(first)}-{type_label(last)})")
        return lo, hi, notes

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

        Notes
        -----
        The grid spans only the rows on the J, H, K system of the observed (or
        mapped) bands (see the module notes; 2MASS when they name none): rows
        of the other system are not templates of this grid, and a note says
        which were left out.
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
        targets = [mapping.get(band.name, band.name) for band in bands]
        lo, hi, notes = self._rows_for(targets, lo, hi, code_range)
        n = int(round((hi - lo) / step)) + 1
        codes = np.round(lo + step * np.arange(n), 6)
        codes = codes[codes <= hi + 1e-9]
        names, used = [], []
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
            # (row codes, leave-one-out residuals [n_rows, n_bands]): per row, not per template
            extra={"step": step, "row_residuals": (self.codes.copy(), self.interpolation_residuals(names))},
        )


def _derive(raw: dict[str, np.ndarray], unc: dict[str, np.ndarray], mko: np.ndarray | None = None):
    """Absolute magnitudes per band and BC_Ks from the stored magnitudes and colours.

    ``mko`` marks the rows whose J, H, K columns are MKO (default: none); their J, H, K go to the
    MKO bands and the 2MASS bands are nan there, and the other way round.
    """
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
    mko = np.zeros(raw["m_j"].shape, bool) if mko is None else np.asarray(mko, bool)
    for std, other in zip(JHK_SYSTEMS["2mass"], JHK_SYSTEMS["mko"]):
        cols[other] = np.where(mko, cols[std], np.nan)
        flags[other] = flags[std] & mko
        cols[std] = np.where(mko, np.nan, cols[std])
        flags[std] = flags[std] & ~mko
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
            fixed = next((c for c in (_COLUMNS_3, _COLUMNS_2, _COLUMNS) if tuple(names[:len(c)]) == c), None)
            if fixed is None or not all(n.startswith(EXTRA_PREFIX) for n in names[len(fixed):]):
                raise InputError(f"expected the columns {' '.join(_COLUMNS_3)} (format 3), the same without "
                                 f"{SYSTEM_COLUMN} (format 2: every row 2MASS) or without {SYSTEM_COLUMN} and "
                                 f"m_ks (format 1), then optionally columns {EXTRA_PREFIX}<band id> (absolute "
                                 "magnitudes in other bands)", path, f"line {number}")
            has_system = SYSTEM_COLUMN in fixed
            extra = _extra_bands(names[len(fixed):], path, number, has_system)
            value_names = [n for n in names[1:] if n != SYSTEM_COLUMN]
            system_at = names.index(SYSTEM_COLUMN) if has_system else None
            continue
        if len(parts) != len(names):
            raise InputError(f"expected {len(names)} columns, found {len(parts)}", path, f"line {number}")
        system = "2mass"
        if system_at is not None:
            system = parts[system_at].lower()
            if system not in JHK_SYSTEMS:
                raise InputError(f"{SYSTEM_COLUMN} must be one of {', '.join(JHK_SYSTEMS)} (the system of the row's "
                                 f"J, H, K columns), got {parts[system_at]!r}", path, f"line {number}")
        try:
            values = [_parse_value(p) for k, p in enumerate(parts[1:], 1) if k != system_at]
        except ValueError:
            raise InputError(f"cannot read numbers from {stripped!r}", path, f"line {number}") from None
        if system == "mko" and math.isfinite(values[value_names.index("ks_w1")][0]):
            raise InputError("ks_w1 is 2MASS Ks - W1: give it only in 2mass rows (this row's J, H, K are MKO)",
                             path, f"line {number}")
        rows.append((parts[0], values, system))
    if names is None or len(rows) < 2:
        raise InputError("the sequence file needs a column line and at least two rows", path)
    labels = tuple(r[0] for r in rows)
    codes = np.array([type_code(lab) for lab in labels])
    if np.any(np.diff(codes) <= 0):
        raise InputError("rows must be in increasing spectral type", path)
    raw = {n: np.array([r[1][i][0] for r in rows]) for i, n in enumerate(value_names)}
    unc = {n: np.array([r[1][i][1] for r in rows]) for i, n in enumerate(value_names)}
    if "m_ks" not in raw:
        raw["m_ks"], unc["m_ks"] = np.full(len(rows), np.nan), np.zeros(len(rows), bool)
    cols, flags = _derive(raw, unc, np.array([r[2] == "mko" for r in rows]))
    for name in extra:
        cols[name], flags[name] = raw[EXTRA_PREFIX + name], unc[EXTRA_PREFIX + name]
    return DwarfSequence(labels, codes, cols, flags, "\n".join(header), path, _citation(header),
                         extra_bands=tuple(extra), systems=tuple(r[2] for r in rows))


def _extra_bands(columns, path, number, has_system: bool = False) -> list[str]:
    """Band ids of the ``abs_<band id>`` columns, each a band motes knows and none a standard column's
    (the MKO J, H, K are standard columns only in a file with the per-row system column)."""
    from ..photometry.bands import get_band

    out = []
    for column in columns:
        name = column[len(EXTRA_PREFIX):]
        if name in SEQUENCE_BANDS and (has_system or name not in JHK_SYSTEMS["mko"]):
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
        = uncertain). Three column sets are accepted:
        ``spt teff log_l mass m_v v_rc v_ic m_g bp_rp g_rp m_j j_h h_ks m_ks ks_w1 w1_w2 jhk_sys``
        (``jhk_sys``: ``2mass`` or ``mko``, the system of the row's J, H, K columns), the same
        without ``jhk_sys`` (every row 2MASS) or also without ``m_ks``, followed optionally by absolute magnitudes
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
