"""Deriving the ledger tables ``peers`` and ``correlations`` from daily closes (``assumptions --peer-tables``).

For each peer set (see :mod:`grantval.market.peer_sets` for its members, valuation
date and lookback), over the closes dated from ``valuation date - lookback days``
to the valuation date, both included:

- each peer's volatility: sample standard deviation of its daily log returns
  (between its consecutive closes) times sqrt(252) (common practice; the
  company's own is in the assumptions table);
- each pair's correlation (the company is ``self``): the sample correlation of
  the two series' log returns between consecutive dates on which *both* have a
  close (pairwise deletion; ``peer_dates="common"``: the dates on which every
  member has one);
- each peer's dividend yield, with ``dividends``: ex-dates in the 365 days up to
  the valuation date over its close then (as for the company); otherwise the
  ledger's value is kept and said so.

Dates on which some member has a close and another has none are counted in the
provenance columns.  Pairwise deletion can give a matrix that is not positive
semi-definite: it is then refused, naming the smallest eigenvalue.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.errors import LedgerError, Problem, UsageError
from grantval.market.derive import DIVIDENDS, MarketOptions, Series, _read, read_prices
from grantval.market.peer_sets import PeerSet, read_peer_sets
from grantval.market.stats import common_log_returns, historical_volatility, return_correlation, smallest_eigenvalue

PEER_NOTES = [
    ("Peer volatility", "Per peer, the sample standard deviation of daily log returns times sqrt(252), over the "
                        "closes from the valuation date less the performance period (end_date - start_date of the "
                        "market condition using the peer set) to the valuation date."),
    ("Valuation date", "The grant date of the grants on the market condition using the peer set; its start_date "
                       "when no grant uses it yet (source_valuation_basis says which)."),
    ("Correlations", "Sample correlation of daily log returns between consecutive dates on which both members "
                     "have a close (pairwise), or on which every member has one (--peer-dates common); the "
                     "matrix is refused when not positive semi-definite."),
    ("Peer dividend yield", "With --dividends: dividends with ex-dates in the 365 days up to the valuation date "
                            "over the peer's close then; otherwise the ledger's value, kept."),
]
PSD_TOLERANCE = 1e-10  # as the ledger's check of the correlations table
_LISTED = 5            # missing dates listed in source_missing_listed


@dataclass
class PeerTables:
    """The derived ``peers`` and ``correlations`` tables (ledger format plus ``source_*`` columns)."""

    peers: pd.DataFrame
    correlations: pd.DataFrame
    notes: list[tuple[str, str]] = field(default_factory=list)
    #: what the user must know: members without a close on some dates of the lookback
    warnings: list[str] = field(default_factory=list)


@dataclass
class _Window:
    ticker: str
    days: np.ndarray
    closes: np.ndarray


def _iso(day) -> str:
    return str(np.datetime64(int(day), "D"))


def derive_peer_tables(prices, ledger, *, dividends=None, peer_sets=None,
                       options: MarketOptions | None = None) -> PeerTables:
    """Derive ``peers`` and ``correlations`` for the peer sets of ``ledger`` (all used ones, or ``peer_sets``).

    Raises
    ------
    LedgerError
        Listing every problem found in the prices file and the ledger (file, row, column).
    UsageError
        For a peer set not in the ledger or an unknown ``peer_dates``.
    """
    opt = options or MarketOptions()
    if opt.peer_dates not in ("pairwise", "common"):
        raise UsageError(f"{{peer_dates}} must be pairwise or common; got {opt.peer_dates!r}", ("peer_dates",))
    series, problems, psrc = read_prices(prices, opt)
    found, probs = read_peer_sets(ledger, list(peer_sets) if peer_sets else None)
    problems += probs
    divs = _dividends(dividends, problems) if dividends is not None else None
    for ps in found.sets:
        for pid, row in ps.members:
            if pid == "self":  # refused on its row already
                continue
            if pid == opt.ticker:
                problems.append(Problem(found.peers_source, row, "peer_id", f"{pid!r} is the company's ticker "
                                        "(--ticker); the company is 'self' and is not one of its peers"))
            elif pid not in series:
                problems.append(Problem(found.peers_source, row, "peer_id", f"{pid!r} has no closes in {psrc}"))
    _stop(problems)
    own = opt.ticker or "(own)"
    peer_rows, cor_rows, warnings = [], [], []
    for ps in found.sets:
        p, c = _one_set(ps, series, own, divs, opt, psrc, problems, warnings)
        peer_rows += p
        cor_rows += c
    _stop(problems)
    note = "peer set kept from the ledger unchanged (not derived)"
    peers = pd.DataFrame(peer_rows + [dict(r, source_note=note) for r in found.kept_peers])
    cors = pd.DataFrame(cor_rows + [dict(r, source_note=note) for r in found.kept_correlations])
    notes = [("peer sets derived", ", ".join(ps.name for ps in found.sets) or "none"),
             ("correlation dates", opt.peer_dates)]
    return PeerTables(_ordered(peers, ("peer_set", "peer_id", "volatility", "dividend_yield")),
                      _ordered(cors, ("peer_set", "first", "second", "correlation")), notes, warnings)


def _stop(problems: list[Problem]) -> None:
    if any(p.severity == "error" for p in problems):
        raise LedgerError(problems, "market data")


def _ordered(frame: pd.DataFrame, first: tuple[str, ...]) -> pd.DataFrame:
    """The ledger's columns first (present even when the table is empty), then the provenance columns."""
    for c in first:
        if c not in frame.columns:
            frame[c] = pd.Series(dtype=object)
    return frame[list(first) + [c for c in frame.columns if c not in first]]


