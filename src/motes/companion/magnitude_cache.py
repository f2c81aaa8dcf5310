"""On-disk cache of synthetic magnitudes of library spectra.

Synthesising a few hundred spectra through a dozen bands takes seconds; the
result depends only on the spectrum file (and how its units are read) and on
the band definition. The cache maps

    key = sha256(spectrum file bytes + unit interpretation) | sha256(band definition)

to the magnitude (or ``null`` when the spectrum does not cover the band). The
band part hashes the curve arrays, the response and counting modes, the Vega
magnitude of the system and the Vega reference spectrum, so editing a curve
or a top-hat width invalidates exactly the affected entries.

The file (``synthetic-magnitudes.json`` in the cache folder) carries a format
name and version and the motes version that wrote it; a file with another
format version, or one that cannot be read, is ignored and rewritten (it is
only a cache). Writes go to a temporary file that is then renamed, so an
interrupted run never leaves a half-written cache.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np

from ..files import format_stamp, stamp_problem, write_json_atomic
from ..photometry.bands import VEGA_REFERENCE, Band

__all__ = ["MagnitudeCache", "band_key", "CACHE_FORMAT", "CACHE_VERSION"]

CACHE_FORMAT = "motes-synthetic-magnitudes"
CACHE_VERSION = 1
_FILE = "synthetic-magnitudes.json"


def band_key(band: Band) -> str:
    """Hash of everything that defines a band's synthetic magnitudes."""
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(band.wavelength, dtype=float).tobytes())
    h.update(np.ascontiguousarray(band.throughput, dtype=float).tobytes())
    h.update(f"|{band.response}|{band.counting}|{band.vega_magnitude!r}|{VEGA_REFERENCE}".encode())
    return h.hexdigest()[:32]


class MagnitudeCache:
    """A persistent dict of synthetic magnitudes.

    Parameters
    ----------
    folder : str or Path or None
        Cache folder (created on first save). ``None`` keeps the cache in
        memory only.
    """

    def __init__(self, folder=None):
        self.folder = None if folder is None else Path(folder)
        self._data: dict[str, float | None] = {}
        self._dirty = False
        self.note = ""
        if self.folder is not None:
            self._load()

    @property
    def path(self) -> Path | None:
        """The cache file, or None for an in-memory cache."""
        return None if self.folder is None else self.folder / _FILE

    def _load(self):
        path = self.path
        if not path.is_file():
            return
        try:
            doc = json.loads(path.read_text())
            if stamp_problem(doc, CACHE_VERSION, CACHE_FORMAT, version_key="version"):
                self.note = f"synthetic-magnitude cache {path} has another format version; rebuilt"
                return
            data = doc["magnitudes"]
            if not isinstance(data, dict):
                raise ValueError("magnitudes is not a mapping")
            self._data = {str(k): (None if v is None else float(v)) for k, v in data.items()}
        except (OSError, ValueError, KeyError, TypeError) as exc:
            self.note = f"synthetic-magnitude cache {path} could not be read ({exc}); rebuilt"
            self._data = {}

    def __len__(self) -> int:
        return len(self._data)

    def get(self, key: str):
        """The cached magnitude (nan for 'not covered'), or None when absent."""
        if key not in self._data:
            return None
        value = self._data[key]
        return float("nan") if value is None else value

    def put(self, key: str, value: float) -> None:
        """Store a magnitude (nan is stored as 'not covered')."""
        self._data[key] = None if not np.isfinite(value) else float(value)
        self._dirty = True

    def save(self) -> None:
        """Write the cache if it changed (temporary file, then rename)."""
        if self.folder is None or not self._dirty:
            return
        self.folder.mkdir(parents=True, exist_ok=True)
        doc = {**format_stamp(CACHE_VERSION, CACHE_FORMAT, version_key="version"), "magnitudes": self._data}
        write_json_atomic(self.path, doc)
        self._dirty = False
