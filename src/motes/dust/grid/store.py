"""The grid store: an append-only, crash-safe folder of Parquet parts keyed by grid point.

Layout of a store folder::

    STORE/
      manifest.json            format and package versions, the description's digest and text,
                               axes, bands, observations, column list (written once, atomically)
      parts/chunk-0000000.parquet   one file per finished chunk of consecutive keys
      parts/chunk-0000001.parquet
      ...
      .lock                    held (flock) by the one process writing the store

Guarantees

* A chunk is either wholly present or absent: its rows are written to a
  temporary name in ``parts/``, flushed to disk (fsync), then renamed to the
  final name (an atomic rename on POSIX file systems), and the folder is
  fsynced. A run killed at any instant leaves at most a temporary file, which
  the next run deletes.
* Keys are unique: chunk ``i`` holds exactly the keys ``i*chunk_size ..``; a
  finished chunk is never computed or written again.
* A store belongs to one grid description (SHA-256 of the description and of
  the files it names), one store format and one motes version; opening it for
  anything else is refused, and nothing in it is changed.
* Only one process writes a store at a time (an advisory lock); readers
  need no lock because they see finished parts only.
"""

from __future__ import annotations

import contextlib
import datetime
import fcntl
import json
import os
import re
import shutil
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from ... import __version__
from ...errors import GridError
from ...files import atomic_write, format_stamp, stamp_problem, temporary_target, write_bytes_atomic

__all__ = ["GridStore", "STORE_FORMAT", "STORE_FORMAT_VERSION", "fraction_column", "model_column"]

STORE_FORMAT = "motes-grid-store"
STORE_FORMAT_VERSION = 1

_MANIFEST = "manifest.json"
_PARTS = "parts"
_LOCK = ".lock"
_PART_RE = re.compile(r"^chunk-(\d{7})\.parquet$")
_OLD_TMP_RE = re.compile(r"^\.chunk-\d{7}\.parquet\.tmp$")   # temporary names written by earlier versions


def fraction_column(material: str) -> str:
    """Store column holding a material's volume fraction of the solid."""
    return f"f_{material}"


def model_column(band: str) -> str:
    """Store column holding the model disk/star flux ratio in a band (unit cross-section)."""
    return f"model_{band}"


def _part_name(chunk: int) -> str:
    return f"chunk-{chunk:07d}.parquet"