def _dividends(path, problems: list[Problem]) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Ex-dates (day numbers) and amounts by ticker."""
    frame, probs, src = _read(path, DIVIDENDS, "dividends")
    problems += probs
    for r, a in zip(frame["_row"][frame["amount"] < 0], frame["amount"][frame["amount"] < 0]):
        problems.append(Problem(src, int(r), "amount", f"must be zero or more; got {a:g}"))
    tick = frame["ticker"].where(frame["ticker"].notna(), "").to_numpy(dtype=object)
    days = frame["ex_date"].to_numpy("datetime64[D]").astype(np.int64)
    amount = frame["amount"].to_numpy(float)
    return {t: (days[tick == t], amount[tick == t]) for t in pd.unique(tick)}


def _window(s: Series, ticker: str, ps: PeerSet, opt: MarketOptions, psrc: str,
            problems: list[Problem]) -> tuple[_Window, bool]:
    """The closes of one member in the lookback; a lookback the closes do not cover is a problem."""
    end, start = ps.valuation_day, ps.valuation_day - ps.lookback_days
    m = (s.days >= start) & (s.days <= end)
    held = f"its closes run from {_iso(s.days[0])} to {_iso(s.days[-1])}" if s.days.size else "it has no closes"
    span = (f"the lookback of peer set {ps.name!r} runs from {_iso(start)} to {_iso(end)} "
            f"({ps.lookback_days} days, the performance period)")
    short = not s.days.size or s.days[0] > start
    if short and not opt.allow_short_history:
        problems.append(Problem(psrc, None, "date", f"{ticker}: {span}, but {held}; use --allow-short-history "
                                "to accept a shorter history (flagged)"))
    last = s.days[m][-1] if m.any() else None
    if last is None or end - last > opt.max_gap_days:
        problems.append(Problem(psrc, None, "date", f"{ticker}: no close in the {opt.max_gap_days} days "
                                f"(--max-gap-days) up to the valuation date {_iso(end)} of peer set {ps.name!r}; {held}"))
    return _Window(ticker, s.days[m], s.closes[m]), bool(short)


def _one_set(ps: PeerSet, series: dict[str, Series], own: str, divs, opt: MarketOptions, psrc: str,
             problems: list[Problem], warnings: list[str]) -> tuple[list[dict], list[dict]]:
    """The peers and correlations rows of one peer set."""
    names = ["self"] + [pid for pid, _ in ps.members]
    keys = [""] + [pid for pid, _ in ps.members]
    before = len(problems)
    win, short = zip(*(_window(series[k], own if k == "" else k, ps, opt, psrc, problems) for k in keys))
    if len(problems) > before:
        return [], []
    union = np.unique(np.concatenate([w.days for w in win]))
    warnings += _missing_warnings(ps, win, union, opt.peer_dates)
    base = {"source_prices": psrc, "source_valuation_date": _iso(ps.valuation_day),
            "source_valuation_basis": ps.basis, "source_lookback_days": ps.lookback_days}
    peers = [_peer_row(ps, names[i], win[i], short[i], union, divs, base) for i in range(1, len(names))]
    if opt.peer_dates == "common":
        shared = union[np.all([np.isin(union, w.days) for w in win], axis=0)]
        win = tuple(_Window(w.ticker, shared, w.closes[np.isin(w.days, shared)]) for w in win)
    cors, matrix = _pairs(ps, names, win, opt.peer_dates, base, psrc, problems)
    if len(problems) == before:
        problems += _psd_problem(ps, matrix, win, union, opt, psrc)
    return peers, cors


def _missing_warnings(ps: PeerSet, win, union, dates: str) -> list[str]:
    """One line per member without a close on some of the lookback's dates (those of any member)."""
    out = []
    for w in win:
        missing = union[~np.isin(union, w.days)]
        if missing.size:
            listed = ", ".join(_iso(d) for d in missing[:_LISTED]) + (", ..." if missing.size > _LISTED else "")
            use = ("the dates all members have" if dates == "common" else "the dates both have")
            out.append(f"peer set {ps.name}: {w.ticker} has no close on {missing.size} of the {union.size} dates "
                       f"of the lookback ({listed}); its correlations use {use} (source_dates_skipped)")
    return out


