"""Disk photometry tables, the noise model and the exact best scale."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar
from scipy.special import log_ndtr

from motes.dust.likelihood import chi_square, chi_square_with_best_scale, effective_errors, ln_likelihood
from motes.dust.observations import DiskPhotometry, read_disk_photometry
from motes.errors import InputError
from motes.photometry.bands import top_hat_band

BANDS = tuple(top_hat_band(f"b{i}", 0.7 + 0.45 * i, 0.1) for i in range(6))


def _obs(value, error, limits=None):
    limits = np.zeros(len(value), bool) if limits is None else np.asarray(limits, bool)
    return DiskPhotometry(BANDS[: len(value)], value, error, limits, np.where(limits, 3.0, np.nan))


def test_read_csv_kinds_and_limits(tmp_path):
    path = tmp_path / "disk.csv"
    path.write_text(
        "# invented disk\n"
        "band,value,error,kind,limit_sigma\n"
        "2mass_j,1.0e-4,3e-6,contrast_ratio,\n"
        "2mass_h,10.0,0.03,contrast_mag,\n"
        "2mass_ks,1.2e-4,,contrast_ratio,3\n"
        "wise_w1,9.5,,contrast_mag,5\n")
    obs = read_disk_photometry(path)
    assert obs.band_names == ("2mass_j", "2mass_h", "2mass_ks", "wise_w1")
    # Delta-mag: r = 10^(-0.4 dm), sigma_r = r ln(10)/2.5 sigma_dm (first-order propagation)
    assert obs.value[1] == pytest.approx(1e-4, rel=1e-12)
    assert obs.error[1] == pytest.approx(1e-4 * math.log(10) / 2.5 * 0.03, rel=1e-12)
    assert list(obs.is_limit) == [False, False, True, True]
    # an N-sigma limit L has noise L / N
    assert obs.error[2] == pytest.approx(1.2e-4 / 3)
    assert obs.error[3] == pytest.approx(10 ** (-0.4 * 9.5) / 5)
    assert obs.normalisation == "flux ratio"
    assert obs.n_detections == 2


def test_read_ecsv_upper_limit_column_default_sigma(tmp_path):
    from astropy.table import Table

    t = Table({"band": ["2mass_j", "2mass_h"], "value": [1e-4, 2e-4], "error": [1e-5, 0.0],
               "upper_limit": ["no", "yes"]})
    path = tmp_path / "disk.ecsv"
    t.write(path, format="ascii.ecsv")
    obs = read_disk_photometry(path)
    assert list(obs.is_limit) == [False, True]
    assert obs.limit_sigma[1] == 3.0
    assert any("3-sigma" in n for n in obs.notes)


def test_custom_bands(tmp_path):
    nb = top_hat_band("NB3.1", 3.1, 0.1)
    path = tmp_path / "disk.csv"
    path.write_text("band,value,error\nNB3.1,1e-4,1e-5\n2mass_j,2e-4,1e-5\n")
    obs = read_disk_photometry(path, custom_bands={"NB3.1": nb})
    assert obs.bands[0] is nb
    assert any("approximate" in n for n in obs.notes)


@pytest.mark.parametrize("body, message", [
    ("band,value\n2mass_j,1e-4\n", "missing column"),
    ("band,value,error\nNoSuchBand,1e-4,1e-5\n", "row 1"),
    ("band,value,error\n2mass_j,1e-4,0\n", "error must be > 0"),
    ("band,value,error\n2mass_j,abc,1e-5\n", "not a number"),
    ("band,value,error,kind\n2mass_j,1e-4,1e-5,flux\n", "kind"),
    ("band,value,error\n2mass_j,1e-4,1e-5\n2mass_j,1e-4,1e-5\n", "already given in row 1"),
    ("band,value,error,kind\n2mass_j,1e-4,1e-5,contrast_ratio\n2mass_h,1e-4,1e-5,sb_contrast_ratio\n", "mixes"),
    # the disk kinds of earlier releases, refused with their name in the one vocabulary (table_schema)
    ("band,value,error,kind\n2mass_j,1e-4,1e-5,ratio\n", "kind 'ratio' is now called 'contrast_ratio'"),
    ("band,value,error,kind\n2mass_j,10.0,0.03,delta_mag\n", "kind 'delta_mag' is now called 'contrast_mag'"),
    ("band,value,error,kind\n2mass_j,1e-4,1e-5,sb_ratio\n", "now called 'sb_contrast_ratio'"),
    ("band,value,error,kind\n2mass_j,10.0,0.03,SB_Delta_Mag\n", "now called 'sb_contrast_mag'"),
    ("band,value,error,kind\n2mass_j,10.0,0.03,vega_mag\n", "not accepted in this table"),
    ("band,value,error,limit_sigma\n2mass_j,-1e-4,,3\n", "upper limit must be > 0"),
])
def test_bad_tables_name_file_and_row(tmp_path, body, message):
    path = tmp_path / "bad.csv"
    path.write_text(body)
    with pytest.raises(InputError) as err:
        read_disk_photometry(path)
    assert message in str(err.value)
    assert "bad.csv" in str(err.value)


def test_unknown_format_and_missing_file(tmp_path):
    with pytest.raises(InputError, match="unknown table format"):
        read_disk_photometry(tmp_path / "x.fits")
    with pytest.raises(InputError, match="not found"):
        read_disk_photometry(tmp_path / "x.csv")


def test_best_scale_detections_is_weighted_least_squares(rng):
    model = rng.uniform(0.5, 2.0, (5, 6))
    value = 3e-4 * model[0] * (1 + 0.03 * rng.normal(size=6))
    obs = _obs(value, 0.03 * value)
    scale, chi2, dof = chi_square_with_best_scale(model, obs)
    assert dof == 5
    for i in range(5):
        res = minimize_scalar(lambda s: chi_square(s * model[i], obs), bracket=(0, 1e-3), tol=1e-12)
        assert scale[i] == pytest.approx(res.x, rel=1e-7)
        assert chi2[i] == pytest.approx(res.fun, rel=1e-9, abs=1e-9)
        # and chi2 at the optimum equals the direct sum
        assert chi2[i] == pytest.approx(np.sum(((scale[i] * model[i] - value) / (0.03 * value)) ** 2), rel=1e-10)


def test_best_scale_with_limits_is_the_joint_minimum(rng):
    model = rng.uniform(0.5, 2.0, (6, 6))
    value = 3e-4 * model[0]
    limits = np.array([0, 0, 0, 0, 1, 1], bool)
    # limits set near or below the scaled model so that they bite
    value = np.where(limits, 0.8 * value, value * (1 + 0.03 * rng.normal(size=6)))
    obs = _obs(value, np.where(limits, value / 3, 0.03 * value), limits)
    scale, chi2, dof = chi_square_with_best_scale(model, obs)
    assert dof == 3
    for i in range(6):
        res = minimize_scalar(lambda s: chi_square(s * model[i], obs), bounds=(0, 1e-3), method="bounded",
                              options={"xatol": 1e-15})
        assert chi2[i] <= res.fun + 1e-9
        assert scale[i] == pytest.approx(res.x, rel=1e-5)
    # the limit term is -2 ln Phi((L - s m)/sigma_L)
    s = scale[0]
    z = (value[limits] - s * model[0][limits]) / (value[limits] / 3)
    det = ~limits
    direct = np.sum(((s * model[0][det] - value[det]) / (0.03 * value[det])) ** 2) - 2 * np.sum(log_ndtr(z))
    assert chi2[0] == pytest.approx(direct, rel=1e-12)


def test_best_scale_is_never_negative():
    obs = _obs(np.array([1e-4, -1e-4, 1e-4]), np.full(3, 1e-5))
    scale, chi2, _ = chi_square_with_best_scale(np.array([[0.0, 1.0, 0.0]]), obs)
    assert scale[0] == 0.0
    assert chi2[0] == pytest.approx(300.0)


def test_systematic_term_and_normalisation():
    value = np.array([1e-4, 2e-4, 3e-4])
    obs = _obs(value, np.full(3, 1e-5))
    sig = effective_errors(obs, 0.1)
    assert np.allclose(sig, np.sqrt(1e-10 + (0.1 * value) ** 2))
    lnl = ln_likelihood(value[None, :], obs, 0.1)
    assert lnl[0] == pytest.approx(-np.sum(np.log(sig)) - 1.5 * math.log(2 * math.pi))


def test_model_shape_is_checked():
    obs = _obs(np.ones(3), np.ones(3))
    with pytest.raises(InputError, match="shape"):
        chi_square_with_best_scale(np.ones((2, 4)), obs)
