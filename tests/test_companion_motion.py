"""Common proper motion: reading epochs, the background track, the test and `motes motion`."""

from __future__ import annotations

import math
import socket

import astropy.units as u
import numpy as np
import pytest

from motes.cli import main
from motes.companion import (
    HostMotion,
    MotionSettings,
    RelativeAstrometry,
    background_track,
    common_proper_motion,
    earth_barycentric_au,
    host_displacement,
    offsets_from_separation,
    read_astrometry,
)
from motes.errors import InputError
from motes.photometry import standard_band_names

#: An invented nearby host moving fast (a Gaia-like solution; numbers chosen, not measured).
HOST = HostMotion(ra_deg=201.35, dec_deg=-38.72, pm_ra_mas_yr=-185.4, pm_dec_mas_yr=92.1, parallax_mas=48.3,
                  pm_ra_mas_yr_error=0.04, pm_dec_mas_yr_error=0.03, parallax_mas_error=0.05)
EPOCHS = np.array([57820.3, 58210.6, 58580.2, 59310.9])     # MJD (TT), ~4 yr


def _closed_form(host, mjd, ref):
    """Green (1985, Spherical Astronomy): Δ = μ Δt + ϖ ΔP with the parallax factors
    P = (X sin α − Y cos α, X cos α sin δ + Y sin α sin δ − Z cos δ)."""
    a, d = math.radians(host.ra_deg), math.radians(host.dec_deg)

    def factors(m):
        x, y, z = earth_barycentric_au(m)
        return np.stack([x * math.sin(a) - y * math.cos(a),
                         x * math.cos(a) * math.sin(d) + y * math.sin(a) * math.sin(d) - z * math.cos(d)], 1)

    dt = (np.asarray(mjd) - ref) / 365.25
    return np.outer(dt, [host.pm_ra_mas_yr, host.pm_dec_mas_yr]) + host.parallax_mas * (factors(mjd) - factors([ref]))


@pytest.mark.parametrize("host", [
    HOST,
    HostMotion(10.0, 85.0, 400.0, -900.0, 180.0),          # near the pole, very nearby and fast
    HostMotion(300.0, 2.0, 5.0, -3.0, 10.0),               # near the equator, slow and distant
])
def test_track_matches_closed_form_parallax_factors(host):
    mjd = np.linspace(57000.0, 61000.0, 120)
    ours = host_displacement(host, mjd, 57000.0)
    # Independent: the closed form is first order in (Earth distance / star distance); our vector
    # geometry keeps the second-order terms, which are below 1e-3 mas for these hosts (ϖ² ~ 1e-12 rad
    # times offsets of ~1e4 mas) over 11 yr. Tolerance 0.005 mas: a small fraction of a mas.
    np.testing.assert_allclose(ours, _closed_form(host, mjd, 57000.0), rtol=0, atol=5e-3)
    # and the motion is not trivially small: the check compares real displacements
    assert np.ptp(ours, axis=0).max() > 30.0


def test_offsets_and_covariance_from_separation(rng):
    rho, srho, pa, spa, scale, north = 2350.0, 3.0, 123.0, 0.15, 0.002, 0.1
    off, cov = offsets_from_separation(rho, srho, pa, spa, scale, north)
    assert off[0] == pytest.approx([rho * math.sin(math.radians(pa)), rho * math.cos(math.radians(pa))])
    # Monte Carlo of the same measurement model: ρ(1 + s) with s ~ N(0, scale), PA + N(0, spa) + N(0, north)
    n = 200_000
    r = (rho + rng.normal(0, srho, n)) * (1 + rng.normal(0, scale, n))
    t = np.radians(pa + rng.normal(0, spa, n) + rng.normal(0, north, n))
    sample = np.cov(np.stack([r * np.sin(t), r * np.cos(t)]))
    # first-order propagation vs sampling: relative errors of the (co)variances ~ sqrt(2/n) = 0.3%,
    # non-linearity (σ_PA ~ 3e-3 rad) adds far less; 2% tolerance.
    scale_of = np.sqrt(np.outer(np.diag(sample), np.diag(sample))).max()   # covariance entries near 0
    np.testing.assert_allclose(cov[0], sample, rtol=0.02, atol=0.02 * scale_of)


