"""``motes optics``: per-band scattered-light optics of one dust mixture."""

from __future__ import annotations

import argparse
from pathlib import Path

from .figure_options import add_figure_formats_option, figure_formats

__all__ = ["register"]

_EPILOG = """\
examples:
  motes optics mixture.toml                       print per-band optics, write table and figures
                                                  into ./mixture_optics/
  motes optics mixture.toml --output optics_run   ... into another folder
  motes optics mixture.toml --reference-band 2mass_h --no-figures

The mixture file is a dust-model description ([star], [[materials]], [mixing],
[geometry], [model] bands, user [bands.NAME]) plus a [mixture] table:

  [mixture]
  fractions = { silicate = 0.7, ice = 0.3 }   # volume fractions of the solid
  porosity = 0.2                              # vacuum fraction of the whole grain
  a_min = 1.0                                 # um
  q = 3.5

With [star] luminosity and a [thermal] table the same grains' thermal emission
is added (grain temperatures against size, thermal SED, band fluxes, excess over
the photosphere, L_dust/L*, ring radius over blackbody radius):

  [thermal]
  radius_au = 60.0                            # ring radius; [r_in, r_out] for a belt
  bands = ["wise_w4", "herschel-pacs_70"]     # standard or [bands.NAME] bands
  dust_mass_mearth = 0.01                     # or cross_section_au2 = ...
  distance_pc = 20.0                          # optional: fluxes in Jy

Every material then needs constants from 0.05 um to 2 cm, or an extrapolation
rule in its [[materials]] table (extrapolation = "dielectric" or "conductor").

See docs/optics.md. Real grains are not Mie spheres: read the notes printed
with the results.
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "optics",
        help="scattered-light colours, albedo and g of one dust mixture, per band",
        description=(
            "Compute, for one porous dust mixture and size distribution, the disk/star flux "
            "ratio per unit grain cross-section in each band, the colours relative to a "
            "reference band, the single-scattering albedo and asymmetry parameter, the "
            "effective refractive index at each band's pivot wavelength, the mixture density "
            "and (when the star's luminosity and mass are given) the radiation-pressure "
            "blow-out size; with the Mie phase function also the polarised intensity and the "
            "degree of polarisation per band. Uses direct Mie calculations (miepython). Writes a "
            "table (ECSV) and figures: reflectance against wavelength with the bands, Q and albedo "
            "against grain size, and (Mie phase function) total and polarised intensity with the "
            "degree of polarisation against wavelength."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("mixture", help="mixture description (TOML)")
    p.add_argument("--output", "-o", metavar="DIR",
                   help="folder for the table and figures (default: ./<mixture stem>_optics)")
    p.add_argument("--reference-band", metavar="BAND",
                   help="band the colours are relative to (default: [mixture] reference_band, else the first)")
    p.add_argument("--no-figures", action="store_true", help="write the table only")
    add_figure_formats_option(p)
    p.set_defaults(func=_run)


def _run(args) -> int:
    import dataclasses

    from ..dust.model.mixture import compute_mixture_optics, read_mixture_file
    from ..files import check_output_folder, default_output_folder
    from ..report.optics_text import format_mixture_optics, write_mixture_outputs

    from ..dust.model.thermal import compute_thermal, read_thermal_settings

    path = Path(args.mixture)
    description, mixture = read_mixture_file(path)
    thermal_settings = read_thermal_settings(path, description)
    if args.reference_band:
        mixture = dataclasses.replace(mixture, reference_band=args.reference_band)
    folder = Path(args.output) if args.output else default_output_folder(path, "optics")
    check_output_folder(folder, "--output")   # before the work
    result = compute_mixture_optics(description, mixture)
    thermal = compute_thermal(description, mixture, thermal_settings) if thermal_settings else None
    print(format_mixture_optics(result))
    if thermal is not None:
        from ..report.thermal_text import format_thermal

        print(format_thermal(thermal, printed_notes=result.notes))
    written = write_mixture_outputs(result, folder, stem=path.stem, figures=not args.no_figures,
                                    formats=figure_formats(args))
    if thermal is not None:
        from ..report.thermal_text import scattered_flux_ratio, write_thermal_outputs

        scattered = (result.bands, scattered_flux_ratio(thermal, result.optics.flux_ratio))
        written += write_thermal_outputs(thermal, folder, stem=path.stem, figures=not args.no_figures,
                                         scattered=scattered, provenance=result.provenance(),
                                         formats=figure_formats(args))
    print("")
    for w in written:
        print(f"wrote {w}")
    return 0
