"""motes.files: atomic writes that never lose the old file, the one cache-folder rule, format stamps."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest

from motes import __version__
from motes.files import (atomic_write, atomic_writes, cache_directory, format_stamp, stamp_problem,
                         temporary_target, write_bytes_atomic, write_json_atomic, write_text_atomic)


class Interrupted(Exception):
    """Stands for anything that stops a writer half-way (a full disk, a bug, Ctrl-C)."""


def _names(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


# ----------------------------------------------------------------------------- atomic writes
def test_write_shortcuts_replace_the_file_and_leave_nothing_else(tmp_path):
    path = tmp_path / "state.json"
    path.write_text("old")
    assert write_json_atomic(path, {"a": 1}, indent=1) == path
    assert json.loads(path.read_text()) == {"a": 1}
    write_text_atomic(tmp_path / "notes.txt", "µm\n")
    assert (tmp_path / "notes.txt").read_text(encoding="utf-8") == "µm\n"
    write_bytes_atomic(tmp_path / "blob.bin", b"\x00\x01")
    assert (tmp_path / "blob.bin").read_bytes() == b"\x00\x01"
    assert _names(tmp_path) == ["blob.bin", "notes.txt", "state.json"]


def test_a_write_that_fails_half_way_keeps_the_old_file_and_no_temporary(tmp_path):
    path = tmp_path / "table.ecsv"
    path.write_text("the complete old table\n")
    with pytest.raises(Interrupted):
        with atomic_write(path) as tmp:
            with open(tmp, "w") as handle:
                handle.write("half of the new")
                handle.flush()
            assert tmp.exists() and tmp.parent == tmp_path
            raise Interrupted
    assert path.read_text() == "the complete old table\n"
    assert _names(tmp_path) == ["table.ecsv"]


def test_a_failure_before_anything_is_written_creates_nothing(tmp_path):
    with pytest.raises(Interrupted):
        with atomic_write(tmp_path / "new.json"):
            raise Interrupted
    assert _names(tmp_path) == []


def test_a_writer_that_writes_nothing_is_an_error_and_changes_nothing(tmp_path):
    path = tmp_path / "kept.txt"
    path.write_text("kept")
    with pytest.raises(FileNotFoundError):
        with atomic_write(path):
            pass
    assert path.read_text() == "kept" and _names(tmp_path) == ["kept.txt"]


def test_several_files_are_replaced_only_when_all_are_written(tmp_path):
    a, b = tmp_path / "a.ecsv", tmp_path / "a.csv"
    a.write_text("old a")
    with pytest.raises(Interrupted):
        with atomic_writes([a, b]) as (ta, tb):
            ta.write_text("new a")
            raise Interrupted     # before b is written: a must stay old
    assert a.read_text() == "old a" and _names(tmp_path) == ["a.ecsv"]
    with atomic_writes([a, b]) as (ta, tb):
        ta.write_text("new a")
        tb.write_text("new b")
    assert a.read_text() == "new a" and b.read_text() == "new b"
    assert _names(tmp_path) == ["a.csv", "a.ecsv"]


def test_temporary_name_keeps_the_suffix_for_libraries_that_write_by_path(tmp_path):
    """numpy appends .npz, astropy and matplotlib infer the format from the suffix."""
    import matplotlib.pyplot as plt
    from astropy.table import Table

    with atomic_write(tmp_path / "tile.npz") as tmp:
        assert tmp.suffix == ".npz" and tmp.name.startswith(".tile.npz.")
        np.savez(tmp, x=np.arange(3))
    with np.load(tmp_path / "tile.npz") as z:
        np.testing.assert_array_equal(z["x"], np.arange(3))

    with atomic_write(tmp_path / "t.ecsv") as tmp:
        Table({"a": [1, 2]}).write(tmp, format="ascii.ecsv")
    assert list(Table.read(tmp_path / "t.ecsv", format="ascii.ecsv")["a"]) == [1, 2]

    fig, ax = plt.subplots()
    ax.plot([0, 1])
    with atomic_write(tmp_path / "plot.pdf") as tmp:
        fig.savefig(tmp)
    with atomic_write(tmp_path / "plot", suffix=".png") as tmp:   # no suffix: the writer is told one
        fig.savefig(tmp)
    plt.close(fig)
    assert (tmp_path / "plot.pdf").read_bytes().startswith(b"%PDF")
    assert (tmp_path / "plot").read_bytes().startswith(b"\x89PNG")
    assert _names(tmp_path) == ["plot", "plot.pdf", "t.ecsv", "tile.npz"]


def test_new_files_get_the_usual_permissions(tmp_path):
    umask = os.umask(0o022)
    try:
        write_text_atomic(tmp_path / "x.txt", "x")
    finally:
        os.umask(umask)
    assert (tmp_path / "x.txt").stat().st_mode & 0o777 == 0o644


def test_temporary_names_are_recognised(tmp_path):
    with pytest.raises(Interrupted):
        with atomic_write(tmp_path / "chunk-0000003.parquet") as tmp:
            tmp.write_bytes(b"part")
            assert temporary_target(tmp.name) == "chunk-0000003.parquet"
            raise Interrupted
    assert temporary_target("chunk-0000003.parquet") is None
    assert temporary_target(".chunk.parquet.tmp") is None


# ----------------------------------------------------------------------------- cache folder
@pytest.mark.parametrize("motes, xdg, expected", [
    ("{tmp}/mine", "{tmp}/xdg", "{tmp}/mine"),       # MOTES_CACHE_DIR wins
    ("{tmp}/mine", None, "{tmp}/mine"),
    (None, "{tmp}/xdg", "{tmp}/xdg/motes"),           # else XDG_CACHE_HOME/motes
    ("", "{tmp}/xdg", "{tmp}/xdg/motes"),             # an empty variable counts as unset
    (None, None, "{home}/.cache/motes"),              # else ~/.cache/motes
    (None, "", "{home}/.cache/motes"),
])
def test_cache_folder_rule(monkeypatch, tmp_path, motes, xdg, expected):
    home = tmp_path / "home"
    monkeypatch.setenv("HOME", str(home))
    for name, value in (("MOTES_CACHE_DIR", motes), ("XDG_CACHE_HOME", xdg)):
        if value is None:
            monkeypatch.delenv(name, raising=False)
        else:
            monkeypatch.setenv(name, value.format(tmp=tmp_path))
    assert cache_directory() == Path(expected.format(tmp=tmp_path, home=home))


def test_cache_folder_expands_the_home_folder(monkeypatch, tmp_path):
    monkeypatch.setenv("HOME", str(tmp_path))
    monkeypatch.setenv("MOTES_CACHE_DIR", "~/motes-cache")
    assert cache_directory() == tmp_path / "motes-cache"


def test_optics_tables_and_magnitude_cache_share_the_folder(monkeypatch, tmp_path):
    """Both former rules: with XDG_CACHE_HOME elsewhere, both caches live under it."""
    from motes.companion import read_library
    from motes.dust.model.geometry import ScatteringGeometry
    from motes.dust.model.tables import LookupTable

    monkeypatch.delenv("MOTES_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    root = tmp_path / "xdg" / "motes"
    table = LookupTable(ScatteringGeometry((90.0,), "mie"), progress=False, workers=1)
    assert table.folder.parent == root / "tables"

    lib = tmp_path / "lib"
    lib.mkdir()
    wl = np.geomspace(0.5, 5.0, 200)
    (lib / "a.txt").write_text("\n".join(f"{w:.5f} {w ** -4:.5e}" for w in wl) + "\n")
    (lib / "motes-library.toml").write_text('[library]\nwavelength_unit = "um"\nflux_unit = "W m-2 um-1"\n'
                                            'calibration = "at_10pc"\n[[spectrum]]\nfile = "a.txt"\n'
                                            'spectral_type = "L0"\n')
    library = read_library(lib)
    assert library.cache.folder == root


# ----------------------------------------------------------------------------- stamps
def test_format_stamp_and_its_check():
    stamp = format_stamp(3, "motes-thing")
    assert stamp == {"format": "motes-thing", "format_version": 3, "motes_version": __version__}
    assert list(format_stamp(1)) == ["format_version", "motes_version"]
    assert format_stamp(2, "x", version_key="version")["version"] == 2
    assert stamp_problem({**stamp, "extra": 1}, 3, "motes-thing") is None
    assert "format version 2" in stamp_problem({**stamp, "format_version": 2}, 3, "motes-thing")
    assert "'other'" in stamp_problem({**stamp, "format": "other"}, 3, "motes-thing")
    assert stamp_problem([], 3) is not None
