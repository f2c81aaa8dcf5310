"""``motes motion``: is the companion co-moving with its host, or a background star?"""

from __future__ import annotations

from .figure_options import add_figure_formats_option, figure_formats

__all__ = ["register"]

_EPILOG = """\
examples:
  motes motion target.toml astrometry.csv
        co-moving vs background from two or more epochs of relative astrometry
  motes motion target.toml astrometry.csv --orbital-tolerance 2 --output run1/
        allow 2 mas/yr (1 sigma per axis) of orbital motion; figure into run1/

The target's [host] table needs ra_deg, dec_deg, pm_ra_mas_yr, pm_dec_mas_yr and
parallax_mas; the astrometry table format (dates, separation and position angle or
offsets, with errors) is described in docs/companion.md.
"""


def register(subparsers) -> None:
    import argparse

    p = subparsers.add_parser(
        "motion",
        help="common proper motion: co-moving companion or background star?",
        description=(
            "Compare the companion's offsets from its host at two or more epochs with a constant offset "
            "(co-moving, optionally with orbital motion) and with the track a distant background object "
            "would follow as the host moves (its proper motion and parallax; the Earth from astropy's "
            "built-in ephemeris, offline). Prints chi2 of each, the Bayes factor and the rule applied, "
            "and draws offsets with error ellipses against the background track."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("target", metavar="TARGET", help="target description (TOML) whose [host] gives position, "
                                                      "proper motion and parallax")
    p.add_argument("astrometry", metavar="ASTROMETRY", help="relative astrometry table (CSV or ECSV)")
    p.add_argument("--orbital-tolerance", metavar="MAS_YR", type=float, default=None,
                   help="orbital motion allowed to the co-moving hypothesis [mas/yr, 1 sigma per axis] "
                        "(default 0: constant offset)")
    p.add_argument("--background-pm-sigma", metavar="MAS_YR", type=float, default=None,
                   help="1-sigma per axis of a background star's own proper motion [mas/yr] (default 5)")
    p.add_argument("-o", "--output", metavar="DIR", default=None,
                   help="folder for the figure (default: ./<TARGET stem>_motion)")
    p.add_argument("--no-figure", action="store_true", help="do not draw the figure")
    add_figure_formats_option(p)
    p.set_defaults(func=_run)


def _run(args) -> int:
    from pathlib import Path

    from ..companion import HostMotion, MotionSettings, common_proper_motion, read_astrometry
    from ..photometry import read_target
    from ..report.motion_text import format_motion_test

    target = read_target(args.target)
    host = HostMotion.from_host(target.host, args.target)
    astrometry = read_astrometry(args.astrometry)
    overrides = {"orbital_tolerance_mas_yr": args.orbital_tolerance,
                 "background_pm_sigma_mas_yr": args.background_pm_sigma}
    settings = MotionSettings(**{k: v for k, v in overrides.items() if v is not None})
    result = common_proper_motion(astrometry, host, settings)
    print(format_motion_test(result, target.name))
    if not args.no_figure:
        from ..report.figure_files import figure_paths
        from ..report.motion_figures import motion_figure_name, plot_motion

        from ..files import default_output_folder

        folder = Path(args.output) if args.output else default_output_folder(args.target, "motion")
        plot_motion(result, folder / motion_figure_name(target.name), title=target.name, formats=figure_formats(args))
        for path in figure_paths(folder / motion_figure_name(target.name), figure_formats(args)):
            print(f"wrote {path}")
    return 0
