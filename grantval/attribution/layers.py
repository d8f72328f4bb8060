"""Cost layers: the pieces of cost a tranche carries, each attributed over its own service period.

A tranche's cumulative cost at a date is the sum over its layers of

    fair value per unit of the layer x units expected to vest x fraction of the layer's service served,

where a layer's service runs from its ``start`` to the tranche's vesting date (graded
attribution) or to the award's last vesting date (straight-line attribution, per layer
set).  The grant-date fair value is layer set 0 of every tranche, starting on the grant
date; a modification adds a set whose layers start on the modification date.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: layer kinds, as reported
KINDS = ("grant", "modification", "remeasurement")


@dataclass
class CostLayers:
    """Cost layers of all tranches, one entry per layer.

    Attributes
    ----------
    tranche : ndarray of int64
        Position of the layer's tranche in the ledger's tranche table.
    fair_value : ndarray of float
        Fair value per unit of the layer, currency (full float).
    start : ndarray of datetime64[D]
        First day of the layer's service.
    set_id : ndarray of int64
        Layer set of the layer within its award (0 = grant-date value).  Under
        straight-line attribution the layers of one set share one service fraction.
    kind : ndarray of str
        One of :data:`KINDS`.
    end : ndarray of datetime64[D], optional
        Last day of the layer's service where it is not the tranche's (NaT: the tranche's service
        end).  A modification that changes the vesting schedule keeps the original cost on the
        original service period (ASC 718-20-55-107; IFRS 2 B44(c)).  None: NaT everywhere.
    kept : ndarray of bool, optional
        The layer's cost stays recognised for units forfeited on or after its ``end``: the units
        met the layer's (original) service condition although the tranche now vests later
        (ASC 718-20-55-107: "would have vested under the original vesting conditions";
        IFRS 2 B44(c)).  None: False everywhere.
    """

    tranche: np.ndarray
    fair_value: np.ndarray
    start: np.ndarray
    set_id: np.ndarray
    kind: np.ndarray
    end: np.ndarray | None = None
    kept: np.ndarray | None = None

    def __post_init__(self):
        n = len(self.tranche)
        if self.end is None:
            self.end = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
        if self.kept is None:
            self.kept = np.zeros(n, dtype=bool)

    def __len__(self) -> int:
        return len(self.tranche)

    def per_tranche_value(self, n_tranches: int) -> np.ndarray:
        """Sum of the layers' fair values per unit, for each tranche (currency per unit)."""
        return np.bincount(self.tranche, weights=self.fair_value, minlength=n_tranches)


def grant_date_layers(fair_value: np.ndarray, grant_date_of_tranche: np.ndarray) -> CostLayers:
    """One layer per tranche: its grant-date fair value, served from the grant date."""
    n = len(fair_value)
    return CostLayers(
        tranche=np.arange(n, dtype=np.int64),
        fair_value=np.asarray(fair_value, dtype=float),
        start=np.asarray(grant_date_of_tranche, dtype="datetime64[D]"),
        set_id=np.zeros(n, dtype=np.int64),
        kind=_same_text(n, "grant"),
    )


def _same_text(n: int, text: str) -> np.ndarray:
    """An object array of ``n`` references to one string (``np.full`` would make ``n`` string objects)."""
    out = np.empty(n, dtype=object)
    out[:] = text
    return out


def append_layers(base: CostLayers, more: CostLayers) -> CostLayers:
    """Both sets of layers in one table (``more`` after ``base``)."""
    return CostLayers(*(np.concatenate([getattr(base, f), getattr(more, f)])
                        for f in ("tranche", "fair_value", "start", "set_id", "kind", "end", "kept")))
