"""Arrays the expense engine works on, built from a checked ledger and its fair values."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.fairvalue import FairValues
from grantval.ledger.model import Ledger


@dataclass
class ExpenseInputs:
    """Everything the engine needs, as arrays (one entry per grant, tranche or change).

    Dates are ``datetime64[D]``; quantities are int64; fair values are
    currency per unit (full floats).
    """

    grant_id: np.ndarray
    group: np.ndarray
    grant_date: np.ndarray
    last_vest: np.ndarray          # per grant: end of the requisite service period
    t_grant: np.ndarray            # per tranche: grant position
    t_vest: np.ndarray             # per tranche: vest date
    t_qty: np.ndarray              # per tranche: quantity granted
    t_fv: np.ndarray               # per tranche: fair value per unit
    c_tranche: np.ndarray          # per change: tranche position
    c_date: np.ndarray             # per change: date
    c_qty: np.ndarray              # per change: quantity
    c_kind: np.ndarray             # per change: forfeit, cancel, exercise, expire
    est_applies_to: np.ndarray     # per estimate row
    est_effective: np.ndarray
    est_rate: np.ndarray
    est_fraction: np.ndarray
    #: what-if: a function applied to the annual forfeiture rate (0 where none) of the grants in
    #: ``rate_shift_mask``; grants estimated by an expected vest fraction are left as they are
    rate_shift: object = None
    rate_shift_mask: np.ndarray | None = None
    #: shared across runs that differ only in fair values (what-if scenarios): quantities by date
    memo: dict | None = None
    #: shift label, part of the memo key when a forfeiture-rate shift is applied
    rate_shift_label: str = ""
    _prep: object = None

    @property
    def n_grants(self) -> int:
        return len(self.grant_id)

    def prepared(self) -> "Prepared":
        """Integer day numbers and index arrays computed once per inputs object."""
        if self._prep is None:
            self._prep = Prepared(self)
        return self._prep


class Prepared:
    """Static per-tranche, per-change and per-estimate arrays, as int64 day numbers."""

    def __init__(self, inp: ExpenseInputs):
        day = lambda a: np.asarray(a, dtype="datetime64[D]").astype(np.int64)  # noqa: E731
        self.grant = day(inp.grant_date)
        self.last = day(inp.last_vest)
        self.t_gdate = self.grant[inp.t_grant]
        self.t_vest = day(inp.t_vest)
        self.t_len = self.t_vest - self.t_gdate
        self.g_len = self.last - self.grant
        self.c_date = day(inp.c_date)
        self.c_forfeit = inp.c_kind == "forfeit"
        self.c_cancel = (inp.c_kind == "cancel") & (self.t_vest[inp.c_tranche] > self.c_date)
        self.est_eff = day(inp.est_effective)
        keys = sorted({k for k in inp.est_applies_to if k is not None})
        self.est_keys = keys
        index = {k: i for i, k in enumerate(keys)}
        self.est_key = np.array([index.get(k, -1) for k in inp.est_applies_to], dtype=np.int64)
        self.code_grant = np.array([index.get(k, -1) for k in inp.grant_id], dtype=np.int64)
        self.code_group = np.array([index.get(k, -1) for k in inp.group], dtype=np.int64)
        self.code_star = index.get("*", -1)


def build_inputs(ledger: Ledger, fair_values: FairValues) -> ExpenseInputs:
    """Collect the engine's arrays from a ledger and its fair values."""
    g, tr, ch, est = ledger.grants, ledger.tranches, ledger.changes, ledger.estimates
    t_grant = tr["grant_idx"].to_numpy(np.int64)
    t_vest = tr["vest_date"].to_numpy("datetime64[D]")
    last = pd.Series(t_vest).groupby(t_grant).max()
    last_vest = np.full(len(g), np.datetime64("NaT"), dtype="datetime64[D]")
    last_vest[last.index.to_numpy()] = last.to_numpy("datetime64[D]")
    return ExpenseInputs(
        grant_id=g["grant_id"].to_numpy(dtype=object),
        group=g["group"].to_numpy(dtype=object),
        grant_date=g["grant_date"].to_numpy("datetime64[D]"),
        last_vest=last_vest,
        t_grant=t_grant,
        t_vest=t_vest,
        t_qty=tr["quantity"].to_numpy(np.int64),
        t_fv=np.asarray(fair_values.tranche_value, dtype=float),
        c_tranche=ch["tranche_idx"].to_numpy(np.int64),
        c_date=ch["date"].to_numpy("datetime64[D]"),
        c_qty=ch["quantity"].to_numpy(np.int64),
        c_kind=ch["kind"].to_numpy(dtype=object),
        est_applies_to=est["applies_to"].to_numpy(dtype=object),
        est_effective=est["effective_date"].to_numpy("datetime64[D]"),
        est_rate=est["annual_forfeiture_rate"].to_numpy(float),
        est_fraction=est["expected_vest_fraction"].to_numpy(float),
    )
