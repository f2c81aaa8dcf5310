"""Issue 11 audit: the bad-input list at the command line (one message naming file and field, exit 2,
nothing written), settings files holding only [boundness], the boundness test from the Python API,
and detected bands that cannot enter the Bayes factor checked against each reading."""

from __future__ import annotations

import math

import pytest

from motes.cli import main
from motes.companion import (
    BoundnessSettings,
    ClassifySettings,
    classify,
    load_dwarf_sequence,
    photometric_boundness,
    photometry_from_magnitudes,
)
from motes.demo import companion as demo_companion
from motes.errors import InputError
from motes.photometry import calibrate, read_target

from test_companion_motion import GOOD, HOST_LINES, _target


@pytest.fixture
def demo_target(tmp_path):
    folder = tmp_path / "demo"
    demo_companion.write_inputs(folder)
    return folder / demo_companion.TARGET_FILE


def _one_message(capsys, code, out, *words):
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    for w in words:
        assert w in err, (w, err)
    assert not out.exists()


# ---------------------------------------------------------------- the bad-input list, as a user meets it
@pytest.mark.parametrize("row, column", [
    ("2020-13-45,1190,2,30.0,0.1\n", "'date'"),            # a date that does not parse
    ("2020-01-01,1190,,30.0,0.1\n", "'sep_error'"),        # a separation with no error
])
def test_motion_command_refuses_bad_dates_and_missing_errors(tmp_path, capsys, row, column):
    target = _target(tmp_path, HOST_LINES)
    astro = tmp_path / "astrometry.csv"
    astro.write_text("date,sep_mas,sep_error,pa_deg,pa_error_deg\n" + GOOD + row)
    out = tmp_path / "never"
    code = main(["motion", str(target), str(astro), "--output", str(out)])
    _one_message(capsys, code, out, "astrometry.csv", "row 2", column)


def test_evolution_table_not_reaching_the_companion_is_refused(demo_target, tmp_path, capsys):
    # every model 5 mag fainter than the demo companion: the age is covered, its luminosity is not
    phot = calibrate(read_target(demo_target))
    m_j = phot.row("2mass_j").absolute_mag
    table = tmp_path / "faint_models.csv"
    table.write_text("age_gyr,mass_msun,2mass_j\n"
                     + "".join(f"{a},{m},{m_j + 5 + dm:.3f}\n" for a in (0.1, 1.0)
                               for m, dm in ((0.01, 2.0), (0.03, 0.0))))
    out = tmp_path / "never"
    code = main(["classify", str(demo_target), "--evolution", str(table), "--age", "0.5:0.1 Gyr",
                 "--output", str(out)])
    _one_message(capsys, code, out, "faint_models.csv", "2mass_j", "absolute magnitudes")


def test_type_prior_excluding_every_template_in_a_settings_file(demo_target, tmp_path, capsys):
    settings = tmp_path / "prior.toml"
    settings.write_text('[classify]\ntype_prior = "T5=1,T9=1"\ntype_range = ["M0", "L5"]\n')
    out = tmp_path / "never"
    code = main(["classify", str(demo_target), "--settings", str(settings), "--output", str(out)])
    _one_message(capsys, code, out, "prior.toml", "type_prior", "excludes every template")


# ---------------------------------------------------------------- settings files
def test_a_settings_file_with_only_a_boundness_table(demo_target, tmp_path, capsys):
    settings = tmp_path / "bound.toml"
    settings.write_text("[boundness]\nseparation_arcsec = 1.5\n")
    assert ClassifySettings.from_toml(settings) == ClassifySettings()
    assert BoundnessSettings.from_toml(settings).separation_mas == pytest.approx(1500.0)
    code = main(["classify", str(demo_target), "--settings", str(settings), "--no-figures",
                 "--output", str(tmp_path / "run")])
    text = capsys.readouterr().out
    assert code == 0 and "within 1.5\"" in text and "P(bound)      : 1 - " in text


