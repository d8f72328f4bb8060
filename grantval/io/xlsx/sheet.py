"""What a workbook sheet holds before it is written: frames, rows, formulas, charts, formats."""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field

import pandas as pd

_FORMULA_START = ("=", "+", "-", "@")


#: frame sheets longer than this are written by grantval.io.xlsx.bigsheet after the first data row
FAST_ROWS = 2_000


#: Excel's limits: rows per sheet (with the header) and columns
EXCEL_ROWS = 1_048_576


EXCEL_COLUMNS = 16_384


#: timestamp written into reproducible workbooks (``--no-timestamp``)
FIXED_TIME = _dt.datetime(2000, 1, 1)


class Formula(str):
    """A cell formula (text starting with ``=``) that grantval itself wrote.

    Only values of this type are written as formulas; every other text is a
    text cell, whatever it starts with.
    """


@dataclass
class Chart:
    """A chart to place on a sheet (built with openpyxl at write time).

    ``data`` and ``categories`` are (min_col, min_row, max_col, max_row) on
    ``source`` (a sheet title; default the chart's own sheet); ``data``
    includes its title row.
    """

    kind: str  # "bar" or "line"
    title: str
    data: tuple[int, int, int, int]
    categories: tuple[int, int, int, int]
    anchor: str
    source: str | None = None
    y_title: str = ""
    x_title: str = ""


@dataclass
class Sheet:
    """One worksheet to write.

    Attributes
    ----------
    name : str
        Sheet title.
    frame : DataFrame, optional
        A table written with a header row (labels from ``labels`` or the
        column names made readable), frozen and filtered.
    rows : list of list, optional
        Free-form rows (for notes and summaries), written as given; a string
        starting with ``=`` in a row from ``formula_rows`` is a formula.
    formats : dict
        Column name -> Excel number format.
    widths : dict
        Column name (or 1-based column number for ``rows``) -> width.
    text_columns : tuple of str
        Columns whose values came from the ledger: always stored as text.
    """

    name: str
    frame: pd.DataFrame | None = None
    rows: list[list] | None = None
    formats: dict[str, str] = field(default_factory=dict)
    widths: dict = field(default_factory=dict)
    labels: dict[str, str] = field(default_factory=dict)
    text_columns: tuple[str, ...] = ()
    charts: list = field(default_factory=list)
    row_formats: dict = field(default_factory=dict)  # rows sheets: (row index, column index) -> number format
    #: cells holding PASS/FAIL verdicts (for example ``F2:G20``), coloured green and red
    verdicts: str | None = None


def label(column: str) -> str:
    """Readable header for a snake_case column name."""
    text = column.replace("_", " ")
    return text[:1].upper() + text[1:]
