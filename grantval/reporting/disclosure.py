"""Disclosure tables (ASC 718-10-50-2): award activity roll-forwards and grant-year figures.

All figures are computed from the checked ledger's tranches and allocated
events, vectorised over tranches.  Options still outstanding at the end of
their expiration date expire by themselves on that date.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.dates import DAY, DAYS_PER_YEAR
from grantval.attribution.engine import measure
from grantval.attribution.inputs import ExpenseInputs
from grantval.measurement.fairvalue import FairValues
from grantval.ledger.model import Ledger
from grantval.policy import Policy
from grantval.awards.registry import in_group


@dataclass
class Disclosure:
    """Disclosure tables for one window."""

    options: pd.DataFrame      # option activity: line, number, wa exercise price, wa remaining term, intrinsic value
    rsus: pd.DataFrame         # RSU activity: line, number, wa grant-date fair value
    grants: pd.DataFrame       # figures for awards granted in the window: item, value
    option_tie: tuple[int, int]  # (start + granted - exercised - forfeited - expired, end)
    rsu_tie: tuple[int, int]
    start: np.datetime64
    through: np.datetime64
    share_price: float | None
    #: performance-unit activity at target, with the change from performance adjustments (empty when none)
    performance_units: pd.DataFrame | None = None
    psu_tie: tuple[int, int] = (0, 0)


def _vest_in_force(ledger: Ledger) -> np.ndarray:
    """Per tranche: the vest date after the ledger's modifications (the schedule's when it has none)."""
    mods = ledger.tables.get("modifications")
    if mods is None or not len(mods):
        return ledger.tranches["vest_date"].to_numpy("datetime64[D]")
    from grantval.ledger.ext.modifications import vest_in_force

    return np.asarray(vest_in_force(ledger.tranches, ledger.grants, mods), dtype="datetime64[D]")


class _Tranches:
    """Per-tranche arrays with event quantities by kind up to a date.

    Facts of the grant (grant date, expiration date, exercise price) are kept per grant and
    gathered per tranche where a figure needs them (a million grants have 13.7 million
    tranches: each per-tranche copy would take 110 MB).
    """

    def __init__(self, ledger: Ledger, fv: FairValues):
        g, tr, ch = ledger.grants, ledger.tranches, ledger.changes
        gi = tr["grant_idx"].to_numpy()
        self.gi = gi
        self.option = in_group(g["award_type"].to_numpy(), "options")[gi]
        self.performance = in_group(g["award_type"].to_numpy(), "performance_units")[gi]
        self.units = in_group(g["award_type"].to_numpy(), "units")[gi]  # RSUs (not purchase plans or cash)
        self.qty = tr["quantity"].to_numpy(np.int64)
        self.vest = _vest_in_force(ledger)  # accelerations and new schedules (they only move unvested tranches)
        self.grant_date_g = g["grant_date"].to_numpy("datetime64[D]")
        self.expiry_g = g["expiration_date"].to_numpy("datetime64[D]")
        self.strike_g = g["exercise_price"].to_numpy(float)
        self.fv = np.asarray(fv.tranche_value, dtype=float)
        self.c_t = ch["tranche_idx"].to_numpy(np.int64)
        self.c_date = ch["date"].to_numpy("datetime64[D]")
        self.c_kind = ch["kind"].to_numpy(dtype=object)
        self.c_qty = ch["quantity"].to_numpy(np.int64)
        self.c_event = ch["event_idx"].to_numpy(np.int64)
        n = len(self.qty)
        # implicit expiry: what is left of an option after all its events lapses at expiration
        self.lapse_qty = self.qty - np.bincount(self.c_t, weights=self.c_qty, minlength=n).astype(np.int64)
        self.lapse_qty[~self.option] = 0

    def granted_by(self, d) -> np.ndarray:
        """Per tranche: whether its grant date is on or before ``d``."""
        return (self.grant_date_g <= d)[self.gi]

    def _within(self, dates_g: np.ndarray, lo, hi) -> np.ndarray:
        """Per tranche: whether its grant's date among ``dates_g`` (one per grant) is in [lo, hi]."""
        return ((dates_g >= lo) & (dates_g <= hi))[self.gi]

    def granted_in(self, lo, hi) -> np.ndarray:
        """Per tranche: whether its grant date is in [lo, hi]."""
        return self._within(self.grant_date_g, lo, hi)

    def strike(self, rows) -> np.ndarray:
        """Exercise price of the tranches ``rows`` (a mask or positions)."""
        return self.strike_g[self.gi[rows]]

    def expiry(self, rows) -> np.ndarray:
        """Expiration date of the tranches ``rows`` (a mask or positions)."""
        return self.expiry_g[self.gi[rows]]

    def moved(self, kinds: tuple[str, ...], lo, hi) -> np.ndarray:
        """Quantity per tranche removed by events of ``kinds`` dated in [lo, hi]."""
        m = np.isin(self.c_kind, kinds) & (self.c_date >= lo) & (self.c_date <= hi)
        out = np.bincount(self.c_t[m], weights=self.c_qty[m], minlength=len(self.qty))
        if "expire" in kinds:
            lapse = self.option & self._within(self.expiry_g, lo, hi)
            out[lapse] += self.lapse_qty[lapse]
        return out.astype(np.int64)

    def removed_before_vest(self) -> np.ndarray:
        """Quantity per tranche forfeited or cancelled before it vested."""
        m = np.isin(self.c_kind, ("forfeit", "cancel")) & (self.c_date < self.vest[self.c_t])
        return np.bincount(self.c_t[m], weights=self.c_qty[m], minlength=len(self.qty)).astype(np.int64)

    def nonvested(self, d) -> np.ndarray:
        """Quantity per tranche granted, not yet vested and not forfeited or cancelled at the end of ``d``."""
        removed = self.moved(("forfeit", "cancel"), np.datetime64("1900-01-01"), d)
        return np.where(self.granted_by(d) & (self.vest > d), self.qty - removed, 0)

    def outstanding(self, d) -> np.ndarray:
        """Quantity per tranche outstanding at the end of ``d``."""
        early = np.datetime64("1900-01-01")
        removed = self.moved(("forfeit", "cancel", "exercise", "expire"), early, d)
        return np.where(self.granted_by(d), self.qty - removed, 0)


