"""``motes fit``: rank dust compositions of a debris disk by Bayesian evidence."""

from __future__ import annotations

import argparse
from pathlib import Path

from .figure_options import add_figure_formats_option, figure_formats

__all__ = ["register"]

_EPILOG = """\
examples:
  motes fit disk_fit.toml                       run every model, results in ./disk_fit_fit/
  motes fit disk_fit.toml --output run1 --workers 2
  motes fit disk_fit.toml --output run1         after an interruption: finished models are kept,
                                                the interrupted one continues from its checkpoint
  motes fit disk_fit.toml --output run1 --fresh delete run1's previous fit and start over

The description (TOML) names the disk photometry, the star, the candidate materials,
the priors and the model set ("each-removed", "all-subsets" or an explicit list);
see docs/fit.md. With [data] thermal = "sed.csv" the thermal SED of the same grains is
fitted jointly, and the verdicts say which data drove them (docs/fit.md, "Joint fit"). Output: ranking.ecsv, verdicts.ecsv, summary.txt (with what to cite),
figures, report.html (one self-contained page of the run), and per model the posterior
samples, summaries and best fit.
"""


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "fit",
        help="fit disk colours with dust mixtures and rank compositions by evidence",
        description=(
            "Fit a debris disk's scattered-light colours with Mie-scattering dust mixtures by nested "
            "sampling (dynesty), one run per model of the comparison; rank the models by Bayesian "
            "evidence and say, per material, whether the data need it."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("description", type=Path, help="fit description (TOML)")
    parser.add_argument("--output", "-o", type=Path, default=None, metavar="DIR",
                        help="run folder (default: ./<description stem>_fit)")
    parser.add_argument("--workers", "-w", type=int, default=1, metavar="N",
                        help="processes evaluating the likelihood (default 1)")
    mode = parser.add_mutually_exclusive_group()
    mode.add_argument("--resume", dest="mode", action="store_const", const="resume",
                      help="continue the fit found in the run folder (the default)")
    mode.add_argument("--fresh", dest="mode", action="store_const", const="fresh",
                      help="delete the run folder's previous fit and start over")
    parser.add_argument("--no-figures", action="store_true", help="skip the figures")
    add_figure_formats_option(parser)
    parser.add_argument("--no-spectra", action="store_true",
                        help="colour figure with band values only: skip evaluating the best model's "
                             "monochromatic spectrum (exact Mie; can take minutes)")
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress lines")
    parser.set_defaults(func=_run, mode="resume")


def _run(args) -> int:
    from ..dust.fit.run import FitRunSettings, run_fit
    from ..report.fit_text import format_fit_report, write_fit_report

    settings = FitRunSettings(output=args.output, workers=args.workers, resume=True,
                              fresh=(args.mode == "fresh"), progress=not args.quiet)
    echo = (lambda *a, **k: None) if args.quiet else print
    result = run_fit(args.description, settings, echo=echo)
    curves = None
    if not args.no_figures and not args.no_spectra:
        import time

        from ..dust.fit.curves import posterior_curves

        echo("evaluating the best model's spectrum for the colour figure (--no-spectra skips this) ...")
        start = time.monotonic()
        curves = posterior_curves(result, n_models=1)
        if curves:
            echo(f"  done in {time.monotonic() - start:.0f} s")
    result = write_fit_report(result, figures=not args.no_figures, formats=figure_formats(args), curves=curves)
    print(format_fit_report(result))
    return 0
