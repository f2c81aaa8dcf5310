"""One command line: --output everywhere, one default-output rule, both spellings, plain errors, notes once.

Subcommands are discovered from the parser, so a new one is checked without editing this file.
"""

from __future__ import annotations

import argparse
import os
import re

import numpy as np
import pytest
from astropy.table import Table

from motes.cli import build_parser, main
from motes.demo import copy_demo_inputs
from motes.files import default_output_folder

# Subcommands that write no folder of outputs: bands and materials write only the file --plot names.
# (demo takes its folder as a positional FOLDER or as --output, like every other command.)
_NO_OUTPUT_FOLDER = {"bands", "materials"}


def _subcommands() -> dict[str, argparse.ArgumentParser]:
    parser = build_parser()
    action = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return dict(action.choices)


def _options(sub: argparse.ArgumentParser) -> dict[str, argparse.Action]:
    return {s: a for a in sub._actions for s in a.option_strings}


def test_subcommands_are_discovered_from_the_parser():
    assert {"photometry", "classify", "optics", "fit", "grid"} <= set(_subcommands())


@pytest.mark.parametrize("name", sorted(set(_subcommands()) - _NO_OUTPUT_FOLDER))
def test_every_subcommand_that_writes_accepts_output(name):
    options = _options(_subcommands()[name])
    assert "--output" in options, f"motes {name} has no --output"
    assert "--out" not in options, f"motes {name} still lists a second spelling of --output"
    if "-o" in options:   # the short form, where given, is --output's and nothing else's
        assert options["-o"] is options["--output"]


@pytest.mark.parametrize("name", ["photometry", "classify", "optics", "fit"])
def test_default_output_is_the_one_rule_in_the_help(name):
    help_text = _options(_subcommands()[name])["--output"].help
    assert f"./<" in help_text and f"_{name})" in help_text, help_text


def test_default_output_folder_rule():
    assert default_output_folder("some/where/disk_fit.toml", "fit") == default_output_folder("disk_fit.toml", "fit")
    assert str(default_output_folder("some/where/disk_fit.toml", "fit")) == "disk_fit_fit"   # in the current folder
    assert str(default_output_folder("<string>", "grid")) == "motes_grid"


def test_photometry_default_output_goes_to_the_current_folder(tmp_path, monkeypatch, capsys):
    copy_demo_inputs(tmp_path / "inputs", ["companion_target.toml", "companion_photometry.ecsv",
                                           "companion_nb3p1_curve.txt"])
    before = sorted(p.name for p in (tmp_path / "inputs").iterdir())
    monkeypatch.chdir(tmp_path)
    assert main(["photometry", os.path.join("inputs", "companion_target.toml")]) == 0
    out = capsys.readouterr().out
    folder = tmp_path / "companion_target_photometry"
    assert folder.is_dir() and list(folder.glob("*_photometry.ecsv"))
    assert sorted(p.name for p in (tmp_path / "inputs").iterdir()) == before   # nothing beside the input
    # the written path is shown relative, as the user would type it
    assert f"wrote {os.path.join('companion_target_photometry', '')}" in out and str(tmp_path) not in out


# ------------------------------------------------------------------ spellings
def test_fit_colors_is_colours():
    from motes.companion import ClassifySettings

    args = build_parser().parse_args(["classify", "t.toml", "--fit", "colors"])
    assert args.fit == "colours"
    assert build_parser().parse_args(["classify", "t.toml", "--fit", "colours"]).fit == "colours"
    assert ClassifySettings(mode="colors").mode == "colours"


@pytest.mark.parametrize("word", ["summarize", "summarise"])
def test_grid_summary_word_in_both_spellings(word, tmp_path, capsys):
    # a folder that is no store: both words reach the summary (not "unexpected argument")
    assert main(["grid", word, str(tmp_path / "nostore")]) == 2
    err = capsys.readouterr().err
    assert "is not a motes grid store" in err and "unexpected argument" not in err


# ------------------------------------------------------------------ errors in plain words
def _one_error(capsys, argv, tmp_path) -> str:
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert "['" not in err and "']" not in err, err          # no Python list syntax
    assert str(tmp_path) not in err, err                      # no absolute path the user did not type
    return err


