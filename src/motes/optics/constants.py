"""Optical constants: reading and validating n,k files, finding materials by name.

A :class:`~motes.optics.material.Material` (re-exported here) holds a
complex refractive index ``m = n + i k`` (``k >= 0``) on a wavelength grid
[um], a bulk density [g cm^-3] with its source, and a provenance text. Files
are read with
:func:`read_optical_constants`; bundled and user materials are found by name
with :func:`load_material`.

File format (see ``docs/materials.md``)
---------------------------------------
Plain text, three numeric columns per data line (whitespace or comma
separated): a spectral coordinate and either ``n, k`` or ``eps1, eps2``.
Lines starting with ``#`` are comments; a comment of the form
``# key: value`` with one of the keys in :data:`HEADER_KEYS` is a header
entry::

    # name: water_ice_crystalline
    # wavelength_unit: um          (um | nm | angstrom | cm-1 | eV)
    # columns: n k                 (n k | eps1 eps2)
    # density: 0.92                [g cm^-3]
    # density_source: ...
    # citation: Author & Author (year)   (short form, used in listings)
    # reference: ...                      (full reference of the measurement)

The data may be in any order; they are sorted by wavelength. Exact
duplicates and overlapping segments (a file that is several tables pasted
together whose ranges overlap) are refused, as are n <= 0, k < 0 and
non-finite values. Every error names the file and the line.

Interpolation and extrapolation are described in :mod:`motes.optics.material`
(n linear in ln lambda, k linear in (ln lambda, ln k); no extrapolation unless
an explicit rule is chosen, and then every output says so).

Where materials are found
-------------------------
Bundled files live in ``motes/optical_constants`` inside an installed wheel
and in the repository's ``optical_constants/`` folder for editable installs.
User folders are listed in the environment variable ``MOTES_MATERIALS_PATH``
(separated by ``os.pathsep``); their ``*.dat``/``*.txt`` files are found by
file stem and take precedence over bundled files of the same name.
"""

from __future__ import annotations

import difflib
import os
import re
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from ..errors import OpticalConstantsError, quoted_names
from ..parameters import EXTINCTION_K, REFRACTIVE_N, accepts_quantities
from .material import EXTRAPOLATION_RULES, VACUUM, IndexSample, Material

__all__ = [
    "Material",
    "IndexSample",
    "MaterialEntry",
    "HEADER_KEYS",
    "WAVELENGTH_UNITS",
    "EXTRAPOLATION_RULES",
    "MATERIALS_PATH_VARIABLE",
    "VACUUM",
    "read_optical_constants",
    "check_optical_constants",
    "load_material",
    "bundled_material_names",
    "user_material_names",
    "list_materials",
    "bundled_materials_folder",
]

#: Environment variable listing user material folders (``os.pathsep``-separated).
MATERIALS_PATH_VARIABLE = "MOTES_MATERIALS_PATH"

# hc in eV um, from CODATA 2018 exact h, c and e: 1.239841984... eV um.
_HC_EV_UM = 6.62607015e-34 * 299792458.0 / 1.602176634e-19 * 1e6

#: Accepted spellings of the wavelength unit -> canonical name.
WAVELENGTH_UNITS = {
    "um": "um", "µm": "um", "micron": "um", "microns": "um", "micrometre": "um",
    "micrometer": "um",
    "nm": "nm", "nanometre": "nm", "nanometer": "nm",
    "angstrom": "angstrom", "å": "angstrom", "aa": "angstrom", "a": "angstrom",
    "cm-1": "cm-1", "cm^-1": "cm-1", "1/cm": "cm-1", "wavenumber": "cm-1", "kayser": "cm-1",
    "ev": "eV",
}

# canonical unit -> function value -> wavelength [um]
_TO_UM = {
    "um": lambda v: v,
    "nm": lambda v: v * 1e-3,
    "angstrom": lambda v: v * 1e-4,
    "cm-1": lambda v: 1e4 / v,
    "eV": lambda v: _HC_EV_UM / v,
}

_COLUMNS = {"n k": "nk", "nk": "nk", "n,k": "nk",
            "eps1 eps2": "eps", "eps": "eps", "epsilon": "eps", "e1 e2": "eps",
            "eps1,eps2": "eps"}

