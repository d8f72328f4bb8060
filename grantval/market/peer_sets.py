"""A ledger's peer sets as ``assumptions --peer-tables`` needs them: members, valuation date, lookback.

The members of a peer set are the ledger's ``peers`` rows of that set; each
``peer_id`` is a ticker of the prices file (the company is ``self``).  Only
``peer_set`` and ``peer_id`` are needed: ``volatility`` may still be blank.

The lookback of a peer set ends on its **valuation date** and is as long as
the performance period (``end_date - start_date``, calendar days) of the market
condition using it.  The valuation date is the grant date of the grants whose
``condition_set`` is that condition (the fair value is measured at the grant
date: ASC 718-10-30-2, IFRS 2.11, from memory); when no grant uses the
condition yet, its ``start_date``.  A peer set whose conditions give more than
one (valuation date, period) is refused: the ``peers`` table holds one
volatility per member and set.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from grantval.errors import Problem, UsageError
from grantval.io.ledger_files import read_ledger_files
from grantval.ledger.parse import parse_table
from grantval.ledger.schema import Column

MEMBERS = (Column("peer_set", "text", True), Column("peer_id", "text", True), Column("volatility", "number"),
           Column("dividend_yield", "number"))
CONDITIONS = (Column("condition_set", "text", True), Column("start_date", "date", True),
              Column("end_date", "date", True), Column("peer_set", "text"))
GRANTS = (Column("grant_id", "text", True), Column("grant_date", "date", True), Column("condition_set", "text"))
_NAT = np.iinfo(np.int64).min


@dataclass
class PeerSet:
    """One peer set to derive.

    Attributes
    ----------
    name : str
    members : list of (str, int)
        Each peer's ``peer_id`` (its ticker) and its row in the ledger's peers table.
    valuation_day : int
        Day number (days since 1970-01-01) on which the lookback ends.
    lookback_days : int
        Calendar days of the performance period, the lookback's length.
    basis : str
        How the valuation date was chosen (written to ``source_valuation_basis``).
    dividend_yields : dict
        The ledger's ``dividend_yield`` by ``peer_id`` (NaN when blank).
    """

    name: str
    members: list[tuple[str, int]]
    valuation_day: int
    lookback_days: int
    basis: str
    dividend_yields: dict = field(default_factory=dict)


@dataclass
class LedgerPeerSets:
    """The peer sets to derive and the ledger rows of the others, kept unchanged."""

    sets: list[PeerSet]
    kept_peers: list[dict]
    kept_correlations: list[dict]
    peers_source: str


def _typed(raw, name, columns) -> tuple[pd.DataFrame | None, list[Problem]]:
    """A ledger table typed with the few columns needed (other columns are not checked here)."""
    table = raw.tables.get(name)
    if table is None:
        return None, []
    frame, probs = parse_table(table, columns)
    return frame, [p for p in probs if p.severity == "error"]


def _days(frame: pd.DataFrame, column: str) -> np.ndarray:
    return frame[column].to_numpy("datetime64[D]").astype(np.int64)


def _raw_rows(raw, name: str, keep) -> list[dict]:
    """Rows of a raw ledger table (cells as read, ``source_*`` columns dropped) whose peer set is kept."""
    table = raw.tables.get(name)
    if table is None:
        return []
    out = []
    for cells in table.cells:
        row = {h: c for h, c in zip(table.headers, cells) if not h.startswith("source_")}
        if keep(row.get("peer_set")):
            out.append(row)
    return out


def read_peer_sets(ledger, wanted=None) -> tuple[LedgerPeerSets, list[Problem]]:
    """The peer sets of ``ledger`` to derive (all used by a market condition, or the ``wanted`` ones).

    Raises
    ------
    UsageError
        When a wanted peer set is not in the ledger's peers table.
    """
    from grantval.ledger.load import KNOWN_COLUMNS

    raw = read_ledger_files(ledger, ("grants", "market_conditions", "peers", "correlations"), KNOWN_COLUMNS)
    problems = [p for p in raw.problems if p.severity == "error"]
    peers, probs = _typed(raw, "peers", MEMBERS)
    problems += probs
    if peers is None:
        problems.append(Problem(str(ledger), None, None, "the ledger has no peers table: list each peer set's "
                                "members there (peer_set, peer_id = the ticker in the prices file)"))
        return LedgerPeerSets([], [], [], "peers"), problems
    src = raw.tables["peers"].source
    conditions, probs = _typed(raw, "market_conditions", CONDITIONS)
    problems += probs
    grants, probs = _typed(raw, "grants", GRANTS)
    problems += probs
    problems += _member_problems(peers, src)
    names = list(dict.fromkeys(n for n in peers["peer_set"] if isinstance(n, str)))
    csrc = _source(raw, "market_conditions")
    problems += _sets_without_members(conditions, names, csrc)
    if wanted:
        unknown = [w for w in wanted if w not in names]
        if unknown:
            raise UsageError(f"{{peer_sets}}: {', '.join(map(repr, unknown))} not in the ledger's peers table "
                             f"(its peer sets: {', '.join(names) or 'none'})", ("peer_sets",))
    sets: list[PeerSet] = []
    derived: set[str] = set()
    for name in names:
        if wanted and name not in wanted:
            continue
        found, probs = _lookback_of(name, conditions, grants, csrc, explicit=bool(wanted))
        problems += probs
        if found is None:
            continue
        day, length, basis = found
        f = peers[peers["peer_set"] == name]
        members = [(pid, int(r)) for pid, r in zip(f["peer_id"], f["_row"]) if isinstance(pid, str)]
        dy = {pid: float(q) for pid, q in zip(f["peer_id"], f["dividend_yield"])}
        sets.append(PeerSet(name, members, day, length, basis, dy))
        derived.add(name)
    keep = lambda ps: ps not in derived  # noqa: E731
    return LedgerPeerSets(sets, _raw_rows(raw, "peers", keep), _raw_rows(raw, "correlations", keep), src), problems


def _source(raw, name: str) -> str:
    return raw.tables[name].source if name in raw.tables else name


def _sets_without_members(conditions, names: list[str], csrc: str) -> list[Problem]:
    """A market condition naming a peer set that has no rows in the peers table."""
    if conditions is None:
        return []
    return [Problem(csrc, int(r), "peer_set", f"peer set {ps!r} has no members in the peers table: list them there "
                    "(peer_set, peer_id = the ticker in the prices file)")
            for ps, r in zip(conditions["peer_set"], conditions["_row"]) if isinstance(ps, str) and ps not in names]


def _member_problems(peers: pd.DataFrame, src: str) -> list[Problem]:
    """A member named ``self`` or listed twice in its set."""
    out, seen = [], {}
    for ps, pid, r in zip(peers["peer_set"], peers["peer_id"], peers["_row"]):
        if not isinstance(pid, str) or not isinstance(ps, str):
            continue
        if pid == "self":
            out.append(Problem(src, int(r), "peer_id", "'self' is the company; a peer needs its own ticker"))
        elif (ps, pid) in seen:
            out.append(Problem(src, int(r), "peer_id", f"{pid!r} is already in peer set {ps!r} on row {seen[(ps, pid)]}"))
        else:
            seen[(ps, pid)] = int(r)
    return out


def _lookback_of(name: str, conditions, grants, csrc: str, explicit: bool):
    """(valuation day, lookback days, basis) of one peer set, or None with the problems that prevent it.

    A peer set used by no market condition is left out (kept unchanged) unless it was asked for.
    """
    uses = conditions[conditions["peer_set"] == name] if conditions is not None else None
    if uses is None or not len(uses):
        if explicit:
            return None, [Problem(csrc, None, "peer_set", f"no market condition uses peer set {name!r}: its "
                                  "lookback is the performance period of the condition that uses it")]
        return None, []
    found: dict[tuple[int, int], list[str]] = {}
    problems = []
    for cs, sd, ed, r in zip(uses["condition_set"], _days(uses, "start_date"), _days(uses, "end_date"), uses["_row"]):
        if sd == _NAT or ed == _NAT:
            continue
        if ed <= sd:
            problems.append(Problem(csrc, int(r), "end_date", "must be after start_date (the lookback is the "
                                    "performance period)"))
            continue
        for day, basis in _valuation_days(cs, sd, grants):
            found.setdefault((int(day), int(ed - sd)), []).append(basis)
    if problems or not found:
        return None, problems
    if len(found) > 1:
        listed = "; ".join(f"{np.datetime64(d, 'D')} with {n} days ({', '.join(b)})" for (d, n), b in found.items())
        return None, [Problem(csrc, None, "peer_set", f"peer set {name!r} is used at several valuation dates or "
                              f"periods: {listed}; the peers table holds one volatility per member, so give each "
                              "its own peer set")]
    (day, length), bases = next(iter(found.items()))
    return (day, length, "; ".join(bases)), []


def _valuation_days(condition: str, start_day: int, grants) -> list[tuple[int, str]]:
    """The grant dates of the grants on ``condition``, or its start_date when none uses it."""
    if grants is not None and len(grants):
        m = (grants["condition_set"] == condition).to_numpy()
        days = _days(grants, "grant_date")[m]
        ids = grants["grant_id"].to_numpy(dtype=object)[m]
        out = []
        for d in np.unique(days[days != _NAT]):
            named = [str(i) for i in ids[days == d]]
            more = f" and {len(named) - 3} more" if len(named) > 3 else ""
            out.append((int(d), f"grant date of {', '.join(named[:3])}{more} (condition {condition})"))
        if out:
            return out
    return [(int(start_day), f"start_date of condition {condition} (no grant uses it)")]
