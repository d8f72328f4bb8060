"""The liability engine of cash-settled awards, as a :class:`~grantval.attribution.inputs.CostHook`.

Rules (IFRS 2.30-33 and IG Example 12; ASC 718-30-35-1 to 35-3; see docs/cash-settled.md):

- liability at a date d, per tranche: fair value per unit at d x units x service fraction,
  where units are those expected to vest (unvested tranches, from the estimates in force,
  or outstanding under the as-occur policy) or those outstanding (vested tranches:
  granted less forfeited, cancelled, exercised and expired); the fraction is the
  engine's (graded: to the tranche's vesting date; straight-line: to the award's last
  vesting date, never less than the vested tranches' full liability);
- cash paid through d: exercises of share appreciation rights, quantity x
  max(share price - exercise price, 0); cash units settle at vesting, vested quantity x
  share price of the vesting date;
- cumulative cost through d = liability at d + cash paid through d, so the expense of a
  period is the change in the liability plus the cash paid in it, and once everything is
  settled or expired the total expense equals the cash paid;
- on and after the expiration date a right no longer outstanding at the end of that day
  has lapsed: its liability is 0 and no value is needed;
- fair values per unit come from :class:`~grantval.measurement.remeasure.Remeasurer`,
  only where a liability is to be measured (granted, units left, service begun).
"""

from __future__ import annotations

from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from grantval.attribution.engine import elapsed_fraction
from grantval.attribution.inputs import CostHook, ExpenseInputs
from grantval.dates import DAYS_PER_YEAR
from grantval.ledger.model import Ledger
from grantval.measurement.remeasure import Remeasurer


@dataclass
class LiabilityState:
    """Liability figures of every grant at one date (entries of non-cash grants are 0 / NaN).

    Attributes
    ----------
    liability, cash_paid : ndarray per grant
        Liability at the date and cash paid through it, currency.
    expected_total : ndarray per grant
        Liability at full service at the date's fair values and estimates, plus cash paid.
    fair_value_per_unit : ndarray per grant
        Unit-weighted fair value per unit at the date (NaN where no unit is left).
    units : ndarray per grant
        Units in the liability (expected to vest, or outstanding once vested).
    method : ndarray of str per grant
        Where the fair values came from.
    remaining_years : ndarray per grant
        Weighted-average remaining service of the unrecognised part, years.
    """

    liability: np.ndarray
    cash_paid: np.ndarray
    expected_total: np.ndarray
    fair_value_per_unit: np.ndarray
    units: np.ndarray
    method: np.ndarray
    remaining_years: np.ndarray

    @property
    def grant_cost(self) -> np.ndarray:
        return self.liability + self.cash_paid

    @property
    def unrecognised(self) -> np.ndarray:
        return np.maximum(self.expected_total - self.grant_cost, 0.0)