@pytest.fixture
def demo_disk(tmp_path, monkeypatch):
    copy_demo_inputs(tmp_path / "sub", ["disk_fit.toml", "disk_grid.toml", "disk_photometry.ecsv",
                                        "optics_mixture.toml"])
    monkeypatch.chdir(tmp_path)
    return tmp_path / "sub"


def test_fit_unknown_material_message(demo_disk, tmp_path, capsys):
    text = (demo_disk / "disk_fit.toml").read_text()
    assert 'keep = ["silica"]' in text
    (demo_disk / "bad.toml").write_text(text.replace('keep = ["silica"]', 'keep = ["silica", "x", "y"]'))
    err = _one_error(capsys, ["fit", os.path.join("sub", "bad.toml")], tmp_path)
    assert "unknown material(s) 'x', 'y'" in err and "'silica', 'water_ice'" in err
    assert os.path.join("sub", "bad.toml") in err


@pytest.mark.parametrize("command, file", [("fit", "disk_fit.toml"), ("grid", "disk_grid.toml")])
def test_missing_photometry_named_as_typed(command, file, demo_disk, tmp_path, capsys):
    text = (demo_disk / file).read_text()
    (demo_disk / "bad.toml").write_text(text.replace('"disk_photometry.ecsv"', '"missing.ecsv"'))
    argv = [command, os.path.join("sub", "bad.toml")] + (["--dry-run"] if command == "grid" else [])
    err = _one_error(capsys, argv, tmp_path)
    assert f"cannot read the photometry file {os.path.join('sub', 'missing.ecsv')}" in err


def test_optics_unknown_fraction_message(demo_disk, tmp_path, capsys):
    text = (demo_disk / "optics_mixture.toml").read_text()
    assert "fractions = {" in text
    (demo_disk / "bad.toml").write_text(text.replace("fractions = {", "fractions = { zz = 0.1,"))
    err = _one_error(capsys, ["optics", os.path.join("sub", "bad.toml"), "--no-figures"], tmp_path)
    assert "unknown material(s) 'zz'; the materials are 'silica'" in err


def test_grid_axis_message_has_no_lists(tmp_path):
    from motes.dust.grid.spec import read_grid_description
    from motes.errors import InputError

    copy_demo_inputs(tmp_path, ["disk_grid.toml", "disk_photometry.ecsv"])
    text = (tmp_path / "disk_grid.toml").read_text()
    assert "a_min = [1.0, 1.5, 2.25]" in text
    (tmp_path / "g.toml").write_text(text.replace("a_min = [1.0, 1.5, 2.25]", "a_min = [1.0, 5000.0]"))
    with pytest.raises(InputError, match="must be below every a_max") as info:
        read_grid_description(tmp_path / "g.toml")
    assert "[" not in str(info.value).split(": ", 1)[-1].replace("[grid]", "")


# ------------------------------------------------------------------ each note once
def test_fit_prints_each_approximate_band_note_once(tmp_path):
    from motes.dust.fit.run import _model_notes, prepare_fit
    from motes.dust.fit.spec import read_fit_description

    copy_demo_inputs(tmp_path, ["disk_fit.toml", "disk_photometry.ecsv"])
    spec = read_fit_description(tmp_path / "disk_fit.toml")
    obs, handles = prepare_fit(spec)
    approximate = [b.name for b in obs.bands if b.approximate]
    assert approximate, "the demo disk should have approximate (top-hat) bands"
    notes = tuple(dict.fromkeys(list(obs.notes) + _model_notes(handles[:1])))   # as run_fit joins them
    for name in approximate:
        assert sum(f"'{name}'" in n or f"{name}:" in n for n in notes) == 1, notes


