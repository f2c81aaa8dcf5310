"""Generate the joint scattered-light + thermal example from known truth.

Everything here is INVENTED: the star and its dust ring do not exist. The
script writes, into ``examples/joint_ring/``:

``colours.csv``
    disk/star brightness ratios of the ring in 5 near-infrared bands (kind
    ``contrast_ratio``), 3% errors;
``sed.csv``
    the ring's thermal flux densities (kind ``flux``, in mJy) in 5 bands from
    12 um to 250 um, 5% errors, and a 3-sigma upper limit at 500 um;
``joint_fit.toml``
    the fit description: star (with luminosity), the two candidate materials
    (amorphous silica and amorphous carbon, each with its extrapolation rule
    beyond its data), priors (the ring radius with a uniform prior), the
    thermal table's distance and calibration error, "each removed in turn".

How the truth is made
---------------------
The ring's dust is ``TRUTH``: a mixture of 75% amorphous silica and 25%
amorphous carbon (volume fractions of the solid), porosity 0.3, a_min 3 um,
q 3.5, a_max 1 mm, at 60 au from a 5800 K, 1 L_sun blackbody star seen from
20 pc. Its scattered-light ratios come from motes' disk-colour model with the
*exact* optics path, times ``SCALE``; its thermal band fluxes from the exact
thermal path (:func:`motes.dust.model.thermal.compute_thermal`) for a total
grain cross-section of ``CROSS_SECTION_AU2``. Each value is multiplied by
(1 + noise x Gaussian) from a seeded generator; the quoted errors are the
noise fraction of the noiseless value. The fits use the fast paths, so the
data are not made with the fitted model's own numerics.

Run from the repository root::

    python examples/make_joint_example.py            # writes examples/joint_ring/
    python examples/make_joint_example.py --out DIR  # elsewhere

Re-running reproduces the files exactly.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

SEED = 20261213
OUT = Path(__file__).resolve().parent / "joint_ring"

STAR = {"teff": 5800.0, "luminosity": 1.0, "mass": 1.0, "distance_pc": 20.0}
MATERIALS = {"silicate": ("silica_amorphous", "dielectric"), "carbon": ("carbon_amorphous", "conductor")}
#: The invented ring (truth). Fractions: volume fractions of the solid.
TRUTH = {"fractions": {"silicate": 0.75, "carbon": 0.25}, "porosity": 0.3, "a_min": 3.0, "q": 3.5,
         "a_max": 1000.0, "ring_radius": 60.0}
SCALE = 2.0e-3             # scattered light: disk/star ratio per unit of the model's output
CROSS_SECTION_AU2 = 5.0    # thermal: total grain cross-section [au^2]
SCATTERED_BANDS = ("2mass_j", "2mass_h", "2mass_ks", "wise_w1", "spitzer-irac_4.5")
THERMAL_BANDS = ("wise_w3", "wise_w4", "herschel-pacs_70", "herschel-pacs_160", "herschel-spire_250")
THERMAL_LIMIT_BANDS = ("herschel-spire_500",)
NOISE_SCATTERED, NOISE_THERMAL, CALIBRATION = 0.03, 0.05, 0.05


def description_text(nlive: int = 100) -> str:
    """The example's fit description."""
    mats = "\n".join(f'[[materials]]\nname = "{n}"\nsource = "{src}"\nextrapolation = "{rule}"\n'
                     for n, (src, rule) in MATERIALS.items())
    return f"""# An invented debris ring fitted in scattered light and thermal emission together
# (made by examples/make_joint_example.py from known truth; see docs/fit.md, "Joint fit").
# Run:  motes fit examples/joint_ring/joint_fit.toml

[data]
photometry = "colours.csv"       # scattered light: disk/star ratios
thermal = "sed.csv"              # thermal SED: flux densities (kind "flux", mJy)

[star]
teff = {STAR['teff']}
luminosity = {STAR['luminosity']}   # [L_sun]: required by the thermal side
mass = {STAR['mass']}

{mats}
[mixing]
rule = "bruggeman"

[geometry]
angles_deg = [90.0]

[parameters]
porosity = {{ prior = "uniform", lower = 0.0, upper = 0.8 }}
a_min = {{ prior = "log-uniform", lower = 0.5, upper = 20.0 }}
q = {TRUTH['q']}
ring_radius = {{ prior = "uniform", lower = 30.0, upper = 90.0 }}   # [au]; the SED alone is degenerate with a_min

[thermal]
distance_pc = {STAR['distance_pc']}
calibration = {CALIBRATION}              # fractional calibration error of the far-IR photometry

[models]
set = "each-removed"

[sampler]
nlive = {nlive}
dlogz = 0.5
seed = 1
"""


