"""Generate the photometry demo inputs from known truth.

Everything here is INVENTED: the host star "Velmora" and its companion
"Velmora b" do not exist. The script writes, into ``src/motes/demo/data/``:

``companion_target.toml``
    the target description (host catalogue magnitudes, parallax, Teff, user bands);
``companion_photometry.ecsv``
    the companion's photometry (contrasts, one flux ratio, one upper limit);
``companion_nb3p1_curve.txt``
    an invented narrow-band filter curve near 3.1 um.

How the truth is made
---------------------
* Host: a K-type star modelled as a blackbody of ``HOST["teff_k"]`` and radius
  ``HOST["radius_rsun"]`` at ``HOST["distance_pc"]``. Its catalogue magnitudes
  are the blackbody's synthetic Vega magnitudes in a few standard bands plus
  Gaussian noise of the quoted errors; its parallax is 1000/d plus noise.
  (A real star is not a blackbody; here it is, so motes' blackbody synthesis of
  the host magnitude in L′ and the narrow band is exact up to noise.)
* Companion: an invented early-L dwarf whose absolute magnitudes are in
  the ``TRUTH`` dict below (the one place to change them), taken from motes'
  built-in dwarf sequence at ``COMPANION_TYPE``. Contrasts are
  (companion - host) apparent magnitudes plus Gaussian noise from a seeded rng.

Run from the repository root::

    python examples/make_photometry_demo.py

Re-running reproduces the committed files exactly (tests check this).
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from motes.companion import load_dwarf_sequence
from motes.photometry import (
    distance_modulus,
    get_band,
    read_band_curve,
    top_hat_band,
)
from motes.photometry.spectra import blackbody_flux_lambda

SEED = 20240611
OUT = Path(__file__).resolve().parents[1] / "src" / "motes" / "demo" / "data"

#: The invented host star (truth).
HOST = {
    "name": "Velmora",
    "teff_k": 4600.0,
    "radius_rsun": 0.74,
    "distance_pc": 31.4,
    "parallax_error_mas": 0.035,
}
#: Host catalogue bands and their quoted 1-sigma errors [mag].
HOST_CATALOGUE = {"gaia_g": 0.003, "2mass_j": 0.024, "2mass_h": 0.032, "2mass_ks": 0.021}

#: TRUTH: absolute Vega magnitudes of the invented companion "Velmora b", an
#: invented L0.5 dwarf. I, J, H and Ks are motes' own mean dwarf sequence
#: (src/motes/data/dwarf_sequence.txt, the published sequence of Pecaut & Mamajek
#: 2013 / Mamajek 2024.05.15) interpolated at L0.5 and rounded to 1 mmag, so
#: `motes classify` should recover about L0.5; NB3p1 and Lp (which the sequence
#: does not tabulate) are invented colours typical of early-L dwarfs relative to
#: Ks: Ks - NB3p1 = 0.35, Ks - Lp = 0.55 (from memory, approximate).
#: Replace this dict (and only this dict) to change the companion.
COMPANION_TYPE = "L0.5"
_SEQUENCE = load_dwarf_sequence()


def _sequence_mag(band: str) -> float:
    """Absolute magnitude of the sequence at COMPANION_TYPE, rounded to 1 mmag."""
    return round(float(_SEQUENCE.value(band, COMPANION_TYPE)), 3)


TRUTH = {
    "cousins_i": _sequence_mag("cousins_i"),
    "2mass_j": _sequence_mag("2mass_j"),
    "2mass_h": _sequence_mag("2mass_h"),
    "2mass_ks": _sequence_mag("2mass_ks"),
    "NB3p1": round(_sequence_mag("2mass_ks") - 0.35, 3),
    "Lp": round(_sequence_mag("2mass_ks") - 0.55, 3),
}

#: How each companion band is measured: (kind, 1-sigma error). The contrast
#: errors are in mag; the flux ratio's error is relative. cousins_i is a
#: non-detection reported as a 5-sigma flux limit with noise LIMIT_NOISE_MJY.
MEASURED = {
    "2mass_j": ("contrast_mag", 0.06),
    "2mass_h": ("contrast_ratio", 0.07),
    "2mass_ks": ("contrast_mag", 0.05),
    "NB3p1": ("contrast_mag", 0.15),
    "Lp": ("contrast_mag", 0.08),
}
LIMIT_BAND, LIMIT_SIGMA, LIMIT_NOISE_MJY = "cousins_i", 5.0, 0.09

#: User bands: an L′-like top-hat 3.4-4.1 um, and a narrow band from a curve file.
LP = {"centre_um": 3.75, "width_um": 0.7}
NB_CURVE = {"centre_um": 3.10, "fwhm_um": 0.06, "file": "companion_nb3p1_curve.txt"}

_RSUN_PC = 2.25461e-8  # solar radius in parsec (IAU 2015 nominal R_sun / pc)


def _nb_curve_text() -> str:
    """An invented narrow-band curve: flat top with cosine edges, 2 nm steps."""
    c, w = NB_CURVE["centre_um"], NB_CURVE["fwhm_um"]
    wl = np.round(np.arange(c - w, c + w + 1e-9, 0.002), 4)
    x = np.clip((np.abs(wl - c) - 0.3 * w) / (0.4 * w), 0.0, 1.0)
    t = 0.82 * 0.5 * (1 + np.cos(np.pi * x))
    lines = [
        "# Invented narrow-band filter near 3.1 um for the motes demo (not a real instrument).",
        "# wavelength_unit: um",
        "# response: photon",
        "# wavelength  throughput",
    ]
    lines += [f"{a:.4f}  {b:.4f}" for a, b in zip(wl, t)]
    return "\n".join(lines) + "\n"


def _host_magnitude(band) -> float:
    """Synthetic Vega magnitude of the host blackbody in ``band``."""
    scale = math.pi * (HOST["radius_rsun"] * _RSUN_PC / HOST["distance_pc"]) ** 2
    mean = band.average_flux_lambda_of(lambda wl: scale * blackbody_flux_lambda(wl, HOST["teff_k"]))
    return float(band.vega_magnitude_of(mean))


def _target_text(host_mags, parallax) -> str:
    mags = "\n".join(f'"{name}" = [{m:.3f}, {e:.3f}]' for name, (m, e) in host_mags.items())
    return f'''# motes target description - INVENTED demo system (generated by examples/make_photometry_demo.py)

[companion]
name = "Velmora b"
photometry = "companion_photometry.ecsv"

[host]
name = "Velmora"
parallax_mas = [{parallax:.4f}, {HOST["parallax_error_mas"]:.3f}]
teff_k = {HOST["teff_k"]:.0f}   # used to synthesise host magnitudes in Lp and NB3p1

[host.magnitudes]   # catalogue Vega magnitudes: band = [magnitude, 1-sigma]
{mags}

[bands.Lp]          # an L'-like band, approximated as a top-hat
shape = "top-hat"
centre_um = {LP["centre_um"]}
width_um = {LP["width_um"]}

[bands.NB3p1]       # a narrow band near 3.1 um, from a curve file
shape = "curve"
file = "{NB_CURVE["file"]}"
wavelength_unit = "um"
response = "photon"

[settings]
synthesis_systematic_mag = 0.15   # the default, written out
'''


def generate(out: Path = OUT) -> list[Path]:
    """Write the demo files into ``out``; return their paths."""
    from astropy.table import MaskedColumn, Table

    rng = np.random.default_rng(SEED)
    out.mkdir(parents=True, exist_ok=True)
    curve_path = out / NB_CURVE["file"]
    curve_path.write_text(_nb_curve_text())
    bands = {name: get_band(name) for name in set(HOST_CATALOGUE) | set(TRUTH) - {"Lp", "NB3p1"}}
    bands["Lp"] = top_hat_band("Lp", LP["centre_um"], LP["width_um"])
    bands["NB3p1"] = read_band_curve(curve_path, name="NB3p1")

    mu_true = float(distance_modulus(HOST["distance_pc"]))
    host_true = {name: _host_magnitude(band) for name, band in bands.items()}
    host_mags = {name: (host_true[name] + rng.normal(0.0, err), err) for name, err in HOST_CATALOGUE.items()}
    parallax = 1000.0 / HOST["distance_pc"] + rng.normal(0.0, HOST["parallax_error_mas"])

    rows = []
    for name, (kind, err) in MEASURED.items():
        delta = TRUTH[name] + mu_true - host_true[name]
        if kind == "contrast_ratio":
            ratio = 10 ** (-0.4 * delta) * (1 + rng.normal(0.0, err))
            rows.append((name, kind, float(f"{ratio:.4e}"), float(f"{ratio * err:.2e}"), None, None))
        else:
            rows.append((name, kind, round(delta + rng.normal(0.0, err), 3), err, None, None))
    flux_true_mjy = 1e3 * bands[LIMIT_BAND].vega_zero_point_jy * 10 ** (-0.4 * (TRUTH[LIMIT_BAND] + mu_true))
    if not flux_true_mjy < LIMIT_SIGMA * LIMIT_NOISE_MJY:
        raise RuntimeError("the invented upper limit must lie above the true flux")
    rows.append((LIMIT_BAND, "flux", round(LIMIT_SIGMA * LIMIT_NOISE_MJY, 4), None, "mJy", LIMIT_SIGMA))
    rows.sort(key=lambda r: bands[r[0]].pivot_wavelength)

    table = Table()
    table["band"] = [r[0] for r in rows]
    table["kind"] = [r[1] for r in rows]
    table["value"] = [r[2] for r in rows]
    table["error"] = MaskedColumn([r[3] or 0.0 for r in rows], mask=[r[3] is None for r in rows])
    table["unit"] = MaskedColumn([r[4] or "" for r in rows], mask=[r[4] is None for r in rows])
    table["limit_sigma"] = MaskedColumn([r[5] or 0.0 for r in rows], mask=[r[5] is None for r in rows])
    table.meta["comments"] = [
        "Photometry of the INVENTED companion Velmora b (motes demo; examples/make_photometry_demo.py).",
        "contrast_mag: companion - host [mag]; contrast_ratio: companion/host flux ratio; "
        "flux with limit_sigma: N-sigma upper limit.",
    ]
    table_path = out / "companion_photometry.ecsv"
    table.write(table_path, format="ascii.ecsv", overwrite=True)

    target_path = out / "companion_target.toml"
    target_path.write_text(_target_text(host_mags, parallax))
    return [target_path, table_path, curve_path]


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description="Generate the motes photometry demo inputs from known truth.")
    parser.add_argument("--out", type=Path, default=OUT, help=f"output folder (default: {OUT})")
    args = parser.parse_args(argv)
    for path in generate(args.out):
        print(f"wrote {path}")


if __name__ == "__main__":
    main()