def _peer_row(ps: PeerSet, pid: str, w: _Window, short: bool, union, divs, base: dict) -> dict:
    vol, n = historical_volatility(w.closes, "daily")
    missing = union[~np.isin(union, w.days)]
    row = {"peer_set": ps.name, "peer_id": pid, "volatility": vol}
    row.update(_dividend_cells(ps, pid, w, divs))
    row.update(base)
    row.update(source_ticker=pid, source_first_date=_iso(w.days[0]), source_last_date=_iso(w.days[-1]),
               source_return_count=n, source_missing_dates=int(missing.size),
               source_missing_listed=" ".join(_iso(d) for d in missing[:_LISTED]) + (" ..." if missing.size > _LISTED else ""),
               source_short_history="yes" if short else "no")
    return row


def _dividend_cells(ps: PeerSet, pid: str, w: _Window, divs) -> dict:
    """dividend_yield with its provenance: trailing twelve months over the close, or the ledger's value."""
    if divs is None:
        q = ps.dividend_yields.get(pid, float("nan"))
        note = "no dividends file: the ledger's value kept" + (" (blank)" if np.isnan(q) else "")
        return {"dividend_yield": q, "source_dividend_note": note}
    d, a = divs.get(pid, (np.zeros(0, np.int64), np.zeros(0)))
    m = (d > ps.valuation_day - 365) & (d <= ps.valuation_day)
    ttm, price = float(a[m].sum()), float(w.closes[-1])
    return {"dividend_yield": ttm / price, "source_dividends_counted": int(m.sum()), "source_ttm_dividends": ttm,
            "source_dividend_note": f"ex-dates in the 365 days up to {_iso(ps.valuation_day)} over the close "
                                    f"of {_iso(w.days[-1])}"}


def _pairs(ps: PeerSet, names, win, dates: str, base: dict, psrc: str, problems: list[Problem]):
    """The correlation rows of every pair of members, and the matrix."""
    k = len(names)
    matrix, rows = np.eye(k), []
    for i in range(k):
        for j in range(i + 1, k):
            common, ra, rb = common_log_returns(win[i].days, win[i].closes, win[j].days, win[j].closes)
            rho = return_correlation(ra, rb)
            if np.isnan(rho):
                problems.append(Problem(psrc, None, "close", f"peer set {ps.name!r}: {win[i].ticker} and "
                                        f"{win[j].ticker} have {ra.size} common daily returns in the lookback "
                                        "(or one is constant): no correlation can be computed"))
                continue
            matrix[i, j] = matrix[j, i] = rho
            either = np.union1d(win[i].days, win[j].days).size
            row = {"peer_set": ps.name, "first": names[i], "second": names[j], "correlation": rho}
            row.update(base)
            row.update(source_first_date=_iso(common[0]), source_last_date=_iso(common[-1]),
                       source_return_count=int(ra.size), source_dates_skipped=int(either - common.size),
                       source_dates=dates)
            rows.append(row)
    return rows, matrix


def _psd_problem(ps: PeerSet, matrix, win, union, opt: MarketOptions, psrc: str) -> list[Problem]:
    """A problem when the matrix is not positive semi-definite, saying why and what to do."""
    low = smallest_eigenvalue(matrix)
    if low >= -PSD_TOLERANCE:
        return []
    gaps = [f"{w.ticker} misses {union.size - w.days.size}" for w in win if w.days.size < union.size]
    why = ("pairs were computed over different dates because some closes are missing in the lookback ("
           + ", ".join(gaps) + f" of {union.size} dates); use --peer-dates common to compute every pair over "
           "the dates all members share") if gaps and opt.peer_dates == "pairwise" else "check the closes"
    return [Problem(psrc, None, "close", f"the correlations derived for peer set {ps.name!r} are not positive "
                    f"semi-definite (smallest eigenvalue {low:.6g}): {why}")]
