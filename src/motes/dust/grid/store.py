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
  need no lock because they see finished parts only. Overwriting a store
  (``--overwrite``) takes the same lock first, so it is refused while a run
  writes the store.
* Overwriting is all-or-nothing: a folder holding anything but the store's
  own entries (``manifest.json``, ``parts/``, ``summary/``, ``.lock``) is
  refused before anything is touched; otherwise the old parts and summary are
  first renamed aside in one step each, the new manifest replaces the old one
  atomically, and only then is the old content deleted. A run killed at any
  instant leaves either the old store (without its parts) or the new one,
  never a mixture.
* Parts are verified when a run resumes and when a store is summarised:
  each must be a readable Parquet file of exactly its chunk's keys (and, for
  parts written with page checksums, pass them). A damaged part is named;
  a resuming run moves it aside (``parts/chunk-NNNNNNN.parquet.damaged``)
  and computes the chunk again.
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
_SUMMARY = "summary"
_DISCARDED = (".parts-discarded", ".summary-discarded")     # old content being deleted by an overwrite
_OWN_ENTRIES = {_MANIFEST, _PARTS, _SUMMARY, _LOCK, *_DISCARDED}
_OLD_TMP_RE = re.compile(r"^\.chunk-\d{7}\.parquet\.tmp$")   # temporary names written by earlier versions


def fraction_column(material: str) -> str:
    """Store column holding a material's volume fraction of the solid."""
    return f"f_{material}"


def model_column(band: str) -> str:
    """Store column holding the model disk/star flux ratio in a band (unit cross-section)."""
    return f"model_{band}"


def _part_name(chunk: int) -> str:
    return f"chunk-{chunk:07d}.parquet"