def _synthetic(offsets, rng, sigma=1.5):
    cov = np.repeat(np.diag([sigma**2, sigma**2])[None], len(EPOCHS), 0)
    return RelativeAstrometry(EPOCHS, offsets + rng.normal(0, sigma, offsets.shape), cov)


def test_comoving_companion_is_accepted_and_background_star_rejected(rng):
    start = np.array([1210.0, -845.0])
    comoving = _synthetic(np.repeat(start[None], len(EPOCHS), 0), rng)
    result = common_proper_motion(comoving, HOST)
    assert result.verdict == "co-moving"
    assert result.ln_bayes_factor > math.log(MotionSettings().bayes_factor_threshold)
    assert result.p_comoving > 1e-3 and result.dof == 6
    # a background star: the track, plus its own proper motion of 3 mas/yr
    dt = (EPOCHS - EPOCHS[0]) / 365.25
    track = start - host_displacement(HOST, EPOCHS, EPOCHS[0]) + np.outer(dt, [3.0, -2.0])
    result = common_proper_motion(_synthetic(track, rng), HOST)
    assert result.verdict == "background"
    assert result.ln_bayes_factor < -math.log(MotionSettings().bayes_factor_threshold)
    assert result.motion_sigma > 100


def test_orbital_tolerance_admits_slow_orbital_motion(rng):
    dt = (EPOCHS - EPOCHS[0]) / 365.25
    orbiting = np.array([800.0, 300.0]) + np.outer(dt, [4.0, -3.0])   # 5 mas/yr of orbital motion
    strict = common_proper_motion(_synthetic(orbiting, rng, 0.5), HOST)
    loose = common_proper_motion(_synthetic(orbiting, rng, 0.5), HOST, MotionSettings(orbital_tolerance_mas_yr=5.0))
    assert strict.p_comoving < 1e-3          # a constant offset does not fit ...
    assert loose.verdict == "co-moving" and loose.p_comoving > 1e-3   # ... a stated tolerance does
    assert any("orbital motion of 5 mas/yr" in n for n in loose.notes)


def test_not_decisive_when_the_host_barely_moves(rng):
    slow = HostMotion(45.0, 20.0, 0.8, -0.5, 1.2)
    epochs = np.array([58000.0, 58200.0])
    astro = RelativeAstrometry(epochs, np.array([[500.0, 500.0], [500.5, 499.8]]),
                               np.repeat(np.diag([4.0, 4.0])[None], 2, 0))
    result = common_proper_motion(astro, slow)
    assert result.verdict == "not decisive" and result.motion_sigma < 3


def test_track_uncertainty_grows_with_the_background_prior():
    astro = RelativeAstrometry(EPOCHS, np.zeros((4, 2)) + 1000.0, np.repeat(np.eye(2)[None], 4, 0))
    narrow = background_track(astro, HOST, settings=MotionSettings(background_pm_sigma_mas_yr=0.0))
    wide = background_track(astro, HOST, settings=MotionSettings(background_pm_sigma_mas_yr=5.0))
    assert narrow.covariance[0] == pytest.approx(np.eye(2))
    span = (EPOCHS[-1] - EPOCHS[0]) / 365.25
    assert wide.covariance[-1, 0, 0] - narrow.covariance[-1, 0, 0] == pytest.approx(25.0 * span**2, rel=1e-9)


def test_quantities_at_the_boundary():
    host = HostMotion(201.35 * u.deg, -38.72 * u.deg, -0.1854 * u.arcsec / u.yr, 92.1 * u.mas / u.yr,
                      0.0483 * u.arcsec)
    assert host.pm_ra_mas_yr == pytest.approx(-185.4) and host.parallax_mas == pytest.approx(48.3)
    off, _ = offsets_from_separation(1.0 * u.arcsec, 1 * u.mas, 90 * u.deg, 0.1 * u.deg)
    assert off[0, 0] == pytest.approx(1000.0)
    with pytest.raises(InputError, match="pm_ra_mas_yr"):
        HostMotion(1.0, 2.0, 3.0 * u.s, 1.0, 1.0)


