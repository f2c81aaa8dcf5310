"""Writing a finished figure to disk: one PNG, atomically, or one clear error."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..files import atomic_write

__all__ = ["save_figure"]


def save_figure(fig, path, dpi: int = 130) -> Path:
    """Write ``fig`` (a :class:`matplotlib.figure.Figure`) as a PNG at ``path``.

    The folder is created; the file is written to a temporary name and renamed
    (:func:`motes.files.atomic_write`), so an existing figure is never half
    overwritten.

    Raises
    ------
    motes.errors.InputError
        The file cannot be written (unwritable folder, disk full), naming it.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with atomic_write(path, suffix=".png") as tmp:
            fig.savefig(tmp, dpi=dpi)
    except OSError as exc:
        raise InputError(f"cannot write figure: {exc}", path) from None
    return path
