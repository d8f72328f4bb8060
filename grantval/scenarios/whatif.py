"""What-if runs: the same ledger valued and expensed under shifted assumptions.

A scenario is a set of shifts, one per assumption named with ``--vary``;
several ``--vary`` options give the full grid of their shifts.  Only grants
dated in the chosen window are re-valued; the rest keep their base values.
Input sets priced once are not priced again in later scenarios.
"""

from __future__ import annotations

import itertools
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from grantval.errors import UsageError
from grantval.attribution.inputs import build_inputs
from grantval.attribution.periods import ExpenseSchedule, compute_schedule
from grantval.measurement.fairvalue import FairValues, compute_fair_values
from grantval.scenarios.shifts import Shifts, adjust_payouts, forfeiture_adjuster
from grantval.ledger import Ledger
from grantval.policy import Policy

NAMES = ("volatility", "expected_term_years", "risk_free_rate", "dividend_yield", "share_price", "forfeiture_rate",
         "payout")
_NUM = r"(\d+(\.\d*)?|\.\d+)"


@dataclass(frozen=True)
class Shift:
    """One change of one assumption: a level, an additive shift or a relative one."""

    name: str
    kind: str  # "level", "add" or "relative"
    amount: float
    text: str

    def apply(self, base: np.ndarray) -> np.ndarray:
        if self.kind == "level":
            return np.full_like(base, self.amount, dtype=float)
        if self.kind == "add":
            return base + self.amount
        return base * (1.0 + self.amount)

    @property
    def label(self) -> str:
        return f"{self.name}={self.text}"


def parse_vary(text: str) -> list[Shift]:
    """Parse ``NAME=SPEC[,SPEC...]``: ``0.45`` (level), ``+0.05``/``-0.05`` (add), ``+10%``/``-10%`` (relative)."""
    if "=" not in text:
        raise UsageError(f"{{vary}} {text!r}: write NAME=SPEC, for example volatility=+0.05,-0.05", ("vary",))
    name, spec = (x.strip() for x in text.split("=", 1))
    if name not in NAMES:
        raise UsageError(f"{{vary}} {text!r}: {name!r} is not one of {', '.join(NAMES)}", ("vary",))
    shifts = []
    for tok in (t.strip() for t in spec.split(",")):
        if re.fullmatch(rf"[+-]{_NUM}%", tok):
            shifts.append(Shift(name, "relative", float(tok[:-1]) / 100.0, tok))
        elif re.fullmatch(rf"[+-]{_NUM}", tok):
            shifts.append(Shift(name, "add", float(tok), tok))
        elif re.fullmatch(_NUM, tok):
            shifts.append(Shift(name, "level", float(tok), tok))
        else:
            raise UsageError(f"{{vary}} {text!r}: {tok!r} is not a level (0.45), a shift (+0.05) or a relative "
                             "shift (+10%); rates and volatilities are decimals", ("vary",))
    if len({s.text for s in shifts}) != len(shifts):
        raise UsageError(f"{{vary}} {text!r}: a shift is listed twice", ("vary",))
    return shifts


@dataclass(frozen=True)
class Scenario:
    """A named set of shifts (empty for the base)."""

    id: str
    shifts: tuple[Shift, ...]

    @property
    def description(self) -> str:
        return "base" if not self.shifts else "; ".join(s.label for s in self.shifts)


def grid(varies: list[list[Shift]]) -> list[Scenario]:
    """The base and every combination of the shifts (a full grid)."""
    names = [v[0].name for v in varies]
    if len(set(names)) != len(names):
        raise UsageError("each assumption may be named in one {vary} option only", ("vary",))
    out = [Scenario("base", ())]
    for i, combo in enumerate(itertools.product(*varies), start=1):
        out.append(Scenario(f"S{i:02d}", tuple(combo)))
    return out


def one_at_a_time(varies: list[list[Shift]]) -> list[Scenario]:
    """Each shift alone, the others at base (for the tornado summary)."""
    return [Scenario(f"T{i:02d}", (s,)) for i, s in enumerate((s for v in varies for s in v), start=1)]


@dataclass
class ScenarioResult:
    scenario: Scenario
    fair_values: FairValues
    schedule: ExpenseSchedule


@dataclass
class WhatIfRun:
    """Results of a what-if run."""

    ledger: Ledger
    policy: Policy
    window_mask: np.ndarray
    results: list[ScenarioResult]     # base first, then the grid
    tornado: list[ScenarioResult]     # one-at-a-time runs
    through: np.datetime64
    start: np.datetime64
    priced: int                       # input sets priced in the whole run
    planned: str | None = None        # the planned-grants file read, if any


