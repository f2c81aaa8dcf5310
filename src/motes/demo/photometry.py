"""Demo part "photometry": calibrate the invented companion Velmora b.

Inputs (generated from known truth by ``examples/make_photometry_demo.py``):
``companion_target.toml``, ``companion_photometry.ecsv`` and
``companion_nb3p1_curve.txt``. Output: ``photometry/velmora_b_photometry.ecsv``
(and ``.csv``) in the demo folder.
"""

from __future__ import annotations

from pathlib import Path

from . import copy_demo_inputs

__all__ = ["INPUT_FILES", "TARGET_FILE", "write_inputs", "run"]

#: Files this part copies into the demo folder.
INPUT_FILES = ("companion_target.toml", "companion_photometry.ecsv", "companion_nb3p1_curve.txt")
#: The target description the part (and the companion part) reads.
TARGET_FILE = "companion_target.toml"


def write_inputs(folder: Path) -> None:
    """Copy the photometry demo inputs into ``folder``."""
    copy_demo_inputs(folder, INPUT_FILES)


def run(folder: Path) -> None:
    """Calibrate the demo target, print the table and write it as ECSV and CSV."""
    from ..photometry import calibrate, read_target
    from ..report.photometry_text import format_photometry, write_photometry

    folder = Path(folder)
    result = calibrate(read_target(folder / TARGET_FILE))
    print(format_photometry(result))
    for path in write_photometry(result, folder / "photometry", csv=True):
        print(f"wrote {path}")
