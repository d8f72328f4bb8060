"""The ledger format: tables, columns, types and defaults.

This module is the contract documented in ``docs/ledger-format.md``.
"""

from __future__ import annotations

from grantval.awards.registry import AWARD_TYPES
from grantval.ledger.columns import Column
from grantval.ledger.extensions import extensions


GRANTS = (
    Column("grant_id", "text", required=True),
    Column("holder_id", "text", required=True),
    Column("group", "text"),
    Column("award_type", "choice", choices=AWARD_TYPES, default="option"),
    Column("grant_date", "date", required=True),
    Column("quantity", "integer", required=True),
    Column("exercise_price", "number"),
    Column("expiration_date", "date"),
    Column("vest_start_date", "date"),
    Column("vest_months", "integer", required=True),
    Column("vest_every_months", "integer", required=True),
    Column("cliff_months", "integer", default=0),
    Column("assumption_set", "text"),
) + tuple(c for ext in extensions() for c in ext.grant_columns)

ASSUMPTIONS = (
    Column("assumption_set", "text"),
    Column("grant_date", "date"),
    Column("share_price", "number", required=True),
    Column("volatility", "number"),
    Column("risk_free_rate", "number"),
    Column("dividend_yield", "number", default=0.0),
    Column("expected_term_years", "number"),
    Column("model", "choice", choices=("bsm", "lattice"), default="bsm"),
    Column("exercise_multiple", "number"),
    Column("post_vest_exit_rate", "number"),
    Column("fair_value", "number"),
)

TRANCHES = (
    Column("grant_id", "text", required=True),
    Column("vest_date", "date", required=True),
    Column("quantity", "integer", required=True),
)

EVENT_TYPES = ("exercise", "forfeit", "expire", "cancel") + tuple(t for ext in extensions() for t in ext.event_types)

EVENTS = (
    Column("grant_id", "text", required=True),
    Column("event_date", "date", required=True),
    Column("event_type", "choice", required=True, choices=EVENT_TYPES),
    Column("quantity", "integer"),
    Column("share_price", "number"),
)

ESTIMATES = (
    Column("applies_to", "text", required=True),
    Column("effective_date", "date", required=True),
    Column("annual_forfeiture_rate", "number"),
    Column("expected_vest_fraction", "number"),
)

POLICY = (
    Column("key", "text", required=True),
    Column("value", "text"),
)

TABLES: dict[str, tuple[Column, ...]] = {
    "grants": GRANTS,
    "assumptions": ASSUMPTIONS,
    "tranches": TRANCHES,
    "events": EVENTS,
    "estimates": ESTIMATES,
    "policy": POLICY,
}
for _ext in extensions():
    TABLES.update(_ext.tables)

REQUIRED_TABLES = ("grants", "assumptions")
TABLE_NAMES = tuple(TABLES)

# limits of the assumptions' ranges (checked in validate)
VOLATILITY_MAX = 5.0
RATE_MIN, RATE_MAX = -0.05, 0.50

#: identifier and free-text columns: kept as text when a CSV ledger is turned into a workbook
TEXT_COLUMNS = frozenset({"grant_id", "holder_id", "group", "assumption_set", "applies_to", "key", "value"}).union(
    *(ext.text_columns for ext in extensions()))