def _wavg(values, weights) -> float:
    w = np.asarray(weights, dtype=float)
    total = w.sum()
    return float(np.sum(np.asarray(values, float) * w) / total) if total > 0 else float("nan")


def _option_activity(T: _Tranches, m, start, through, share_price):
    """Option roll-forward lines, the end-balance tie, and the per-tranche flows the other tables reuse.

    Each line's figures are taken as soon as its quantities are made, so that no more than a
    few per-tranche arrays are held at once (a million grants: 13.7 million tranches each).
    """
    before = start - DAY
    opt = T.option
    strike, expiry = T.strike(opt), T.expiry(opt)
    nan = float("nan")
    lines, numbers = [], {}

    def line(name, q, at=None, intrinsic=False):
        qo = q[opt]
        years = nan if at is None else _wavg(np.maximum((expiry - at).astype(np.int64), 0) / DAYS_PER_YEAR, qo)
        value = nan if not intrinsic or share_price is None else float(np.sum(qo * np.maximum(share_price - strike, 0.0)))
        numbers[name] = total = np.sum(qo)
        lines.append((name, float(total), _wavg(strike, qo), years, value))

    line("Outstanding at start", T.outstanding(before), before)
    granted = np.where(T.granted_in(start, through), T.qty, 0)
    line("Granted", granted)
    line("Exercised", T.moved(("exercise",), start, through))
    forfeited = T.moved(("forfeit", "cancel"), start, through)
    line("Forfeited or cancelled", forfeited)
    line("Expired", T.moved(("expire",), start, through))
    out1 = T.outstanding(through)
    line("Outstanding at end", out1, through, True)
    line("Exercisable at end", np.where(T.vest <= through, out1, 0), through, True)
    ratio = np.where(m.outstanding > 0, m.n_expensed / np.where(m.outstanding > 0, m.outstanding, 1), 0.0)
    line("Vested and expected to vest at end", np.where(T.vest <= through, out1, out1 * np.minimum(ratio, 1.0)),
         through, True)
    frame = pd.DataFrame(lines, columns=["line", "number", "weighted_average_exercise_price",
                                         "weighted_average_remaining_term_years", "aggregate_intrinsic_value"])
    n = numbers
    tie = (int(n["Outstanding at start"] + n["Granted"] - n["Exercised"] - n["Forfeited or cancelled"] - n["Expired"]),
           int(n["Outstanding at end"]))
    return frame, tie, granted, forfeited


