"""Turning price, curve, dividend and peer tables into a ledger ``assumptions`` table.

Every output row carries its provenance in ``source_*`` columns (which the
ledger reader keeps out of its checks).  Methods:

- share price: the close on the grant date, or the last close before it (flagged);
- expected term: from the ledger's option grants on that date, quantity-weighted,
  by the simplified method (SEC SAB Topic 14.D.2), or given with ``--dates``;
- historical volatility: sample standard deviation of log returns over a lookback
  ending on the grant date, annualised by sqrt(252), sqrt(52) or sqrt(12);
  optionally blended with a weighted average of peers' volatilities
  (ASC 718-10-55-37; SAB Topic 14.D.1 for peer groups);
- risk-free rate: the par yield interpolated linearly between tenors to the
  expected term on the grant date's curve, converted from semiannual
  compounding to continuous: r = 2 ln(1 + y/2);
- dividend yield: dividends with ex-dates in the twelve months up to the grant
  date over the share price.
"""

from __future__ import annotations

import pathlib
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.errors import LedgerError, Problem, UsageError
from grantval.io.csv_read import read_csv_table
from grantval.io.tables import RawTable
from grantval.ledger.parse import parse_table
from grantval.ledger.schema import Column
from grantval.market.stats import historical_volatility, interpolate_yield, par_to_continuous, sample_closes

PRICES = (Column("date", "date", True), Column("close", "number", True), Column("ticker", "text"))
DIVIDENDS = (Column("ex_date", "date", True), Column("amount", "number", True), Column("ticker", "text"))
PEERS = (Column("ticker", "text", True), Column("weight", "number", True))
_TENOR = re.compile(r"^(\d+(\.\d+)?)(m|y)$")


@dataclass
class MarketOptions:
    """Choices of an assumptions run (see ``grantval assumptions --help``)."""

    lookback: str | float = "expected-term"   # "expected-term", "contractual-term" or years
    frequency: str = "daily"
    ticker: str | None = None                  # the company's ticker in a prices file with several
    peer_weight: float = 0.5                   # weight of the peer volatility in the blend
    max_gap_days: int = 7
    curve_units: str = "auto"                  # "auto", "percent" or "decimal"
    curve_fallback: bool = False
    allow_short_history: bool = False
    expected_term: float | None = None         # with --dates
    contractual_term: float | None = None      # with --dates and a contractual-term lookback
    peer_dates: str = "pairwise"               # peer tables: "pairwise" or "common" dates for correlations


@dataclass
class Series:
    name: str
    days: np.ndarray      # int64 day numbers, ascending
    closes: np.ndarray
    rows: np.ndarray      # spreadsheet rows


@dataclass
class Derived:
    table: pd.DataFrame
    notes: list[tuple[str, str]] = field(default_factory=list)


def _read(path, columns, name) -> tuple[pd.DataFrame, list[Problem], str]:
    p = pathlib.Path(path)
    if not p.is_file():
        raise LedgerError([Problem(str(p), None, None, "no such file")], str(p))
    raw: RawTable = read_csv_table(p, name)
    frame, problems = parse_table(raw, columns)
    return frame, problems, raw.source


def _series(frame: pd.DataFrame, src: str, max_gap: int, ticker_filter) -> tuple[dict[str, Series], list[Problem]]:
    """Price series by ticker ('' for the company's own), checked for order, duplicates, gaps and signs."""
    problems: list[Problem] = []
    out: dict[str, Series] = {}
    tick = frame["ticker"].where(frame["ticker"].notna(), "").to_numpy(dtype=object)
    for t in pd.unique(tick):
        m = tick == t
        f = frame[m]
        days = f["date"].to_numpy("datetime64[D]").astype(np.int64)
        close = f["close"].to_numpy(float)
        rows = f["_row"].to_numpy()
        ok = ~np.isnan(close) & (days != np.iinfo(np.int64).min)
        for r, c in zip(rows[ok & (close <= 0)], close[ok & (close <= 0)]):
            problems.append(Problem(src, int(r), "close", f"must be greater than zero; got {c:g}"))
        order = np.argsort(days[ok], kind="stable")
        d, c, rr = days[ok][order], close[ok][order], rows[ok][order]
        dup = np.r_[False, d[1:] == d[:-1]]
        for r, x in zip(rr[dup], d[dup]):
            problems.append(Problem(src, int(r), "date", f"{np.datetime64(int(x), 'D')} appears twice"
                                    + (f" for ticker {t}" if t else "")))
        gaps = np.diff(d)
        for j in np.flatnonzero(gaps > max_gap):
            problems.append(Problem(src, int(rr[j + 1]), "date",
                                    f"{gaps[j]} days since the previous close ({np.datetime64(int(d[j]), 'D')}); "
                                    f"the limit is {max_gap} days (--max-gap-days)"))
        key = ticker_filter(t)
        out[key] = Series(key or "(own)", d[~dup], c[~dup], rr[~dup])
    return out, problems


