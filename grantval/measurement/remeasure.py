"""Fair value per unit of cash-settled awards at any measurement date (remeasurement).

The rule for a date ``d`` (see docs/cash-settled.md):

1. a ``liability_values`` row measured on exactly ``d``, the most specific one
   (``applies_to`` = the grant, else its group, else ``*``): used as given;
2. else an ``assumptions`` row for ``d`` (its ``assumption_set`` is the ISO text of
   ``d``, or its ``assumption_set`` is blank and its ``grant_date`` is ``d``): its
   ``fair_value`` if given, else the award is valued on it: share appreciation
   rights by Black-Scholes-Merton (``model`` = ``bsm``) or the employee-option
   lattice (``lattice``) over the remaining contractual term, expiration - ``d``;
   cash units as the share price less the dividends forgone until each tranche
   vests, ``S e^{-q (vest - d)}``;
3. else a :class:`~grantval.errors.LedgerError` naming the grant and the date.

There is no interpolation and no carrying forward: a date that is not a reporting
date with a value (a mid-period date, say) is an error unless it is after the
``hold_after`` date of a forecast, where the values of ``hold_after`` are kept.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from grantval.dates import DAYS_PER_YEAR
from grantval.errors import LedgerError, Problem
from grantval.ledger.model import Ledger
from grantval.pricing import DEFAULT_STEPS, bsm_value, lattice_value, rsu_value


_ISO = re.compile(r"^\d{4}-\d{2}-\d{2}$")


@dataclass
class UnitValues:
    """Fair values per unit at one date.

    Attributes
    ----------
    tranche_value : ndarray, per tranche
        Currency per unit (NaN for tranches not asked for).
    method : ndarray of str, per grant
        Where each grant's value came from, in words (empty where not asked for).
    """

    tranche_value: np.ndarray
    method: np.ndarray


def _day(d) -> int:
    return int(np.datetime64(d, "D").astype(np.int64))


class Remeasurer:
    """Fair values per unit of a ledger's cash awards at any date, by the module's rule.

    Parameters
    ----------
    ledger : Ledger
        A checked ledger.
    steps : int, optional
        Lattice steps (default the pricing default).
    """

    def __init__(self, ledger: Ledger, steps: int | None = None):
        g, tr = ledger.grants, ledger.tranches
        self.ledger = ledger
        self.steps = steps or DEFAULT_STEPS
        self.ids = g["grant_id"].to_numpy(dtype=object)
        self.group = g["group"].to_numpy(dtype=object)
        self.award = g["award_type"].to_numpy(dtype=object)
        self.rows = g["_row"].to_numpy()
        self.strike = g["exercise_price"].to_numpy(float)
        self.expiry = g["expiration_date"].to_numpy("datetime64[D]").astype(np.int64)
        self.gi = tr["grant_idx"].to_numpy(np.int64)
        self.t_vest = tr["vest_date"].to_numpy("datetime64[D]").astype(np.int64)
        lv = ledger.tables.get("liability_values")
        self.lv_src = ledger.sources.get("liability_values", "liability_values")
        self.lv_key = lv["applies_to"].to_numpy(dtype=object) if lv is not None else np.zeros(0, dtype=object)
        self.lv_day = (lv["measured_on"].to_numpy("datetime64[D]").astype(np.int64) if lv is not None
                       else np.zeros(0, dtype=np.int64))
        self.lv_value = lv["fair_value"].to_numpy(float) if lv is not None else np.zeros(0)
        self.lv_row = lv["_row"].to_numpy() if lv is not None else np.zeros(0, dtype=np.int64)
        a = ledger.assumptions
        self.a = a
        self.a_src = ledger.sources.get("assumptions", "assumptions")
        self._by_date = self._assumption_dates(a)
        self._index_rows()
        self.cache: dict[int, UnitValues] = {}

    @staticmethod
    def _assumption_dates(a) -> dict[int, int]:
        """Day number -> assumptions row for that date (a set named by the date, else a dated row)."""
        out: dict[int, int] = {}
        names = a["assumption_set"].to_numpy(dtype=object)
        dates = a["grant_date"].to_numpy("datetime64[D]")
        for i, (name, d) in enumerate(zip(names, dates)):
            if not isinstance(name, str) and not np.isnat(d):  # blank set names may be None or NaN
                out.setdefault(_day(d), i)
        for i, name in enumerate(names):
            if isinstance(name, str) and _ISO.match(name.strip()):
                try:
                    out[_day(np.datetime64(name.strip(), "D"))] = i
                except ValueError:
                    continue
        return out

    def _index_rows(self) -> None:
        """Per ``liability_values`` row: the grant, group code or ``*`` it applies to (vectorised lookups)."""
        pos = {k: i for i, k in enumerate(self.ids)}
        groups = sorted({k for k in self.group if k is not None})
        gcode = {k: i for i, k in enumerate(groups)}
        self.n_groups = len(groups)
        self.g_code = np.array([gcode.get(k, -1) for k in self.group], dtype=np.int64)
        self.lv_grant = np.array([pos.get(k, -1) for k in self.lv_key], dtype=np.int64)
        self.lv_group = np.array([gcode.get(k, -1) if k not in pos else -1 for k in self.lv_key], dtype=np.int64)
        self.lv_star = np.array([k == "*" for k in self.lv_key], dtype=bool)
        self.lv_label = np.array([f"{self.lv_src} row {r}" for r in self.lv_row], dtype=object)

    def _liability_row(self, dn: int, grants: np.ndarray) -> np.ndarray:
        """Per grant: the most specific ``liability_values`` row measured on day ``dn`` (-1: none)."""
        found = np.full(len(self.ids), -1, dtype=np.int64)
        on_day = np.flatnonzero(self.lv_day == dn)
        if not on_day.size:
            return found
        by_grant = on_day[self.lv_grant[on_day] >= 0]
        found[self.lv_grant[by_grant]] = by_grant
        by_group = on_day[self.lv_group[on_day] >= 0]
        if by_group.size:
            group_row = np.full(self.n_groups, -1, dtype=np.int64)
            group_row[self.lv_group[by_group]] = by_group
            hit = np.where(self.g_code >= 0, group_row[np.maximum(self.g_code, 0)], -1)
            found = np.where(found < 0, hit, found)
        star = on_day[self.lv_star[on_day]]
        if star.size:
            found = np.where(found < 0, star[-1], found)
        return np.where(grants, found, -1)

    def _missing(self, dn: int, grants: np.ndarray) -> LedgerError:
        d = str(np.datetime64(dn, "D"))
        gsrc = self.ledger.sources.get("grants", "grants")
        problems = [Problem(self.lv_src, None, "measured_on",
                            f"cash-settled grant {self.ids[i]} ({gsrc} row {self.rows[i]}) has no fair value for "
                            f"{d}: give a liability_values row measured_on {d} (applies_to the grant, its group "
                            f"or '*'), or an assumptions row for {d} (assumption_set {d}, or grant_date {d} with "
                            "assumption_set blank) to value it with")
                    for i in np.flatnonzero(grants)[:20]]
        return LedgerError(problems, self.ledger.location)

    def values_at(self, d, grants: np.ndarray) -> UnitValues:
        """Fair value per unit at ``d`` of every tranche of the grants in the boolean mask ``grants``.

        Raises
        ------
        LedgerError
            Naming each grant (and the date) with neither a ``liability_values`` row nor an
            assumptions row for the date.
        """
        dn = _day(d)
        grants = np.asarray(grants, dtype=bool)
        hit = self.cache.get(dn)
        if hit is not None and not np.any(grants & (hit.method == "")):
            return hit
        out = hit if hit is not None else UnitValues(np.full(len(self.gi), np.nan),
                                                     np.full(len(self.ids), "", dtype=object))
        todo = grants & (out.method == "")
        row = self._liability_row(dn, todo)
        given = row >= 0
        gt = given[self.gi]
        out.tranche_value[gt] = self.lv_value[row[self.gi][gt]]
        out.method[given] = self.lv_label[row[given]]
        rest = todo & ~given
        if rest.any():
            j = self._by_date.get(dn)
            if j is None:
                raise self._missing(dn, rest)
            self._from_assumptions(dn, j, rest, out)
        self.cache[dn] = out
        return out

    def _from_assumptions(self, dn: int, j: int, grants: np.ndarray, out: UnitValues) -> None:
        """Value ``grants`` at day ``dn`` on assumptions row ``j`` (in place into ``out``)."""
        a = self.a
        col = lambda c: float(a[c].iat[j])  # noqa: E731
        where = f"{self.a_src} row {int(a['_row'].iat[j])}"
        mt = grants[self.gi]
        if not np.isnan(col("fair_value")):
            out.tranche_value[mt] = col("fair_value")
            out.method[grants] = f"supplied in {where}"
            return
        s, q = col("share_price"), np.nan_to_num(col("dividend_yield"))
        unit = mt & (self.award[self.gi] == "cash_unit")
        left_vest = np.maximum(self.t_vest - dn, 0) / DAYS_PER_YEAR
        out.tranche_value[unit] = rsu_value(s, left_vest[unit], q) if unit.any() else 0.0
        out.method[grants & (self.award == "cash_unit")] = f"share price less dividends to vesting, {where}"
        sar = mt & ~unit
        if sar.any():
            self._option_values(dn, j, sar, where, out)
            out.method[grants & (self.award != "cash_unit")] = (
                f"{a['model'].iat[j]}, remaining contractual term, {where}")

    def _option_values(self, dn: int, j: int, sar: np.ndarray, where: str, out: UnitValues) -> None:
        """BSM or lattice values of share appreciation rights over their remaining contractual term."""
        a = self.a
        col = lambda c: float(a[c].iat[j])  # noqa: E731
        vol, rate = col("volatility"), col("risk_free_rate")
        if np.isnan(vol) or np.isnan(rate):
            missing = "volatility" if np.isnan(vol) else "risk_free_rate"
            raise LedgerError([Problem(self.a_src, int(a["_row"].iat[j]), missing,
                                       f"is required to remeasure cash-settled share appreciation rights on "
                                       f"{np.datetime64(dn, 'D')} (no fair_value given)")], self.ledger.location)
        s, q = col("share_price"), np.nan_to_num(col("dividend_yield"))
        gi = self.gi[sar]
        left = np.maximum(self.expiry[gi] - dn, 0) / DAYS_PER_YEAR
        k = self.strike[gi]
        if a["model"].iat[j] == "lattice":
            mult = col("exercise_multiple")
            vest = np.minimum(np.maximum(self.t_vest[sar] - dn, 0) / DAYS_PER_YEAR, left)
            out.tranche_value[sar] = lattice_value(
                s, k, left, rate, vol, q, vesting=vest, exercise_multiple=None if np.isnan(mult) else mult,
                exit_rate=np.nan_to_num(col("post_vest_exit_rate")), steps=self.steps)
        else:
            out.tranche_value[sar] = bsm_value(s, k, left, rate, vol, q)

    def settlement_price(self, d, grants: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Share price per grant at ``d`` for cash units settling then, with where it came from.

        A ``liability_values`` row for the date (a unit settling that day is worth one share), else the
        assumptions row's ``share_price``; else :class:`LedgerError`.
        """
        dn = _day(d)
        grants = np.asarray(grants, dtype=bool)
        price = np.full(len(self.ids), np.nan)
        method = np.full(len(self.ids), "", dtype=object)
        row = self._liability_row(dn, grants)
        given = row >= 0
        price[given] = self.lv_value[row[given]]
        method[given] = self.lv_label[row[given]]
        rest = grants & ~given
        if rest.any():
            j = self._by_date.get(dn)
            if j is None:
                raise self._missing(dn, rest)
            price[rest] = float(self.a["share_price"].iat[j])
            method[rest] = f"share_price, {self.a_src} row {int(self.a['_row'].iat[j])}"
        return price, method