class LiabilityEngine:
    """Liabilities and cash paid of a ledger's cash-settled grants at any date.

    Parameters
    ----------
    ledger : Ledger
    cash : ndarray of bool, per grant
        The cash-settled grants.
    remeasurer : Remeasurer, optional
        Source of fair values per unit (default: one built on ``ledger``).
    """

    def __init__(self, ledger: Ledger, cash: np.ndarray, remeasurer: Remeasurer | None = None):
        g, tr, ch = ledger.grants, ledger.tranches, ledger.changes
        self.values = remeasurer or Remeasurer(ledger)
        self.cash = np.asarray(cash, dtype=bool)
        self.gi = tr["grant_idx"].to_numpy(np.int64)
        self.n_g, self.n_t = len(g), len(tr)
        award = g["award_type"].to_numpy(dtype=object)
        self.unit_g = self.cash & (award == "cash_unit")
        self.unit_t = self.unit_g[self.gi]
        self.cash_t = self.cash[self.gi]
        self.grant_day = g["grant_date"].to_numpy("datetime64[D]").astype(np.int64)
        self.expiry = g["expiration_date"].to_numpy("datetime64[D]")
        self.expiry_day = np.where(np.isnat(self.expiry), np.iinfo(np.int64).max, self.expiry.astype(np.int64))
        self.t_vest = tr["vest_date"].to_numpy("datetime64[D]").astype(np.int64)
        last = np.full(self.n_g, np.iinfo(np.int64).min, dtype=np.int64)
        np.maximum.at(last, self.gi, self.t_vest)
        self.last_vest = last
        own = self.cash_t[ch["tranche_idx"].to_numpy(np.int64)] if len(ch) else np.zeros(0, dtype=bool)
        self.c_t = ch["tranche_idx"].to_numpy(np.int64)[own]
        self.c_day = ch["date"].to_numpy("datetime64[D]").astype(np.int64)[own]
        self.c_kind = ch["kind"].to_numpy(dtype=object)[own]
        self.c_qty = ch["quantity"].to_numpy(np.int64)[own]
        price = ledger.events["share_price"].to_numpy(float) if len(ledger.events) else np.zeros(0)
        s = price[ch["event_idx"].to_numpy(np.int64)[own]] if own.any() else np.zeros(0)
        k = g["exercise_price"].to_numpy(float)[self.gi[self.c_t]]
        ex = self.c_kind == "exercise"
        self.c_cash = np.where(ex, self.c_qty * np.maximum(np.nan_to_num(s) - np.nan_to_num(k), 0.0), 0.0)
        self._price_memo: dict[int, np.ndarray] = {}
        #: forecasts: on dates after this day number, events after it are ignored and fair values held at it
        self.hold_after: int | None = None
        #: the bridge (values-only hold): on dates after this day number, events still count but the fair
        #: values per unit are those of this day for grants granted by it, and settlements after it are
        #: paid at those values (the carrying amount), so that only a change of value moves the cost
        self.values_held_at: int | None = None

    def _removed(self, cut: int) -> np.ndarray:
        """Vested units per tranche exercised, expired or cancelled through day ``cut``.

        (The engine's ``outstanding`` already excludes forfeits and cancels of unvested units.)
        """
        vested_cancel = (self.c_kind == "cancel") & (self.c_day >= self.t_vest[self.c_t])
        m = (np.isin(self.c_kind, ("exercise", "expire")) | vested_cancel) & (self.c_day <= cut)
        return np.bincount(self.c_t[m], weights=self.c_qty[m], minlength=self.n_t).astype(float)

    def _prices(self, tranches: np.ndarray, days: np.ndarray) -> np.ndarray:
        """Settlement share price of each of ``tranches`` on its day in ``days`` (looked up once per day)."""
        out = np.empty(len(tranches))
        for day in np.unique(days):
            on = days == day
            want = self.gi[tranches[on]]
            known = self._price_memo.get(int(day))
            if known is None or np.isnan(known[want]).any():
                grants = np.zeros(self.n_g, dtype=bool)
                grants[want] = True
                got = self.values.settlement_price(np.datetime64(int(day), "D"), grants)[0]
                known = got if known is None else np.where(np.isnan(got), known, got)
                self._price_memo[int(day)] = known
            out[on] = known[want]
        return out

    def _cash_paid(self, dn: int, cut: int, outstanding: np.ndarray, vested: np.ndarray,
                   vday: int | None = None) -> np.ndarray:
        """Cash paid per grant through day ``dn`` (events through ``cut``).

        With ``vday`` (values-only hold), settlements after ``vday`` of grants granted by it are
        counted at the fair value per unit of ``vday`` instead of the cash paid.
        """
        m = self.c_day <= cut
        amount = self.c_cash
        if vday is not None:
            late = m & (self.c_day > vday) & (self.c_kind == "exercise") & (self.grant_day[self.gi[self.c_t]] <= vday)
            if late.any():
                amount = amount.copy()
                amount[late] = self.c_qty[late] * self._held_values(vday, self.c_t[late])
        paid = np.bincount(self.gi[self.c_t[m]], weights=amount[m], minlength=self.n_g).astype(float)
        settled = np.flatnonzero(self.unit_t & vested & (outstanding > 0))
        if settled.size:
            days = self.t_vest[settled]
            if self.hold_after is not None:
                days = np.minimum(days, self.hold_after)
            price = self._prices(settled, days)
            if vday is not None:
                late = (days > vday) & (self.grant_day[self.gi[settled]] <= vday)
                if late.any():
                    price[late] = self._held_values(vday, settled[late])
            paid += np.bincount(self.gi[settled], weights=outstanding[settled] * price, minlength=self.n_g)
        return paid

    def _held_values(self, vday: int, tranches: np.ndarray) -> np.ndarray:
        """Fair value per unit on day ``vday`` of each of ``tranches`` (values-only hold)."""
        grants = np.zeros(self.n_g, dtype=bool)
        grants[self.gi[tranches]] = True
        return self.values.values_at(np.datetime64(vday, "D"), grants).tranche_value[tranches]

    def _unit_values(self, day: int, need: np.ndarray, vday: int | None):
        """Per tranche fair value per unit (where ``need``) and per grant method, at ``day``.

        With ``vday``, grants granted by ``vday`` take the values of ``vday`` (values-only hold).
        """
        fv = np.zeros(self.n_t)
        method = np.full(self.n_g, "", dtype=object)
        early = self.grant_day <= (vday if vday is not None else np.iinfo(np.int64).min)
        for when, part in ((day, ~early), (vday, early)):
            sel = need & part[self.gi]
            if not sel.any():
                continue
            grants = np.zeros(self.n_g, dtype=bool)
            grants[self.gi[sel]] = True
            got = self.values.values_at(np.datetime64(when, "D"), grants)
            fv[sel] = got.tranche_value[sel]
            method[grants] = got.method[grants]
        return fv, method

    def state(self, dn: int, n_exp, outstanding, vested, elapsed, attribution: str) -> LiabilityState:
        """Liability figures at day number ``dn`` from the engine's per-tranche quantities.

        ``n_exp``, ``outstanding``, ``vested`` and ``elapsed`` are the engine's per-tranche
        units expected to vest, units outstanding (before exercises), vested flags and
        service fractions of the grant-date layer at ``dn``.
        """
        held = self.hold_after is not None and dn > self.hold_after
        cut = self.hold_after if held else dn
        vday = self.values_held_at
        vday = vday if (vday is not None and not held and dn > vday) else None
        outstanding = np.asarray(outstanding, dtype=float)
        left = outstanding - self._removed(cut)
        live = self.cash_t & (self.grant_day[self.gi] <= dn) & (dn < self.expiry_day[self.gi])
        units = np.where(vested, np.where(self.unit_t, 0.0, left), np.asarray(n_exp, dtype=float))
        units = np.where(live, np.maximum(units, 0.0), 0.0)
        if attribution == "graded":
            frac = np.asarray(elapsed, dtype=float)[: self.n_t]
        else:
            award = elapsed_fraction(np.datetime64(dn, "D"), self.grant_day.astype("datetime64[D]"),
                                     self.last_vest.astype("datetime64[D]"))
            frac = award[self.gi]
        need = units > 0
        fv, method = self._unit_values(cut if held else dn, need, vday)
        full = fv * units
        if attribution == "graded":
            liability = np.bincount(self.gi, weights=full * frac, minlength=self.n_g)
        else:
            spread = np.bincount(self.gi, weights=full * frac, minlength=self.n_g)
            floor = np.bincount(self.gi, weights=np.where(vested, full, 0.0), minlength=self.n_g)
            liability = np.maximum(spread, floor)
        cash = self._cash_paid(dn, cut, outstanding, np.asarray(vested, dtype=bool), vday)
        total = np.bincount(self.gi, weights=full, minlength=self.n_g)
        u_g = np.bincount(self.gi, weights=units, minlength=self.n_g)
        with np.errstate(invalid="ignore", divide="ignore"):
            fv_unit = np.where(u_g > 0, total / np.where(u_g > 0, u_g, 1.0), np.nan)
        years = self._remaining(dn, full, frac, attribution, total - liability)
        mask = lambda a, fill=0.0: np.where(self.cash, a, fill)  # noqa: E731
        return LiabilityState(mask(liability), mask(cash), mask(total + cash), mask(fv_unit, np.nan), mask(u_g),
                              method, mask(years))

    def _remaining(self, dn: int, full, frac, attribution: str, unrec_g) -> np.ndarray:
        """Weighted-average remaining service of the unrecognised liability, years."""
        if attribution == "graded":
            left_t = full * (1.0 - frac)
            yrs_t = np.maximum(self.t_vest - dn, 0) / DAYS_PER_YEAR
            w = np.bincount(self.gi, weights=left_t * yrs_t, minlength=self.n_g)
            u = np.bincount(self.gi, weights=left_t, minlength=self.n_g)
            return np.where(u > 0, w / np.where(u > 0, u, 1.0), 0.0)
        return np.where(unrec_g > 0, np.maximum(self.last_vest - dn, 0) / DAYS_PER_YEAR, 0.0)

    def at(self, measurement, d, attribution: str) -> LiabilityState:
        """Liability figures at date ``d`` from a :class:`~grantval.attribution.engine.Measurement` at ``d``."""
        m = measurement
        return self.state(int(np.datetime64(d, "D").astype(np.int64)), m.n_expensed, m.outstanding, m.vested,
                          m.elapsed, attribution)

    def cost(self, inp: ExpenseInputs, Q, dn: int, attribution: str) -> LiabilityState:
        """The :class:`CostHook` cost function: cumulative cost = liability + cash paid."""
        return self.state(dn, Q.n_exp, Q.outstanding, Q.vested, Q.elapsed, attribution)


