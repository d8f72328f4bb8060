"""Former module of the workbook content, kept so that existing imports work: see :mod:`grantval.reporting`."""

from grantval.io.cells import col_letter  # noqa: F401
from grantval.reporting.checks import CheckRow, checks_sheet  # noqa: F401
from grantval.reporting.disclosure_book import disclosure_sheets  # noqa: F401
from grantval.reporting.expense_book import expense_sheets  # noqa: F401
from grantval.reporting.fair_value_sheet import AUDIT_INPUTS, fair_value_audit, recomputed_column  # noqa: F401
from grantval.reporting.formats import FORMATS, LEDGER_TEXT, MONEY, UNIT  # noqa: F401
from grantval.reporting.period_tables import with_sum_formulas  # noqa: F401
from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet  # noqa: F401
from grantval.reporting.whatif_book import WHATIF_NOTES, whatif_sheets  # noqa: F401