def _take_lock(folder: Path) -> int:
    """Open and flock ``folder/.lock``; return the descriptor, or refuse when another process holds it."""
    fd = os.open(folder / _LOCK, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        os.close(fd)
        raise GridError(f"another motes grid run is writing to {folder}; nothing was changed. Wait for it, "
                        "or stop it, before starting a second one on the same store") from None
    os.ftruncate(fd, 0)
    os.write(fd, f"{os.getpid()}\n".encode())
    return fd


def _release_lock(fd: int) -> None:
    fcntl.flock(fd, fcntl.LOCK_UN)
    os.close(fd)


def _read_manifest(path: Path) -> dict:
    try:
        return json.loads((path / _MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise GridError(f"{path / _MANIFEST} cannot be read ({exc})") from None


def _full_manifest(manifest: dict) -> dict:
    return {
        **format_stamp(STORE_FORMAT_VERSION, STORE_FORMAT),
        "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        **manifest,
    }


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
        manifest = _read_manifest(path)
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
        full = _full_manifest(manifest)
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
            Replace an existing store of another description (only a folder
            that *is* a grid store, holding nothing else, is ever replaced;
            see the module docstring). The returned store then already holds
            the writer lock.

        Raises
        ------
        motes.errors.GridError
            When the folder holds a store of another description, format or
            motes version (and ``overwrite`` is false), or holds other files;
            when overwriting a store that another process is writing, or one
            whose folder holds other files. Nothing is changed in these cases.
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
            return cls._overwrite(path, manifest)
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

    @classmethod
    def _overwrite(cls, path: Path, manifest: dict) -> "GridStore":
        """Replace the store at ``path`` by a new, empty one, holding the writer lock throughout."""
        stray = sorted(p.name for p in path.iterdir()
                       if p.name not in _OWN_ENTRIES and temporary_target(p.name) not in _OWN_ENTRIES)
        if stray:
            raise GridError(
                f"{path} holds files that are not part of its grid store ({', '.join(stray[:5])}"
                f"{', ...' if len(stray) > 5 else ''}); nothing was changed. Move them out, or give a new "
                "--output folder, before overwriting")
        fd = _take_lock(path)
        try:
            cls._remove_discarded(path)
            # one rename each moves the old content aside: the folder is at every instant either the
            # old store (manifest, no parts) or the new one (new manifest, no parts)
            for name, aside in zip((_PARTS, _SUMMARY), _DISCARDED):
                with contextlib.suppress(FileNotFoundError):
                    os.rename(path / name, path / aside)
            full = _full_manifest(manifest)
            write_bytes_atomic(path / _MANIFEST, json.dumps(full, indent=1, sort_keys=True).encode())
            (path / _PARTS).mkdir(exist_ok=True)
            cls._remove_discarded(path)
        except BaseException:
            _release_lock(fd)
            raise
        store = cls(path, full)
        store._lock_fd = fd
        return store

    @staticmethod
    def _remove_discarded(path: Path) -> None:
        for aside in _DISCARDED:
            shutil.rmtree(path / aside, ignore_errors=True)

    # -- writing -----------------------------------------------------------------------------
    def lock(self) -> None:
        """Take the writer lock; refuse when another process holds it.

        The lock is released when the process ends, however it ends. Taking
        it again while held (a store returned by an overwrite) does nothing
        more. Once locked, the manifest on disk must still be the one this
        store was opened with (another run may have overwritten it since).
        """
        if self._lock_fd is None:
            fd = _take_lock(self.path)
            try:
                on_disk = _read_manifest(self.path)
            except GridError:
                _release_lock(fd)
                raise
            if any(on_disk.get(k) != self.manifest.get(k) for k in ("grid_digest", "created", "motes_version")):
                _release_lock(fd)
                raise GridError(f"the store {self.path} was replaced by another motes grid run after it was "
                                "opened; nothing was written. Run the command again")
            self._lock_fd = fd
        self._remove_discarded(self.path)
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
            _release_lock(self._lock_fd)
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
            pq.write_table(table, tmp, compression="zstd", write_page_checksum=True)
        return final

    # -- verifying ---------------------------------------------------------------------------
    def part_problem(self, path: Path) -> str | None:
        """What is wrong with one part file, or None when it is a whole chunk of this store.

        Parameters
        ----------
        path : pathlib.Path
            A ``parts/chunk-NNNNNNN.parquet`` file.

        Returns
        -------
        str or None
            A short reason (unreadable, failed page checksum, wrong columns,
            wrong keys, chunk number beyond the grid).
        """
        chunk = int(_PART_RE.match(path.name).group(1))
        if chunk >= self.n_chunks:
            return f"chunk {chunk} is beyond this grid's {self.n_chunks} chunks"
        try:
            table = pq.read_table(path, page_checksum_verification=True)
        except (OSError, pa.ArrowException) as exc:
            return f"cannot be read ({str(exc).splitlines()[0]})"
        names = self.manifest["columns"]
        if set(table.column_names) != set(names):
            return "its columns differ from the manifest's"
        start = chunk * self.chunk_size
        keys = table.column("key").to_numpy()
        if keys.size != self.chunk_length(chunk) or not np.array_equal(keys, np.arange(start, start + keys.size)):
            return f"it does not hold exactly the keys {start}..{start + self.chunk_length(chunk) - 1}"
        return None

    def damaged_parts(self) -> list[tuple[Path, str]]:
        """Every part file that is not a whole chunk of this store, with the reason.

        Reads every part once (one at a time), so it costs about one pass over the store.
        """
        parts = self.path / _PARTS
        if not parts.is_dir():
            return []
        found = sorted(p for p in parts.iterdir() if _PART_RE.match(p.name))
        return [(p, why) for p in found if (why := self.part_problem(p)) is not None]

    def set_aside_damaged(self) -> list[tuple[Path, str]]:
        """Rename every damaged part to ``<name>.damaged`` so that its chunk is computed again.

        Needs the writer lock. Returns the damaged parts (original paths) and the reasons.
        """
        if self._lock_fd is None:
            raise GridError("set_aside_damaged needs the store's writer lock")
        damaged = self.damaged_parts()
        for path, _ in damaged:
            os.replace(path, path.with_name(path.name + ".damaged"))
        return damaged

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
        found = (int(m.group(1)) for p in parts.iterdir() if (m := _PART_RE.match(p.name)))
        return sorted(c for c in found if c < self.n_chunks)     # a part beyond the grid is no chunk of it

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
            try:
                yield pq.read_table(path, columns=None if columns is None else list(columns),
                                    page_checksum_verification=True)
            except (OSError, pa.ArrowException) as exc:
                raise GridError(f"{path} is damaged and cannot be read ({str(exc).splitlines()[0]}); run "
                                "`motes grid` again with the same description and --output to recompute it") from None

    def read_table(self, columns=None) -> pa.Table:
        """All finished rows in one Table (for small stores; use :meth:`iter_tables` otherwise)."""
        tables = list(self.iter_tables(columns))
        if not tables:
            names = self.manifest["columns"] if columns is None else list(columns)
            return pa.table({n: pa.array([], type=pa.float64()) for n in names})
        return pa.concat_tables(tables)
