"""Host-star magnitudes synthesised in bands with no catalogue value.

The usual adaptive-optics case: a companion's contrast is measured in L′, a
narrow band or an instrument band where the host star has no catalogue
magnitude. The host's magnitude there is taken from a spectrum (a blackbody
of the host's Teff, or a user spectrum) normalised to its catalogue
magnitude in a *reference* band:

    m_host(B) = m_host(R) + [m(B) - m(R)]_spectrum

where the colour in brackets is synthetic photometry of the spectrum in the
same magnitude system as the catalogue magnitude m_host(R). The 1-sigma of
the result is sqrt(σ_R² + σ_sys²), with σ_sys a stated systematic for the
spectrum model (default 0.15 mag; see
:data:`motes.photometry.targets.DEFAULT_SYNTHESIS_SYSTEMATIC_MAG`).

Caveat: a blackbody has no absorption bands. Real K and M dwarfs have CO
and H2O bands in the near infrared and the colour between two bands can
differ from a blackbody's by 0.1-0.2 mag; the further the reference band is from
the target band, the larger the error. Give a model-atmosphere spectrum for
cool hosts when it matters.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import PhotometryError
from ..parameters import accepts_quantities
from .bands import Band
from .spectra import blackbody_flux_lambda

__all__ = [
    "SynthesisedMagnitude",
    "spectrum_colour",
    "nearest_reference_band",
    "synthesise_host_magnitude",
]


@dataclass(frozen=True)
class SynthesisedMagnitude:
    """A host magnitude synthesised from a spectrum.

    Attributes
    ----------
    band : Band
        The band of the synthesised magnitude.
    magnitude : float [mag]
        In ``system``.
    error : float [mag]
        1-sigma: reference-magnitude error and systematic in quadrature.
    system : {"Vega", "AB"}
        The system of the reference catalogue magnitude.
    reference : Band
    colour : float [mag]
        m(band) - m(reference) of the spectrum, in ``system``.
    systematic : float [mag]
    model : str
        E.g. ``"4500 K blackbody"``.
    """

    band: Band
    magnitude: float
    error: float
    system: str
    reference: Band
    colour: float
    systematic: float
    model: str

    @property
    def note(self) -> str:
        """One-line description for table notes."""
        return (
            f"host magnitude synthesised from a {self.model} normalised to {self.reference.name} "
            f"(colour {self.colour:+.3f} mag, +{self.systematic:.2f} mag systematic)"
        )


def _band_mean_flux(band: Band, teff: float | None, spectrum) -> float:
    if spectrum is not None:
        return band.average_flux_lambda(spectrum.wavelength, spectrum.flux_lambda)
    return band.average_flux_lambda_of(lambda wl: blackbody_flux_lambda(wl, teff))


@accepts_quantities
def spectrum_colour(band: Band, reference: Band, *, teff: float | None = None, spectrum=None,
                    system: str = "Vega") -> float:
    """Synthetic colour m(band) - m(reference) of a spectrum [mag].

    Parameters
    ----------
    band, reference : Band
    teff : float [K], optional
        Blackbody temperature (used when ``spectrum`` is None).
    spectrum : HostSpectrum, optional
        Wavelength [um] and F_lambda (any unit); must cover both bands.
    system : {"Vega", "AB"}

    Returns
    -------
    float

    Notes
    -----
    Vega: m = -2.5 log10(<F_λ> / <F_λ,Vega>) + m_Vega per band; AB adds
    each band's m_AB - m_Vega. Band averages follow each band's counting mode.
    """
    if spectrum is None and (teff is None or not teff > 0):
        raise PhotometryError("a colour needs a Teff > 0 or a spectrum")
    f_band = _band_mean_flux(band, teff, spectrum)
    f_ref = _band_mean_flux(reference, teff, spectrum)
    colour = float(band.vega_magnitude_of(f_band) - reference.vega_magnitude_of(f_ref))
    if system == "AB":
        colour += band.ab_minus_vega - reference.ab_minus_vega
    return colour


def nearest_reference_band(band: Band, candidates) -> Band:
    """The candidate band nearest to ``band`` in log pivot wavelength.

    Parameters
    ----------
    band : Band
    candidates : sequence of Band
        Bands with a host catalogue magnitude.
    """
    candidates = list(candidates)
    if not candidates:
        raise PhotometryError(f"no host catalogue magnitude to normalise a synthesised {band.name} magnitude to")
    lp = math.log(band.pivot_wavelength)
    return min(candidates, key=lambda b: abs(math.log(b.pivot_wavelength) - lp))


def synthesise_host_magnitude(band: Band, host, *, reference: Band | None = None,
                              systematic: float = 0.15) -> SynthesisedMagnitude:
    """The host's magnitude in ``band`` from its spectrum model.

    Parameters
    ----------
    band : Band
        Band with no catalogue magnitude.
    host : HostStar
        Needs catalogue magnitudes and a ``teff`` or a ``spectrum`` (the
        spectrum wins when both are given).
    reference : Band, optional
        Band to normalise to (must have a host magnitude); default: the
        nearest in pivot wavelength.
    systematic : float [mag]
        Added in quadrature.

    Returns
    -------
    SynthesisedMagnitude

    Raises
    ------
    PhotometryError
        When the host has no Teff/spectrum or no catalogue magnitudes.
    """
    if host.spectrum is None and not (host.teff > 0):
        raise PhotometryError(f"the host has no magnitude in {band.name} and no teff_k or spectrum to "
                              "synthesise one from")
    bands = [m.band for m in host.magnitudes]
    if reference is None:
        reference = nearest_reference_band(band, bands)
    entry = host.magnitude_in(reference)
    if entry is None:
        raise PhotometryError(f"the host has no catalogue magnitude in the reference band {reference.name}")
    colour = spectrum_colour(band, entry.band, teff=host.teff, spectrum=host.spectrum, system=entry.system)
    model = (f"spectrum ({host.spectrum.source})" if host.spectrum is not None
             else f"{host.teff:.0f} K blackbody")
    error = float(np.hypot(entry.error, systematic))
    return SynthesisedMagnitude(band, entry.magnitude + colour, error, entry.system, entry.band, colour,
                                float(systematic), model)
