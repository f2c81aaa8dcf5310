"""Demo part "companion": type the invented companion Velmora b.

Inputs: the same target files as the photometry part (generated from known
truth by ``examples/make_photometry_demo.py``; the companion was made an L0.5
dwarf of motes' own sequence, with invented 3.1 um and L′ colours). The
part calibrates the photometry, ranks the dwarf sequence in the
distance-known and colours-only modes (blackbodies are added because the
narrow band and L′ are covered by nothing else), prints the summary and
writes the ranking (ECSV) and two figures into ``companion/`` in the demo folder.
"""

from __future__ import annotations

from pathlib import Path

from .photometry import INPUT_FILES, TARGET_FILE
from .photometry import write_inputs as _write_photometry_inputs

__all__ = ["INPUT_FILES", "TARGET_FILE", "DEMO_TRUTH_TYPE", "write_inputs", "run"]

#: spectral type the invented companion was generated with (examples/make_photometry_demo.py)
DEMO_TRUTH_TYPE = "L0.5"


def write_inputs(folder: Path) -> None:
    """Copy the target description, photometry table and filter curve into ``folder``."""
    _write_photometry_inputs(folder)


def run(folder: Path) -> None:
    """Classify the demo companion; print the summary and the paths written."""
    from ..companion import ClassifySettings, classify
    from ..photometry import calibrate, read_target
    from ..report.companion_figures import write_companion_figures
    from ..report.companion_text import format_classification, write_classification

    folder = Path(folder)
    result = classify(calibrate(read_target(folder / TARGET_FILE)), ClassifySettings(mode="auto"))
    print(format_classification(result, top=5))
    print("(the invented companion was generated as an L0.5 dwarf of motes' own sequence)")
    out = folder / "companion"
    # the figures show the invented truth (DEMO_TRUTH_TYPE) beside the probabilities
    for path in write_classification(result, out) + write_companion_figures(result, out, truth=DEMO_TRUTH_TYPE):
        print(f"wrote {path}")
