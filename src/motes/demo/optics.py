"""Demo part: the optics of the invented ring's dust, band by band.

Input (package data): ``optics_mixture.toml``, written by
``examples/make_optics_demo.py``: the true dust of the disk demo (65% amorphous
silica, 30% water ice, 5% amorphous carbon; porosity 0.35; a_min 1.5 um;
q 3.6) around the invented star "Orvanne", in the 8 bands of the disk
photometry. The part prints what ``motes optics`` prints and writes the table
and the two figures into ``optics_run/``.
"""

from __future__ import annotations

from pathlib import Path

from . import copy_demo_inputs

__all__ = ["write_inputs", "run", "INPUT_FILES"]

#: Files this part copies into the demo folder.
INPUT_FILES = ("optics_mixture.toml",)


def write_inputs(folder: Path) -> None:
    """Copy the demo mixture file into ``folder``."""
    copy_demo_inputs(folder, INPUT_FILES)


def run(folder: Path) -> None:
    """Compute the mixture's optics (exact Mie path), print them, write table and figures."""
    from ..dust.model.mixture import compute_mixture_optics, read_mixture_file
    from ..report.optics_text import format_mixture_optics, write_mixture_outputs

    folder = Path(folder)
    description, mixture = read_mixture_file(folder / "optics_mixture.toml")
    result = compute_mixture_optics(description, mixture)
    print(format_mixture_optics(result))
    nb = list(result.optics.bands).index("NB3p1")
    print(f"The 3.1 um ice band: NB3p1 is {result.colours[nb]:+.2f} mag relative to 2mass_j "
          "(positive = fainter).")
    for path in write_mixture_outputs(result, folder / "optics_run", stem="optics_mixture"):
        print(f"wrote {path}")
