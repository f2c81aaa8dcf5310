"""Exceptions raised by motes.

Every error a user can cause derives from :class:`MotesError` *and* a builtin,
so ``except ValueError`` keeps working in notebooks while the command line can
catch ``MotesError`` and print one clear message without a traceback.
"""

from __future__ import annotations

__all__ = [
    "MotesError",
    "InputError",
    "BandError",
    "PhotometryError",
    "OpticalConstantsError",
    "ModelError",
    "FitError",
    "GridError",
    "quoted_names",
]


def quoted_names(names) -> str:
    """Names for a message in plain words: ``'x', 'y'`` (never a Python list).

    Examples
    --------
    >>> print(quoted_names(["ice", "carbon"]))
    'ice', 'carbon'
    """
    return ", ".join(f"'{n}'" for n in names)


class MotesError(Exception):
    """Base class of every error motes raises on purpose."""


class InputError(MotesError, ValueError):
    """A user-supplied file or value is malformed.

    Parameters
    ----------
    message : str
        What is wrong and what was expected.
    path : str or os.PathLike, optional
        The file in which the problem was found.
    where : str, optional
        The line, row or field inside that file (e.g. ``"line 12"``,
        ``"row 3 (band 'wise_w1')"``, ``"[host] parallax"``).
    """

    def __init__(self, message: str, path=None, where: str | None = None):
        self.path = None if path is None else str(path)
        self.where = where
        self.reason = message
        prefix = ""
        if self.path is not None:
            prefix = self.path
            if where:
                prefix += f", {where}"
            prefix += ": "
        elif where:
            prefix = f"{where}: "
        super().__init__(prefix + message)


class BandError(InputError):
    """An unknown, malformed or unusable photometric band."""


class PhotometryError(InputError):
    """Photometry that cannot be calibrated as given."""


class OpticalConstantsError(InputError):
    """Optical constants that are malformed or used outside their range."""


class ModelError(MotesError, ValueError):
    """A forward model asked for something it cannot compute."""


class FitError(MotesError, ValueError):
    """A fit that is ill-posed as described (too few bands, bad priors, ...)."""


class GridError(MotesError, ValueError):
    """A grid description or store that cannot be used as given."""
