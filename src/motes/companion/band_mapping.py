"""Explicit band mappings (``band_map`` / ``--treat-as``): checking that they are close.

A mapping ``observed = standard`` compares an instrument's band with the
sequence's values in a standard band as if they were the same band. That is
fair only when the two bands are close: a mapping whose pivot wavelengths
differ by more than :data:`MAPPING_PIVOT_TOLERANCE` (fractionally) is flagged
in the result.

Why 5%: late-type dwarfs, the targets of the dwarf sequence, have spectral
slopes in the near infrared of up to ~2 mag per unit ln(lambda) (common
practice, no source); a 5% shift in pivot then changes a magnitude by up to
~0.1 mag, the default template scatter of a classification
(:class:`motes.companion.ClassifySettings`). A larger mismatch is an error
the likelihood does not carry. E.g. MKO K against 2MASS Ks differ by 1.6%,
while L' against WISE W1 (3.76 vs 3.37 um) differ by 12%.
"""

from __future__ import annotations

from ..errors import BandError
from ..photometry.bands import Band, get_band

__all__ = ["MAPPING_PIVOT_TOLERANCE", "mapping_pivot_warnings"]

#: Largest fractional difference of pivot wavelengths a mapping passes without a flag.
MAPPING_PIVOT_TOLERANCE = 0.05


def mapping_pivot_warnings(bands, mapping) -> list[str]:
    """Messages for the mappings whose bands differ too much in pivot wavelength.

    Parameters
    ----------
    bands : sequence of Band
        The observed bands.
    mapping : dict of str to str
        ``observed name -> standard name``; targets that are not standard
        bands are left to the template sets to refuse.

    Returns
    -------
    list of str
        One message per mapping whose pivots differ by more than
        :data:`MAPPING_PIVOT_TOLERANCE` of the standard band's pivot.
    """
    by_name = {b.name: b for b in bands if isinstance(b, Band)}
    out = []
    for observed, standard in mapping.items():
        band = by_name.get(observed)
        try:
            target = get_band(standard)
        except BandError:
            continue
        if band is None:
            continue
        lam_obs, lam_std = band.pivot_wavelength, target.pivot_wavelength
        offset = lam_obs / lam_std - 1
        if abs(offset) > MAPPING_PIVOT_TOLERANCE:
            out.append(
                f"band mapping {observed}={target.name}: pivot wavelengths {lam_obs:.3f} and {lam_std:.3f} um "
                f"differ by {100 * abs(offset):.0f}% (more than {100 * MAPPING_PIVOT_TOLERANCE:.0f}%): the "
                "mapped band's colours may be off by more than the template scatter"
            )
    return out
