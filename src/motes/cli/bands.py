"""``motes bands``: list the known photometric bands or describe one."""

from __future__ import annotations

import argparse

__all__ = ["register"]

_EPILOG = """\
examples:
  motes bands                              table of every standard band
  motes bands 2MASS.Ks                     one band in detail
  motes bands WISE.W1 --plot w1.png        ... and save a plot of its curve
  motes bands --counting energy            zero points for energy-counting detectors
  motes bands --target target.toml         the user bands defined in a target file
  motes bands Lp --target target.toml --plot lp.png
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "bands",
        help="list photometric bands, zero points and Vega magnitudes",
        description=(
            "List the standard photometric bands motes knows (pivot wavelength, FWHM, Vega zero point, "
            "AB-Vega offset, the magnitude the system assigns to Vega, the kind of curve), or describe "
            "one band and optionally plot its curve. User bands (curve files, top-hat or Gaussian "
            "bands) are read from a target file with --target."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("name", nargs="?", help="a band name (case-insensitive), e.g. 2MASS.Ks")
    p.add_argument("--target", metavar="FILE", help="target TOML file whose [bands] tables to include")
    p.add_argument("--counting", choices=("photon", "energy"), default=None,
                   help="detector counting mode for band averages (default: photon; user bands keep "
                        "the mode set in the target file)")
    p.add_argument("--plot", metavar="FILE", help="save a plot of the band's curve (needs NAME)")
    p.set_defaults(func=_run)


def _run(args) -> int:
    from ..errors import InputError
    from ..photometry import band_table, format_band, format_band_table, get_band, read_user_bands
    from ..report.band_figures import plot_band

    custom = read_user_bands(args.target) if args.target else {}
    if args.name is None:
        if args.plot:
            raise InputError("--plot needs a band NAME (e.g. motes bands 2MASS.Ks --plot ks.png)")
        if args.target and not custom:
            print(f"{args.target} defines no user bands; the standard bands are:")
        if custom:
            table = band_table(list(custom.values()), counting=args.counting)
        else:
            table = band_table(counting=args.counting or "photon")
        print(format_band_table(table))
        return 0
    if args.name in custom and args.counting is None:
        band = custom[args.name]
    else:
        band = get_band(args.name, custom, counting=args.counting or "photon")
    plotted = plot_band(band, args.plot) if args.plot else None
    print(format_band(band))
    if plotted is not None:
        print(f"plot written to {plotted}")
    return 0
