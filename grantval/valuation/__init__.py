"""Public name kept from the first release: the pricing core now lives in :mod:`grantval.pricing`.

``from grantval.valuation import bsm_value, lattice_value, simplified_term, rsu_value``
keeps working (documented in README.md).
"""

from grantval.pricing import DEFAULT_STEPS, bsm_sensitivities, bsm_value, lattice_value, rsu_value, simplified_term

__all__ = ["bsm_value", "bsm_sensitivities", "lattice_value", "simplified_term", "rsu_value", "DEFAULT_STEPS"]