def run_scenarios(ledger: Ledger, policy: Policy, varies: list[list[Shift]], *, grants_from=None,
                  grants_through=None, through=None, start=None, forecast_through=None) -> WhatIfRun:
    """Value and expense the base and every scenario."""
    gd = ledger.grants["grant_date"].to_numpy("datetime64[D]")
    mask = np.ones(len(gd), dtype=bool)
    if grants_from is not None:
        mask &= gd >= np.datetime64(grants_from, "D")
    if grants_through is not None:
        mask &= gd <= np.datetime64(grants_through, "D")
    if any(v[0].name == "forfeiture_rate" for v in varies) and policy.forfeitures != "estimate":
        raise UsageError("forfeiture_rate changes nothing when forfeitures are accounted for as they occur; "
                         "run with {forfeitures} estimate to vary it", ("forfeitures",))
    if through is None:
        through = ledger.tranches["vest_date"].max()
    through = np.datetime64(through, "D")
    cache: dict = {}
    memo: dict = {}  # expense quantities by date, shared by scenarios that differ only in fair values
    priced = 0

    def one(sc: Scenario) -> ScenarioResult:
        nonlocal priced
        by = {s.name: s.apply for s in sc.shifts}
        shifts = Shifts(sc.description, mask, **{k: by.get(k) for k in
                                                 ("share_price", "volatility", "risk_free_rate", "dividend_yield",
                                                  "expected_term_years")}) if sc.shifts else None
        fv = compute_fair_values(ledger, policy, shifts, cache)
        priced += fv.distinct_valuations
        inp = build_inputs(ledger, fv)
        inp.memo = memo
        if "forfeiture_rate" in by:
            inp.estimate_adjust = forfeiture_adjuster(by["forfeiture_rate"], mask)
            inp.estimate_label = next(s.label for s in sc.shifts if s.name == "forfeiture_rate")
            rates = np.unique(np.concatenate([inp.est_rate[~np.isnan(inp.est_rate)], [0.0]]))
            moved = by["forfeiture_rate"](rates)
            if np.any((moved < 0) | (moved >= 1)):
                raise UsageError(f"scenario {sc.description}: an annual forfeiture rate becomes "
                                 f"{moved[(moved < 0) | (moved >= 1)][0]:g}; it must be at least 0 and below 1")
        if "payout" in by:
            adjust_payouts(inp, by["payout"], mask, sc.description)
        sched = compute_schedule(inp, policy, through, start, forecast_through)
        return ScenarioResult(sc, fv, sched)

    results = [one(sc) for sc in grid(varies)]
    tornado = [one(sc) for sc in one_at_a_time(varies)]
    return WhatIfRun(ledger, policy, mask, results, tornado, through, results[0].schedule.window_start, priced)


def _metrics(run: WhatIfRun, r: ScenarioResult) -> dict:
    q = run.ledger.grants["quantity"].to_numpy(float)
    m = run.window_mask
    return {
        "grant_date_fair_value_window": float(np.sum(q[m] * r.fair_values.grant_value[m])),
        "grant_date_fair_value_all": float(np.sum(q * r.fair_values.grant_value)),
        "expense_through": float(r.schedule.expense_cents.sum()) / 100.0,
        "forecast": float(r.schedule.forecast_cents.sum()) / 100.0,
    }


def sensitivity_table(run: WhatIfRun) -> pd.DataFrame:
    """Scenario x metric, with differences from the base in amount and percent."""
    base = _metrics(run, run.results[0])
    rows = []
    for r in run.results:
        m = _metrics(run, r)
        row = {"scenario": r.scenario.id, "description": r.scenario.description, **m}
        for k in m:
            row[f"{k}_change"] = m[k] - base[k]
            row[f"{k}_change_percent"] = (m[k] - base[k]) / base[k] if base[k] else float("nan")
        rows.append(row)
    return pd.DataFrame(rows)


