"""`motes classify` as a user runs it, and the companion demo part."""

from __future__ import annotations

import pytest

from motes.cli import main
from motes.demo import companion as demo_companion


@pytest.fixture
def demo_folder(tmp_path):
    folder = tmp_path / "demo"
    demo_companion.write_inputs(folder)
    return folder


def test_classify_demo_target_writes_table_and_figures(demo_folder, tmp_path, capsys):
    out = tmp_path / "run"
    code = main(["classify", str(demo_folder / demo_companion.TARGET_FILE), "--output", str(out), "--csv"])
    text = capsys.readouterr().out
    assert code == 0
    assert "spectral type :" in text and "distance check:" in text and "caveats" in text
    assert "blackbody fallback used" in text  # L' and the 3.1 um narrow band are covered by nothing else
    names = sorted(p.name for p in out.iterdir())
    assert names == ["velmora_b_classification.csv", "velmora_b_classification.ecsv",
                     "velmora_b_classification_boundness.ecsv",
                     "velmora_b_classification_cmd_2mass_j-2mass_ks_2mass_j.png",
                     "velmora_b_classification_estimates.csv", "velmora_b_classification_estimates.ecsv",
                     "velmora_b_classification_report.html", "velmora_b_classification_report.txt",
                     "velmora_b_classification_sed.png", "velmora_b_classification_types.png"]
    assert "is it bound? (photometry)" in text
    for name in names:
        assert f"wrote {out / name}" in text


def test_classify_options(demo_folder, tmp_path, capsys):
    target = str(demo_folder / demo_companion.TARGET_FILE)
    out = tmp_path / "run2"
    code = main(["classify", target, "--fit", "colours", "--types", "M0-T9", "--blackbody", "never",
                 "--template-scatter", "0.15", "--no-figures", "--output", str(out), "--top", "3"])
    text = capsys.readouterr().out
    assert code == 0 and "colours-only mode" in text and "distance-known mode ==" not in text
    # the ranked table, the estimates table, the report page and the printed report
    assert sorted(p.suffix for p in out.iterdir()) == [".ecsv", ".ecsv", ".html", ".txt"]


@pytest.mark.parametrize("extra, message", [
    (["--treat-as", "NACO.Ks=2mass_ks"], "not in the photometry"),
    (["--treat-as", "Lp=MKO.Lp"], "tabulates only"),
    (["--types", "T8-M0"], "increasing"),
    (["--fit-extinction", "-1"], "A_V maximum"),
    (["--type-prior", "T9.5=1,Y0=1"], "excludes every template"),
    (["--type-prior", "M0=0,T8=0"], "excludes every template"),
    (["--type-prior", "fieldish"], "TYPE=WEIGHT"),
])
def test_bad_options_give_one_line_and_exit_2(demo_folder, tmp_path, capsys, extra, message):
    out = tmp_path / "never"
    code = main(["classify", str(demo_folder / demo_companion.TARGET_FILE), "--output", str(out), *extra])
    err = capsys.readouterr().err
    assert code == 2
    assert message in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_unlabelled_library_spectrum(demo_folder, tmp_path, capsys):
    lib = tmp_path / "lib"
    lib.mkdir()
    (lib / "mystery.txt").write_text("# wavelength_unit: um\n# flux_unit: f_lambda\n1.0 1.0\n2.0 0.5\n3.0 0.2\n")
    code = main(["classify", str(demo_folder / demo_companion.TARGET_FILE), "--library", str(lib),
                 "--output", str(tmp_path / "never")])
    err = capsys.readouterr().err
    assert code == 2 and "mystery.txt" in err and "unlabelled spectrum" in err


def test_all_limits_target(demo_folder, tmp_path, capsys):
    (demo_folder / "limits.csv").write_text(
        "band,kind,value,error,unit,limit_sigma\n2mass_j,flux,0.1,,mJy,5\n2mass_h,flux,0.1,,mJy,5\n")
    toml = (demo_folder / demo_companion.TARGET_FILE).read_text()
    (demo_folder / "limits.toml").write_text(toml.replace('photometry = "companion_photometry.ecsv"',
                                                          'photometry = "limits.csv"'))
    code = main(["classify", str(demo_folder / "limits.toml"), "--output", str(tmp_path / "never")])
    err = capsys.readouterr().err
    assert code == 2 and "upper limits" in err and "Traceback" not in err


def test_help_has_examples(capsys):
    with pytest.raises(SystemExit) as info:
        main(["classify", "--help"])
    assert info.value.code == 0
    text = capsys.readouterr().out
    assert "examples:" in text and "--treat-as" in text and "--library" in text


def test_demo_part_runs(demo_folder, capsys):
    demo_companion.run(demo_folder)
    text = capsys.readouterr().out
    assert "spectral type :" in text and "L0.5 dwarf" in text
    assert (demo_folder / "companion" / "velmora_b_classification.ecsv").is_file()


def test_classify_boundness_options_and_cmd(demo_folder, tmp_path, capsys):
    target = str(demo_folder / demo_companion.TARGET_FILE)
    out = tmp_path / "run3"
    code = main(["classify", target, "--separation", "1.2", "--galactic", "120,35", "--source-density", "500",
                 "--cmd", "2mass_h-2mass_ks:2mass_ks", "--output", str(out)])
    text = capsys.readouterr().out
    assert code == 0
    assert "P(bound)" in text and "Galactic thin + thick disk" in text and "given by the user" in text
    assert (out / "velmora_b_classification_cmd_2mass_h-2mass_ks_2mass_ks.png").is_file()
    assert (out / "velmora_b_classification_boundness.ecsv").is_file()


def test_classify_bad_cmd_band_writes_nothing(demo_folder, tmp_path, capsys):
    target = str(demo_folder / demo_companion.TARGET_FILE)
    out = tmp_path / "never"
    code = main(["classify", target, "--cmd", "2mass_j-wise_w2:2mass_j", "--output", str(out)])
    err = capsys.readouterr().err
    assert code != 0 and "wise_w2" in err and not out.exists()


def test_report_is_saved_as_printed_and_type_prior_option(demo_folder, tmp_path, capsys):
    target = str(demo_folder / demo_companion.TARGET_FILE)
    out = tmp_path / "run3"
    code = main(["classify", target, "--type-prior", "flat", "--no-figures", "--output", str(out)])
    text = capsys.readouterr().out
    assert code == 0 and "flat type prior]" in text and "flat prior  :" not in text
    saved = (out / "velmora_b_classification_report.txt").read_text(encoding="utf-8")
    # the saved report is everything printed before the "wrote" lines
    assert text.startswith(saved) and text[len(saved):].lstrip("\n").startswith("wrote ")
    assert "caveats" in saved and "late-T dwarfs and G/K stars" in saved
    code = main(["classify", target, "--no-figures", "--output", str(tmp_path / "run4")])
    text = capsys.readouterr().out
    assert code == 0 and "field type prior]" in text and "flat prior  :" in text and "fit         :" in text


def test_classify_bad_separation_is_one_message(demo_folder, tmp_path, capsys):
    target = str(demo_folder / demo_companion.TARGET_FILE)
    out = tmp_path / "never2"
    code = main(["classify", target, "--separation", "-1", "--output", str(out)])
    err = capsys.readouterr().err
    assert code != 0 and "separation_arcsec must be a number > 0" in err and not out.exists()
