"""Files motes writes: atomic writes, the cache folder, format stamps.

Every file motes writes (tables, figures, checkpoints, store parts, caches)
goes through :func:`atomic_write` or one of its shortcuts: the content is
written to a temporary name in the destination folder, flushed and
``fsync``-ed, then renamed onto the final name (``os.replace``, atomic on one
file system) and the folder is ``fsync``-ed where the OS allows. On any
error the temporary file is removed and the old file, if any, is untouched:
a reader sees either the old file or the complete new one, never half of it.

The temporary name keeps the final name's suffix, so libraries that infer a
format from it (matplotlib's ``savefig``, ``numpy.savez``, astropy's
``Table.write``) write the right format::

    with atomic_write(folder / "profile.png") as tmp:
        fig.savefig(tmp, dpi=120)

The one cache-folder rule is :func:`cache_directory`; checkpoints and stores
carry a stamp from :func:`format_stamp`, checked by :func:`stamp_problem`.
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import secrets
from collections.abc import Iterator, Sequence
from pathlib import Path

from . import __version__

__all__ = [
    "atomic_write",
    "atomic_writes",
    "write_bytes_atomic",
    "write_text_atomic",
    "write_json_atomic",
    "temporary_target",
    "default_output_folder",
    "check_output_folder",
    "cache_directory",
    "format_stamp",
    "stamp_problem",
]

# ".<final name>.<12 hex digits>.tmp<final suffix>"
_TEMPORARY_RE = re.compile(r"^\.(?P<name>.+)\.[0-9a-f]{12}\.tmp(?P<suffix>\.[^.]*)?$")


def _temporary_path(path: Path, suffix: str | None) -> Path:
    suffix = path.suffix if suffix is None else suffix
    return path.with_name(f".{path.name}.{secrets.token_hex(6)}.tmp{suffix}")


def temporary_target(name: str) -> str | None:
    """The final file name a temporary name of :func:`atomic_write` stands for.

    Parameters
    ----------
    name : str
        A file name (not a path), e.g. one found in a folder after a crash.

    Returns
    -------
    str or None
        The final name, or None when ``name`` is not such a temporary name.
    """
    match = _TEMPORARY_RE.match(name)
    return None if match is None else match["name"]


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder: Path) -> None:
    """Make a rename in ``folder`` durable (POSIX; skipped where folders cannot be opened)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass   # some file systems refuse fsync on a folder; the rename itself is done
    finally:
        os.close(fd)


