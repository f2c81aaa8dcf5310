"""``motes demo``: run the bundled invented scenario end to end."""

from __future__ import annotations

import argparse

__all__ = ["register"]


def register(subparsers) -> None:
    from ..demo import DEMO_PARTS

    parser = subparsers.add_parser(
        "demo",
        help="run the bundled demo (an invented star, companion and debris disk)",
        description=(
            "Write the invented demo scenario into FOLDER and run every part of motes on it: "
            "photometry calibration, companion typing, dust optics, the nested-sampling "
            "fit of the disk colours, a small mixture grid and a joint fit of scattered light and "
            "thermal emission (which runs in a second process alongside the others)."
        ),
        epilog="examples:\n  motes demo ./motes-demo --parts photometry companion\n"
               "  motes demo --output my-demo",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("folder", nargs="?", default=None,
                        help="output folder (default: ./motes-demo); or give it as --output")
    parser.add_argument("--output", "-o", metavar="DIR", default=None,
                        help="output folder, as on every other command (default: ./motes-demo)")
    parser.add_argument("--parts", nargs="+", choices=DEMO_PARTS, metavar="PART",
                        help=f"run only these parts, from: {', '.join(DEMO_PARTS)}")
    parser.add_argument("--workers", "-w", type=int, default=None, metavar="N",
                        help="processes: 2 (the default on a machine with 2 or more cores) runs the joint fit "
                             "alongside the other parts; 1 runs every part in sequence")
    parser.set_defaults(func=_run)


def _run(args) -> int:
    from ..demo import run_demo
    from ..errors import InputError

    if args.folder is not None and args.output is not None and args.folder != args.output:
        raise InputError(f"two output folders given ({args.folder} and --output {args.output}): give one")
    run_demo(args.output or args.folder or "motes-demo", parts=args.parts, workers=args.workers)
    return 0
