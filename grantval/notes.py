"""Former module of the method statements, kept so that existing imports work: see :mod:`grantval.reporting.notes`."""

from grantval.reporting.notes import EXPENSE_RULES, MARKET_NOTES, REVIEW, VALUATION_METHODS, expense_notes  # noqa: F401
