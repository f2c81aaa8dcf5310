"""Linear polarisation of light scattered by spheres: S11, -S12 and the degree of polarisation.

For unpolarised incident light, a sphere's scattering matrix has (Bohren &
Huffman 1983, eq. 4.77, with their amplitudes S1, S2)::

    S11 = (|S1|^2 + |S2|^2) / 2,        -S12 = (|S1|^2 - |S2|^2) / 2,

so that the scattered intensity is ``S11`` and the linearly polarised
intensity ``-S12`` (both per ``k^2 r^2`` times the incident intensity), and the
degree of linear polarisation is ``-S12 / S11``: **positive when the light is
polarised perpendicular to the scattering plane** (Rayleigh scattering at 90
deg gives +1), negative when parallel. This is the sign of
:func:`motes.optics.mie.polarised_phase_function`, which is ``-S12`` divided by
``pi x^2 Q_sca``. A negative ``-S12`` is a result (e.g. near the rainbow and
the glory of large spheres), not an error.

The functions here broadcast like :func:`motes.optics.mie.scattered_intensity`:
indices and size parameters to a shape ``S``, angles along a last axis.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..parameters import SCATTERING_ANGLE_RAD, accepts_quantities
from . import mie
from .coated import coated_scattering_amplitudes

__all__ = [
    "ScatteringElements",
    "scattering_elements",
    "sphere_polarisation",
    "coated_polarisation",
    "degree_of_polarisation",
    "polarised_intensity",
]


@dataclass(frozen=True)
class ScatteringElements:
    """Intensity and polarised elements of the scattering matrix, per size and angle.

    Attributes
    ----------
    s11 : ndarray
        ``(|S1|^2 + |S2|^2) / 2``.
    minus_s12 : ndarray
        ``(|S1|^2 - |S2|^2) / 2``; positive when polarised perpendicular to the
        scattering plane.
    """

    s11: np.ndarray
    minus_s12: np.ndarray

    @property
    def degree(self) -> np.ndarray:
        """Degree of linear polarisation ``-S12 / S11`` (nan where ``S11 = 0``)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(self.s11 > 0, self.minus_s12 / self.s11, np.nan)


def scattering_elements(s1, s2) -> ScatteringElements:
    """S11 and -S12 from Bohren & Huffman amplitudes.

    Parameters
    ----------
    s1, s2 : complex ndarray
        Amplitude functions (any broadcastable shapes).

    Returns
    -------
    ScatteringElements

    Examples
    --------
    >>> e = scattering_elements(1.0 + 0j, 0.0 + 0j)   # light polarised perpendicular to the plane
    >>> print(f"{float(e.degree):+.2f}")
    +1.00
    """
    i1 = np.abs(np.asarray(s1)) ** 2
    i2 = np.abs(np.asarray(s2)) ** 2
    return ScatteringElements(s11=0.5 * (i1 + i2), minus_s12=0.5 * (i1 - i2))


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def sphere_polarisation(m, x, theta) -> ScatteringElements:
    """S11 and -S12 of homogeneous spheres (amplitudes from :mod:`motes.optics.mie`).

    Parameters
    ----------
    m : complex or complex ndarray
        ``n + i k`` with ``k >= 0``.
    x : float or ndarray
        Size parameter ``2 pi a / lambda``; broadcasts with ``m`` to shape ``S``.
    theta : float or ndarray[n_theta]
        Scattering angles [rad] in [0, pi].

    Returns
    -------
    ScatteringElements
        Arrays of shape ``[*S, n_theta]`` (``[*S]`` for scalar ``theta``).

    Examples
    --------
    Rayleigh limit at 60 deg: ``(1 - cos^2) / (1 + cos^2) = 0.6`` (Bohren & Huffman 1983, ch. 5).

    >>> import numpy as np
    >>> print(f"{float(sphere_polarisation(1.5, 1e-3, np.pi / 3).degree):.4f}")
    0.6000
    """
    return scattering_elements(*mie.scattering_amplitudes(m, x, theta))


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def coated_polarisation(m_core, m_mantle, x, core_volume_fraction, theta) -> ScatteringElements:
    """S11 and -S12 of coated spheres (:func:`motes.optics.coated.coated_scattering_amplitudes`).

    Parameters
    ----------
    m_core, m_mantle : complex or complex ndarray
        Indices ``n + i k`` (``k >= 0``).
    x : float or ndarray
        Outer size parameter.
    core_volume_fraction : float or ndarray
        ``(a_core / a_outer)^3`` in [0, 1]. The four broadcast to shape ``S``.
    theta : float or ndarray[n_theta]
        Scattering angles [rad].

    Returns
    -------
    ScatteringElements
        Arrays of shape ``[*S, n_theta]`` (``[*S]`` for scalar ``theta``).
    """
    return scattering_elements(*coated_scattering_amplitudes(m_core, m_mantle, x, core_volume_fraction, theta))


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def degree_of_polarisation(m, x, theta) -> np.ndarray:
    """Degree of linear polarisation ``-S12 / S11`` of homogeneous spheres.

    Parameters
    ----------
    m, x : broadcast to shape ``S``
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    ndarray[*S, n_theta] (``[*S]`` for scalar ``theta``)
        In [-1, 1]; positive when perpendicular to the scattering plane.
    """
    return sphere_polarisation(m, x, theta).degree


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def polarised_intensity(m, x, theta) -> np.ndarray:
    """Angle-averaged ``|S1|^2 - |S2|^2`` of homogeneous spheres over ``theta`` (equal weights).

    The polarised twin of :func:`motes.optics.mie.scattered_intensity`: it is
    ``-2 S12``, to be integrated over sizes with the same weights (for coated
    spheres, :func:`motes.optics.coated.coated_intensities` returns both).

    Parameters
    ----------
    m, x : broadcast to shape ``S``
    theta : float or ndarray[n_theta] [rad]

    Returns
    -------
    ndarray[*S]
    """
    return mie.polarised_scattered_intensity(m, x, np.atleast_1d(np.asarray(theta, dtype=float)))