class GridStore:
    """A grid store folder (see the module docstring for layout and guarantees).

    Use :meth:`create`, :meth:`open` or :meth:`prepare` rather than the constructor.

    Attributes
    ----------
    path : pathlib.Path
    manifest : dict
    """

    def __init__(self, path: Path, manifest: dict):
        self.path = Path(path)
        self.manifest = manifest
        self._lock_fd = None

    # -- opening -----------------------------------------------------------------------------
    @staticmethod
    def is_store(path) -> bool:
        """True when ``path`` is a folder holding a grid-store manifest."""
        return (Path(path) / _MANIFEST).is_file()

    @classmethod
    def open(cls, path) -> "GridStore":
        """Open an existing store for reading.

        Raises
        ------
        motes.errors.GridError
            When ``path`` is not a store, or is one of another format version.
        """
        path = Path(path)
        if not cls.is_store(path):
            raise GridError(f"{path} is not a motes grid store (no {_MANIFEST})")
        try:
            manifest = json.loads((path / _MANIFEST).read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise GridError(f"{path / _MANIFEST} cannot be read ({exc})") from None
        if manifest.get("format") != STORE_FORMAT:
            raise GridError(f"{path / _MANIFEST} is not a motes grid store manifest")
        problem = stamp_problem(manifest, STORE_FORMAT_VERSION, STORE_FORMAT)
        if problem:
            raise GridError(
                f"{path} is a grid store of {problem}; summarise it with the motes version that "
                "wrote it, or start the grid afresh in a new --output folder")
        return cls(path, manifest)

    @classmethod
    def create(cls, path, manifest: dict) -> "GridStore":
        """Create a new, empty store (``path`` must be absent or an empty folder)."""
        path = Path(path)
        if path.exists() and (not path.is_dir() or any(path.iterdir())):
            raise GridError(f"{path} exists and is not empty; choose a new --output folder")
        full = {
            **format_stamp(STORE_FORMAT_VERSION, STORE_FORMAT),
            "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
            **manifest,
        }
        (path / _PARTS).mkdir(parents=True, exist_ok=True)
        write_bytes_atomic(path / _MANIFEST, json.dumps(full, indent=1, sort_keys=True).encode())
        return cls(path, full)

    @classmethod
    def prepare(cls, path, manifest: dict, overwrite: bool = False) -> "GridStore":
        """Open ``path`` to continue the same grid, or create it; refuse anything else.

        Parameters
        ----------
        path : str or os.PathLike
        manifest : dict
            The manifest a new store would get; must contain ``grid_digest``.
        overwrite : bool
            Delete an existing store of another description first (only a
            folder that *is* a grid store is ever deleted).

        Raises
        ------
        motes.errors.GridError
            When the folder holds a store of another description, format or
            motes version (and ``overwrite`` is false), or holds other files.
        """
        path = Path(path)
        if cls.is_store(path):
            try:
                store = cls.open(path)
                problem = store._mismatch(manifest)
            except GridError as exc:
                problem = str(exc)
            if problem is None:
                return store
            if not overwrite:
                raise GridError(
                    f"{path} holds a grid store that does not match: {problem}. Nothing was changed. "
                    "To start fresh, give a new --output folder, or pass --overwrite to delete that store")
            cls._delete(path)
        elif path.exists() and (not path.is_dir() or any(path.iterdir())):
            raise GridError(f"{path} exists and is not a motes grid store; nothing was changed. "
                            "Choose a new --output folder")
        return cls.create(path, manifest)

    def _mismatch(self, manifest: dict) -> str | None:
        if self.manifest.get("grid_digest") != manifest.get("grid_digest"):
            return (f"it was made from another grid description (or another version of the files it names: "
                    f"store digest {self.manifest.get('grid_digest', '?')[:12]}, "
                    f"this description {manifest.get('grid_digest', '?')[:12]})")
        if self.manifest.get("motes_version") != __version__:
            return (f"it was written by motes {self.manifest.get('motes_version')}, this is motes {__version__}, "
                    "and model values may differ between versions")
        return None

    @staticmethod
    def _delete(path: Path) -> None:
        with contextlib.suppress(FileNotFoundError):
            (path / _MANIFEST).unlink()
        shutil.rmtree(path / _PARTS, ignore_errors=True)
        shutil.rmtree(path / "summary", ignore_errors=True)
        with contextlib.suppress(FileNotFoundError):
            (path / _LOCK).unlink()

    # -- writing -----------------------------------------------------------------------------
    def lock(self) -> None:
        """Take the writer lock; refuse when another process holds it.

        The lock is released when the process ends, however it ends.
        """
        fd = os.open(self.path / _LOCK, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise GridError(f"another motes grid run is writing to {self.path}; wait for it, "
                            "or stop it, before starting a second one on the same store") from None
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        self._lock_fd = fd
        # leftovers of a run killed while writing a part
        for tmp in (self.path / _PARTS).iterdir():
            if _OLD_TMP_RE.match(tmp.name) or _PART_RE.match(temporary_target(tmp.name) or ""):
                tmp.unlink()

    @property
    def lock_fd(self) -> int | None:
        """File descriptor holding the writer lock (None when not locked)."""
        return self._lock_fd

    def unlock(self) -> None:
        if self._lock_fd is not None:
            fcntl.flock(self._lock_fd, fcntl.LOCK_UN)
            os.close(self._lock_fd)
            self._lock_fd = None

    def __enter__(self):
        self.lock()
        return self

    def __exit__(self, *exc):
        self.unlock()

    def write_chunk(self, chunk: int, columns: dict[str, np.ndarray]) -> Path:
        """Write one finished chunk atomically.

        Parameters
        ----------
        chunk : int
            Chunk number.
        columns : dict of str to ndarray[n]
            Exactly the manifest's columns, each with the chunk's length.

        Returns
        -------
        pathlib.Path
            The part file.
        """
        if self._lock_fd is None:
            raise GridError("write_chunk needs the store's writer lock (use the store as a context manager)")
        names = self.manifest["columns"]
        if set(columns) != set(names):
            raise GridError(f"chunk columns {sorted(columns)} differ from the store's {sorted(names)}")
        expected = self.chunk_length(chunk)
        lengths = {len(columns[n]) for n in names}
        if lengths != {expected}:
            raise GridError(f"chunk {chunk} should hold {expected} rows, got {sorted(lengths)}")
        final = self.path / _PARTS / _part_name(chunk)
        if final.exists():
            raise GridError(f"chunk {chunk} is already in {self.path}; refusing to write it twice")
        table = pa.table({n: np.asarray(columns[n]) for n in names})
        with atomic_write(final) as tmp:
            pq.write_table(table, tmp, compression="zstd")
        return final

    # -- reading -----------------------------------------------------------------------------
    @property
    def n_points(self) -> int:
        return int(self.manifest["n_points"])

    @property
    def chunk_size(self) -> int:
        return int(self.manifest["chunk_size"])

    @property
    def n_chunks(self) -> int:
        return -(-self.n_points // self.chunk_size)

    def chunk_length(self, chunk: int) -> int:
        return min(self.chunk_size, self.n_points - chunk * self.chunk_size)

    def completed_chunks(self) -> list[int]:
        """Numbers of the chunks present, sorted."""
        parts = self.path / _PARTS
        if not parts.is_dir():
            return []
        return sorted(int(m.group(1)) for p in parts.iterdir() if (m := _PART_RE.match(p.name)))

    def completed_points(self) -> int:
        return sum(self.chunk_length(c) for c in self.completed_chunks())

    @property
    def is_complete(self) -> bool:
        return len(self.completed_chunks()) == self.n_chunks

    def part_paths(self) -> list[Path]:
        return [self.path / _PARTS / _part_name(c) for c in self.completed_chunks()]

    def iter_tables(self, columns=None):
        """Yield the finished parts one at a time, in key order, as pyarrow Tables.

        Parameters
        ----------
        columns : sequence of str, optional
            Read only these columns (all by default).

        Notes
        -----
        Memory use is one part at a time, whatever the size of the store.
        """
        for path in self.part_paths():
            yield pq.read_table(path, columns=None if columns is None else list(columns))

    def read_table(self, columns=None) -> pa.Table:
        """All finished rows in one Table (for small stores; use :meth:`iter_tables` otherwise)."""
        tables = list(self.iter_tables(columns))
        if not tables:
            names = self.manifest["columns"] if columns is None else list(columns)
            return pa.table({n: pa.array([], type=pa.float64()) for n in names})
        return pa.concat_tables(tables)