class AsIfGranted:
    """Fair values per unit of equity awards at dates before their grant date (service inception earlier).

    Rule (docs/expense-rules.md, "Service inception before the grant date"): at a date ``d`` before
    the grant date an award is valued exactly as the ledger would value it were it granted on ``d``:
    same terms (exercise price, expiration, vesting dates), its award kind's own valuer (options by
    ``bsm`` at the expected term given or by the simplified method from ``d``, or by the lattice over
    ``expiration - d``; units as the share price less dividends to each vesting date), on the
    ``assumptions`` row for ``d`` (its ``assumption_set`` is the ISO text of ``d``, or its
    ``assumption_set`` is blank and its ``grant_date`` is ``d``; a ``fair_value`` on that row is used
    as given).  ``liability_values`` rows are not used: they hold values of cash-settled awards.
    A date with no such row is a :class:`~grantval.errors.LedgerError` naming the grant and the date.

    Parameters
    ----------
    ledger : Ledger
        A checked ledger.
    policy : Policy
        Valuation unit and lattice steps, as for the grant-date values.
    """

    def __init__(self, ledger: Ledger, policy):
        self.ledger, self.policy = ledger, policy
        self.by_date = Remeasurer._assumption_dates(ledger.assumptions)
        self.gi = ledger.tranches["grant_idx"].to_numpy(np.int64)
        self.cache: dict[int, UnitValues] = {}
        self.priced: dict = {}  # input sets already priced (measurement.unique)

    def values_at(self, d, grants: np.ndarray) -> UnitValues:
        """Fair value per unit at ``d`` of every tranche of the grants in the mask ``grants`` (currency)."""
        dn = _day(d)
        grants = np.asarray(grants, dtype=bool)
        out = self.cache.get(dn)
        if out is None:
            out = UnitValues(np.full(len(self.gi), np.nan), np.full(len(grants), "", dtype=object))
            self.cache[dn] = out
        todo = grants & (out.method == "")
        if not todo.any():
            return out
        j = self.by_date.get(dn)
        if j is None:
            raise self._missing(dn, todo)
        self._check_row(dn, j, todo)
        idx = np.flatnonzero(todo)
        values = self._value(self._as_if(idx, dn, j))
        mt = todo[self.gi]
        out.tranche_value[mt] = values
        where = f"{self.ledger.sources.get('assumptions', 'assumptions')} row {int(self.ledger.assumptions['_row'].iat[j])}"
        out.method[todo] = f"valued as if granted on {np.datetime64(dn, 'D')}, {where}"
        return out

    def _as_if(self, idx: np.ndarray, dn: int, j: int) -> Ledger:
        """The ledger of grants ``idx`` only, granted on day ``dn`` and valued on assumptions row ``j``."""
        from dataclasses import replace

        led = self.ledger
        g = led.grants.iloc[idx].reset_index(drop=True).copy()
        g["grant_date"] = np.datetime64(dn, "D")
        tr = led.tranches
        keep = np.isin(self.gi, idx)
        sub = tr[keep].reset_index(drop=True).copy()
        pos = np.full(len(led.grants), -1, dtype=np.int64)
        pos[idx] = np.arange(len(idx))
        sub["grant_idx"] = pos[self.gi[keep]]
        return replace(led, grants=g, tranches=sub, grant_assumption=np.full(len(idx), j, dtype=np.int64))

    def _value(self, led: Ledger) -> np.ndarray:
        from grantval.measurement.fairvalue import compute_fair_values

        return np.asarray(compute_fair_values(led, self.policy, cache=self.priced).tranche_value, dtype=float)

    def _check_row(self, dn: int, j: int, grants: np.ndarray) -> None:
        """An option valued on row ``j`` (no fair_value given) needs its volatility and risk-free rate."""
        from grantval.awards.registry import flag

        a = self.ledger.assumptions
        if not np.isnan(float(a["fair_value"].iat[j])):
            return
        options = grants & flag(self.ledger.grants["award_type"].to_numpy(), "option_terms")
        if not options.any():
            return
        for c in ("volatility", "risk_free_rate"):
            if np.isnan(float(a[c].iat[j])):
                first = np.flatnonzero(options)[0]
                raise LedgerError([Problem(self.ledger.sources.get("assumptions", "assumptions"),
                                           int(a["_row"].iat[j]), c,
                                           f"is required to value option grant {self.ledger.grants['grant_id'].iat[first]} "
                                           f"on {np.datetime64(dn, 'D')}, before its grant date (its service began "
                                           "earlier, service_inception_date); or give a fair_value")],
                                  self.ledger.location)

    def _missing(self, dn: int, grants: np.ndarray) -> LedgerError:
        d = str(np.datetime64(dn, "D"))
        g = self.ledger.grants
        gsrc = self.ledger.sources.get("grants", "grants")
        problems = [Problem(gsrc, int(g["_row"].iat[i]), "service_inception_date",
                            f"grant {g['grant_id'].iat[i]} has no fair value for {d}, before its grant date "
                            f"{np.datetime64(g['grant_date'].iat[i], 'D')}: its service began on "
                            f"{np.datetime64(g['service_inception_date'].iat[i], 'D')}, so its cost is measured at the "
                            f"fair value at each reporting date until the grant date. Give an assumptions row for {d} "
                            f"(assumption_set {d}, or grant_date {d} with assumption_set blank), with a fair_value "
                            "or the inputs to value it")
                    for i in np.flatnonzero(grants)[:20]]
        return LedgerError(problems, self.ledger.location)