def make(out: Path, nlive: int = 100) -> dict:
    """Write the example into ``out``; return the noiseless values."""
    from motes.dust.model.description import parse_model_description
    from motes.dust.model.mixture import MixtureParameters
    from motes.dust.model.thermal import ThermalSettings, compute_thermal
    from motes.photometry.bands import get_band

    import tomllib

    out.mkdir(parents=True, exist_ok=True)
    text = description_text(nlive)
    desc = parse_model_description(tomllib.loads(text), base_dir=out, source="joint_fit.toml")
    rng = np.random.default_rng(SEED)
    fr = [TRUTH["fractions"][m] for m in MATERIALS]
    model = desc.build_model(bands=[get_band(b) for b in SCATTERED_BANDS], method="exact")
    ratio = model.flux_ratio([fr], TRUTH["porosity"], TRUTH["a_min"], TRUTH["q"], a_max=TRUTH["a_max"])[0] * SCALE
    bands = [get_band(b) for b in THERMAL_BANDS + THERMAL_LIMIT_BANDS]
    settings = ThermalSettings((TRUTH["ring_radius"],), None, tuple(bands), None, CROSS_SECTION_AU2,
                               STAR["distance_pc"], {})
    th = compute_thermal(desc, MixtureParameters(tuple(fr), TRUTH["porosity"], TRUTH["a_min"], TRUTH["q"],
                                                 TRUTH["a_max"]), settings)
    flux_mjy = th.band_disk * 1e3
    lines = ["# INVENTED scattered-light colours (examples/make_joint_example.py)", "band,kind,value,error"]
    noisy = ratio * (1 + NOISE_SCATTERED * rng.normal(size=ratio.size))
    lines += [f"{b},contrast_ratio,{v:.6e},{NOISE_SCATTERED * r:.6e}" for b, v, r in zip(SCATTERED_BANDS, noisy, ratio)]
    (out / "colours.csv").write_text("\n".join(lines) + "\n")
    lines = ["# INVENTED thermal SED of the same ring, disk only (examples/make_joint_example.py)",
             "band,kind,value,error,unit,limit_sigma"]
    n_det = len(THERMAL_BANDS)
    noisy = flux_mjy[:n_det] * (1 + NOISE_THERMAL * rng.normal(size=n_det))
    lines += [f"{b},flux,{v:.5g},{NOISE_THERMAL * f:.4g},mJy," for b, v, f in zip(THERMAL_BANDS, noisy, flux_mjy)]
    for b, f in zip(THERMAL_LIMIT_BANDS, flux_mjy[n_det:]):   # a 3-sigma limit well above the truth
        lines.append(f"{b},flux,{3 * f:.4g},,mJy,3")
    (out / "sed.csv").write_text("\n".join(lines) + "\n")
    (out / "joint_fit.toml").write_text(text)
    return {"scattered": ratio, "thermal_mjy": flux_mjy, "fractional_luminosity": th.fractional_luminosity,
            "radius_over_blackbody_radius": th.radius_ratio}


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT)
    parser.add_argument("--nlive", type=int, default=100)
    args = parser.parse_args(argv)
    values = make(args.out, args.nlive)
    print(f"wrote {args.out}: L_dust/L_star = {values['fractional_luminosity']:.3g}, "
          f"r/r_bb = {values['radius_over_blackbody_radius']:.3g}")


if __name__ == "__main__":
    main()
