"""``motes grid``: run a resumable grid of dust mixtures, or summarise a grid store."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ..errors import InputError
from .figure_options import add_figure_formats_option, figure_formats

__all__ = ["register"]

#: The subcommand word of a summary, in both spellings of the trade; help and
#: messages print the first.
_SUMMARY_WORDS = ("summarize", "summarise")

_DESCRIPTION = """\
Evaluate every dust mixture of a grid against the disk colours, and summarise the result.

  motes grid GRID.toml [options]            run (or resume) the grid described in GRID.toml
  motes grid summarize STORE [options]      best mixtures and chi-square profiles of a store
                                            ('summarise' is accepted too)

A run writes a store folder (--output; default ./<GRID stem>_grid): a manifest and
one Parquet part per finished chunk of points, each written atomically. Kill a run
at any moment and start the same command again: it resumes where it stopped, with
no point lost or computed twice. A store made from another grid description is
refused (nothing is changed); pass a new --output folder, or --overwrite.
When the run completes, the summary (ECSV tables, PNG figures and grid_report.html,
one self-contained page with what to cite) goes to STORE/summary.

Work runs in local processes (--workers, default: every core), or on the workers
of an existing Dask distributed cluster (--scheduler; needs pip install
'motes[cluster]'; motes and any user files the description names must be
available on the workers).
"""

_EPILOG = """\
examples:
  motes grid disk_grid.toml --dry-run            count points, time the model, estimate the run
  motes grid disk_grid.toml --workers 2          run on two local processes
  motes grid disk_grid.toml --scheduler tcp://10.0.0.5:8786
  motes grid summarize disk_grid_grid --top 20 --output results/
"""


def register(subparsers) -> None:
    # no motes.dust import here: building the parser must stay fast for every subcommand
    parser = subparsers.add_parser(
        "grid",
        help="run a resumable grid of dust mixtures (local processes or Dask), or summarise one",
        description=_DESCRIPTION,
        epilog=_EPILOG,
        usage="motes grid GRID.toml [options]\n       motes grid summarize STORE [--top N] [--output DIR]",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("target", metavar="GRID.toml | summarize",
                        help="the grid description to run, or the word 'summarize' (or 'summarise')")
    parser.add_argument("store", nargs="?", metavar="STORE",
                        help="with 'summarize': the store folder to summarise")
    parser.add_argument("-o", "--output", metavar="DIR",
                        help="run: the store folder (default ./<GRID stem>_grid); "
                             "summarize: where tables and figures go (default STORE/summary)")
    parser.add_argument("--workers", "-w", type=int, metavar="N",
                        help="local worker processes (default: every core; 1 = in this process)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run on the Dask distributed scheduler at ADDRESS (e.g. tcp://host:8786)")
    parser.add_argument("--timeout", type=float, metavar="SECONDS",
                        help="how long to wait for the Dask scheduler and a worker (default 10)")
    parser.add_argument("--dry-run", action="store_true",
                        help="print the number of points and an estimated run time from a short "
                             "timing probe; write nothing")
    parser.add_argument("--yes", action="store_true",
                        help="confirm a grid larger than the size limit (a larger grid is refused, "
                             "naming the limit, until confirmed)")
    parser.add_argument("--overwrite", action="store_true",
                        help="delete a store of another grid description found in --output")
    parser.add_argument("--top", type=int, metavar="N", help="best mixtures to list (default 10)")
    parser.add_argument("--no-summary", action="store_true",
                        help="run: do not summarise when the run completes")
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress bar")
    add_figure_formats_option(parser)
    parser.set_defaults(func=_main)


def _main(args) -> int:
    if args.target in _SUMMARY_WORDS:
        if not args.store:
            raise InputError("summarize needs the store folder: motes grid summarize STORE")
        return _summarize(Path(args.store), args)
    if args.store:
        raise InputError(f"unexpected argument {args.store!r}; to summarise a store use "
                         "motes grid summarize STORE")
    return _run(Path(args.target), args)


def _settings(args):
    from ..dust.grid.run import GridRunSettings

    kw = {}
    if args.workers is not None:
        kw["workers"] = args.workers
    if args.timeout is not None:
        kw["scheduler_timeout"] = args.timeout
    return GridRunSettings(scheduler=args.scheduler, overwrite=args.overwrite, confirm_large=args.yes,
                           progress=not args.quiet, **kw)


def _run(path: Path, args) -> int:
    from ..dust.grid.spec import read_grid_description
    from ..dust.grid.run import default_store_path, describe_dry_run, run_grid

    spec = read_grid_description(path)
    settings = _settings(args)
    from ..files import default_output_folder

    output = Path(args.output) if args.output else default_store_path(spec)   # absolute, for the run
    # messages name the store as the user gave it, or as the default rule names it (./<stem>_grid)
    shown = Path(args.output) if args.output else default_output_folder(spec.source, "grid")
    if args.dry_run:
        for line in describe_dry_run(spec, shown, settings):
            print(line)
        return 0
    print(f"grid {spec.source}: {spec.describe_count()}")
    print(f"store: {shown}")
    try:
        result = run_grid(spec, output, settings)
    except KeyboardInterrupt:
        print("interrupted: the finished chunks are kept; run the same command again to resume", file=sys.stderr)
        raise
    if result.n_computed:
        print(f"computed {result.n_computed:,} points in {result.seconds:.1f} s "
              f"({result.points_per_second:,.1f} points/s, {result.where})")
    else:
        print(f"computed 0 points: the store already holds all {result.n_points:,}")
    if not args.no_summary:
        _summarize(shown, args, default_folder=shown / "summary")
    return 0


def _summarize(store: Path, args, default_folder: Path | None = None) -> int:
    from ..dust.grid.summary import summarize_grid
    from ..report.grid_figures import write_grid_figures
    from ..report.grid_text import format_grid_summary
    from ..report.html_page import write_grid_page
    from ..report.run_citations import format_citations, grid_citations

    summary = summarize_grid(store, top=args.top or 10)
    folder = Path(args.output) if (args.output and default_folder is None) else (default_folder or store / "summary")
    print("\n".join(format_grid_summary(summary, top=args.top or 10)))
    references = grid_citations(summary)
    print(format_citations(references))
    written = summary.write_tables(folder) + write_grid_figures(summary, folder, formats=figure_formats(args))
    written.append(write_grid_page(summary, folder, files=written, references=references, top=args.top or 10))
    print("wrote:")
    for path in written:
        print(f"  {path}")
    return 0
