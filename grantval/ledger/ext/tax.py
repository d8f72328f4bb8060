"""Ledger extension of the income-tax feature: ``grants.tax_treatment``, ``tax_rates``, ``share_prices``
and the ``disqualifying_disposition`` event (rules in ``docs/tax-and-dilution.md``).

Nothing tax-related is computed unless the ``tax_rates`` table has rows; the checks below that
concern tax effects apply only then, so ledgers without the table read exactly as before.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from grantval.awards.registry import flag
from grantval.errors import Problem
from grantval.ledger.columns import Column
from grantval.ledger.extensions import Extension, LedgerParts

#: ``grants.tax_treatment`` choices; blank means ``deductible`` (see :func:`treatments`)
TREATMENTS = ("deductible", "none")
DEFAULT_TREATMENT = "deductible"

TAX_RATES = (
    Column("applies_to", "text", required=True),
    Column("effective_date", "date", required=True),
    Column("tax_rate", "number", required=True),
)

SHARE_PRICES = (
    Column("date", "date", required=True),
    Column("share_price", "number", required=True),
)

DISQUALIFYING = "disqualifying_disposition"


def treatments(grants: pd.DataFrame) -> np.ndarray:
    """Per grant: ``deductible`` or ``none`` (blank cells are ``deductible``)."""
    if "tax_treatment" not in grants:
        return np.full(len(grants), DEFAULT_TREATMENT, dtype=object)
    t = grants["tax_treatment"].to_numpy(dtype=object)
    return np.where(pd.isna(t), DEFAULT_TREATMENT, t).astype(object)


def _rate_problems(rates: pd.DataFrame, src: str) -> list[Problem]:
    """Rates outside [0, 1) and two rows for one key and effective date."""
    out = []
    for r, x in zip(rates["_row"], rates["tax_rate"].to_numpy(float)):
        if np.isfinite(x) and not 0.0 <= x < 1.0:
            out.append(Problem(src, int(r), "tax_rate", f"{x:g} is outside [0, 1); write rates as decimals "
                                                       "(21% is 0.21)"))
    seen: dict = {}
    for r, k, d in zip(rates["_row"], rates["applies_to"], rates["effective_date"]):
        if k is None or pd.isna(d):
            continue
        d = np.datetime64(d, "D")
        if (k, d) in seen:
            out.append(Problem(src, int(r), "effective_date", f"{k!r} already has a tax rate effective {d} "
                                                              f"(row {seen[(k, d)]})"))
        seen.setdefault((k, d), int(r))
    return out


def _price_problems(prices: pd.DataFrame, src: str) -> list[Problem]:
    """Share prices that are not positive and two rows for one date."""
    out = []
    seen: dict = {}
    for r, d, p in zip(prices["_row"], prices["date"], prices["share_price"].to_numpy(float)):
        if np.isfinite(p) and p <= 0:
            out.append(Problem(src, int(r), "share_price", f"must be positive; got {p:g}"))
        if not pd.isna(d):
            d = np.datetime64(d, "D")
            if d in seen:
                out.append(Problem(src, int(r), "date", f"{d} already has a share price (row {seen[d]})"))
            seen.setdefault(d, int(r))
    return out


def _rate_cover(parts: LedgerParts, treat: np.ndarray) -> list[Problem]:
    """Every deductible grant needs a tax rate in force on its grant date."""
    g = parts.grants
    gd = g["grant_date"].to_numpy("datetime64[D]")
    earliest = _earliest_rate(parts, g["grant_id"].to_numpy(dtype=object), g["group"].to_numpy(dtype=object))
    bad = (treat == "deductible") & ~np.isnat(gd) & ~(earliest <= gd)
    return [Problem(parts.sources["grants"], int(r), "tax_treatment",
                    f"grant {gid} is deductible but no tax_rates row (for the grant, its group or '*') "
                    f"is in force on its grant date {d}")
            for r, gid, d in zip(g["_row"][bad], g["grant_id"][bad], gd[bad])]


def _earliest_rate(parts: LedgerParts, grant_ids, groups) -> np.ndarray:
    """Per (grant id, group): the first day a tax rate applies to it (NaT when none ever does)."""
    rates = parts.tables["tax_rates"]
    first = pd.Series(rates["effective_date"].to_numpy("datetime64[D]"),
                      index=rates["applies_to"].to_numpy(dtype=object)).groupby(level=0).min()
    by_grant = pd.Series(grant_ids, dtype=object).map(first).to_numpy("datetime64[D]")
    by_group = pd.Series(groups, dtype=object).map(first).to_numpy("datetime64[D]")
    star = np.datetime64(first.get("*", np.datetime64("NaT")), "D")
    return np.fmin(np.fmin(by_grant, by_group), star)


def _key_problems(parts: LedgerParts) -> list[Problem]:
    """Warn about ``applies_to`` values that are neither a grant, a group nor ``*`` (a typo falls back to ``*``)."""
    rates, g = parts.tables["tax_rates"], parts.grants
    known = set(g["grant_id"].dropna()) | set(g["group"].dropna()) | {"*"}
    return [Problem(parts.sources["tax_rates"], int(r), "applies_to", f"{k!r} is neither a grant, a group nor '*'; "
                    "the row applies to nothing", "warning")
            for r, k in zip(rates["_row"], rates["applies_to"]) if k is not None and k not in known]


def _dd_rate_problems(parts: LedgerParts) -> list[Problem]:
    """A disqualifying disposition needs a tax rate in force on its date."""
    ev, g = parts.tables["events"], parts.grants
    dd = ev[(ev["event_type"] == DISQUALIFYING) & ev["grant_id"].isin(set(g["grant_id"].dropna()))]
    if dd.empty:
        return []
    group = dict(zip(g["grant_id"].to_numpy(dtype=object), g["group"].to_numpy(dtype=object)))
    first = _earliest_rate(parts, dd["grant_id"].to_numpy(dtype=object),
                           np.array([group[k] for k in dd["grant_id"]], dtype=object))
    day = dd["event_date"].to_numpy("datetime64[D]")
    bad = ~np.isnat(day) & ~(first <= day)
    return [Problem(parts.sources["events"], int(r), "event_date", f"no tax_rates row (for grant {k}, its group or "
                    f"'*') is in force on {d}, the date of this disqualifying_disposition")
            for r, k, d in zip(dd["_row"][bad], dd["grant_id"][bad], day[bad])]


def _event_problems(parts: LedgerParts, treat: np.ndarray, with_rates: bool) -> list[Problem]:
    """Disqualifying dispositions (grant, share price, quantity) and exercises of deductible options without a price."""
    ev, g, src = parts.tables["events"], parts.grants, parts.sources["events"]
    index = {k: i for i, k in enumerate(g["grant_id"].to_numpy(dtype=object))}
    exercisable = flag(g["award_type"].to_numpy(), "exercisable")
    out = []
    for r, gid, kind, q, p in zip(ev["_row"].to_numpy(), ev["grant_id"].to_numpy(dtype=object),
                                  ev["event_type"].to_numpy(dtype=object), ev["quantity"].to_numpy(float),
                                  ev["share_price"].to_numpy(float)):
        i = index.get(gid)
        if i is None:
            continue  # reported by the core
        if kind == DISQUALIFYING:
            if treat[i] != "none":
                out.append(Problem(src, int(r), "event_type", f"grant {gid} has tax_treatment {treat[i]}; a "
                                   "disqualifying_disposition applies only to grants with tax_treatment none"))
            if not exercisable[i]:
                out.append(Problem(src, int(r), "event_type", f"grant {gid} is not an option; only shares from "
                                   "exercised options have a disqualifying disposition"))
            if not np.isfinite(p):
                out.append(Problem(src, int(r), "share_price", "is required for a disqualifying_disposition (the "
                                   "share value the tax deduction is measured on)"))
            if not (np.isfinite(q) and q > 0 and float(q).is_integer()):
                out.append(Problem(src, int(r), "quantity", "must be a positive whole number of shares for a "
                                   "disqualifying_disposition"))
        elif with_rates and kind == "exercise" and treat[i] == "deductible" and exercisable[i] and not np.isfinite(p):
            out.append(Problem(src, int(r), "share_price", f"is required for the exercise of deductible grant "
                               f"{gid}: the tax deduction is the intrinsic value at exercise"))
    return out


def _disposed_problems(parts: LedgerParts) -> list[Problem]:
    """A disqualifying disposition cannot dispose of more shares than were exercised by its date."""
    ev, src = parts.tables["events"], parts.sources["events"]
    out = []
    dd = ev[ev["event_type"] == DISQUALIFYING]
    if dd.empty:
        return out
    ex = ev[ev["event_type"] == "exercise"]
    disposed: dict = {}
    for r, gid, d, q in sorted(zip(dd["_row"], dd["grant_id"], dd["event_date"], dd["quantity"].to_numpy(float)),
                               key=lambda t: (str(t[1]), t[2], t[0])):
        if not np.isfinite(q) or pd.isna(d):
            continue
        m = (ex["grant_id"] == gid) & (ex["event_date"] <= d)
        exercised = float(np.nansum(ex["quantity"][m].to_numpy(float)))
        disposed[gid] = disposed.get(gid, 0.0) + q
        if disposed[gid] > exercised:
            out.append(Problem(src, int(r), "quantity", f"disposes of {disposed[gid]:g} shares of grant {gid} in "
                               f"all by {d}, but only {exercised:g} were exercised by then"))
    return out


def check(parts: LedgerParts) -> list[Problem]:
    """Rows and cross-table checks of the tax tables (see the module docstring)."""
    rates, prices = parts.tables["tax_rates"], parts.tables["share_prices"]
    treat = treatments(parts.grants)
    out = _rate_problems(rates, parts.sources["tax_rates"]) + _price_problems(prices, parts.sources["share_prices"])
    with_rates = len(rates) > 0
    if with_rates:
        out += _rate_cover(parts, treat) + _dd_rate_problems(parts) + _key_problems(parts)
    out += _event_problems(parts, treat, with_rates)
    out += _disposed_problems(parts)
    return out


EXTENSION = Extension(
    feature="tax",
    tables={"tax_rates": TAX_RATES, "share_prices": SHARE_PRICES},
    grant_columns=(Column("tax_treatment", "choice", choices=TREATMENTS),),
    event_types=(DISQUALIFYING,),
    check=check,
)
