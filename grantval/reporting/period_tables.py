"""Wide period tables with live SUM formulas for row and column totals."""

from __future__ import annotations

import pandas as pd
from grantval.io.cells import col_letter
from grantval.io.xlsx.sheet import Formula


def with_sum_formulas(frame: pd.DataFrame, first_period_col: int, label_col: str) -> pd.DataFrame:
    """Replace the ``total`` column by row SUM formulas and append a column-total row of SUMs.

    ``first_period_col`` is the 1-based column of the first period; periods
    run up to the column before ``total``.
    """
    n = len(frame)
    cols = list(frame.columns)
    tcol = cols.index("total") + 1
    first, last = col_letter(first_period_col), col_letter(tcol - 1)
    out = frame.copy()
    if tcol - 1 >= first_period_col:
        out["total"] = [Formula(f"=SUM({first}{r}:{last}{r})") for r in range(2, n + 2)]
    else:
        out["total"] = 0.0
    total_row = {c: None for c in cols}
    total_row[label_col] = "Total"
    for j in range(first_period_col, tcol + 1):
        L = col_letter(j)
        total_row[cols[j - 1]] = Formula(f"=SUM({L}2:{L}{n + 1})") if n else 0.0
    return pd.concat([out, pd.DataFrame([total_row])], ignore_index=True)