def _unit_activity(T: _Tranches, granted, forfeited, start, through):
    """Nonvested-unit roll-forward, its tie, and the units vested in the window per tranche."""
    units = T.units

    nv0, nv1 = T.nonvested(start - DAY), T.nonvested(through)
    vest_in = (T.vest >= start) & (T.vest <= through) & T.granted_by(through)
    vested_q = np.where(vest_in, T.qty - T.removed_before_vest(), 0)
    lines = [("Nonvested at start", nv0), ("Granted", granted), ("Vested", vested_q),
             ("Forfeited", forfeited), ("Nonvested at end", nv1)]
    frame = pd.DataFrame({
        "line": [x[0] for x in lines],
        "number": [float(np.sum(x[1][units])) for x in lines],
        "weighted_average_grant_date_fair_value": [_wavg(T.fv[units], x[1][units]) for x in lines],
    })
    tie = (int(np.sum((nv0 + granted - vested_q - forfeited)[units])), int(np.sum(nv1[units])))
    return frame, tie, vested_q


def _performance_activity(ledger: Ledger, T: _Tranches, granted, forfeited, vested_q, start, through):
    """Performance-unit roll-forward: target units, and the shares issued at the final payout.

    Lines: nonvested at start (target), granted (target), change from performance adjustments
    (shares issued at vesting less the target units that vested), vested (shares issued),
    forfeited (target), nonvested at end (target); weighted-average grant-date fair value per
    target unit.  The adjustment line makes the roll-forward tie.
    """
    psu = T.performance
    if not psu.any():
        return None, (0, 0)
    payout = _final_payouts(ledger, T, through)
    issued = np.where(psu, np.floor(vested_q * payout + 1e-9), 0).astype(np.int64)
    adjust = issued - np.where(psu, vested_q, 0)

    nv0, nv1 = T.nonvested(start - DAY), T.nonvested(through)
    lines = [("Nonvested at start (target units)", nv0), ("Granted (target units)", granted),
             ("Change from performance adjustments", adjust), ("Vested (shares issued at the final payout)", issued),
             ("Forfeited (target units)", forfeited), ("Nonvested at end (target units)", nv1)]
    frame = pd.DataFrame({
        "line": [x[0] for x in lines],
        "number": [float(np.sum(x[1][psu])) for x in lines],
        "weighted_average_grant_date_fair_value": [_wavg(T.fv[psu], np.abs(x[1][psu])) for x in lines],
    })
    tie = (int(np.sum((nv0 + granted + adjust - issued - forfeited)[psu])), int(np.sum(nv1[psu])))
    return frame, tie


def _final_payouts(ledger: Ledger, T, through) -> np.ndarray:
    """Per tranche: the payout fixing the shares issued at vesting (performance table in force on the
    vesting date; a market condition's ``achieved_payout``, required once its units have vested)."""
    from grantval.attribution.performance import Assessments, performance_grants
    from grantval.ledger.ext.market import achieved_payouts

    A = Assessments(ledger, performance_grants(ledger))
    payout, _ = A.at(T.gi, T.vest.astype(np.int64))
    achieved, market = achieved_payouts(ledger, T.vest <= np.datetime64(through, "D"), T.gi)
    return np.where(market[T.gi], np.nan_to_num(achieved[T.gi]), payout)


