"""``motes grid`` on the command line: run, dry run, summarize, and clear refusals of bad input."""

from __future__ import annotations

import socket

import numpy as np
import pytest

from motes.cli import main
from motes.dust.grid.store import GridStore

from test_dust_grid import tiny_real_factory, write_real_grid


@pytest.fixture(autouse=True)
def tiny_real_model(monkeypatch):
    """The command line builds its model with the real Mie model's coarse size quadrature."""
    import motes.dust.grid.run

    monkeypatch.setattr(motes.dust.grid.run, "build_disk_model", tiny_real_factory)


def test_run_then_summarize_on_the_real_model(tmp_path, rng, capsys):
    grid = write_real_grid(tmp_path, rng)
    store = tmp_path / "store"
    assert main(["grid", str(grid), "--output", str(store), "--workers", "1", "--quiet", "--top", "3"]) == 0
    out = capsys.readouterr().out
    assert "60 points = 15 mixtures (= C(4 + 3 - 1, 3 - 1)) x 2 porosity x 2 a_min" in out
    assert "best mixtures:" in out and "#3" in out and "#4" not in out
    assert "bands: 2mass_j, 2mass_h, 2mass_ks, wise_w1, wise_w2\n" in out
    assert "leaving it out costs" in out and "Mie spheres" in out
    for name in ("grid_best.ecsv", "grid_fraction_profiles.ecsv", "grid_axis_profiles.ecsv",
                 "grid_fraction_profiles.png", "grid_axis_profiles.png", "grid_best_models.png"):
        assert (store / "summary" / name).is_file(), name
    table = GridStore.open(store).read_table().to_pandas()
    assert len(table) == 60 and table["key"].is_unique and np.all(np.isfinite(table["chi2"]))

    # summarize into another folder; a second run of the same grid finds it complete
    assert main(["grid", "summarize", str(store), "--top", "2", "--output", str(tmp_path / "sum")]) == 0
    assert (tmp_path / "sum" / "grid_best.ecsv").is_file()
    from astropy.table import Table
    import motes

    meta = Table.read(tmp_path / "sum" / "grid_best.ecsv").meta     # what produced the grid's numbers
    assert meta["motes_version"] == motes.__version__ and meta["star"].startswith("blackbody Teff")
    assert {"mixing", "phase_function", "scattering_angles_deg", "grains", "size_distribution"} <= set(meta)
    assert main(["grid", str(grid), "--output", str(store), "--workers", "1", "--quiet", "--no-summary"]) == 0
    assert "computed 0 points" in capsys.readouterr().out


def test_default_store_is_named_as_the_rule_names_it_not_by_its_absolute_path(tmp_path, rng, capsys,
                                                                              monkeypatch):
    """Issue 14: the store and every summary file were printed with absolute paths."""
    (tmp_path / "in").mkdir()
    write_real_grid(tmp_path / "in", rng, step="0.5")
    monkeypatch.chdir(tmp_path)
    assert main(["grid", "in/grid.toml", "--dry-run", "--workers", "1"]) == 0
    assert "  store grid_grid: new" in capsys.readouterr().out
    assert main(["grid", "in/grid.toml", "--workers", "1", "--quiet", "--top", "2"]) == 0
    out = capsys.readouterr().out
    assert "store: grid_grid\n" in out and "  grid_grid/summary/grid_report.html" in out
    assert str(tmp_path) not in out and str(tmp_path.resolve()) not in out


def test_dry_run_prints_count_and_estimate_and_writes_nothing(tmp_path, rng, capsys):
    grid = write_real_grid(tmp_path, rng)
    before = sorted(p.name for p in tmp_path.iterdir())
    assert main(["grid", str(grid), "--dry-run", "--workers", "2", "--output", str(tmp_path / "s")]) == 0
    out = capsys.readouterr().out
    assert "60 points" in out and "timing probe: 16 points" in out
    assert "estimated run time with 2 local processes" in out and "1,000,000 points need --yes" in out
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def run_cli(args, capsys):
    code = main(args)
    return code, capsys.readouterr().err


def test_bad_inputs_give_one_line_errors_and_write_nothing(tmp_path, rng, capsys):
    grid = write_real_grid(tmp_path, rng)
    text = grid.read_text()

    # too many points without --yes: refused before anything is built or written
    big = tmp_path / "big.toml"
    big.write_text(text.replace('fraction_step = 0.25', 'fraction_step = "1/1000"'))
    code, err = run_cli(["grid", str(big), "--output", str(tmp_path / "big_store")], capsys)
    assert code == 2 and "--yes" in err and "1,000,000-point limit" in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "big_store").exists()

    # zero points
    empty = tmp_path / "empty.toml"
    empty.write_text(text + "\n[grid.fraction_bounds]\nsilica = [0.0, 0.25]\ncarbon = [0.0, 0.25]\nice = [0.0, 0.25]\n")
    code, err = run_cli(["grid", str(empty), "--output", str(tmp_path / "empty_store")], capsys)
    assert code == 2 and "no points" in err
    assert not (tmp_path / "empty_store").exists()

    # a store made from another description
    store = tmp_path / "store"
    assert main(["grid", str(grid), "--output", str(store), "--workers", "1", "--quiet", "--no-summary"]) == 0
    capsys.readouterr()
    parts = {p.name: p.stat().st_mtime_ns for p in (store / "parts").iterdir()}
    other = tmp_path / "other.toml"
    other.write_text(text.replace("a_min = [0.5, 2.0]", "a_min = [0.5, 3.0]"))
    code, err = run_cli(["grid", str(other), "--output", str(store), "--workers", "1"], capsys)
    assert code == 2 and "another grid description" in err and "--overwrite" in err and "new --output" in err
    assert {p.name: p.stat().st_mtime_ns for p in (store / "parts").iterdir()} == parts

    # an unreachable scheduler: a clear error within the timeout, the store untouched
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    code, err = run_cli(["grid", str(other), "--output", str(store), "--overwrite",
                         "--scheduler", f"tcp://127.0.0.1:{port}", "--timeout", "1"], capsys)
    assert code == 2 and "cannot reach the Dask scheduler" in err
    assert {p.name: p.stat().st_mtime_ns for p in (store / "parts").iterdir()} == parts

    # summarize: not a store, and a missing argument
    code, err = run_cli(["grid", "summarize", str(tmp_path)], capsys)
    assert code == 2 and "not a motes grid store" in err
    code, err = run_cli(["grid", "summarize"], capsys)
    assert code == 2 and "summarize needs the store folder" in err
    code, err = run_cli(["grid", str(tmp_path / "missing.toml")], capsys)
    assert code == 2 and "not found" in err


def test_help_describes_both_forms(capsys):
    with pytest.raises(SystemExit):
        main(["grid", "--help"])
    out = capsys.readouterr().out
    assert "motes grid GRID.toml" in out and "motes grid summarize STORE" in out
    assert "--scheduler" in out and "--dry-run" in out and "--yes" in out and "examples:" in out


def test_polarised_row_keys_read_as_labels():
    from motes.dust.grid.summary import band_label

    assert band_label("2mass_h_polarised") == "2mass_h (polarised)"
    assert band_label("model_2mass_h_polarised") == "model_2mass_h (polarised)"
    assert band_label("2mass_h") == "2mass_h"
