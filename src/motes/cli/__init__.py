"""The ``motes`` command line: a thin layer over the Python API.

Each subcommand lives in its own module in this package and exposes
``register(subparsers)``; the module parses arguments, builds the API's
settings objects and calls public functions. No physics and no defaults of its
own live here. Errors derived from :class:`motes.errors.MotesError` are printed
as one line on stderr with exit status 2, never as a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .. import __version__
from ..errors import MotesError

__all__ = ["main", "build_parser"]

# Subcommand modules, in the order `motes --help` lists them.
_COMMANDS = ("demo", "bands", "photometry", "classify", "motion", "materials", "optics", "fit", "grid")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="motes",
        description=(
            "Type faint companions from their photometry and fit debris-disk colours "
            "with Mie-scattering dust mixtures."
        ),
    )
    parser.add_argument("--version", action="version", version=f"motes {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in _COMMANDS:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue  # subcommand not built yet
            raise
        module.register(sub)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        return int(args.func(args) or 0)
    except MotesError as exc:
        print(f"motes {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"motes {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # Output piped into e.g. `head`, which closed early: not an error.
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except OSError as exc:
        # the system refused a read or write (disk full, no permission, ...): every file motes writes
        # goes through motes.files, so no half-written file is left and finished results are kept
        where = f" ({exc.filename})" if exc.filename else ""
        print(f"motes {args.command}: error: {exc.strerror or exc}{where}; files already finished are kept, "
              "nothing half-written is left: fix the cause and run the same command again", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