def read_prices(prices, opt: MarketOptions) -> tuple[dict[str, Series], list[Problem], str]:
    """Price series by ticker, the company's own under ``""``; the problems found; the file's name.

    The company's closes are the rows of the ticker ``opt.ticker`` or, without it,
    the rows with a blank ticker; their absence is a problem naming the tickers found.
    """
    pframe, problems, psrc = _read(prices, PRICES, "prices")
    own_ticker = opt.ticker or ""
    series, probs = _series(pframe, psrc, opt.max_gap_days,
                            lambda t: "" if (t == own_ticker or (t == "" and not own_ticker)) else t)
    problems += probs
    if "" not in series:
        named = sorted(t for t in series if t)
        hint = (f"; the file holds closes of {', '.join(named[:8])}{' ...' if len(named) > 8 else ''}: name the "
                "company's own with --ticker" if named else "")
        problems.append(Problem(psrc, None, "ticker", "no closes of the company's own shares (rows with a blank "
                                f"ticker, or the ticker given with --ticker{' ' + repr(opt.ticker) if opt.ticker else ''})"
                                + hint))
    return series, problems, psrc


def _curve(path, units: str) -> tuple[dict[int, tuple[np.ndarray, np.ndarray, int]], list[Problem], str, str]:
    """Curve rows by day number: (tenors in years, par yields as decimals, row)."""
    p = pathlib.Path(path)
    if not p.is_file():
        raise LedgerError([Problem(str(p), None, None, "no such file")], str(p))
    raw = read_csv_table(p, "curve")
    problems = list(raw.problems)
    src = raw.source
    tenor_cols = []
    for h in raw.headers:
        if h == "date":
            continue
        m = _TENOR.match(h)
        if not m:
            problems.append(Problem(src, 1, h, "is not a tenor: write months or years as 1m, 3m, 6m, 1y, 10y"))
            continue
        years = float(m.group(1)) / (12.0 if m.group(3) == "m" else 1.0)
        tenor_cols.append((h, years))
    if "date" not in raw.headers:
        problems.append(Problem(src, 1, "date", "required column is missing"))
    cols = (Column("date", "date", True),) + tuple(Column(h, "number") for h, _ in tenor_cols)
    frame, probs = parse_table(raw, cols)
    problems += [q for q in probs if not (q.severity == "warning" and "unknown column" in q.message)]
    values = frame[[h for h, _ in tenor_cols]].to_numpy(float) if tenor_cols else np.zeros((len(frame), 0))
    finite = values[~np.isnan(values)]
    detected = "decimal"
    if finite.size:
        top = float(np.max(np.abs(finite)))
        guess = "percent" if top > 1.0 else ("decimal" if top < 0.2 else "ambiguous")
        if units == "auto":
            if guess == "ambiguous":
                problems.append(Problem(src, None, None, f"the yields (largest {top:g}) could be percent or decimals; "
                                        "say which with --curve-units percent|decimal"))
            detected = guess
        else:
            if units == "decimal" and top > 1.0:
                problems.append(Problem(src, None, None, f"--curve-units {units} does not fit the yields "
                                        f"(largest {top:g})"))
            detected = units
    scale = 0.01 if detected == "percent" else 1.0
    tenors = np.array([y for _, y in tenor_cols])
    out: dict[int, tuple[np.ndarray, np.ndarray, int]] = {}
    dn = frame["date"].to_numpy("datetime64[D]").astype(np.int64)
    for i, (d, r) in enumerate(zip(dn, frame["_row"])):
        if d == np.iinfo(np.int64).min:
            continue
        if d in out:
            problems.append(Problem(src, int(r), "date", f"{np.datetime64(int(d), 'D')} appears twice"))
            continue
        row = values[i]
        ok = ~np.isnan(row)
        if not ok.any():
            problems.append(Problem(src, int(r), None, "the row has no yields"))
            continue
        out[int(d)] = (tenors[ok], row[ok] * scale, int(r))
    return out, problems, src, detected