def tornado_table(run: WhatIfRun) -> pd.DataFrame:
    """One-at-a-time effects on expense and window fair value, widest range first."""
    base = _metrics(run, run.results[0])
    by_name: dict[str, list] = {}
    for r in run.tornado:
        s = r.scenario.shifts[0]
        by_name.setdefault(s.name, []).append((s.label, _metrics(run, r)))
    rows = []
    for name, items in by_name.items():
        d_exp = [(t, m["expense_through"] - base["expense_through"]) for t, m in items]
        d_fv = [(t, m["grant_date_fair_value_window"] - base["grant_date_fair_value_window"]) for t, m in items]
        lo, hi = min(d_exp, key=lambda x: x[1]), max(d_exp, key=lambda x: x[1])
        rows.append({"assumption": name, "shift_lowest_expense": lo[0], "expense_change_low": lo[1],
                     "shift_highest_expense": hi[0], "expense_change_high": hi[1], "expense_range": hi[1] - lo[1],
                     "fair_value_change_low": min(x[1] for x in d_fv),
                     "fair_value_change_high": max(x[1] for x in d_fv)})
    frame = pd.DataFrame(rows)
    return frame.sort_values("expense_range", ascending=False, kind="stable").reset_index(drop=True) if len(frame) else frame


def fair_values_by_scenario(run: WhatIfRun) -> pd.DataFrame:
    """Fair value per unit of each re-valued grant under each scenario (wide)."""
    ids = run.ledger.grants["grant_id"].to_numpy()
    m = run.window_mask
    frame = pd.DataFrame({"grant_id": ids[m]})
    for r in run.results:
        frame[r.scenario.id] = r.fair_values.grant_value[m]
    return frame


def expense_by_period(run: WhatIfRun) -> pd.DataFrame:
    """Total expense by period (rows) under each scenario (columns)."""
    frame = pd.DataFrame({"period_end": np.asarray(run.results[0].schedule.period_ends, dtype="datetime64[D]")})
    for r in run.results:
        frame[r.scenario.id] = r.schedule.expense_cents.sum(axis=0) / 100.0
    return frame


def volatility_curve(run: WhatIfRun) -> pd.DataFrame | None:
    """Total window fair value against the quantity-weighted volatility, from the volatility-only runs."""
    runs = [run.results[0]] + [r for r in run.tornado if r.scenario.shifts[0].name == "volatility"]
    if len(runs) == 1:
        return None
    q = run.ledger.grants["quantity"].to_numpy(float)
    m = run.window_mask & (run.ledger.grants["award_type"].to_numpy() == "option")
    rows = []
    for r in runs:
        t = r.fair_values.table.drop_duplicates("grant_id").set_index("grant_id")
        vol = t["volatility"].reindex(run.ledger.grants["grant_id"]).to_numpy(float)
        ok = m & ~np.isnan(vol)
        rows.append({"scenario": r.scenario.id, "description": r.scenario.description,
                     "weighted_average_volatility": float(np.average(vol[ok], weights=q[ok])) if ok.any() else np.nan,
                     "grant_date_fair_value_window": _metrics(run, r)["grant_date_fair_value_window"]})
    return pd.DataFrame(rows).sort_values("weighted_average_volatility", kind="stable").reset_index(drop=True)


def greeks_table(run: WhatIfRun) -> pd.DataFrame:
    """Analytic BSM sensitivities of each BSM grant's base value, per unit and per award."""
    from grantval.pricing import bsm_sensitivities

    t = run.results[0].fair_values.table
    b = t[t["model"] == "bsm"]
    if b.empty:
        return pd.DataFrame(columns=["grant_id"])
    g = bsm_sensitivities(b["share_price"].to_numpy(float), b["exercise_price"].to_numpy(float),
                          b["expected_term_years"].to_numpy(float), b["risk_free_rate"].to_numpy(float),
                          b["volatility"].to_numpy(float), b["dividend_yield"].to_numpy(float))
    q = b["quantity"].to_numpy(float)
    out = pd.DataFrame({"grant_id": b["grant_id"].to_numpy()})
    if "tranche" in b.columns:
        out["tranche"] = b["tranche"].to_numpy()
    out["fair_value_per_unit"] = b["fair_value_per_unit"].to_numpy()
    out["delta"] = g["delta"]
    out["value_per_volatility_point"] = g["vega"] / 100.0
    out["value_per_year_of_term"] = g["term"]
    out["value_per_rate_point"] = g["rho"] / 100.0
    out["value_per_dividend_point"] = g["dividend"] / 100.0
    out["award_per_volatility_point"] = q * g["vega"] / 100.0
    out["award_per_year_of_term"] = q * g["term"]
    out["award_per_rate_point"] = q * g["rho"] / 100.0
    return out
