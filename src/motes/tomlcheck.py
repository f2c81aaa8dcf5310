"""Checking what a TOML description holds: its tables, their keys, their numbers.

Every reader of a TOML description (targets, mixture, fit and grid
descriptions, library indexes, classification settings) checks with these
functions, so every file refuses a misspelt table or key the same way and
names the file, the table or key, the value received and what is allowed::

    check_tables(doc, ("star", "materials", "mixing"), path="mix.toml", arrays=("materials",))
    # mix.toml: unknown table [mixin]; did you mean [mixing]? allowed: [star], [[materials]], [mixing]
    star = get_table(doc, "star", path="mix.toml", required=True)
    check_keys(star, ("teff", "luminosity"), path="mix.toml", where="[star]")
    teff = read_number(star["teff"], path="mix.toml", where="[star] teff", positive=True)

Errors are :class:`motes.errors.InputError` unless the caller names another
subclass (``error=``).
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Collection

from .errors import InputError

__all__ = ["check_tables", "check_keys", "get_table", "read_number"]


def _ordered(allowed) -> list[str]:
    """Allowed names in the caller's order (sorted when given as a set)."""
    return sorted(allowed) if isinstance(allowed, (set, frozenset)) else list(allowed)


def _hint(name, allowed: list[str], show=repr) -> str:
    """``"did you mean 'x'?"`` for the allowed name nearest to ``name``, or ``""``."""
    close = difflib.get_close_matches(str(name), allowed, n=1, cutoff=0.6)
    return f"did you mean {show(close[0])}?" if close else ""


def _listed(unknown: list, allowed: list[str], show=repr) -> str:
    """The unknown names, the single one followed by "; did you mean ...?", several each with theirs."""
    if len(unknown) == 1:
        hint = _hint(unknown[0], allowed, show)
        return show(unknown[0]) + (f"; {hint}" if hint else "")
    out = []
    for name in unknown:
        hint = _hint(name, allowed, show)
        out.append(show(name) + (f" ({hint})" if hint else ""))
    return ", ".join(out)


def _then(listed: str) -> str:
    """Separator before "allowed: ..." (none after a question)."""
    return " " if listed.endswith("?") else "; "


def check_keys(table, allowed: Collection[str], *, path=None, where: str | None = None,
               required: Collection[str] = (), noun: str = "key", error: type[InputError] = InputError) -> dict:
    """Refuse a table that is not a table, has an unknown key or lacks a required one.

    Parameters
    ----------
    table : object
        The value read from TOML (must be a dict).
    allowed : collection of str
        Keys the table may hold (listed in the message in this order, or
        sorted when given as a set).
    path : str or os.PathLike, optional
        The file, for the message.
    where : str, optional
        The table, e.g. ``"[host]"`` or ``"[[materials]] #2"``.
    required : collection of str
        Keys that must be present.
    noun : str
        What the keys are called in the message ("key", "setting", ...).
    error : type
        Subclass of :class:`~motes.errors.InputError` to raise.

    Returns
    -------
    dict
        ``table``, for chaining.

    Raises
    ------
    motes.errors.InputError
        E.g. ``"unknown key 'paralax_mas'; did you mean 'parallax_mas'? allowed: name, parallax_mas"``;
        an unknown key close to an allowed one is given the nearest name.

    Examples
    --------
    >>> check_keys({"teff": 5800.0}, ("teff", "mass"), where="[star]")
    {'teff': 5800.0}
    >>> check_keys({"tef": 5800.0}, ("teff", "mass"), path="disk.toml", where="[star]")
    Traceback (most recent call last):
    ...
    motes.errors.InputError: disk.toml, [star]: unknown key 'tef'; did you mean 'teff'? allowed: teff, mass
    """
    if not isinstance(table, dict):
        raise error(f"expected a table, got {table!r}", path, where)
    names = _ordered(allowed)
    unknown = sorted(set(table) - set(names), key=str)
    if unknown:
        plural = noun + ("s" if len(unknown) > 1 else "")
        listed = _listed(unknown, names)
        raise error(f"unknown {plural} {listed}{_then(listed)}allowed: {', '.join(names)}", path, where)
    missing = [k for k in _ordered(required) if k not in table]
    if missing:
        raise error(f"missing {noun}{'s' if len(missing) > 1 else ''} {', '.join(map(repr, missing))}", path, where)
    return table


