"""The award kinds known to grantval, by ``award_type``.

Adding a kind: write ``grantval/awards/<kind>.py`` defining ``KIND`` and add one
line to :data:`MODULES`.  Modules are imported on first use, so the ledger format
can list the award types without importing the pricing engines.
"""

from __future__ import annotations

import importlib

import numpy as np

from grantval.awards.base import AwardKind

#: award_type -> module defining ``KIND``
MODULES = {
    "option": "grantval.awards.option",
    "rsu": "grantval.awards.rsu",
    "psu": "grantval.awards.psu",
    "cash_sar": "grantval.awards.cash_sar",
    "cash_unit": "grantval.awards.cash_unit",
    "espp": "grantval.awards.espp",  # ESPP enrollments (synthesized from espp_enrollments)
}

#: the award types accepted in the grants table, in the order documented
AWARD_TYPES = tuple(MODULES)


def kind(name: str) -> AwardKind:
    """The :class:`AwardKind` of ``award_type`` ``name``."""
    return importlib.import_module(MODULES[name]).KIND


def kinds() -> list[AwardKind]:
    """Every registered kind, in :data:`AWARD_TYPES` order."""
    return [kind(n) for n in AWARD_TYPES]


def flag(award_types: np.ndarray, attribute: str) -> np.ndarray:
    """Boolean array: the kind of each ``award_types`` entry has ``attribute`` true (False for unknown types)."""
    award_types = np.asarray(award_types, dtype=object)
    out = np.zeros(len(award_types), dtype=bool)
    for k in kinds():
        if getattr(k, attribute):
            out |= award_types == k.name
    return out


def in_group(award_types: np.ndarray, group: str) -> np.ndarray:
    """Boolean array: the award is disclosed in activity table ``group`` (``options`` or ``units``)."""
    award_types = np.asarray(award_types, dtype=object)
    out = np.zeros(len(award_types), dtype=bool)
    for k in kinds():
        if k.disclosure_group == group:
            out |= award_types == k.name
    return out
