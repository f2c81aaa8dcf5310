"""Stellar and reference spectra: blackbodies and user spectra.

Spectra are plain arrays inside motes: wavelength [um], F_lambda
[W m^-2 um^-1] (or any consistent F_lambda unit when only ratios matter).
"""

from __future__ import annotations

from ..planck import planck_lambda

__all__ = ["blackbody_flux_lambda"]

#: The one Planck function (motes.planck), under the name photometry has always used.
blackbody_flux_lambda = planck_lambda