#: Header keys understood in ``# key: value`` comment lines.
HEADER_KEYS = (
    "name", "material", "phase", "temperature", "wavelength_unit", "columns",
    "density", "density_source", "citation", "reference", "source", "database_entry",
    "database_commit", "license", "note",
)
_PROVENANCE_KEYS = ("material", "phase", "temperature", "citation", "reference", "source",
                    "database_entry", "database_commit", "license", "note")
_HEADER_RE = re.compile(r"^#\s*([A-Za-z][A-Za-z0-9_]*)\s*:\s*(.*?)\s*$")
_MAX_PROBLEMS = 20
_MATERIAL_SUFFIXES = (".dat", ".txt")


# ----------------------------------------------------------------- reading files
@dataclass(frozen=True)
class _Parsed:
    header: dict
    header_lines: dict
    values: np.ndarray       # [rows, 3] as read
    lines: np.ndarray        # [rows] 1-based line numbers
    problems: tuple[str, ...]


def _parse_file(path: Path) -> _Parsed:
    try:
        text = path.read_text(encoding="utf-8-sig")      # a byte-order mark, if any, is not data
    except UnicodeDecodeError as exc:
        raise OpticalConstantsError(f"not a UTF-8 text file ({exc.reason})", path=path) from exc
    except OSError as exc:
        raise OpticalConstantsError(f"cannot read file ({exc.strerror})", path=path) from exc
    header: dict[str, str] = {}
    header_lines: dict[str, int] = {}
    rows, lines, problems = [], [], []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            hm = _HEADER_RE.match(line)
            if hm:
                key, value = hm.group(1).lower(), hm.group(2)
                if key in HEADER_KEYS:
                    if key in header and header[key] != value and key not in ("note",):
                        problems.append(f"line {lineno}: header key '{key}' given twice "
                                        f"(first on line {header_lines[key]})")
                    elif key == "note" and key in header:
                        header[key] += "; " + value
                    else:
                        header[key], header_lines[key] = value, lineno
                else:
                    close = difflib.get_close_matches(key, HEADER_KEYS, n=1, cutoff=0.8)
                    if close:
                        problems.append(f"line {lineno}: unknown header key '{key}' "
                                        f"(did you mean '{close[0]}'?)")
            continue
        fields = [f for f in re.split(r"[\s,;]+", line) if f]
        if len(fields) != 3:
            problems.append(f"line {lineno}: expected 3 numbers (wavelength and n, k or "
                            f"eps1, eps2), found {len(fields)} fields: {line[:60]!r}")
            continue
        try:
            vals = [float(f) for f in fields]
        except ValueError:
            problems.append(f"line {lineno}: not a number in {line[:60]!r}")
            continue
        if not all(np.isfinite(vals)):
            problems.append(f"line {lineno}: non-finite value (NaN or inf) in {line[:60]!r}")
            continue
        rows.append(vals)
        lines.append(lineno)
    values = np.array(rows, dtype=float).reshape(-1, 3)
    return _Parsed(header, header_lines, values, np.array(lines, dtype=int), tuple(problems))


def _resolve_option(header: dict, header_lines: dict, key: str, option, table: dict, default: str,
                    path, problems: list) -> str:
    """Combine a header value and a keyword option; they must agree if both are given."""
    chosen = []
    for source, value in (("option", option), ("header", header.get(key))):
        if value is None:
            continue
        canonical = table.get(str(value).strip().lower()) or table.get(str(value).strip())
        if canonical is None:
            where = f"line {header_lines[key]}: " if source == "header" else ""
            allowed = sorted(set(table.values()))
            problems.append(f"{where}unknown {key} {value!r} (allowed: {', '.join(allowed)})")
            return default
        chosen.append((source, canonical))
    if len(chosen) == 2 and chosen[0][1] != chosen[1][1]:
        problems.append(f"line {header_lines[key]}: header says {key} '{chosen[1][1]}' but the "
                        f"option asks for '{chosen[0][1]}'; remove one of them")
    return chosen[0][1] if chosen else default


