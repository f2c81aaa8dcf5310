"""Spectral types as numbers: parsing, formatting and the numeric code.

motes places spectral types on one continuous axis, the *type code*::

    code = 10 * class_index + subtype,   class_index: O=0 B=1 A=2 F=3 G=4 K=5 M=6 L=7 T=8 Y=9

so G2 = 42, K7 = 57, M0 = 60, M4.5 = 64.5, L0 = 70, T8 = 88. One subtype is
one unit of code everywhere (M9 -> L0 is one subtype, as is K7 -> K8), which is
the usual convention of spectral-type relations for M, L and T dwarfs (e.g.
Dupuy & Liu 2012, ApJS 201, 19, who use numeric types with M6 = 6, L0 = 10,
T0 = 20). Luminosity classes, peculiarity flags and uncertainty marks are
ignored when parsing ("L3.5pec", "M5V", "T7:" parse as L3.5, M5 and T7).
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..errors import InputError

__all__ = ["SPECTRAL_CLASSES", "type_code", "type_label", "is_type_label"]

#: Spectral classes in order; the class index is the position in this string.
SPECTRAL_CLASSES = "OBAFGKMLTY"

_PATTERN = re.compile(r"^\s*(?:sd|esd|usd|d)?([OBAFGKMLTY])(\d(?:\.\d+)?)(.*)$")
# What may follow the subtype: a luminosity class and common flags
# (peculiar, uncertain, gravity classes, blue/red), nothing with a digit.
_SUFFIX = re.compile(r"^\s*(?:IV|VI|V|III|II|I)?\s*(?:pec|p|e|n|sb|blue|red|beta|gamma|delta|[:?\u03b2\u03b3\u03b4]|\s)*$")


def type_code(label) -> float:
    """Numeric type code of a spectral-type label.

    Parameters
    ----------
    label : str or float
        A label such as ``"M4.5"``, ``"L2"``, ``"T7.5"``, ``"M5V"``, ``"L3pec"``;
        a number is returned unchanged (already a code).

    Returns
    -------
    float
        ``10 * class_index + subtype`` (see the module notes).

    Raises
    ------
    InputError
        When the label is not a spectral type.

    Examples
    --------
    >>> type_code("M4.5"), type_code("L0"), type_code("T8")
    (64.5, 70.0, 88.0)
    """
    if isinstance(label, (int, float, np.floating, np.integer)) and not isinstance(label, bool):
        value = float(label)
        if not math.isfinite(value):
            raise InputError(f"spectral type code must be finite, got {label!r}")
        return value
    if not isinstance(label, str):
        raise InputError(f"spectral type must be a label like 'M4.5' or 'T2', got {label!r}")
    match = _PATTERN.match(label)
    if match is None or not _SUFFIX.match(match.group(3)):
        raise InputError(
            f"cannot read spectral type {label!r}: expected a class letter from "
            f"{SPECTRAL_CLASSES} and a subtype 0-9.x, e.g. 'M4.5', 'L2', 'T7.5'"
        )
    cls, sub = match.group(1), float(match.group(2))
    if sub >= 10:
        raise InputError(f"spectral subtype must be below 10 in {label!r}")
    return 10.0 * SPECTRAL_CLASSES.index(cls) + sub


def is_type_label(label) -> bool:
    """True if ``label`` parses as a spectral type (see :func:`type_code`)."""
    try:
        type_code(label)
    except InputError:
        return False
    return True


def type_label(code, decimals: int = 1) -> str:
    """Spectral-type label of a numeric type code.

    Parameters
    ----------
    code : float
        Type code (see the module notes).
    decimals : int
        Decimals of the subtype; trailing ``.0`` is dropped.

    Returns
    -------
    str
        e.g. ``"M4.5"``; ``"?"`` for nan.

    Examples
    --------
    >>> type_label(64.5), type_label(70.0), type_label(87.96)
    ('M4.5', 'L0', 'T8')
    """
    code = float(code)
    if not math.isfinite(code):
        return "?"
    code = round(code, decimals)
    index = int(math.floor(code / 10.0 + 1e-9))
    index = min(max(index, 0), len(SPECTRAL_CLASSES) - 1)
    sub = round(code - 10.0 * index, decimals)
    text = f"{sub:.{decimals}f}".rstrip("0").rstrip(".") if decimals else f"{sub:.0f}"
    return f"{SPECTRAL_CLASSES[index]}{text or '0'}"