def _granted_figures(ledger: Ledger, fv: FairValues, start, through) -> list[tuple[str, float]]:
    """Number and weighted-average values of the awards granted in the window, and BSM assumption ranges."""
    g = ledger.grants
    award = g["award_type"].to_numpy()
    gq = g["quantity"].to_numpy(float)
    gd = g["grant_date"].to_numpy("datetime64[D]")
    g_in = (gd >= start) & (gd <= through)
    items: list[tuple[str, float]] = []
    groups = [("options", in_group(award, "options") & g_in), ("RSUs", in_group(award, "units") & g_in)]
    if in_group(award, "performance_units").any():
        groups.append(("performance units (target)", in_group(award, "performance_units") & g_in))
    for label, mask in groups:
        items.append((f"{label} granted: number", float(gq[mask].sum())))
        items.append((f"{label} granted: weighted-average grant-date fair value",
                      _wavg(fv.grant_value[mask], gq[mask])))
    tab = fv.table  # one row per grant, or per tranche under the tranche valuation unit
    td = tab["grant_date"].to_numpy("datetime64[D]")
    computed = (td >= start) & (td <= through) & (tab["model"].to_numpy() == "bsm")
    w = tab["quantity"].to_numpy(float)[computed]
    for col, name in (("volatility", "expected volatility"), ("risk_free_rate", "risk-free rate"),
                      ("dividend_yield", "dividend yield"), ("expected_term_years", "expected term (years)")):
        vals = tab[col].to_numpy(float)[computed]
        items.append((f"BSM options granted: weighted-average {name}", _wavg(vals, w)))
        items.append((f"BSM options granted: lowest {name}", float(np.min(vals)) if vals.size else float("nan")))
        items.append((f"BSM options granted: highest {name}", float(np.max(vals)) if vals.size else float("nan")))
    return items + _market_granted(ledger, fv, g_in)


def _market_granted(ledger: Ledger, fv: FairValues, g_in: np.ndarray) -> list[tuple[str, float]]:
    """Weighted-average inputs of the awards with a market condition granted in the window (ASC 718-10-50-2:
    the method and significant assumptions used), when there are any."""
    from grantval.ledger.ext.market import condition_rows, market_grants

    if fv.std_error is None:
        return []
    m = market_grants(ledger.grants, ledger.tables) & g_in & np.isfinite(fv.std_error)  # simulated, not supplied
    if not m.any():
        return []
    g, a, ai = ledger.grants, ledger.assumptions, ledger.grant_assumption
    w = g["quantity"].to_numpy(float)[m]
    rows = condition_rows(g, ledger.tables).loc[np.flatnonzero(m)]
    period = (rows["end_date"].to_numpy("datetime64[D]") - g["grant_date"].to_numpy("datetime64[D]")[m]).astype(int)
    label = "Market-condition awards granted (Monte Carlo): weighted-average"
    items = [(f"{label} expected volatility", _wavg(a["volatility"].to_numpy(float)[ai][m], w)),
             (f"{label} risk-free rate", _wavg(a["risk_free_rate"].to_numpy(float)[ai][m], w)),
             (f"{label} dividend yield", _wavg(np.nan_to_num(a["dividend_yield"].to_numpy(float)[ai][m]), w)),
             (f"{label} performance period (years)", _wavg(period / 365.25, w))]
    cor = np.array([_mean_correlation(ledger.tables, ps) for ps in rows["peer_set"]])
    if np.isfinite(cor).any():
        ok = np.isfinite(cor)
        items.append((f"{label} correlation with the peer group", _wavg(cor[ok], w[ok])))
    return items


def _mean_correlation(tables: dict, peer_set) -> float:
    """Mean correlation of the company with the members of ``peer_set`` (NaN without one)."""
    if not isinstance(peer_set, str) or not peer_set:
        return float("nan")
    c = tables["correlations"]
    c = c[(c["peer_set"] == peer_set) & ((c["first"] == "self") | (c["second"] == "self"))]
    return float(c["correlation"].mean()) if len(c) else float("nan")