def test_runs_with_the_network_unreachable(monkeypatch, tmp_path):
    # this machine has no internet; the sockets are refused as well, and every attempt recorded
    # (a download error caught and turned into a warning would otherwise go unnoticed)
    from astropy.utils import iers

    attempts = []

    def refuse(*args, **kwargs):
        attempts.append(args)
        raise OSError("network access attempted in an offline test")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    before = iers.conf.auto_download
    path = tmp_path / "a.csv"
    path.write_text("date,sep_mas,sep_error,pa_deg,pa_error_deg\n2031-06-01,1200,2,30,0.1\n2033-02-01,1190,2,31,0.1\n")
    result = common_proper_motion(read_astrometry(path), HOST)      # dates beyond any bundled IERS table
    assert result.verdict == "co-moving" and not attempts
    assert iers.conf.auto_download == before    # switched off for the call only


# ------------------------------------------------------------------ reading files
def test_read_separation_table_in_arcsec_with_iso_dates(tmp_path):
    path = tmp_path / "astrometry.csv"
    path.write_text("# two epochs\ndate,sep_arcsec,sep_error,pa_deg,pa_error_deg,plate_scale_error,label\n"
                    "2018-03-01,1.2000,0.002,30.0,0.1,0.001,NACO\n"
                    "2021-05-20T06:00,1.1950,0.003,31.5,0.2,,SPHERE\n")
    astro = read_astrometry(path)
    assert astro.mjd == pytest.approx([58178.0, 59354.25])
    assert astro.offset[0] == pytest.approx([600.0, 1200.0 * math.cos(math.radians(30))])
    rho_var = 2.0**2 + (1200 * 0.001) ** 2                # [mas^2]: error plus plate scale
    pa_var = math.radians(0.1) ** 2 * 1200.0**2           # along the PA direction
    radial = np.array([0.5, math.cos(math.radians(30))])
    assert radial @ astro.covariance[0] @ radial == pytest.approx(rho_var)
    tangential = np.array([radial[1], -radial[0]])
    assert tangential @ astro.covariance[0] @ tangential == pytest.approx(pa_var)
    assert astro.labels == ("2018-03-01 NACO", "2021-05-20T06:00 SPHERE")


def test_read_offset_ecsv_with_mjd_and_jyear(tmp_path):
    from astropy.table import Table

    t = Table({"mjd": [57388.5, 58849.0], "dra_mas": [100.0, 120.0], "ddec_mas": [-50.0, -40.0],
               "dra_error": [1.0, 1.5], "ddec_error": [2.0, 2.5], "north_angle_error_deg": [0.0, 0.1]})
    t.write(tmp_path / "a.ecsv", format="ascii.ecsv")
    astro = read_astrometry(tmp_path / "a.ecsv")
    assert astro.errors[0] == pytest.approx([1.0, 2.0])
    w = np.array([-40.0, -120.0])            # d(offset)/d(north angle)
    assert astro.covariance[1] == pytest.approx(np.diag([2.25, 6.25]) + math.radians(0.1) ** 2 * np.outer(w, w))
    (tmp_path / "j.csv").write_text("jyear,dra_mas,ddec_mas,dra_error,ddec_error\n2016.0,1,2,1,1\n2020.5,1,2,1,1\n")
    assert read_astrometry(tmp_path / "j.csv").mjd[0] == pytest.approx(57388.5)   # J2016.0 = MJD 57388.5 TT


GOOD = "2018-03-01,1200,2,30.0,0.1\n"