# ------------------------------------------------------------------ limits and units
def test_photometry_table_shows_limits_as_limits(tmp_path, capsys):
    copy_demo_inputs(tmp_path, ["companion_target.toml", "companion_photometry.ecsv",
                                "companion_nb3p1_curve.txt"])
    assert main(["photometry", str(tmp_path / "companion_target.toml"), "--output", str(tmp_path / "o")]) == 0
    rows = [line for line in capsys.readouterr().out.splitlines() if re.search(r"<\d+(\.\d+)?σ", line)]
    assert rows, "the demo companion has an upper limit"
    for line in rows:
        assert re.search(r">\d+\.\d+", line) and re.search(r"<\d", line), line


def test_fit_parameter_table_has_units_and_overall_estimate(tmp_path, rng):
    from dust_fit_toys import toy_factory, write_toy_fit

    from motes.dust.fit.run import FitRunSettings, run_fit

    truth = {"fractions": {"alpha": 0.6, "beta": 0.4}, "porosity": 0.3, "a_min": 2.0, "q": 3.6}
    path = write_toy_fit(tmp_path, truth, ("alpha", "beta"), rng=rng, sampler="nlive = 30\ndlogz = 1.0\nseed = 2\n")
    lines = []
    result = run_fit(path, FitRunSettings(output=tmp_path / "run", progress=True), model_factory=toy_factory,
                     echo=lambda *a, **k: lines.append(" ".join(map(str, a))))
    n = len(result.models)
    assert n == 3
    estimates = [line for line in lines if "estimate:" in line]
    assert len(estimates) == n - 1, lines                      # after every model but the last
    assert "2 models left" in estimates[0] and "1 model left" in estimates[1] and "rough guide" in estimates[0]
    table = Table.read(result.models[0].folder / "parameters.ecsv", format="ascii.ecsv")
    units = dict(zip(table["parameter"], table["unit"].filled("") if hasattr(table["unit"], "filled")
                     else table["unit"]))   # a pure number's empty unit reads back masked
    assert units["a_min"] == "um" and units["porosity"] == ""
    samples = Table.read(result.models[0].folder / "samples.ecsv", format="ascii.ecsv")
    assert str(samples["a_min"].unit) == "um"


def test_remaining_estimate_is_labelled_and_honest():
    from motes.progress import remaining_estimate

    assert remaining_estimate([], [1000], 3) is None                 # nothing timed yet: no guess
    assert remaining_estimate([(1000, 10.0)], [1000], 0) is None     # nothing left
    line = remaining_estimate([(1000, 10.0)], [1000, 3000], 2)       # 2 x 2000 calls at 100 calls/s = 40 s
    assert line.startswith("estimate:") and "40 s" in line and "2 models left" in line
    assert np.isclose(float(re.search(r"([\d,]+) likelihood calls", line).group(1).replace(",", "")), 2000)


def test_fit_still_resumes_a_run_folder_beside_the_description(tmp_path, monkeypatch):
    from motes.dust.fit.run import _default_output
    from motes.dust.fit.spec import read_fit_description

    copy_demo_inputs(tmp_path / "sub", ["disk_fit.toml", "disk_photometry.ecsv"])
    (tmp_path / "work").mkdir()
    monkeypatch.chdir(tmp_path / "work")
    spec = read_fit_description(tmp_path / "sub" / "disk_fit.toml")
    assert _default_output(spec) == default_output_folder("disk_fit.toml", "fit")   # the one rule
    earlier = tmp_path / "sub" / "disk_fit_fit"
    earlier.mkdir()
    (earlier / "fit_state.json").write_text("{}")
    assert _default_output(spec) == earlier               # an earlier default's run is found, not restarted


def test_demo_takes_its_folder_as_output_too(capsys):
    args = build_parser().parse_args(["demo", "--output", "my-demo", "--parts", "photometry"])
    assert args.output == "my-demo" and args.folder is None
    assert main(["demo", "one", "--output", "two"]) == 2       # refused before anything is written
    assert "two output folders given (one and --output two)" in capsys.readouterr().err


@pytest.mark.parametrize("option, short", [("--workers", "-w"), ("--quiet", "-q")])
def test_fit_and_grid_share_short_options(option, short):
    for name in ("fit", "grid"):
        options = _options(_subcommands()[name])
        assert options[short] is options[option], f"motes {name}: {short} is not {option}"
    assert _options(_subcommands()["fit"])["--output"].metavar == "DIR"
