"""Grant-date fair values of a ledger's awards.

This module turns ledger rows into arrays for the valuation core and back
into a table; it holds no pricing formula itself.

Methods (stated in every output):

- options, ``bsm``: Black-Scholes-Merton with the expected term given in the
  assumptions, or by the simplified method (SEC SAB Topic 14.D.2) from the
  tranches' vesting times weighted by their quantities;
- options, ``lattice``: the employee-option lattice over the contractual term,
  each tranche with its own vesting date; an award-level value is the
  quantity-weighted average of its tranches;
- RSUs: the share price less the present value of dividends forgone until
  each tranche vests (S e^{-q t}); award level as for the lattice;
- a ``fair_value`` in the assumptions is used as given and marked supplied.

Identical valuation inputs are valued once.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from grantval.dates import year_fraction
from grantval.errors import UsageError
from grantval.ledger.model import Ledger
from grantval.policy import Policy
from grantval.pricing import DEFAULT_STEPS, bsm_value, lattice_value, rsu_value


@dataclass
class FairValues:
    """Fair values of every grant and tranche of a ledger.

    Attributes
    ----------
    table : DataFrame
        The output table: one row per grant (``valuation_unit`` award) or per
        tranche (``tranche``), with the inputs used.
    tranche_value : ndarray
        Fair value per unit used for each row of ``ledger.tranches`` (the
        award value for every tranche under the award unit).
    grant_value : ndarray
        Fair value per unit of each grant (quantity-weighted over tranches).
    distinct_valuations : int
        Number of distinct input sets actually priced.
    """

    table: pd.DataFrame
    tranche_value: np.ndarray
    grant_value: np.ndarray
    distinct_valuations: int


@dataclass
class Shifts:
    """Assumption changes of a what-if scenario, applied to the grants in ``mask``.

    Each field is None or a function mapping the base values (array) to the
    scenario's values.  ``expected_term_years`` acts on the term actually used
    by BSM (given or simplified); lattice grants run to the contractual term
    and RSUs to their vesting dates, so it does not change them.  Supplied
    fair values are never changed.
    """

    label: str
    mask: np.ndarray
    share_price: Callable | None = None
    volatility: Callable | None = None
    risk_free_rate: Callable | None = None
    dividend_yield: Callable | None = None
    expected_term_years: Callable | None = None


def _unique_call(fn, columns: dict[str, np.ndarray], cache: dict | None = None, **fixed) -> tuple[np.ndarray, int]:
    """Call ``fn`` once per distinct row of ``columns`` and scatter the results back.

    With ``cache`` (a dict kept by the caller), rows valued before are not valued again.
    """
    n = len(next(iter(columns.values())))
    if n == 0:
        return np.zeros(0), 0
    stacked = np.column_stack([np.asarray(c, dtype=float) for c in columns.values()])
    uniq, inverse = np.unique(stacked, axis=0, return_inverse=True)
    values = np.empty(len(uniq))
    todo = np.arange(len(uniq))
    if cache is not None:
        keys = [(fn.__name__, tuple(fixed.items()), row.tobytes()) for row in uniq]
        known = np.array([k in cache for k in keys], dtype=bool)
        for i in np.flatnonzero(known):
            values[i] = cache[keys[i]]
        todo = np.flatnonzero(~known)
    if todo.size:
        args = {k: uniq[todo, i] for i, k in enumerate(columns)}
        if "exercise_multiple" in args and np.all(np.isnan(args["exercise_multiple"])):
            args["exercise_multiple"] = None
        values[todo] = np.atleast_1d(fn(**args, **fixed))
        if cache is not None:
            for i in todo:
                cache[keys[i]] = values[i]
    return values[np.ravel(inverse)], int(todo.size)


def compute_fair_values(ledger: Ledger, policy: Policy, shifts: Shifts | None = None,
                        cache: dict | None = None) -> FairValues:
    """Value every grant of a checked ledger under ``policy``.

    Parameters
    ----------
    ledger : Ledger
        A ledger returned by :func:`grantval.ledger.load_ledger`.
    policy : Policy
        Uses ``valuation_unit`` and ``lattice_steps``.
    shifts : Shifts, optional
        A what-if scenario's assumption changes.
    cache : dict, optional
        Values of input sets already priced (kept across scenarios).

    Raises
    ------
    UsageError
        When a scenario's shifts give an invalid assumption.
    """
    g, a, tr = ledger.grants, ledger.assumptions, ledger.tranches
    ai = ledger.grant_assumption
    gi = tr["grant_idx"].to_numpy()
    n_tr = len(tr)
    gdate = g["grant_date"].to_numpy("datetime64[D]")
    award = g["award_type"].to_numpy()
    is_option = award == "option"

    col = lambda name: a[name].to_numpy(float)[ai]  # noqa: E731  per-grant assumption
    s, vol, rf, q = col("share_price"), col("volatility"), col("risk_free_rate"), col("dividend_yield")
    q = np.nan_to_num(q, nan=0.0)
    given_term, supplied = col("expected_term_years"), col("fair_value")
    mult, exit_rate = col("exercise_multiple"), np.nan_to_num(col("post_vest_exit_rate"), nan=0.0)
    model = a["model"].to_numpy()[ai]
    is_lattice = is_option & (model == "lattice")
    is_bsm = is_option & ~is_lattice
    is_supplied = ~np.isnan(supplied)
    k = g["exercise_price"].to_numpy(float)
    contract = np.where(is_option, year_fraction(gdate, g["expiration_date"].to_numpy("datetime64[D]")), np.nan)
    moved = None
    if shifts is not None:
        moved = shifts.mask & ~is_supplied
        s = _shift(shifts, "share_price", s, moved, g, lambda x: x > 0, "greater than zero")
        vol = _shift(shifts, "volatility", vol, moved & is_option, g, lambda x: (x > 0) & (x <= 5),
                     "greater than 0 and at most 5")
        rf = _shift(shifts, "risk_free_rate", rf, moved & is_option, g, lambda x: (x >= -0.05) & (x <= 0.5),
                    "between -0.05 and 0.5")
        q = _shift(shifts, "dividend_yield", q, moved, g, lambda x: x >= 0, "zero or more")

    t_vest = np.maximum(year_fraction(gdate[gi], tr["vest_date"].to_numpy("datetime64[D]")), 0.0)
    t_qty = tr["quantity"].to_numpy(float)
    g_qty = np.bincount(gi, weights=t_qty, minlength=len(g))
    avg_vest = np.bincount(gi, weights=t_qty * t_vest, minlength=len(g)) / np.where(g_qty > 0, g_qty, 1)

    steps = policy.lattice_steps or DEFAULT_STEPS
    per_tranche = policy.valuation_unit == "tranche"
    tv = np.full(n_tr, np.nan)
    t_term = np.full(n_tr, np.nan)
    distinct = 0

    # options by BSM: one expected term per award, or per tranche
    simplified_award = (avg_vest + contract) / 2.0
    simplified_tranche = (t_vest + contract[gi]) / 2.0
    if per_tranche:
        term_t = np.where(np.isnan(given_term[gi]), simplified_tranche, given_term[gi])
        if moved is not None:
            term_t = _shift_term(shifts, term_t, (moved & is_bsm)[gi], contract[gi], g["grant_id"].to_numpy()[gi])
        m = is_bsm[gi] & ~is_supplied[gi]
        vals, d = _unique_call(bsm_value, dict(share_price=s[gi][m], strike=k[gi][m], term=term_t[m],
                                               rate=rf[gi][m], volatility=vol[gi][m], dividend_yield=q[gi][m]),
                               cache)
        tv[m], distinct = vals, distinct + d
        t_term[m] = term_t[m]
    else:
        term_g = np.where(np.isnan(given_term), simplified_award, given_term)
        if moved is not None:
            term_g = _shift_term(shifts, term_g, moved & is_bsm, contract, g["grant_id"].to_numpy())
        m = is_bsm & ~is_supplied
        vals, d = _unique_call(bsm_value, dict(share_price=s[m], strike=k[m], term=term_g[m],
                                               rate=rf[m], volatility=vol[m], dividend_yield=q[m]), cache)
        award_bsm = np.full(len(g), np.nan)
        award_bsm[m] = vals
        distinct += d
        mt = m[gi]
        tv[mt] = award_bsm[gi][mt]
        t_term[mt] = term_g[gi][mt]

    # options on the lattice: each tranche with its own vesting date
    m = is_lattice[gi] & ~is_supplied[gi]
    vals, d = _unique_call(
        lattice_value,
        dict(share_price=s[gi][m], strike=k[gi][m], term=contract[gi][m], rate=rf[gi][m],
             volatility=vol[gi][m], dividend_yield=q[gi][m], vesting=np.minimum(t_vest[m], contract[gi][m]),
             exercise_multiple=mult[gi][m], exit_rate=exit_rate[gi][m]),
        cache, steps=steps,
    )
    tv[m], distinct = vals, distinct + d

    # RSUs: each tranche to its own vesting date
    m = (award[gi] == "rsu") & ~is_supplied[gi]
    vals, d = _unique_call(rsu_value, dict(share_price=s[gi][m], term=t_vest[m], dividend_yield=q[gi][m]), cache)
    tv[m], distinct = vals, distinct + d

    # supplied values
    m = is_supplied[gi]
    tv[m] = supplied[gi][m]

    # quantity-weighted mean, taken about the first tranche's value so that a
    # grant whose tranches share one value gets exactly that value
    first = np.searchsorted(gi, np.arange(len(g)))
    ref = tv[np.minimum(first, max(n_tr - 1, 0))] if n_tr else np.zeros(len(g))
    spread = np.bincount(gi, weights=(tv - ref[gi]) * t_qty, minlength=len(g))
    grant_value = ref + spread / np.where(g_qty > 0, g_qty, 1)
    if not per_tranche:
        # one value per award: every tranche carries the award's value
        tranche_value = grant_value[gi]
    else:
        tranche_value = tv

    method = np.where(is_supplied, "supplied", np.where(award == "rsu", "rsu", np.where(is_lattice, "lattice", "bsm")))
    term_method = np.where(
        is_supplied, "",
        np.where(award == "rsu", "vesting period (RSU)",
                 np.where(is_lattice, "contractual term (lattice)",
                          np.where(np.isnan(given_term), "simplified method (SAB Topic 14.D.2)", "given"))))
    base = {
        "grant_id": g["grant_id"].to_numpy(),
        "holder_id": g["holder_id"].to_numpy(),
        "group": g["group"].to_numpy(),
        "award_type": award,
        "grant_date": gdate,
        "assumption_key": np.where(a["assumption_set"].notna().to_numpy()[ai], a["assumption_set"].to_numpy()[ai],
                                   a["grant_date"].astype(str).to_numpy()[ai]),
        "exercise_price": np.where(is_option, k, np.nan),
        "expiration_date": g["expiration_date"].to_numpy("datetime64[D]"),
        "share_price": s,
        "volatility": np.where(is_option & ~is_supplied, vol, np.nan),
        "risk_free_rate": np.where(is_option & ~is_supplied, rf, np.nan),
        "dividend_yield": np.where(~is_supplied, q, np.nan),
        "contractual_term_years": contract,
        "model": method,
        "expected_term_method": term_method,
        "lattice_steps": np.where(is_lattice & ~is_supplied, float(steps), np.nan),
        "exercise_multiple": np.where(is_lattice & ~is_supplied, mult, np.nan),
        "post_vest_exit_rate": np.where(is_lattice & ~is_supplied, exit_rate, np.nan),
    }
    if per_tranche:
        rows = {key: val[gi] for key, val in base.items()}
        rows["tranche"] = tr["tranche"].to_numpy()
        rows["vest_date"] = tr["vest_date"].to_numpy("datetime64[D]")
        rows["quantity"] = tr["quantity"].to_numpy(np.int64)
        rows["expected_term_years"] = np.where(method[gi] == "bsm", t_term, np.nan)
        rows["fair_value_per_unit"] = tranche_value
        order = ["grant_id", "tranche", "vest_date"]
    else:
        rows = dict(base)
        rows["quantity"] = g["quantity"].to_numpy(np.int64)
        award_term = term_g
        rows["expected_term_years"] = np.where(method == "bsm", award_term,
                                               np.where(method == "rsu", avg_vest, np.nan))
        rows["fair_value_per_unit"] = grant_value
        order = ["grant_id"]
    rows["grant_date_fair_value"] = rows["quantity"] * rows["fair_value_per_unit"]
    rows["fair_value_source"] = np.where(rows["model"] == "supplied", "supplied by outside valuation", "computed")
    columns = order + [c for c in (
        "holder_id", "group", "award_type", "grant_date", "quantity", "exercise_price", "expiration_date",
        "assumption_key", "share_price", "volatility", "risk_free_rate", "dividend_yield",
        "contractual_term_years", "expected_term_years", "expected_term_method", "model", "lattice_steps",
        "exercise_multiple", "post_vest_exit_rate", "fair_value_per_unit", "grant_date_fair_value",
        "fair_value_source") if c not in order]
    table = pd.DataFrame(rows)[columns]
    return FairValues(table=table, tranche_value=tranche_value, grant_value=grant_value,
                      distinct_valuations=distinct)


def _shift(shifts: Shifts, name: str, base: np.ndarray, mask: np.ndarray, grants, ok, words: str) -> np.ndarray:
    """Apply one scenario shift to the grants in ``mask``; refuse results outside the valid range."""
    fn = getattr(shifts, name)
    if fn is None or not mask.any():
        return base
    out = base.copy()
    out[mask] = fn(base[mask])
    bad = mask & ~ok(out)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UsageError(f"scenario {shifts.label}: {name} becomes {out[i]:g} for grant "
                         f"{grants['grant_id'].iat[i]}; it must be {words}")
    return out


def _shift_term(shifts: Shifts, term: np.ndarray, mask: np.ndarray, contract: np.ndarray, ids) -> np.ndarray:
    """Apply the expected-term shift; the term must stay above zero and within the contractual term."""
    fn = shifts.expected_term_years
    if fn is None or not mask.any():
        return term
    out = term.copy()
    out[mask] = fn(term[mask])
    bad = mask & ((out <= 0) | (out > contract + 1e-9))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UsageError(f"scenario {shifts.label}: expected_term_years becomes {out[i]:g} for grant {ids[i]}; "
                         f"it must be above 0 and at most the contractual term {contract[i]:.4f}")
    return out
