"""Fast path of a belt: the ring model of :mod:`motes.dust.model.thermal_fast` summed over radius nodes.

A belt from r_in to r_out with surface density Sigma ∝ r^p holds the same
grains (composition, porosity, size distribution) at every radius; only
their temperatures change with r. Its band flux per unit of total grain
cross-section is the ring's at each radius node, weighted by the share of
the cross-section there (:func:`motes.dust.model.thermal.belt_nodes`:
Gauss-Legendre in ln r, weights ∝ r^(p+2) dln r). The amount of dust is the
same free thermal scale as for a ring (total cross-section [au^2]).

:class:`ThermalBeltModel` calls :meth:`ThermalRingModel.evaluate` once per
batch, on the parameter points repeated at every radius node, so a belt
costs ``radial_nodes`` times a ring (the ring's internals are not touched).
:data:`FAST_RADIAL_NODES` is the default node count; its accuracy against the
exact path is measured in ``tests/test_dust_thermal_belt.py``.
"""

from __future__ import annotations

import numpy as np

from ...errors import InputError
from ...parameters import BOUNDARY_QUANTITIES, PARAMETERS, accepts_quantities
from .thermal import belt_nodes

__all__ = ["ThermalBeltModel", "FAST_RADIAL_NODES", "BELT_NOTE"]

#: Gauss-Legendre nodes in ln r of the fast belt. Exact path, band fluxes against 24-32 nodes (measured,
#: issue 13): r_out / r_in = 4, p = -2, -1, +1: 4 nodes <= 1.0e-4, 6 nodes <= 1.0e-8; r_out / r_in = 20,
#: p = -1: 4 nodes 9.8e-4, 6 nodes 4.5e-6. Six keep the radial sum far below the fast path's own ~2%.
FAST_RADIAL_NODES = 6
BELT_NOTE = ("belt: the same grains at every radius, the ring model summed over Gauss nodes in ln r with "
             "cross-section shares ∝ Sigma r^2 dln r; r/r_bb uses the cross-section-weighted mean radius")


@accepts_quantities(extra={"belt_au": BOUNDARY_QUANTITIES["r_au"]})
class ThermalBeltModel:
    """Band fluxes of a belt of one material set's mixtures, batched over parameter points.

    Parameters
    ----------
    ring : motes.dust.model.thermal_fast.ThermalRingModel
        The ring model of the same description, bands and distance.
    belt_au : (float, float) [au]
        Inner and outer edge, 0 < r_in < r_out (a Quantity pair is converted to au).
    surface_density_index : float
        p of Sigma ∝ r^p (:data:`motes.parameters.PARAMETERS` ``surface_density_index``).
    radial_nodes : int, default :data:`FAST_RADIAL_NODES`

    Notes
    -----
    :meth:`evaluate` returns Jy per au^2 of total grain cross-section, like
    the ring model's, so the thermal scale of a fit means the same for both.
    """

    def __init__(self, ring, belt_au, surface_density_index: float = PARAMETERS["surface_density_index"].default,
                 radial_nodes: int = FAST_RADIAL_NODES):
        try:
            r_in, r_out = (float(v) for v in belt_au)
        except (TypeError, ValueError):
            raise InputError(f"belt_au must be a pair [r_in, r_out] of numbers [au], got {belt_au!r}",
                             where="belt_au") from None
        if not (np.isfinite(r_in) and np.isfinite(r_out) and 0 < r_in < r_out):
            raise InputError(f"a belt needs 0 < r_in < r_out [au], got {[r_in, r_out]}", where="belt_au")
        declared = PARAMETERS["surface_density_index"]
        if not declared.contains(surface_density_index):
            raise InputError(f"surface_density_index must be in {declared.interval}, got {surface_density_index!r}",
                             where="surface_density_index")
        if not (isinstance(radial_nodes, (int, np.integer)) and radial_nodes >= 2):
            raise InputError(f"radial_nodes must be an integer >= 2, got {radial_nodes!r}", where="radial_nodes")
        self.ring = ring
        self.belt_au = (r_in, r_out)
        self.surface_density_index = float(surface_density_index)
        self.radii, self.shares = belt_nodes(r_in, r_out, self.surface_density_index, int(radial_nodes))
        #: Cross-section-weighted mean radius [au] (what r / r_bb of a belt uses).
        self.mean_radius = float(np.sum(self.shares * self.radii))
        self.notes = tuple(dict.fromkeys([*ring.notes, BELT_NOTE]))

    def __getattr__(self, name):
        # bands, star_flux, distance_pc, description, luminosity, table, effective_index, ...: the ring's
        if name == "ring":
            raise AttributeError(name)
        return getattr(self.ring, name)

    def prepare(self, fractions, porosity) -> None:
        """Build, in advance, the table tiles these mixtures need."""
        self.ring.prepare(fractions, porosity)

    @accepts_quantities
    def evaluate(self, fractions, porosity, a_min, a_max, q, radius_au=None, temperatures: bool = False):
        """Band fluxes [Jy per au^2 of grain cross-section at distance_pc], shape [N, n_bands].

        Parameters
        ----------
        fractions : ndarray[N, n_materials]
        porosity, a_min, a_max, q : ndarray[N] (or scalars broadcasting)
        radius_au : None
            A belt's radii are fixed (refused otherwise: a ring model takes a radius).
        temperatures : bool
            Also return the grain temperatures [N, R, N_SIZES_T] [K], their sizes [N, N_SIZES_T]
            [um] and the radius nodes [R] [au].
        """
        if radius_au is not None:
            raise InputError("a belt's radii are fixed by its edges: give no radius_au", where="radius_au")
        f = np.atleast_2d(np.asarray(fractions, dtype=float))
        n, n_r = f.shape[0], self.radii.size
        par = [np.repeat(np.broadcast_to(np.asarray(v, dtype=float), (n,)), n_r) for v in (porosity, a_min, a_max, q)]
        r = np.tile(self.radii, n)
        out = self.ring.evaluate(np.repeat(f, n_r, axis=0), *par, r, temperatures=temperatures)
        flux, rest = (out[0], out[1:]) if temperatures else (out, ())
        belt = np.einsum("nrb,r->nb", flux.reshape(n, n_r, -1), self.shares)
        if not temperatures:
            return belt
        t_nodes, sizes = rest
        return belt, t_nodes.reshape(n, n_r, -1), sizes.reshape(n, n_r, -1)[:, 0], self.radii.copy()