@pytest.mark.parametrize("rows, where, column", [
    (GOOD, None, None),                                            # one epoch
    (GOOD + "2020-01-01,1190,2,360.0,0.1\n", "row 2", "pa_deg"),   # PA out of [0, 360)
    (GOOD + "2020-13-45,1190,2,30.0,0.1\n", "row 2", "date"),      # no such date
    (GOOD + "last spring,1190,2,30.0,0.1\n", "row 2", "date"),
    (GOOD + "2020-01-01,1190,,30.0,0.1\n", "row 2", "sep_error"),  # separation without an error
    (GOOD + "2020-01-01,1190,0,30.0,0.1\n", "row 2", "sep_error"),
])
def test_bad_astrometry_is_refused_naming_file_row_and_column(tmp_path, rows, where, column):
    path = tmp_path / "bad.csv"
    path.write_text("date,sep_mas,sep_error,pa_deg,pa_error_deg\n" + rows)
    with pytest.raises(InputError) as info:
        read_astrometry(path)
    message = str(info.value)
    assert str(path) in message
    if where is None:
        assert "two or more epochs" in message
    else:
        assert where in message and repr(column) in message, message


# ------------------------------------------------------------------ the command
def _target(folder, host_lines):
    band = standard_band_names()[0]
    (folder / "phot.csv").write_text(f"band,kind,value,error\n{band},vega_mag,17.2,0.05\n")
    (folder / "target.toml").write_text(
        '[companion]\nname = "Test B"\nphotometry = "phot.csv"\n\n[host]\nparallax_mas = [48.3, 0.05]\n'
        + host_lines)
    return folder / "target.toml"


HOST_LINES = ("ra_deg = 201.35\ndec_deg = -38.72\npm_ra_mas_yr = [-185.4, 0.04]\n"
              "pm_dec_mas_yr = [92.1, 0.03]\n")


def test_motion_command_prints_the_verdict_and_draws_the_figure(tmp_path, capsys):
    target = _target(tmp_path, HOST_LINES)
    astro = tmp_path / "astrometry.csv"
    track = np.array([1210.0, -845.0]) - host_displacement(HOST, EPOCHS, EPOCHS[0])
    astro.write_text("mjd,dra_mas,ddec_mas,dra_error,ddec_error\n"
                     + "".join(f"{m},{x:.2f},{y:.2f},1.5,1.5\n" for m, (x, y) in zip(EPOCHS, track)))
    out = tmp_path / "run"
    code = main(["motion", str(target), str(astro), "--output", str(out), "--orbital-tolerance", "1"])
    text = capsys.readouterr().out
    assert code == 0
    assert "VERDICT: background" in text and "rule: co-moving if B" in text
    assert "orbital motion of 1 mas/yr" in text
    assert (out / "Test_B_motion.png").stat().st_size > 10_000


@pytest.mark.parametrize("host_lines, astro_rows, message", [
    (HOST_LINES, GOOD, "two or more epochs"),
    (HOST_LINES, GOOD + "2020-01-01,1190,2,361,0.1\n", "'pa_deg'"),
    ("ra_deg = 201.35\n", GOOD + GOOD, "pm_ra_mas_yr"),
    (HOST_LINES.replace("201.35", "400.0"), GOOD + GOOD, "[0, 360)"),
])
def test_motion_command_bad_input_exits_2_and_writes_nothing(tmp_path, capsys, host_lines, astro_rows, message):
    target = _target(tmp_path, host_lines)
    astro = tmp_path / "astrometry.csv"
    astro.write_text("date,sep_mas,sep_error,pa_deg,pa_error_deg\n" + astro_rows)
    out = tmp_path / "never"
    code = main(["motion", str(target), str(astro), "--output", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and message in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_figure_of_a_comoving_companion(tmp_path, rng):
    from motes.report import plot_motion

    start = np.array([1210.0, -845.0])
    result = common_proper_motion(_synthetic(np.repeat(start[None], len(EPOCHS), 0), rng), HOST)
    path = plot_motion(result, tmp_path / "fig" / "m.png", title="co-moving")   # with the zoomed inset
    assert path.stat().st_size > 10_000
    assert sorted(p.name for p in path.parent.iterdir()) == ["m.png"]           # no temporary left behind