def check_tables(doc, allowed: Collection[str], *, path=None, arrays: Collection[str] = (),
                 error: type[InputError] = InputError) -> dict:
    """Refuse unknown top-level tables (and keys) of a TOML document.

    Parameters
    ----------
    doc : dict
        The whole parsed document.
    allowed : collection of str
        Top-level names the document may hold.
    path : str or os.PathLike, optional
        The file, for the message.
    arrays : collection of str
        Those of ``allowed`` written as arrays of tables (``[[materials]]``).
    error : type
        Subclass of :class:`~motes.errors.InputError` to raise.

    Returns
    -------
    dict
        ``doc``, for chaining.

    Examples
    --------
    >>> check_tables({"mixin": {}}, ("mixing", "star"), path="mix.toml")
    Traceback (most recent call last):
    ...
    motes.errors.InputError: mix.toml: unknown table [mixin]; did you mean [mixing]? allowed: [mixing], [star]
    """
    if not isinstance(doc, dict):
        raise error("expected a TOML document", path)
    names = _ordered(allowed)
    unknown = sorted(set(doc) - set(names), key=str)
    if not unknown:
        return doc

    def show(name):
        return f"[[{name}]]" if name in arrays else f"[{name}]"

    def kind(name):
        value = doc[name]
        if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            return "table", f"[[{name}]]"
        return ("table", f"[{name}]") if isinstance(value, dict) else ("top-level key", repr(name))

    what = {kind(n)[0] for n in unknown}
    noun = what.pop() if len(what) == 1 else "table or key"
    plural = noun if len(unknown) == 1 else {"table or key": "tables or keys"}.get(noun, noun + "s")
    listed = _listed(unknown, names, show=lambda n: kind(n)[1] if n in doc else show(n))
    raise error(f"unknown {plural} {listed}{_then(listed)}allowed: {', '.join(show(n) for n in names)}", path)


def get_table(doc: dict, key: str, *, path=None, where: str | None = None, required: bool = False,
              expected: str = "", error: type[InputError] = InputError) -> dict:
    """A sub-table of ``doc``: ``{}`` when absent (unless required), refused when not a table.

    Parameters
    ----------
    doc : dict
        The parent table.
    key : str
    path : str or os.PathLike, optional
        The file, for the message.
    where : str, optional
        Default ``"[key]"``.
    required : bool
        Refuse an absent table.
    expected : str
        What the table holds, for the "missing" message (e.g. ``"fraction_step, porosity, a_min"``).
    error : type
        Subclass of :class:`~motes.errors.InputError` to raise.
    """
    where = where or f"[{key}]"
    if key not in doc:
        if required:
            raise error(f"missing the {where} table" + (f" ({expected})" if expected else ""), path)
        return {}
    value = doc[key]
    if not isinstance(value, dict):
        raise error(f"expected a table, got {value!r}", path, where)
    return value


def read_number(value, *, path=None, where: str | None = None, what: str | None = None,
                lo: float | None = None, hi: float | None = None, open_lo: bool = False, open_hi: bool = False,
                positive: bool = False, integer: bool = False, error: type[InputError] = InputError):
    """A finite number from TOML, optionally within a range.

    Parameters
    ----------
    value : object
        The value read (``bool`` is refused although Python counts it as an int).
    path : str or os.PathLike, optional
        The file, for the message.
    where : str, optional
        The field, e.g. ``"[mixture] porosity"``.
    what : str, optional
        What is expected, for the message (e.g. ``"Teff [K]"``; default "a number" or "an integer").
    lo, hi : float, optional
        Allowed range; closed unless ``open_lo`` / ``open_hi``.
    positive : bool
        Require ``value > 0``.
    integer : bool
        Require a TOML integer; returns an ``int``.
    error : type
        Subclass of :class:`~motes.errors.InputError` to raise.

    Returns
    -------
    float or int

    Examples
    --------
    >>> read_number(0.3, where="[mixture] porosity", lo=0.0, hi=1.0, open_hi=True)
    0.3
    >>> read_number(1.0, path="mix.toml", where="[mixture] porosity", lo=0.0, hi=1.0, open_hi=True)
    Traceback (most recent call last):
    ...
    motes.errors.InputError: mix.toml, [mixture] porosity: expected a number in [0, 1), got 1.0
    """
    kind = "integer" if integer else "number"
    if what is None:
        what = f"a positive {kind}" if positive else f"an {kind}" if integer else f"a {kind}"
    if isinstance(value, bool) or not isinstance(value, int if integer else (int, float)) \
            or not math.isfinite(value):
        raise error(f"expected {what}, got {value!r}", path, where)
    number = value if integer else float(value)
    if positive and not number > 0:
        raise error(f"expected a positive {kind}, got {value!r}", path, where)
    below = lo is not None and (number <= lo if open_lo else number < lo)
    above = hi is not None and (number >= hi if open_hi else number > hi)
    if below or above:
        if lo is not None and hi is not None:
            allowed = f"in {'(' if open_lo else '['}{lo:g}, {hi:g}{')' if open_hi else ']'}"
        elif lo is not None:
            allowed = f"{'>' if open_lo else '>='} {lo:g}"
        else:
            allowed = f"{'<' if open_hi else '<='} {hi:g}"
        raise error(f"expected {what} {allowed}, got {value!r}", path, where)
    return number