def cash_grants(award_types) -> np.ndarray:
    """Per grant: its award kind is settled in cash."""
    from grantval.awards.registry import kinds

    award_types = np.asarray(award_types, dtype=object)
    out = np.zeros(len(award_types), dtype=bool)
    for k in kinds():
        if k.settlement == "cash":
            out |= award_types == k.name
    return out


def install_liability_hook(inp: ExpenseInputs, ledger: Ledger, steps: int | None = None) -> LiabilityEngine | None:
    """Give the cash-settled grants of ``inp`` zero layer values and the liability :class:`CostHook`.

    Returns the engine (None when the ledger has no cash-settled grant).
    """
    cash = cash_grants(ledger.grants["award_type"].to_numpy())
    if not cash.any():
        return None
    engine = LiabilityEngine(ledger, cash, Remeasurer(ledger, steps))
    layer_cash = cash[np.asarray(inp.t_grant, dtype=np.int64)[inp.layers.tranche]]
    inp.layers.fair_value = np.where(layer_cash, 0.0, inp.layers.fair_value)
    inp.t_fv = np.where(cash[inp.t_grant], 0.0, inp.t_fv)
    inp.cost_hooks.append(CostHook(grants=cash, cost=engine.cost))
    return engine


def liability_engine(inp: ExpenseInputs) -> LiabilityEngine | None:
    """The liability engine installed in ``inp`` (None when there is none)."""
    for hook in inp.cost_hooks:
        owner = getattr(hook.cost, "__self__", None)
        if isinstance(owner, LiabilityEngine):
            return owner
    return None


@contextmanager
def values_held_at(inp: ExpenseInputs, day):
    """Within the block, the liability engine of ``inp`` holds fair values (not events) at ``day``.

    On dates after ``day`` the engine counts every event through the date but values the units of
    grants granted by ``day`` at their fair values per unit of ``day``, and counts their settlements
    after ``day`` at those values (the carrying amount per unit). The cost so measured differs from the
    full cost only by the remeasurement (the bridge's remeasurement line). Without a liability engine
    the block changes nothing.
    """
    engine = liability_engine(inp)
    if engine is None:
        yield
        return
    before = engine.values_held_at
    engine.values_held_at = int(np.datetime64(day, "D").astype(np.int64))
    try:
        yield
    finally:
        engine.values_held_at = before


def hold_values_after(inp: ExpenseInputs, through) -> None:
    """For forecasts: after ``through``, ignore later events and hold fair values at ``through``."""
    engine = liability_engine(inp)
    if engine is not None:
        engine.hold_after = int(np.datetime64(through, "D").astype(np.int64))