def derive_assumptions(prices, curve, *, dates=None, ledger=None, dividends=None, peers=None,
                       options: MarketOptions | None = None) -> Derived:
    """Build the assumptions table for the grant dates of ``ledger`` or the given ``dates``.

    Raises
    ------
    LedgerError
        Listing every problem in the market files (file, row, column).
    UsageError
        For options that do not fit together.
    """
    opt = options or MarketOptions()
    if (dates is None) == (ledger is None):
        raise UsageError("give either --ledger or --dates")
    if opt.frequency not in ("daily", "weekly", "monthly"):
        raise UsageError(f"--frequency must be daily, weekly or monthly; got {opt.frequency!r}")
    if not 0 <= opt.peer_weight <= 1:
        raise UsageError(f"--peer-weight must be between 0 and 1; got {opt.peer_weight}")
    series, problems, psrc = read_prices(prices, opt)
    own_ticker = opt.ticker or ""
    curve_rows, probs, csrc, units = _curve(curve, opt.curve_units)
    problems += probs
    divs = None
    if dividends is not None:
        dframe, probs, dsrc = _read(dividends, DIVIDENDS, "dividends")
        problems += probs
        dt = dframe["ticker"].where(dframe["ticker"].notna(), "").to_numpy(dtype=object)
        own = (dt == "") | (dt == own_ticker)
        divs = (dframe["ex_date"].to_numpy("datetime64[D]").astype(np.int64)[own], dframe["amount"].to_numpy(float)[own])
        for r, a in zip(dframe["_row"][dframe["amount"] < 0], dframe["amount"][dframe["amount"] < 0]):
            problems.append(Problem(dsrc, int(r), "amount", f"must be zero or more; got {a:g}"))
    peer_list: list[tuple[str, float, int]] = []
    if peers is not None:
        fr, probs, src = _read(peers, PEERS, "peers")
        problems += probs
        for r, t, w in zip(fr["_row"], fr["ticker"], fr["weight"]):
            if t is None or np.isnan(w):
                continue
            if w <= 0:
                problems.append(Problem(src, int(r), "weight", f"must be greater than zero; got {w:g}"))
            elif t not in series:
                problems.append(Problem(src, int(r), "ticker", f"{t!r} has no closes in {psrc}"))
            else:
                peer_list.append((t, float(w), int(r)))

    # the grant dates and their terms
    if ledger is not None:
        from grantval.ledger.load import read_grant_terms

        terms, probs = read_grant_terms(ledger)
        problems += probs
    else:
        terms = _dates_terms(dates, opt)
    if any(p.severity == "error" for p in problems):
        raise LedgerError(problems, "market data")

    rows = []
    for d, term, contract, has_options in terms:
        rows.append(_one_date(d, term, contract, has_options, series, curve_rows, divs, peer_list, opt, units,
                              psrc, csrc, problems, ledger is None))
    if any(p.severity == "error" for p in problems):
        raise LedgerError(problems, "market data")
    table = pd.DataFrame(rows)
    if ledger is not None:
        table = _with_named_sets(table, ledger)
    return Derived(table, [("curve units", units), ("frequency", opt.frequency), ("lookback", str(opt.lookback))])


def _with_named_sets(table: pd.DataFrame, ledger) -> pd.DataFrame:
    """The ledger's named assumption sets, kept unchanged after the derived rows.

    A grant that names an ``assumption_set`` does not use the grant-date row, so its set must stay
    in the table for the result to be accepted unchanged as the ledger's ``assumptions``.
    """
    from grantval.io.ledger_files import read_ledger_files

    raw = read_ledger_files(ledger, ("assumptions",)).tables.get("assumptions")
    if raw is None or "assumption_set" not in raw.headers:
        return table
    rows = [dict(zip(raw.headers, cells)) for cells in raw.cells]
    kept = [r for r in rows if r.get("assumption_set") not in (None, "")]
    if not kept:
        return table
    extra = pd.DataFrame(kept).astype(object)
    extra = extra[[c for c in extra.columns if not c.startswith("source_")]]
    extra["source_note"] = "named assumption set kept from the ledger unchanged"
    if "assumption_set" not in table.columns:
        table.insert(0, "assumption_set", "")
    return pd.concat([table.astype(object), extra], ignore_index=True)


def _dates_terms(dates, opt: MarketOptions):
    out = []
    for d in dates:
        try:
            day = int(np.datetime64(str(d).strip(), "D").astype(np.int64))
        except ValueError:
            raise UsageError(f"--dates: {d!r} is not an ISO date") from None
        if opt.lookback == "expected-term" and opt.expected_term is None:
            raise UsageError("with --dates and an expected-term lookback, give --expected-term YEARS")
        if opt.lookback == "contractual-term" and opt.contractual_term is None:
            raise UsageError("with --dates and a contractual-term lookback, give --contractual-term YEARS")
        out.append((day, opt.expected_term, opt.contractual_term, True))
    return out


