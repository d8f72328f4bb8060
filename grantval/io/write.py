"""Former module of the writers, kept so that existing imports work.

The writers now live by format: :mod:`grantval.io.csv`, :mod:`grantval.io.xlsx.write`,
:mod:`grantval.io.xlsx.sheet` and :mod:`grantval.io.files`.
"""

from grantval.io.csv import column_field, csv_text, money_field, write_csv
from grantval.io.files import atomic_path, refuse_overwriting_inputs
from grantval.io.xlsx.sheet import EXCEL_COLUMNS, EXCEL_ROWS, FAST_ROWS, FIXED_TIME, Chart, Formula, Sheet, label
from grantval.io.xlsx.write import write_workbook

__all__ = ["column_field", "csv_text", "money_field", "write_csv", "atomic_path", "refuse_overwriting_inputs",
           "EXCEL_COLUMNS", "EXCEL_ROWS", "FAST_ROWS", "FIXED_TIME", "Chart", "Formula", "Sheet", "label",
           "write_workbook"]