def test_settings_tables_beside_classify_are_checked(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text('[classify]\nmode = "both"\n\n[boundnes]\nseparation_arcsec = 1.0\n')
    with pytest.raises(InputError, match=r"unknown table \[boundnes\]; did you mean \[boundness\]"):
        ClassifySettings.from_toml(path)
    path.write_text('mode = "colours"\n\n[boundness]\nseparation_arcsec = 1.0\n')   # top-level settings
    assert ClassifySettings.from_toml(path).mode == "colours"


# ---------------------------------------------------------------- the Python API
def test_classify_runs_the_boundness_test_on_request(demo_target):
    target = read_target(demo_target)
    phot = calibrate(target)
    plain = classify(phot, ClassifySettings(mode="distance"))
    assert plain.boundness is None
    from motes.report import format_classification

    assert "is it bound? (photometry): not run" in format_classification(plain)
    result = classify(phot, ClassifySettings(mode="distance"), boundness={"separation_arcsec": 1.5})
    direct = photometric_boundness(phot, BoundnessSettings(separation_mas=1500.0), result.settings)
    assert result.boundness.ln_bayes_factor == pytest.approx(direct.ln_bayes_factor, rel=1e-12)
    assert result.boundness.p_bound == pytest.approx(direct.p_bound, rel=1e-12)
    assert "is it bound? (photometry): BOUND" in format_classification(result)
    with pytest.raises(InputError, match="boundness must be"):
        classify(phot, boundness="yes")
    no_distance = photometry_from_magnitudes({"2mass_j": (15.0, 0.05), "2mass_ks": (14.0, 0.05)})
    with pytest.raises(InputError, match="needs the host's distance"):
        classify(no_distance, boundness=True)


def test_galactic_coordinates_from_the_target(demo_target):
    target = read_target(demo_target)
    host = target.host.__class__(**{**target.host.__dict__, "ra_deg": 266.405, "dec_deg": -28.936})
    s = BoundnessSettings.from_mapping({}, target=target.__class__(**{**target.__dict__, "host": host}))
    # the Galactic centre direction (Sgr A*, from memory): l ~ 359.94, b ~ -0.05 deg
    assert s.prior_kind == "galaxy" and abs(s.galactic_b_deg) < 0.2
    assert min(s.galactic_l_deg, 360 - s.galactic_l_deg) < 0.2
    assert math.isnan(BoundnessSettings.from_mapping({}, target=target).galactic_b_deg)   # no coordinates


# ---------------------------------------------------------------- bands left out of B
def test_bands_left_out_of_b_are_checked_against_each_reading():
    """A T1 at 5.7 pc with J, H, Ks, W1, W2 from the sequence: the T2.2-T9 templates have no W1/W2 and
    carry more than 1% of the bound reading's probability, so W1/W2 stay out of B; they are checked."""
    seq = load_dwarf_sequence()
    d = 5.7
    mu = 5 * math.log10(d / 10)
    bands = ("2mass_j", "2mass_h", "2mass_ks", "wise_w1", "wise_w2")
    phot = photometry_from_magnitudes({b: (float(seq.value(b, "T1")) + mu, 0.05) for b in bands},
                                      distance_pc=d, distance_pc_error=0.05, name="T1 with W1/W2")
    test = photometric_boundness(phot)
    assert test.bands == ("2mass_j", "2mass_h", "2mass_ks")
    checks = {c[0]: c for c in test.left_out_checks}
    assert set(checks) == {"wise_w1", "wise_w2"}
    _, m, s, pred_b, pred_g, z_b, z_g = checks["wise_w2"]
    assert abs(z_b) < 1.0                  # the bound reading's best template is the truth's neighbour
    assert abs(z_g) > 5.0                  # an early M far behind is far too faint in W2
    assert any("wise_w2" in f and "contradicts the background reading" in f for f in test.flags)
    # bands already observed are not offered as the ones that would separate the readings
    assert not {n for n, _, _ in test.separating_bands} & set(bands)
    from motes.report import format_boundness

    assert "left out of B" in format_boundness(test)
    assert test.to_table().meta["left_out_checks"]


def test_motion_output_says_what_is_and_is_not_modelled(tmp_path, capsys):
    target = _target(tmp_path, HOST_LINES)
    astro = tmp_path / "astrometry.csv"
    astro.write_text("date,sep_mas,sep_error,pa_deg,pa_error_deg\n" + GOOD + "2021-03-01,1200,2,30.0,0.1\n")
    assert main(["motion", str(target), str(astro), "--no-figure", "--output", str(tmp_path / "run")]) == 0
    text = capsys.readouterr().out
    assert "no perspective acceleration" in text          # issue 11: say whether it is modelled
    assert "no orbital motion allowed" in text and "rule: co-moving if B" in text
