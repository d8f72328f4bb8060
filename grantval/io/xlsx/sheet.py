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
    """A chart to place on a sheet, built from the sheet's cells at write time (:mod:`grantval.io.xlsx.charts`).

    Ranges are (min_col, min_row, max_col, max_row), 1-based, on ``source`` (a sheet title;
    default the chart's own sheet).  ``data`` is one range or a list of ranges; each column of
    each range is one series, its first row the series title.  ``categories`` are the labels
    (text cells, shown as written) or, for a scatter chart, the x values.

    Attributes
    ----------
    kind : {"bar", "line", "scatter"}
        Bars (columns, or horizontal with ``horizontal``), lines without smoothing, or x-y points.
    horizontal : bool
        Bars along the value axis (categories down the side).
    first_on_top : bool
        Horizontal bars: the first category row at the top (a tornado lists its widest swing first).
    overlap : int or None
        Overlap of a category's bars in percent (100: the low and high bars of a tornado share one row).
    value_format, category_format : str
        Number formats of the value axis and, for a scatter chart, of the x axis.
    size : (float, float)
        Width and height in centimetres.
    legend : str or None
        Legend position ("b", "r", "t") or None for no legend (a single series).
    new_page : bool
        Print the chart on a page of its own: a page break above its anchor row (a chart under
        a table longer than a page would otherwise be cut by the page end).
    """

    kind: str
    title: str
    data: tuple[int, int, int, int] | list[tuple[int, int, int, int]]
    categories: tuple[int, int, int, int]
    anchor: str
    source: str | None = None
    y_title: str = ""
    x_title: str = ""
    horizontal: bool = False
    first_on_top: bool = False
    overlap: int | None = None
    value_format: str = "#,##0"
    category_format: str = "General"
    size: tuple[float, float] = (16.0, 8.5)
    legend: str | None = "b"
    new_page: bool = False

    def ranges(self) -> list[tuple[int, int, int, int]]:
        """The data ranges as a list."""
        return [self.data] if isinstance(self.data, tuple) else list(self.data)

    def n_categories(self) -> int:
        """Number of category cells."""
        c0, r0, c1, r1 = self.categories
        return (c1 - c0 + 1) * (r1 - r0 + 1)


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
    #: pages tall when printed: 0 lets the rows run on (one page wide always); 1 fits the sheet on one page
    fit_height: int = 0
    #: rows sheets: 1-based columns whose text wraps within the column width (rows made tall enough)
    wrap_columns: tuple[int, ...] = ()
    #: table sheets: columns (names) whose long text wraps within the column width, rows made tall
    #: enough (tables of at most ``FAST_ROWS`` rows; longer tables are written without wrapping)
    wrap_text_columns: tuple[str, ...] = ()
    #: rows sheets: (row index, column index) -> what a formula cell there evaluates to, written as its
    #: cached value for readers that do not recalculate (see grantval.io.xlsx.cached)
    cached: dict = field(default_factory=dict)


def label(column: str) -> str:
    """Readable header for a snake_case column name."""
    text = column.replace("_", " ")
    return text[:1].upper() + text[1:]