def _remove(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.unlink(path)


@contextlib.contextmanager
def atomic_writes(paths: Sequence, *, suffixes: Sequence | None = None) -> Iterator[list[Path]]:
    """Write several files all-or-nothing: temporary names first, renamed together.

    Parameters
    ----------
    paths : sequence of str or os.PathLike
        Final names; their folders must exist.
    suffixes : sequence of str or None, optional
        Suffix of each temporary name (default: the final name's suffix, so
        libraries that infer a format from it write the right one).

    Yields
    ------
    list of pathlib.Path
        Temporary paths, in the order of ``paths``; the body writes each one
        (by name: they do not exist yet).

    Raises
    ------
    FileNotFoundError
        When the body did not write one of the temporary files.

    Notes
    -----
    The files are renamed only when the body returns and every temporary file
    exists; each is ``fsync``-ed first and each folder afterwards. On any
    error no final file is changed and every temporary file is removed.
    Renaming several files is not one atomic step: a crash between two
    renames can leave some files new and some old, but none half written.
    """
    finals = [Path(p) for p in paths]
    suffixes = [None] * len(finals) if suffixes is None else list(suffixes)
    if len(suffixes) != len(finals):
        raise ValueError(f"{len(finals)} paths but {len(suffixes)} suffixes")
    temps = [_temporary_path(p, s) for p, s in zip(finals, suffixes)]
    try:
        yield list(temps)
        for tmp in temps:
            _fsync_file(tmp)
        for tmp, final in zip(temps, finals):
            os.replace(tmp, final)
    finally:
        for tmp in temps:
            _remove(tmp)
    for folder in dict.fromkeys(p.parent for p in finals):
        _fsync_folder(folder)


@contextlib.contextmanager
def atomic_write(path, *, suffix: str | None = None) -> Iterator[Path]:
    """Write one file atomically: yield a temporary path, rename it onto ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        Final name; its folder must exist.
    suffix : str, optional
        Suffix of the temporary name (default: ``path``'s suffix). Give e.g.
        ``".png"`` when ``path`` has none but the writer infers the format.

    Yields
    ------
    pathlib.Path
        A name in the same folder, not yet existing, for the body to write.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_write(folder / "notes.txt") as tmp:
    ...     _ = tmp.write_text("complete")
    >>> (folder / "notes.txt").read_text()
    'complete'
    >>> sorted(p.name for p in folder.iterdir())
    ['notes.txt']
    >>> import shutil; shutil.rmtree(folder)
    """
    with atomic_writes([path], suffixes=[suffix]) as (tmp,):
        yield tmp


def write_bytes_atomic(path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_write`); return the path."""
    with atomic_write(path) as tmp:
        with open(tmp, "xb") as handle:
            handle.write(data)
    return Path(path)


def write_text_atomic(path, text: str, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` atomically (see :func:`atomic_write`); return the path."""
    return write_bytes_atomic(path, text.encode(encoding))


def write_json_atomic(path, data, **dumps_options) -> Path:
    """Write ``data`` as JSON to ``path`` atomically; ``dumps_options`` go to :func:`json.dumps`."""
    return write_text_atomic(path, json.dumps(data, **dumps_options))


def default_output_folder(source, command: str) -> Path:
    """The one default output folder of a command: ``./<input stem>_<command>``.

    Every command that writes files and is given no ``--output`` writes into
    a folder named after its input file and the command, in the current folder
    (not beside the input: the input may sit in a shared or read-only place,
    and outputs belong where the user is working). The path is relative to the
    current folder, so messages show it as short as the user would type it.

    Parameters
    ----------
    source : str or os.PathLike
        The input file (its stem names the folder); ``"<string>"`` (a
        description given as text) gives ``motes_<command>``.
    command : str
        The command word, e.g. ``"optics"``.

    Returns
    -------
    pathlib.Path

    Examples
    --------
    >>> print(default_output_folder("data/disk_fit.toml", "fit").as_posix())
    disk_fit_fit
    """
    stem = Path(source).stem if str(source) != "<string>" else "motes"
    return Path(f"{stem}_{command}")


def check_output_folder(folder, where: str | None = None) -> Path:
    """Refuse, before any work, an output folder that cannot be created or written.

    Parameters
    ----------
    folder : str or os.PathLike
        The folder outputs will go to (it may not exist yet).
    where : str, optional
        The option or field that named it (e.g. ``"--out"``), for the message.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    motes.errors.InputError
        When ``folder`` (or the part of its path that exists) is a file, or
        the nearest existing folder is not writable.
    """
    from .errors import InputError

    folder = Path(folder)
    existing = folder
    while not existing.exists() and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise InputError(f"{existing} is a file, not a folder; give a folder for the outputs", folder, where)
    if not os.access(existing, os.W_OK | os.X_OK):
        raise InputError(f"the folder {existing} is not writable; give another output folder", folder, where)
    return folder


def cache_directory() -> Path:
    """The folder of motes' caches (optics lookup tables, synthetic magnitudes).

    Returns
    -------
    pathlib.Path
        ``$MOTES_CACHE_DIR`` when set, else ``$XDG_CACHE_HOME/motes``, else
        ``~/.cache/motes`` (``~`` is expanded). Not created here.
    """
    env = os.environ.get("MOTES_CACHE_DIR")
    if env:
        return Path(env).expanduser()
    base = os.environ.get("XDG_CACHE_HOME")
    return (Path(base).expanduser() if base else Path.home() / ".cache") / "motes"


def format_stamp(version: int, format: str | None = None, *, version_key: str = "format_version") -> dict:
    """The stamp a checkpoint or store starts with: its format and the motes version.

    Parameters
    ----------
    version : int
        Format version of the file kind.
    format : str, optional
        Name of the file kind (key ``"format"``); left out when None.
    version_key : str
        Key of the format version (files written before this helper keep theirs).

    Returns
    -------
    dict
        ``{"format": format, version_key: version, "motes_version": ...}``.
    """
    stamp = {} if format is None else {"format": format}
    stamp[version_key] = version
    stamp["motes_version"] = __version__
    return stamp


def stamp_problem(doc, version: int, format: str | None = None, *,
                  version_key: str = "format_version") -> str | None:
    """What makes ``doc``'s stamp differ from the expected one, or None when it matches.

    Parameters
    ----------
    doc : dict
        A document read back (anything else is reported as not stamped).
    version, format, version_key
        As given to :func:`format_stamp`.

    Returns
    -------
    str or None
        E.g. ``"format version 2, this motes 0.1.0 reads version 1"``.
    """
    if not isinstance(doc, dict):
        return "not a stamped motes file"
    if format is not None and doc.get("format") != format:
        return f"format {doc.get('format')!r} is not {format!r}"
    if doc.get(version_key) != version:
        return f"format version {doc.get(version_key)}, this motes {__version__} reads version {version}"
    return None