def _validate(parsed: _Parsed, unit: str, columns: str, problems: list):
    """Convert to (wavelength [um], n, k), sorted; append problems. Returns arrays or None."""
    vals, lines = parsed.values, parsed.lines
    if vals.shape[0] < 2:
        problems.append(f"needs at least 2 data lines, found {vals.shape[0]}")
        return None
    coord = vals[:, 0]
    bad = coord <= 0
    for ln in lines[bad][:5]:
        problems.append(f"line {ln}: wavelength/wavenumber/energy must be > 0")
    if bad.any():
        return None
    wl = _TO_UM[unit](coord)
    if columns == "eps":
        eps = vals[:, 1] + 1j * vals[:, 2]
        for ln in lines[vals[:, 2] < 0][:5]:
            problems.append(f"line {ln}: eps2 < 0 (absorbing media have eps2 >= 0, i.e. k >= 0)")
        m = np.sqrt(eps)  # principal root: Re m >= 0 and Im m >= 0 when eps2 >= 0
        n, k = m.real, m.imag
        for ln in lines[(n <= 0) & (vals[:, 2] >= 0)][:5]:
            problems.append(f"line {ln}: eps1, eps2 give n = Re sqrt(eps) <= 0")
    else:
        n, k = vals[:, 1], vals[:, 2]
        for ln in lines[n <= 0][:5]:
            problems.append(f"line {ln}: n must be > 0")
        for ln in lines[k < 0][:5]:
            problems.append(f"line {ln}: k must be >= 0 (motes uses m = n + ik; a file with "
                            "k < 0 uses the other sign convention: flip the sign if so)")
    for ln, name, value in _out_of_range(lines, n, k)[:5]:
        problems.append(f"line {ln}: {name} = {value:.6g} is outside {_NK_RANGES[name].interval} "
                        f"({_NK_RANGES[name].meaning}; no real material comes near)")
    order = np.argsort(wl, kind="stable")
    ws = wl[order]
    dup = np.flatnonzero(np.diff(ws) <= 0)
    for d in dup[:5]:
        a, b = sorted((lines[order[d]], lines[order[d + 1]]))
        problems.append(f"line {b}: duplicated wavelength {ws[d]:.6g} um (also on line {a})")
    if not dup.size:
        problems.extend(_overlap_problems(wl, lines))
    if problems:
        return None
    return ws, n[order], k[order]


_NK_RANGES = {"n": REFRACTIVE_N, "k": EXTINCTION_K}


def _out_of_range(lines, n, k) -> list[tuple[int, str, float]]:
    """(line, "n" or "k", value) where n or k is finite and of the right sign but beyond its declared range."""
    out = []
    for ln, nv, kv in zip(lines, n, k):
        if nv > 0 and not REFRACTIVE_N.contains(nv):
            out.append((int(ln), "n", float(nv)))
        if kv >= 0 and not EXTINCTION_K.contains(kv):
            out.append((int(ln), "k", float(kv)))
    return out


def _overlap_problems(wl: np.ndarray, lines: np.ndarray) -> list[str]:
    """Detect segments (monotonic runs in file order) whose ranges overlap."""
    steps = np.sign(np.diff(wl))
    direction = 1.0 if (steps > 0).sum() >= (steps < 0).sum() else -1.0
    breaks = np.flatnonzero(steps != direction) + 1
    starts = np.concatenate([[0], breaks])
    ends = np.concatenate([breaks, [wl.size]])
    segs = sorted((wl[s:e].min(), wl[s:e].max(), s, e) for s, e in zip(starts, ends))
    for (lo0, hi0, s0, e0), (lo1, hi1, s1, e1) in zip(segs, segs[1:]):
        if lo1 < hi0:
            a0, b0 = lines[s0], lines[e0 - 1]
            a1, b1 = lines[s1], lines[e1 - 1]
            return [f"line {a1}: lines {a1}-{b1} ({lo1:.6g}-{hi1:.6g} um) overlap the range of "
                    f"lines {a0}-{b0} ({lo0:.6g}-{hi0:.6g} um); keep one table per range"]
    return []


def _line_of(problem: str) -> int:
    """Sort key: the line number a problem names (problems without one first)."""
    found = re.match(r"line (\d+):", problem)
    return int(found.group(1)) if found else 0


def _provenance(header: dict) -> str:
    return "\n".join(f"{key}: {header[key]}" for key in _PROVENANCE_KEYS if key in header)


