"""motes.tomlcheck, and every description reader refusing a misspelt table with the nearest name."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

import motes.demo
from motes.errors import FitError, InputError
from motes.tomlcheck import check_keys, check_tables, get_table, read_number

DEMO_DATA = Path(motes.demo.__file__).parent / "data"
EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


# ----------------------------------------------------------------------------- keys
def test_known_keys_pass_and_the_table_is_returned():
    table = {"teff": 5800.0}
    assert check_keys(table, ("teff", "mass"), path="d.toml", where="[star]") is table


def test_unknown_key_names_file_table_key_nearest_name_and_allowed():
    with pytest.raises(InputError) as info:
        check_keys({"paralax_mas": [1, 0.1]}, ("name", "parallax_mas", "distance_pc"), path="t.toml",
                   where="[host]")
    message = str(info.value)
    assert message.startswith("t.toml, [host]: unknown key 'paralax_mas'; did you mean 'parallax_mas'?")
    assert message.endswith("allowed: name, parallax_mas, distance_pc")
    assert info.value.path == "t.toml" and info.value.where == "[host]"


def test_several_unknown_keys_each_get_their_suggestion_and_sets_are_listed_sorted():
    with pytest.raises(InputError) as info:
        check_keys({"nlve": 3, "zzz": 1}, {"nlive", "dlogz", "bound"}, where="[sampler]")
    assert "unknown keys 'nlve' (did you mean 'nlive'?), 'zzz'; allowed: bound, dlogz, nlive" in str(info.value)


def test_no_suggestion_when_nothing_is_close():
    with pytest.raises(InputError) as info:
        check_keys({"colour": "blue"}, ("porosity", "a_min"))
    assert "did you mean" not in str(info.value) and "unknown key 'colour'; allowed: porosity, a_min" in str(info.value)


def test_required_keys_and_non_tables():
    with pytest.raises(InputError, match="missing keys 'num', 'stop'"):
        check_keys({"start": 1}, ("start", "stop", "num"), required=("num", "stop"))
    with pytest.raises(InputError, match="expected a table, got 3"):
        check_keys(3, ("a",), where="[grid] a_min")


def test_the_callers_error_class_and_noun_are_used():
    with pytest.raises(FitError, match="unknown setting 'mdoe'; did you mean 'mode'"):
        check_keys({"mdoe": 1}, ("mode",), noun="setting", error=FitError)


# ----------------------------------------------------------------------------- tables
def test_unknown_table_suggests_the_nearest_table():
    doc = {"mixin": {"rule": "maxwell_garnett"}, "star": {}}
    with pytest.raises(InputError) as info:
        check_tables(doc, ("star", "materials", "mixing"), path="mix.toml", arrays=("materials",))
    assert str(info.value) == ("mix.toml: unknown table [mixin]; did you mean [mixing]? "
                               "allowed: [star], [[materials]], [mixing]")


def test_unknown_array_of_tables_and_top_level_key():
    with pytest.raises(InputError, match=r"unknown table \[\[materails\]\]; did you mean \[\[materials\]\]\?"):
        check_tables({"materails": [{"name": "a"}]}, ("materials",), arrays=("materials",))
    with pytest.raises(InputError, match="unknown top-level key 'teff'"):
        check_tables({"teff": 5000.0}, ("star",))
    assert check_tables({"star": {}}, ("star",)) == {"star": {}}


def test_get_table():
    assert get_table({}, "scale") == {}
    assert get_table({"scale": {"lower": 1}}, "scale") == {"lower": 1}
    with pytest.raises(InputError, match=r"d.toml: missing the \[grid\] table \(fraction_step\)"):
        get_table({}, "grid", path="d.toml", required=True, expected="fraction_step")
    with pytest.raises(InputError, match=r"d.toml, \[scale\]: expected a table, got 1"):
        get_table({"scale": 1}, "scale", path="d.toml")


# ----------------------------------------------------------------------------- numbers
@pytest.mark.parametrize("value, options, message", [
    ("x", {}, "expected a number, got 'x'"),
    (True, {}, "expected a number, got True"),
    (float("nan"), {}, "expected a number, got nan"),
    (float("inf"), {"what": "Teff [K]"}, r"expected Teff \[K\], got inf"),
    (0.0, {"positive": True}, "expected a positive number, got 0.0"),
    (1.0, {"lo": 0.0, "hi": 1.0, "open_hi": True}, r"expected a number in \[0, 1\), got 1.0"),
    (-0.5, {"lo": 0.0}, "expected a number >= 0, got -0.5"),
    (0.0, {"lo": 0.0, "open_lo": True}, "expected a number > 0, got 0.0"),
    (2.5, {"integer": True}, "expected an integer, got 2.5"),
    (0, {"integer": True, "positive": True}, "expected a positive integer, got 0"),
    (65, {"integer": True, "lo": 1, "hi": 64}, r"expected an integer in \[1, 64\], got 65"),
])
def test_bad_numbers_are_refused_with_what_was_expected(value, options, message):
    with pytest.raises(InputError, match=message) as info:
        read_number(value, path="d.toml", where="[model] a_max", **options)
    assert str(info.value).startswith("d.toml, [model] a_max: ")


def test_good_numbers():
    assert read_number(3) == 3.0 and isinstance(read_number(3), float)
    assert read_number(8, integer=True) == 8 and isinstance(read_number(8, integer=True), int)
    assert read_number(0.0, lo=0.0, hi=1.0, open_hi=True) == 0.0
    assert read_number(1.0, lo=0.0, hi=1.0) == 1.0


# ----------------------------------------------------------------------------- every reader
@pytest.fixture()
def demo_folder(tmp_path):
    """A copy of the bundled demo inputs (descriptions plus the files they name)."""
    folder = tmp_path / "demo"
    shutil.copytree(DEMO_DATA, folder)
    return folder


def _misspell(path: Path, old: str, new: str) -> Path:
    text = path.read_text()
    assert old in text, old
    bad = path.with_name("bad_" + path.name)
    bad.write_text(text.replace(old, new, 1))
    return bad


def test_every_bundled_description_still_parses(demo_folder):
    from motes.dust.fit.spec import read_fit_description
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.model.mixture import read_mixture_file
    from motes.photometry.targets import read_target

    read_mixture_file(demo_folder / "optics_mixture.toml")
    read_mixture_file(EXAMPLES / "icy_silicate_mixture.toml")
    read_fit_description(demo_folder / "disk_fit.toml")
    read_grid_description(demo_folder / "disk_grid.toml")
    read_target(demo_folder / "companion_target.toml")


def _read_mixture(path):
    from motes.dust.model.mixture import read_mixture_file

    return read_mixture_file(path)


def _read_fit(path):
    from motes.dust.fit.spec import read_fit_description

    return read_fit_description(path)


def _read_grid(path):
    from motes.dust.grid.spec import read_grid_description

    return read_grid_description(path)


def _read_target(path):
    from motes.photometry.targets import read_target

    return read_target(path)


@pytest.mark.parametrize("reader, name, table, typo", [
    (_read_mixture, "optics_mixture.toml", "mixing", "mixin"),   # used to give Bruggeman silently
    (_read_mixture, "optics_mixture.toml", "mixture", "mixtrue"),
    (_read_fit, "disk_fit.toml", "sampler", "sampeler"),          # used to be ignored
    (_read_fit, "disk_fit.toml", "parameters", "paramters"),
    (_read_grid, "disk_grid.toml", "grid", "grdi"),
    (_read_grid, "disk_grid.toml", "geometry", "geometyr"),
    (_read_target, "companion_target.toml", "settings", "setings"),
])
def test_every_description_refuses_a_misspelt_table_naming_the_right_one(demo_folder, reader, name, table, typo):
    bad = _misspell(demo_folder / name, f"[{table}]", f"[{typo}]")
    with pytest.raises(InputError) as info:
        reader(bad)
    message = str(info.value)
    assert message.startswith(f"{bad}: unknown table [{typo}]; did you mean [{table}]? allowed: "), message
    assert f"[{table}]" in message.split("allowed: ")[1]
