"""``motes photometry``: calibrate a target's photometry and write the table."""

from __future__ import annotations

import argparse

__all__ = ["register"]

_EPILOG = """\
examples:
  motes photometry companion_target.toml                 print the table, write ECSV into
                                                         ./companion_target_photometry/
  motes photometry companion_target.toml --output out/   write into out/
  motes photometry companion_target.toml --csv           also write a CSV copy

The target file format (TOML description + CSV/ECSV photometry table) is
described in docs/photometry.md; `motes demo` writes a complete example.
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "photometry",
        help="turn contrasts, magnitudes, fluxes and limits into calibrated photometry",
        description=(
            "Read a target description (TOML) and its photometry table, convert every row "
            "(contrast, Vega/AB magnitude, flux density, N-sigma upper limit) to a Vega apparent "
            "magnitude, a band-averaged flux density and an absolute magnitude with propagated "
            "uncertainties, print the table and write it as ECSV. The distance-modulus error is one "
            "term shared by all bands and is shown once, not folded into each band's error. Host "
            "magnitudes synthesised from a spectrum model and approximate bands are flagged."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("target", metavar="TARGET", help="target description (TOML)")
    p.add_argument("--output", "-o", metavar="DIR", default=None,
                   help="folder for the output tables (default: ./<target stem>_photometry)")
    p.add_argument("--csv", action="store_true", help="also write the table as CSV")
    p.set_defaults(func=_run)


def _run(args) -> int:
    from ..photometry import calibrate, read_target
    from ..report.photometry_text import format_photometry, write_photometry

    result = calibrate(read_target(args.target))
    print(format_photometry(result))
    from ..files import default_output_folder

    folder = args.output or default_output_folder(args.target, "photometry")
    paths = write_photometry(result, folder, csv=args.csv)
    print()
    for path in paths:
        print(f"wrote {path}")
    return 0