def _build(path: Path, wavelength_unit, name, density, extrapolation, columns,
           density_source) -> tuple[Material | None, list[str]]:
    parsed = _parse_file(path)
    problems = list(parsed.problems)
    unit = _resolve_option(parsed.header, parsed.header_lines, "wavelength_unit",
                           wavelength_unit, WAVELENGTH_UNITS, "um", path, problems)
    cols = _resolve_option(parsed.header, parsed.header_lines, "columns", columns, _COLUMNS,
                           "nk", path, problems)
    dens = density
    if dens is None and "density" in parsed.header:
        try:
            dens = float(parsed.header["density"].split()[0])
        except (ValueError, IndexError):
            problems.append(f"line {parsed.header_lines['density']}: density must be a number "
                            f"in g cm^-3, got {parsed.header['density']!r}")
    if dens is not None and not (np.isfinite(dens) and dens > 0):
        problems.append(f"density must be a positive number in g cm^-3, got {dens!r}")
    if extrapolation is not None and extrapolation not in EXTRAPOLATION_RULES:
        problems.append(f"extrapolation must be one of {quoted_names(EXTRAPOLATION_RULES)}, got {extrapolation!r}")
    arrays = _validate(parsed, unit, cols, problems)
    if problems or arrays is None:
        return None, problems
    wl, n, k = arrays
    if density is not None:
        dsrc = density_source or "given by the caller"
    else:
        fallback = "unknown" if dens is None else "file header"
        dsrc = density_source or parsed.header.get("density_source", fallback)
    material = Material(
        name=name or parsed.header.get("name") or path.stem,
        wavelength=wl, n=n, k=k,
        density=float("nan") if dens is None else float(dens),
        density_source=dsrc,
        provenance=_provenance(parsed.header),
        path=str(path),
        extrapolation=extrapolation,
    )
    return material, problems


@accepts_quantities
def read_optical_constants(path, wavelength_unit=None, name=None, density=None,
                           extrapolation=None, *, columns=None, density_source=None) -> Material:
    """Read and validate an n,k (or eps1,eps2) file.

    Parameters
    ----------
    path : str or os.PathLike
        The file (format in the module notes and ``docs/materials.md``).
    wavelength_unit : {"um", "nm", "angstrom", "cm-1", "eV"}, optional
        Unit of the first column when the file has no ``wavelength_unit``
        header (default um). If both are given they must agree.
    name : str, optional
        Material name (default: ``name`` header, else the file stem).
    density : float, optional [g cm^-3]
        Overrides the ``density`` header.
    extrapolation : {None, "constant", "loglog", "dielectric", "conductor"}
        Rule for wavelengths outside the data (default: refuse); the last two
        are for thermal emission (:mod:`motes.optics.material`).
    columns : {"n k", "eps1 eps2"}, optional
        What the second and third columns are when the file has no
        ``columns`` header (default ``n k``); ``m = sqrt(eps1 + i eps2)``.
    density_source : str, optional
        Source of ``density``.

    Returns
    -------
    Material

    Raises
    ------
    motes.errors.OpticalConstantsError
        Naming the file and line of the first problem (and how many more).
    """
    path = Path(path)
    if not path.is_file():
        raise OpticalConstantsError("no such file", path=path)
    material, problems = _build(path, wavelength_unit, name, density, extrapolation, columns,
                                density_source)
    if problems:
        problems.sort(key=_line_of)
        first = problems[0]
        where, _, msg = first.partition(": ") if first.startswith("line ") else (None, "", first)
        more = len(problems) - 1
        if more:
            msg += (f" (and {more} more problem{'s' if more > 1 else ''}; "
                    "run `motes materials check` to list them)")
        raise OpticalConstantsError(msg, path=path, where=where)
    return material


def check_optical_constants(path, wavelength_unit=None, *, columns=None):
    """Validate a file and list every problem instead of stopping at the first.

    Returns
    -------
    (Material or None, tuple of str, tuple of str)
        The material (None when invalid), the problems (each ``"line N: ..."``
        where a line applies) and advisory notes (missing density, source,
        license; sparse sampling).
    """
    path = Path(path)
    if not path.is_file():
        raise OpticalConstantsError("no such file", path=path)
    material, problems = _build(path, wavelength_unit, None, None, None, columns, None)
    problems.sort(key=_line_of)
    advice = []
    if material is not None:
        prov = material.provenance
        if not np.isfinite(material.density):
            advice.append("no 'density' header: masses and blow-out sizes need one")
        elif material.density_source == "unknown":
            advice.append("no 'density_source' header")
        if "reference:" not in prov and "source:" not in prov:
            advice.append("no 'reference' header naming the measurement")
        if "license:" not in prov:
            advice.append("no 'license' header")
        gaps = np.diff(np.log10(material.wavelength))
        if gaps.max() > 0.1:
            i = int(gaps.argmax())
            advice.append(f"sparse sampling: largest gap {material.wavelength[i]:.4g}-"
                          f"{material.wavelength[i + 1]:.4g} um (interpolated in log lambda)")
    return material, tuple(problems[:_MAX_PROBLEMS]), tuple(advice)


