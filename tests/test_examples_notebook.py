"""examples/walkthrough.ipynb runs from top to bottom on a cold cache and builds no lookup tables.

The notebook is stored without outputs (a test checks that too, so a re-saved
run does not slip numbers into the repository that nobody recomputes); this
test executes it in a fresh kernel, in a temporary folder, with an empty
``$MOTES_CACHE_DIR``. Its disk part uses the exact Mie path (a few seconds per
mixture), so nothing is tabulated.
"""

from __future__ import annotations

from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat", reason="the notebook test needs nbformat (pip install -e '.[test]')")
nbclient = pytest.importorskip("nbclient", reason="the notebook test needs nbclient (pip install -e '.[test]')")
pytest.importorskip("ipykernel", reason="the notebook test needs ipykernel (pip install -e '.[test]')")

NOTEBOOK = Path(__file__).resolve().parents[1] / "examples" / "walkthrough.ipynb"


def _text(cell) -> str:
    out = []
    for o in cell.get("outputs", []):
        out.append(o.get("text", ""))
        out.extend(str(v) for k, v in o.get("data", {}).items() if k == "text/plain")
    return "".join(out)


def test_notebook_is_stored_without_outputs():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(nb)
    for cell in nb.cells:
        if cell.cell_type == "code":
            assert not cell.outputs and cell.execution_count is None, "strip the outputs before saving"


def test_notebook_runs_on_a_cold_cache(tmp_path, monkeypatch):
    cache = tmp_path / "cache"
    cache.mkdir()
    monkeypatch.setenv("MOTES_CACHE_DIR", str(cache))   # inherited by the kernel
    monkeypatch.setenv("MPLBACKEND", "Agg")
    nb = nbformat.read(NOTEBOOK, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(tmp_path)}})
    client.execute()          # raises CellExecutionError, with the cell's traceback, on any error

    text = "\n".join(_text(c) for c in nb.cells if c.cell_type == "code")
    assert "spectral type:" in text and "Teff" in text
    assert "leaving the ice out costs delta chi2" in text
    assert "flux ratio - 5 detections" in text   # six rows, the upper limit stayed a limit
    assert (tmp_path / "walkthrough_files" / "disk_photometry.ecsv").is_file()
    assert not (cache / "tables").exists() or not any((cache / "tables").iterdir()), \
        "the notebook built lookup tables"
