"""The validated ledger held in memory."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.errors import Problem


@dataclass
class Ledger:
    """A ledger that passed every check.

    Attributes
    ----------
    location : str
        The folder or workbook it was read from.
    files : list of (path, sha256)
        Every input file with its digest.
    grants : DataFrame
        One row per grant, typed, defaults applied, ``_row`` = spreadsheet row.
    assumptions : DataFrame
        The assumptions table, typed.
    grant_assumption : ndarray of int
        Row of ``assumptions`` that applies to each grant.
    tranches : DataFrame
        ``grant_idx``, ``tranche``, ``vest_date``, ``quantity`` (as granted).
    events : DataFrame
        The events table, typed (may be empty).
    changes : DataFrame
        Events allocated to tranches: ``tranche_idx``, ``event_idx``, ``date``,
        ``kind``, ``quantity``.
    estimates : DataFrame
        The forfeiture-estimates table, typed (may be empty).
    policy_values : dict
        Policies set in the ledger's ``policy`` table.
    warnings : list of Problem
    tables : dict of str to DataFrame
        Every table of the format, typed (empty when absent), including the
        tables of the ledger extensions (:mod:`grantval.ledger.extensions`).
    """

    location: str
    files: list[tuple[str, str]]
    grants: pd.DataFrame
    assumptions: pd.DataFrame
    grant_assumption: np.ndarray
    tranches: pd.DataFrame
    events: pd.DataFrame
    changes: pd.DataFrame
    estimates: pd.DataFrame
    policy_values: dict
    sources: dict[str, str] = field(default_factory=dict)
    warnings: list[Problem] = field(default_factory=list)
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)

    @property
    def n_grants(self) -> int:
        return len(self.grants)
