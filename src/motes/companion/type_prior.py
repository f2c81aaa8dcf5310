"""Prior over spectral types for the dwarf-sequence rankings.

The sequence is a regular grid in type code, so a prior over types is one
weight per grid point. :class:`TypePrior` is built from a setting
(:attr:`ClassifySettings.type_prior <motes.companion.ClassifySettings>`):

``"field"`` (the default)
    the number of objects per subtype in a volume-limited sample of the solar
    neighbourhood (:data:`FIELD_DENSITY`, argued below);
``"flat"``
    the same weight for every type (the behaviour before issue 11);
knots ``{type: weight, ...}``
    a user's own prior: weights at the given types, linear in type code
    between them and **zero outside the first and last knot** (so knots can
    restrict the range as well as weight it).

Why the field density is the default
------------------------------------
The question ``motes classify`` answers is "what type is this companion?":
a source that shares the host's distance. At one fixed distance, the types
that occur are those of a *volume-limited* sample, so the prior over types is
the space density per subtype of field dwarfs. This is not the prior of a
*magnitude-limited* sample (a source of given apparent magnitude seen
anywhere along the line of sight), which would add the volume factor
10^(0.6 M) and favour luminous background stars; that reading, "is it
bound?", is the separate photometric boundness test, whose distance prior
carries the volume factor.

Two facts then fix the shape. (1) M dwarfs dominate the solar neighbourhood:
61% of the stars and brown dwarfs within 10 pc are M stars, more than half of
them M3.0-M5.0 (Reyle et al. 2021, A&A 650, A201); per class the densities are
G 4.8e-3, K 1.05e-2, M 5.92e-2 pc^-3 (E. Mamajek 2016, "Fraction of stars by
spectral type in the solar vicinity", figshare 3206527, from Hipparcos and
RECONS volume-limited samples); late M (M7-M9.5) 4.9e-3 pc^-3 and L0-L8 at
least 3.8e-3 pc^-3 (Cruz et al. 2007, AJ 133, 439). T dwarfs are about as
numerous per subtype as L dwarfs in the 20-25 pc censuses (Kirkpatrick et al.
2021, ApJS 253, 7; Best et al. 2021, AJ 161, 42; from memory, no number
taken from them). (2) A companion found by high-contrast imaging is faint:
at the contrasts such imaging reaches (typically 5-15 mag in the near
infrared, common practice, no source) a bound companion of an FGK host is
several magnitudes fainter than the host, so of later type; a bright G or K
"companion" is usually a background star, and the boundness test, not the
type prior, is the place to weigh that. The field density already makes G and
K types 11-25 times less likely per subtype than mid M; motes does not cut
them out (a prior must not exclude what may be there: real G/K background
stars do sit next to targets), and ``type_range`` or knots let a user who
knows the host's type and the contrast impose it.

The bins (:data:`FIELD_DENSITY`) hold each quoted density spread evenly over
the types it describes, so that the prior's integral over every bin is the
census value: G0-G9.9, K0-K9.9, M0-M2.5 and M5.5-M6.5 (what remains of the M
density after the other M bins), M3.0-M5.0 (half of the M density: "more
than half", Reyle et al. 2021, taken as exactly half), M7-M9.5, L0-L9.9 and
T0-T9.9. A type quoted to half a subtype covers +-0.25 of it, so "M3.0-M5.0"
is the bin [M2.75, M5.25). The census gives no finer shape, and the census
types are themselves uncertain by about half a subtype (common practice, no
source): the bins are therefore averaged over a sliding window of
:data:`FIELD_SMOOTHING` = 1 subtype, which turns each step into a linear ramp
from half a subtype before a bin edge to half a subtype after it. This keeps
the total and moves at most (difference of the two densities) / 8 subtypes'
worth across each edge (K gets 11.1 instead of 10.5, M3.0-M5.0 28.1 instead of
29.6, L 3.9 instead of 3.8), and it keeps the prior's steps from making peaks
of their own in the posterior. (A log-linear interpolation between bin
centres was tried first and moved a third of the K density and half of the L
density into the neighbouring classes, so it was dropped.) The numbers were
taken from the sources above before any classification was run with them;
they are not adjusted to make any test pass.

Types beyond T9.9 (the sequence's MKO rows T9.5-Y4, reached only by MKO J/K
photometry) take the last bin's value, the T density per subtype: no census
number for Y dwarfs was taken (the 20 pc census of Kirkpatrick et al. 2021
counts them, from memory), so the prior neither favours nor penalises them.
The prior is a density per unit of type code, and the sequence grid is
regular in type code, so its weight per grid point is that density (the
measure is the same on both sides).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .spectral_types import type_code, type_label

__all__ = ["TypePrior", "FIELD_DENSITY", "FIELD_LAST_CODE", "FIELD_SMOOTHING", "TYPE_PRIOR_NAMES",
           "parse_type_prior"]

#: Bins of the "field" prior: (first type code of the bin, space density per
#: subtype [1e-3 pc^-3]); each bin runs to the next one's first code, the last
#: to :data:`FIELD_LAST_CODE`. Integrals over the bins [1e-3 pc^-3]: G 4.8,
#: K 10.5 (Mamajek 2016); M0-M2.5 + M5.5-M6.5 24.7 = 59.2 (Mamajek 2016, all M)
#: - 29.6 (half, Reyle et al. 2021) - 4.9 (M7-M9.5, Cruz et al. 2007), over
#: 2.75 + 1.5 subtypes; M3.0-M5.0 29.6 over 2.5; M7-M9.5 4.9 over 3.25; L 3.8
#: (Cruz et al. 2007, a lower limit for L0-L8, spread over L0-L9.9); T taken
#: equal to L per subtype (from memory, see the module notes).
FIELD_DENSITY = (
    (type_code("G0"), 0.48),
    (type_code("K0"), 1.05),
    (type_code("M0"), 24.7 / 4.25),
    (type_code("M2.75"), 29.6 / 2.5),
    (type_code("M5.25"), 24.7 / 4.25),
    (type_code("M6.75"), 4.9 / 3.25),
    (type_code("L0"), 0.38),
    (type_code("T0"), 0.38),
)
#: Upper end of the last bin of :data:`FIELD_DENSITY` (the end of class T; later types, Y, take the
#: last bin's value).
FIELD_LAST_CODE = type_code("T9.9")
#: Width [subtypes] of the sliding average applied to the bins (see the module notes).
FIELD_SMOOTHING = 1.0

TYPE_PRIOR_NAMES = ("field", "flat")


@dataclass(frozen=True)
class TypePrior:
    """A prior over spectral types: ``weights(codes)`` on the sequence grid.

    Attributes
    ----------
    name : str
        ``"field"``, ``"flat"`` or ``"knots"``.
    knots : tuple of (float, float)
        (type code, weight) knots (empty for ``"flat"``); for ``"field"`` the
        bins of :data:`FIELD_DENSITY` (constant from each code to the next).
    """

    name: str
    knots: tuple = ()

    def weights(self, codes) -> np.ndarray:
        """Prior weight of each type code (not normalised), ndarray like ``codes``."""
        codes = np.asarray(codes, dtype=float)
        if self.name == "flat":
            return np.ones(codes.shape)
        x = np.array([k[0] for k in self.knots])
        y = np.array([k[1] for k in self.knots])
        if self.name == "field":
            return _binned_average(x, y, codes, FIELD_SMOOTHING)
        inside = (codes >= x[0] - 1e-9) & (codes <= x[-1] + 1e-9)
        return np.where(inside, np.interp(codes, x, y), 0.0)

    def describe(self) -> str:
        """One line for the notes."""
        if self.name == "flat":
            return "type prior flat (every type of the sequence equally likely)"
        if self.name == "field":
            return ("type prior 'field': space density per subtype of solar-neighbourhood dwarfs (M3-M5 "
                    "most common; per subtype G 25x, K 11x and L/T 31x less; Reyle et al. 2021, Cruz et al. "
                    "2007, Mamajek 2016; see docs/companion.md)")
        text = ", ".join(f"{type_label(c)}={w:g}" for c, w in self.knots)
        return f"type prior from user knots ({text}; linear between, zero outside)"


def _binned_average(starts, density, codes, width):
    """Average over [c - width/2, c + width/2] of a step function (constant from each start to the next;
    the first and last values continue beyond the ends)."""
    starts = np.asarray(starts, float)
    density = np.asarray(density, float)
    lo, hi = starts[0] - width, FIELD_LAST_CODE + width
    edges = np.concatenate([[lo], starts[1:], [hi]])
    cum = np.concatenate([[0.0], np.cumsum(density * np.diff(edges))])   # integral from lo to each edge
    c = np.clip(codes, lo + width / 2, hi - width / 2)
    return (np.interp(c + width / 2, edges, cum) - np.interp(c - width / 2, edges, cum)) / width


def parse_type_prior(value) -> TypePrior:
    """A :class:`TypePrior` from a setting value.

    Parameters
    ----------
    value : str, mapping or sequence of pairs
        ``"field"``, ``"flat"``, ``"M0=1,L0=0.3,T8=0.3"``, ``{"M0": 1, "T8": 0.3}``
        or ``(("M0", 1.0), ("T8", 0.3))``; a TypePrior is returned unchanged.

    Raises
    ------
    InputError
        Unknown name, unreadable type, negative or non-finite weight, fewer than
        two knots, repeated types, or all weights zero.
    """
    if isinstance(value, TypePrior):
        return value
    if isinstance(value, str):
        text = value.strip()
        if text.lower() in TYPE_PRIOR_NAMES:
            name = text.lower()
            return TypePrior(name, FIELD_DENSITY if name == "field" else ())
        pairs = []
        for item in text.split(","):
            t, sep, w = item.partition("=")
            if not sep:
                raise InputError(f"type_prior must be {' or '.join(repr(n) for n in TYPE_PRIOR_NAMES)} or "
                                 f"knots TYPE=WEIGHT,... (e.g. 'M0=1,L0=0.3,T8=0.3'), got {value!r}")
            pairs.append((t.strip(), w.strip()))
    elif isinstance(value, Mapping):
        pairs = list(value.items())
    else:
        try:
            pairs = [tuple(p) for p in value]
        except TypeError:
            raise InputError(f"type_prior must be a name, a TYPE=WEIGHT list or a table of weights, "
                             f"got {value!r}") from None
    knots = []
    for pair in pairs:
        if len(pair) != 2:
            raise InputError(f"type_prior knots are (type, weight) pairs, got {pair!r}")
        code = type_code(pair[0])
        try:
            weight = float(pair[1])
        except (TypeError, ValueError):
            raise InputError(f"type_prior weight of {pair[0]!r} must be a number, got {pair[1]!r}") from None
        if not (math.isfinite(weight) and weight >= 0):
            raise InputError(f"type_prior weight of {pair[0]!r} must be finite and >= 0, got {pair[1]!r}")
        knots.append((code, weight))
    knots.sort()
    if len(knots) < 2:
        raise InputError(f"type_prior needs at least two knots (TYPE=WEIGHT), got {value!r}")
    codes = [k[0] for k in knots]
    if len(set(codes)) != len(codes):
        raise InputError(f"type_prior names a type twice: {value!r}")
    if not any(w > 0 for _, w in knots):
        raise InputError(f"type_prior gives every type zero weight: it excludes every template ({value!r})")
    return TypePrior("knots", tuple(knots))
