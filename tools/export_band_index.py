"""Write ``src/motes/data/band_index.txt``, the index ``motes bands`` lists from.

Run from the repository root after a change of the band list or of the
``pyphot`` package::

    .venv/bin/python tools/export_band_index.py

Every value is computed from the curves by motes itself
(:func:`motes.photometry.band_search.compute_band_index`); the test
``tests/test_photometry_bands_names.py`` recomputes them and fails when the
file is stale.
"""

from __future__ import annotations

from importlib.metadata import version
from pathlib import Path

from motes.photometry.band_search import BAND_INDEX_FILE, compute_band_index, format_band_index
from motes.photometry.bands import VEGA_REFERENCE

OUTPUT = Path(__file__).resolve().parents[1] / "src" / "motes" / "data" / BAND_INDEX_FILE


def main() -> None:
    header = (
        "motes band index: one row per standard band (identifiers: motes.photometry.band_names)\n"
        "written by tools/export_band_index.py; do not edit by hand\n"
        f"computed from the pyphot {version('pyphot')} filter library and the CALSPEC Vega spectrum "
        f"{VEGA_REFERENCE}; photon counting\n"
        "units: wavelengths in um, vega_zero_point_jy in Jy (nan: the Vega spectrum does not cover the band)"
    )
    OUTPUT.write_text(format_band_index(compute_band_index(), header))
    print(f"wrote {OUTPUT}")


if __name__ == "__main__":
    main()