def _one_date(d, term, contract, has_options, series, curve_rows, divs, peer_list, opt, units, psrc, csrc,
              problems, term_given) -> dict:
    iso = str(np.datetime64(d, "D"))
    own = series[""]
    j = int(np.searchsorted(own.days, d, side="right")) - 1
    row = {"grant_date": iso}
    if j < 0:
        problems.append(Problem(psrc, None, "date", f"no close on or before the grant date {iso}"))
        return row
    price = float(own.closes[j])
    price_flag = "close on the grant date" if own.days[j] == d else f"last close before, {np.datetime64(int(own.days[j]), 'D')}"
    row["share_price"] = price
    lookback = (term if opt.lookback == "expected-term" else contract if opt.lookback == "contractual-term"
                else float(opt.lookback))
    vol = rf = np.nan
    prov = {"source_price_date": str(np.datetime64(int(own.days[j]), "D")), "source_price_note": price_flag}
    if has_options and lookback is not None and not np.isnan(lookback):
        start = d - int(round(lookback * 365.25))
        vol, n, first, short = _vol(own, start, d, opt.frequency)
        if short and not opt.allow_short_history:
            problems.append(Problem(psrc, None, "date", f"the lookback for {iso} starts {np.datetime64(start, 'D')} "
                                    f"({lookback:.4f} years) but the closes start {np.datetime64(int(own.days[0]), 'D')}; "
                                    "use --allow-short-history to accept a shorter history"))
        prov.update(source_lookback_years=lookback, source_lookback_start=str(np.datetime64(int(first), "D")),
                    source_lookback_end=iso, source_return_count=n, source_frequency=opt.frequency,
                    source_short_history="yes" if short else "no", source_own_volatility=vol)
        if peer_list:
            vols, weights = [], []
            for t, w, _ in peer_list:
                pv, pn, _, pshort = _vol(series[t], start, d, opt.frequency)
                if pshort and not opt.allow_short_history:
                    problems.append(Problem(psrc, None, "ticker", f"peer {t}: the closes start after the lookback "
                                            f"start {np.datetime64(start, 'D')} for {iso}"))
                vols.append(pv)
                weights.append(w)
            peer_vol = float(np.average(vols, weights=weights))
            prov.update(source_peer_volatility=peer_vol, source_peer_weight=opt.peer_weight,
                        source_peers=" ".join(f"{t}:{w:g}" for t, w, _ in peer_list))
            vol = (1 - opt.peer_weight) * vol + opt.peer_weight * peer_vol
        # risk-free rate at the expected term
        if term is None or np.isnan(term):
            problems.append(Problem(csrc, None, None, f"no expected term for {iso} to read the curve at"))
        else:
            cdate = d
            if d not in curve_rows:
                earlier = [k for k in curve_rows if k < d]
                if opt.curve_fallback and earlier:
                    cdate = max(earlier)
                else:
                    problems.append(Problem(csrc, None, "date", f"no curve row for {iso}"
                                            + ("" if opt.curve_fallback else
                                               " (use --curve-fallback to take the nearest earlier date)")))
                    cdate = None
            if cdate is not None:
                tenors, yields, crow = curve_rows[cdate]
                par, lo, hi, outside = interpolate_yield(tenors, yields, term)
                rf = float(par_to_continuous(par))
                prov.update(source_curve_date=str(np.datetime64(cdate, "D")), source_curve_row=crow,
                            source_tenor_low_years=float(tenors[lo]), source_yield_low=float(yields[lo]),
                            source_tenor_high_years=float(tenors[hi]), source_yield_high=float(yields[hi]),
                            source_par_yield=par, source_curve_units=units,
                            source_curve_note="flat beyond the curve's last tenor" if outside else "linear")
    q = 0.0
    if divs is not None:
        lo_day = d - 365  # ex-dates in the 365 days up to and including the grant date
        m = (divs[0] > lo_day) & (divs[0] <= d)
        ttm = float(divs[1][m].sum())
        q = ttm / price
        prov.update(source_dividends_counted=int(m.sum()), source_ttm_dividends=ttm)
    row.update(volatility=vol, risk_free_rate=rf, dividend_yield=q,
               expected_term_years=term if term_given else np.nan, model="bsm")
    if not term_given:
        prov["source_expected_term_years"] = term
        prov["source_contractual_term_years"] = contract
    if not has_options:
        prov["source_note"] = "RSU grants only: no volatility or rate needed"
    row.update(prov)
    return row


def _vol(s: Series, start: int, end: int, frequency: str):
    m = (s.days >= start) & (s.days <= end)
    days, closes = sample_closes(s.days[m], s.closes[m], frequency)
    vol, n = historical_volatility(closes, frequency)
    first = int(days[0]) if days.size else end
    short = s.days.size == 0 or s.days[0] > start
    return vol, n, first, short
