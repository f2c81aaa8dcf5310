"""Calibration: conversions, round trips and the uncertainty model (Monte Carlo)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from motes.conventions import AB_ZERO_POINT_JY
from motes.photometry import (
    MAG_PER_LN,
    CalibrationSettings,
    HostMagnitude,
    HostStar,
    Measurement,
    Target,
    calibrate,
    delta_mag_to_ratio,
    distance_from_parallax,
    flux_to_magnitude,
    get_band,
    magnitude_to_flux,
    ratio_to_delta_mag,
    spectrum_colour,
    top_hat_band,
)
from motes.photometry.conversions import zero_point_error

J, H, KS, W1 = (get_band(n) for n in ("2mass_j", "2mass_h", "2mass_ks", "wise_w1"))
G, SDSS_I = get_band("gaia_g"), get_band("sdss_i")
LP = top_hat_band("Lp", 3.75, 0.7)


def _target(measurements, parallax=(25.0, 0.5), teff=4800.0, **host_kw):
    host = HostStar(
        name="test host",
        magnitudes=(HostMagnitude(J, 7.80, 0.03), HostMagnitude(H, 7.30, 0.04),
                    HostMagnitude(KS, 7.20, 0.02), HostMagnitude(SDSS_I, 9.10, 0.03, "AB")),
        parallax_mas=parallax[0], parallax_mas_error=parallax[1], teff=teff, **host_kw,
    )
    return Target("test companion", host, tuple(measurements), {"Lp": LP}, CalibrationSettings())


# ----------------------------------------------------------------- round trips
def test_magnitude_flux_magnitude_round_trip(rng):
    mags = rng.uniform(-2, 25, 1000)
    zps = rng.uniform(5, 4000, 1000)
    back = flux_to_magnitude(magnitude_to_flux(mags, zps), zps)
    assert np.allclose(back, mags, rtol=0, atol=1e-12)


def test_contrast_ratio_round_trip(rng):
    ratios = 10 ** rng.uniform(-8, 0, 1000)
    assert np.allclose(delta_mag_to_ratio(ratio_to_delta_mag(ratios)), ratios, rtol=1e-13, atol=0)


def test_contrast_to_magnitude_to_contrast_through_calibrate():
    delta, ratio = 8.123456789, 3.21e-4
    res = calibrate(_target([Measurement(J, "contrast_mag", delta, 0.05, row=1),
                             Measurement(H, "contrast_ratio", ratio, 1e-5, row=2)]))
    rj, rh = res.row("2mass_j"), res.row("2mass_h")
    assert rj.apparent_mag - rj.host_mag == pytest.approx(delta, abs=1e-12)
    assert float(delta_mag_to_ratio(rh.apparent_mag - rh.host_mag)) == pytest.approx(ratio, rel=1e-12)
    # and the flux ratio against the host's flux in the same band
    host_flux = float(magnitude_to_flux(7.30, H.vega_zero_point_jy))
    assert rh.flux_jy / host_flux == pytest.approx(ratio, rel=1e-12)


def test_every_input_kind_gives_the_same_source_back():
    m = 14.321  # Vega magnitude in Ks
    f = float(magnitude_to_flux(m, KS.vega_zero_point_jy))
    flam = float(KS.fnu_to_flux_lambda(f))
    rows = [
        Measurement(KS, "vega_mag", m, 0.05),
        Measurement(KS, "ab_mag", m + KS.ab_minus_vega, 0.05),
        Measurement(KS, "flux", f * 1e3, 0.01, unit="mJy"),
        Measurement(KS, "flux", flam * 1e-1, 1e-20, unit="erg s-1 cm-2 A-1"),  # 1 W m-2 um-1 = 0.1 erg s-1 cm-2 AA-1
        Measurement(KS, "flux", flam, 1e-20, unit="W m-2 um-1"),
        Measurement(KS, "contrast_mag", m - 7.20, 0.05),
        Measurement(KS, "contrast_ratio", 10 ** (-0.4 * (m - 7.20)), 1e-7),
    ]
    for meas in rows:
        r = calibrate(_target([meas])).rows[0]
        assert r.apparent_mag == pytest.approx(m, abs=1e-10), meas
        assert r.flux_jy == pytest.approx(f, rel=1e-10), meas


def test_absolute_magnitude_and_shared_distance_term():
    res = calibrate(_target([Measurement(J, "vega_mag", 15.0, 0.05), Measurement(KS, "vega_mag", 14.0, 0.04)],
                            parallax=(40.0, 0.4)))
    assert res.distance_pc == pytest.approx(25.0)
    assert res.distance_pc_error == pytest.approx(1000 * 0.4 / 40.0**2)
    mu = 5 * math.log10(25.0 / 10)
    assert res.distance_modulus == pytest.approx(mu)
    assert res.distance_modulus_error == pytest.approx(5 / math.log(10) * 0.01)
    for r, m, e in zip(res.rows, (15.0, 14.0), (0.05, 0.04)):
        assert r.absolute_mag == pytest.approx(m - mu)
        assert r.absolute_mag_error == r.apparent_mag_error == pytest.approx(e)  # no distance term folded in


def test_distance_in_pc_and_no_distance():
    res = calibrate(_target([Measurement(J, "vega_mag", 15.0, 0.05)], parallax=(math.nan, math.nan),
                            distance_pc=50.0, distance_pc_error=2.0))
    assert res.distance_modulus == pytest.approx(5 * math.log10(5.0))
    assert res.distance_modulus_error == pytest.approx(5 / math.log(10) * 2.0 / 50.0)
    res = calibrate(_target([Measurement(J, "vega_mag", 15.0, 0.05)], parallax=(math.nan, math.nan)))
    assert math.isnan(res.distance_modulus) and math.isnan(res.rows[0].absolute_mag)
    assert any("no distance" in n for n in res.notes)


def test_low_parallax_snr_is_warned():
    res = calibrate(_target([Measurement(J, "vega_mag", 15.0, 0.05)], parallax=(2.0, 0.8)))
    assert any("WARNING" in n and "parallax S/N" in n for n in res.notes)


def test_upper_limits():
    rows = [Measurement(KS, "contrast_mag", 9.0, math.nan, limit_sigma=5.0),
            Measurement(J, "flux", 0.2, math.nan, unit="mJy", limit_sigma=3.0)]
    res = calibrate(_target(rows))
    ks, j = res.row("2mass_ks"), res.row("2mass_j")
    assert ks.is_limit and ks.apparent_mag == pytest.approx(16.2) and math.isnan(ks.apparent_mag_error)
    assert ks.flux_jy_error == pytest.approx(ks.flux_jy / 5.0)
    assert j.flux_jy == pytest.approx(2e-4) and j.flux_jy_error == pytest.approx(2e-4 / 3)
    assert j.limit_sigma == 3.0 and any("3-sigma upper limit" in n for n in j.notes)


def test_synthesised_host_magnitude_is_flagged():
    res = calibrate(_target([Measurement(LP, "contrast_mag", 6.0, 0.1)]))
    r = res.rows[0]
    assert r.host_synthesised and r.band.approximate
    colour = spectrum_colour(LP, KS, teff=4800.0)
    assert r.host_mag == pytest.approx(7.20 + colour, abs=1e-12)
    assert r.host_mag_error == pytest.approx(math.hypot(0.02, 0.15))  # Ks error and default systematic
    assert any("synthesised" in n and "2mass_ks" in n for n in r.notes)
    assert any("approximate band" in n for n in r.notes)
    table = res.to_table()
    assert bool(table["host_synthesised"][0]) and bool(table["approximate_band"][0])
    assert table.meta["distance_modulus_error"] == res.distance_modulus_error


# ------------------------------------------------------------- Monte Carlo check
def test_propagated_uncertainties_match_monte_carlo_scatter(rng):
    """Perturb every input (measurement, host magnitude, synthesis systematic, zero point,
    parallax), push the draws through the same conversions, and compare the scatter with
    the propagated 1-sigma values (within 5%)."""
    n = 40000
    parallax, parallax_err = 25.0, 0.8
    sys_mag = 0.15
    rows = [
        Measurement(J, "vega_mag", 15.2, 0.05, row=1),
        Measurement(H, "ab_mag", 16.1, 0.06, row=2),
        Measurement(W1, "flux", 1.5, 0.08, unit="mJy", row=3),
        Measurement(KS, "contrast_mag", 7.0, 0.05, row=4),
        Measurement(G, "contrast_ratio", 2.0e-4, 1.5e-5, row=5),
        Measurement(LP, "contrast_mag", 6.0, 0.08, row=6),
        Measurement(SDSS_I, "contrast_mag", 9.5, 0.07, row=7),
    ]
    host_extra = (HostMagnitude(G, 9.60, 0.01),)
    target = _target(rows, parallax=(parallax, parallax_err))
    host = target.host
    target = Target(target.name, HostStar(host.name, host.magnitudes + host_extra, math.nan, math.nan,
                                          parallax, parallax_err, host.teff),
                    target.measurements, target.bands, target.settings)
    res = calibrate(target)

    def draw(value, sigma):
        return value + sigma * rng.standard_normal(n)

    def zp(band):
        return band.vega_zero_point_jy * (1 + zero_point_error(band) * rng.standard_normal(n))

    mu = 5 * np.log10(100.0 / draw(parallax, parallax_err))  # d = 1000/parallax -> 5 log10(d/10)
    sims = {}
    # Vega magnitude: flux = ZP 10^(-0.4 m)
    m = draw(15.2, 0.05)
    sims["2mass_j"] = (m, magnitude_to_flux(m, zp(J)))
    # AB magnitude: flux = 3631 Jy 10^(-0.4 m_AB); Vega magnitude through the (uncertain) Vega ZP
    f = magnitude_to_flux(draw(16.1, 0.06), AB_ZERO_POINT_JY)
    sims["2mass_h"] = (flux_to_magnitude(f, zp(H)), f)
    # flux density: Vega magnitude through the (uncertain) Vega ZP
    f = draw(1.5e-3, 0.08e-3)
    sims["wise_w1"] = (flux_to_magnitude(f, zp(W1)), f)
    # contrast on a Vega host magnitude
    m = draw(7.20, 0.02) + draw(7.0, 0.05)
    sims["2mass_ks"] = (m, magnitude_to_flux(m, zp(KS)))
    # flux ratio on a Vega host magnitude
    m = draw(9.60, 0.01) + ratio_to_delta_mag(draw(2.0e-4, 1.5e-5))
    sims["gaia_g"] = (m, magnitude_to_flux(m, zp(G)))
    # contrast on a synthesised host magnitude: Ks magnitude + blackbody colour + systematic
    colour = spectrum_colour(LP, KS, teff=host.teff)
    m = draw(7.20, 0.02) + colour + draw(0.0, sys_mag) + draw(6.0, 0.08)
    sims["Lp"] = (m, magnitude_to_flux(m, zp(LP)))
    # contrast on an AB host magnitude: the companion's AB magnitude is exact of the ZP
    m_ab = draw(9.10, 0.03) + draw(9.5, 0.07)
    f = magnitude_to_flux(m_ab, AB_ZERO_POINT_JY)
    sims["sdss_i"] = (flux_to_magnitude(f, zp(SDSS_I)), f)

    for name, (m_sim, f_sim) in sims.items():
        r = res.row(name)
        assert np.median(m_sim) == pytest.approx(r.apparent_mag, abs=0.01), name
        assert np.std(m_sim) == pytest.approx(r.apparent_mag_error, rel=0.05), f"{name} magnitude"
        assert np.std(f_sim) == pytest.approx(r.flux_jy_error, rel=0.05), f"{name} flux"
        # absolute magnitude: per-band error plus the shared distance term, in quadrature
        total = math.hypot(r.absolute_mag_error, res.distance_modulus_error)
        assert np.std(m_sim - mu) == pytest.approx(total, rel=0.05), f"{name} absolute"
    # the distance term is shared: it is the covariance of any two bands' absolute magnitudes
    a, b = sims["2mass_j"][0] - mu, sims["2mass_ks"][0] - mu
    assert np.cov(a, b)[0, 1] == pytest.approx(res.distance_modulus_error**2, rel=0.1)
    assert np.std(mu) == pytest.approx(res.distance_modulus_error, rel=0.05)


def test_parallax_propagation_formula():
    d, de, mu, mue = distance_from_parallax(10.0, 0.1)
    assert (d, de) == pytest.approx((100.0, 1.0))
    assert mu == pytest.approx(5.0) and mue == pytest.approx(2 * MAG_PER_LN * 0.01)
