"""``motes bands``: list or search the known photometric bands, or describe one."""

from __future__ import annotations

import argparse

__all__ = ["register"]

_EPILOG = """\
examples:
  motes bands                              table of every standard band
  motes bands 2mass_ks                     one band in detail (identifiers: facility[-instrument]_band)
  motes bands wise_w1 --plot w1.png        ... and save a plot of its curve
  motes bands ice                          bands over the 3 um water-ice feature
  motes bands nircam                       bands whose name, system or note contains a word
  motes bands --range 3.0 3.5              bands with a pivot wavelength in 3.0-3.5 um
  motes bands --facility mko               the bands of one facility (mko, jwst, hst-wfc3, ...)
  motes bands --counting energy            zero points for energy-counting detectors
  motes bands --target target.toml         the user bands defined in a target file
  motes bands Lp --target target.toml --plot lp.png
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "bands",
        help="list photometric bands, zero points and Vega magnitudes",
        description=(
            "List or search the standard photometric bands motes knows (pivot wavelength, FWHM, Vega "
            "zero point, AB-Vega offset, the magnitude the system assigns to Vega, the kind of curve), "
            "or describe one band and optionally plot its curve. User bands (curve files, top-hat or "
            "Gaussian bands) are read from a target file with --target."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("name", nargs="*", metavar="NAME|WORD",
                   help="a band identifier (case-insensitive), e.g. 2mass_ks, or words to search for "
                        "(e.g. ice, nircam)")
    p.add_argument("--range", nargs=2, type=float, metavar=("MIN", "MAX"), dest="wavelength_range",
                   help="only bands whose pivot wavelength lies between MIN and MAX um")
    p.add_argument("--facility", metavar="NAME",
                   help="only bands of one facility or system (e.g. jwst, jwst-nircam, hst, mko)")
    p.add_argument("--target", metavar="FILE", help="target TOML file whose [bands] tables to include")
    p.add_argument("--counting", choices=("photon", "energy"), default=None,
                   help="detector counting mode for band averages (default: photon; user bands keep "
                        "the mode set in the target file)")
    p.add_argument("--plot", metavar="FILE", help="save a plot of the band's curve (needs NAME)")
    p.set_defaults(func=_run)


def _run(args) -> int:
    from ..errors import InputError
    from ..photometry import (band_table, canonical_band_name, format_band, format_band_table, get_band,
                              read_user_bands, search_bands)
    from ..report.band_figures import plot_band

    custom = read_user_bands(args.target) if args.target else {}
    single = args.name[0] if len(args.name) == 1 else None
    is_band = single is not None and (single in custom or canonical_band_name(single) is not None)
    if not is_band:
        if args.plot:
            raise InputError("--plot needs a band NAME (e.g. motes bands 2mass_ks --plot ks.png)")
        searching = bool(args.name or args.wavelength_range or args.facility)
        if args.target and not custom and not searching:
            print(f"{args.target} defines no user bands; the standard bands are:")
        if custom and not searching:
            table = band_table(list(custom.values()), counting=args.counting)
        else:
            found = search_bands(args.name, args.wavelength_range, args.facility)
            table = band_table(found, counting=args.counting or "photon")
        print(format_band_table(table))
        return 0
    if single in custom and args.counting is None:
        band = custom[single]
    else:
        band = get_band(single, custom, counting=args.counting or "photon")
    plotted = plot_band(band, args.plot) if args.plot else None
    print(format_band(band))
    if plotted is not None:
        print(f"plot written to {plotted}")
    return 0