def _window_figures(ledger: Ledger, T: _Tranches, inp: ExpenseInputs, m, vested_q, start, through):
    """Intrinsic value of exercises, fair value vested and unrecognised cost."""
    ev = ledger.events
    ex = (T.c_kind == "exercise") & (T.c_date >= start) & (T.c_date <= through)
    ev_price = ev["share_price"].to_numpy(float)[T.c_event[ex]] if len(ev) else np.zeros(0)
    gain = (ev_price - T.strike(T.c_t[ex])) * T.c_qty[ex]
    vest_value = vested_q * T.fv
    from grantval.attribution.periods import to_cents

    # the same cents as the expense run's unrecognised table: rounded expected total less rounded cost
    unrec_cents = np.maximum(to_cents(m.expected_total) - to_cents(m.grant_cost), 0)
    unrec = unrec_cents / 100.0
    granted_g = inp.grant_date <= through
    total_unrec = float(np.sum(unrec_cents[granted_g])) / 100.0
    return [
        ("Total intrinsic value of options exercised", float(np.nansum(np.maximum(gain, 0.0)))),
        ("Options exercised without an event share price (not in the intrinsic value)",
         float(np.sum(T.c_qty[ex][np.isnan(ev_price)]))),
        ("Total grant-date fair value of options vested", float(np.sum(vest_value[T.option]))),
        ("Total grant-date fair value of RSUs vested", float(np.sum(vest_value[T.units]))),
        ("Unrecognised cost at end", total_unrec),
        ("Weighted-average remaining recognition period (years)",
         _wavg(m.remaining_years[granted_g], unrec[granted_g]) if total_unrec > 0 else 0.0),
    ]


def _rounded(item: str, value: float) -> float:
    """One figure, one value: counts whole, money to cents, per-unit values to 4 places, rates to 6."""
    if np.isnan(value):
        return value
    if "number" in item or item.startswith("Options exercised without"):
        return float(np.round(value, 0))
    if "weighted-average grant-date fair value" in item:
        return float(np.round(value, 4))
    if any(w in item for w in ("intrinsic value", "fair value of", "Unrecognised cost")):
        return float(np.round(value, 2))
    if "years" in item:
        return float(np.round(value, 4))
    return float(np.round(value, 6))


def compute_disclosure(ledger: Ledger, fv: FairValues, inp: ExpenseInputs, policy: Policy, start, through,
                       share_price: float | None = None, at_through=None) -> Disclosure:
    """Option and RSU activity from ``start`` through ``through`` and the window's grant figures.

    ``at_through`` is the measurement of ``inp`` at ``through`` under ``policy`` when one is
    already made (an expense schedule's, :attr:`ExpenseSchedule.at_through`); otherwise it is made here.
    """
    start = np.datetime64(start, "D")
    through = np.datetime64(through, "D")
    T = _Tranches(ledger, fv)
    m = at_through if at_through is not None else measure(inp, through, attribution=policy.attribution,
                                                            forfeitures=policy.forfeitures)
    options, option_tie, granted, forfeited = _option_activity(T, m, start, through, share_price)
    rsus, rsu_tie, vested_q = _unit_activity(T, granted, forfeited, start, through)
    perf, psu_tie = _performance_activity(ledger, T, granted, forfeited, vested_q, start, through)
    items = _granted_figures(ledger, fv, start, through) + _window_figures(ledger, T, inp, m, vested_q, start,
                                                                             through)
    grants = pd.DataFrame({"item": [i for i, _ in items], "value": [_rounded(i, v) for i, v in items]})
    options["number"] = options["number"].round(0)
    for col, places in (("weighted_average_exercise_price", 4), ("weighted_average_remaining_term_years", 4),
                        ("aggregate_intrinsic_value", 2)):
        options[col] = options[col].round(places)
    for frame in (rsus, perf):
        if frame is not None:
            frame["number"] = frame["number"].round(0)
            frame["weighted_average_grant_date_fair_value"] = frame["weighted_average_grant_date_fair_value"].round(4)
    return Disclosure(options, rsus, grants, option_tie, rsu_tie, start, through, share_price, perf, psu_tie)