# ------------------------------------------------------------- finding materials
def bundled_materials_folder() -> Path:
    """Folder of the bundled ``*.dat`` files (installed wheel or repository checkout)."""
    try:
        candidate = resources.files("motes") / "optical_constants"
        if candidate.is_dir():
            return Path(str(candidate))
    except (ModuleNotFoundError, TypeError):  # pragma: no cover - unusual installs
        pass
    return Path(__file__).resolve().parents[3] / "optical_constants"


def _user_folders() -> list[Path]:
    value = os.environ.get(MATERIALS_PATH_VARIABLE, "")
    return [Path(p).expanduser() for p in value.split(os.pathsep) if p.strip()]


def _files_in(folder: Path) -> dict[str, Path]:
    if not folder.is_dir():
        return {}
    return {p.stem: p for p in sorted(folder.iterdir())
            if p.suffix.lower() in _MATERIAL_SUFFIXES and p.is_file()}


def bundled_material_names() -> list[str]:
    """Names of the bundled materials (file stems), sorted."""
    return sorted(_files_in(bundled_materials_folder()))


def user_material_names() -> list[str]:
    """Names of materials found in the folders of ``MOTES_MATERIALS_PATH``, sorted."""
    names = set()
    for folder in _user_folders():
        names.update(_files_in(folder))
    return sorted(names)


@dataclass(frozen=True)
class MaterialEntry:
    """Where a named material comes from (for listings).

    Attributes
    ----------
    name : str
    origin : {"bundled", "user"}
    path : pathlib.Path
    shadowed : bool
        True for a bundled file hidden by a user file of the same name.
    """

    name: str
    origin: str
    path: Path
    shadowed: bool = False


def list_materials() -> list[MaterialEntry]:
    """Every user and bundled material, user folders first (they take precedence)."""
    entries, seen = [], set()
    for folder in _user_folders():
        for name, path in _files_in(folder).items():
            entries.append(MaterialEntry(name, "user", path, shadowed=name in seen))
            seen.add(name)
    for name, path in _files_in(bundled_materials_folder()).items():
        entries.append(MaterialEntry(name, "bundled", path, shadowed=name in seen))
    return entries


def load_material(name_or_path, **kw) -> Material:
    """Load a bundled or user material by name, or any file by path.

    Parameters
    ----------
    name_or_path : str or os.PathLike
        A name from :func:`list_materials` (user folders of
        ``MOTES_MATERIALS_PATH`` first, then bundled) or a path to a file.
    **kw
        Passed to :func:`read_optical_constants` (``extrapolation``,
        ``density``, ``wavelength_unit``, ...).

    Raises
    ------
    motes.errors.OpticalConstantsError
        Unknown name (with close matches) or invalid file.
    """
    if isinstance(name_or_path, Material):
        return name_or_path
    text = str(name_or_path)
    path = Path(text).expanduser()
    if path.is_file():
        return read_optical_constants(path, **kw)
    for entry in list_materials():
        if entry.name == text and not entry.shadowed:
            return read_optical_constants(entry.path, **kw)
    if os.sep in text or path.suffix.lower() in _MATERIAL_SUFFIXES:
        raise OpticalConstantsError("no such file", path=path)
    known = sorted({e.name for e in list_materials()})
    close = difflib.get_close_matches(text, known, n=3, cutoff=0.5)
    hint = f" (did you mean {' or '.join(repr(c) for c in close)}?)" if close else ""
    raise OpticalConstantsError(
        f"unknown material {text!r}{hint}; known: {', '.join(known) or 'none'}. Give a file "
        f"path, or list folders of your own files in {MATERIALS_PATH_VARIABLE}")
