"""Fast path of the disk-colour model (placeholder while the lookup tables are built).

TEMPORARY: until the tabulated path lands, ``method="fast"`` evaluates the exact
quadrature, so results are right but slow.
"""

from __future__ import annotations

__all__ = ["table_for_model"]


class _ExactStandIn:
    def __init__(self, model):
        self.model = model

    def node_values(self, m, wavelength, a_min, q, a_max):
        return self.model.node_values_exact(m, wavelength, a_min, q, a_max)


def table_for_model(model):
    """Lookup table serving ``model`` (placeholder: exact evaluation)."""
    return _ExactStandIn(model)
