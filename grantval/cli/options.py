"""Option and argument types shared by the commands (typer ``Annotated`` style, ``Enum`` choices)."""

from __future__ import annotations

import enum
import pathlib
from typing import Annotated, Optional

import typer


class Period(str, enum.Enum):
    month = "month"
    quarter = "quarter"
    year = "year"


class Standard(str, enum.Enum):
    asc718 = "asc718"
    ifrs2 = "ifrs2"


class Attribution(str, enum.Enum):
    straight_line = "straight-line"
    graded = "graded"


class Forfeitures(str, enum.Enum):
    estimate = "estimate"
    as_occur = "as-occur"


class ValuationUnit(str, enum.Enum):
    award = "award"
    tranche = "tranche"


class Model(str, enum.Enum):
    bsm = "bsm"
    lattice = "lattice"


class Frequency(str, enum.Enum):
    daily = "daily"
    weekly = "weekly"
    monthly = "monthly"


class CurveUnits(str, enum.Enum):
    auto = "auto"
    percent = "percent"
    decimal = "decimal"


def choice(value) -> str | None:
    """The text of an Enum choice (None stays None)."""
    return None if value is None else value.value


Ledger = Annotated[pathlib.Path, typer.Argument(metavar="LEDGER",
                                                help="Ledger: a folder of CSV files or an .xlsx workbook.")]
Workbook = Annotated[Optional[pathlib.Path], typer.Option("-o", "--output", metavar="PATH",
                                                          help="Workbook to write (.xlsx).")]
CsvDir = Annotated[Optional[pathlib.Path], typer.Option("--csv-dir", metavar="DIR",
                                                        help="Also write the CSV tables in this folder.")]
NoTimestamp = Annotated[bool, typer.Option("--no-timestamp",
                                           help="Record no run time, for byte-identical reruns.")]
Through = Annotated[str, typer.Option("--through", metavar="DATE", help="Last day of the run (ISO date).")]
PeriodOpt = Annotated[Optional[Period], typer.Option("--period", help="Reporting period.")]
StandardOpt = Annotated[Optional[Standard], typer.Option("--standard", help="Accounting standard.")]
AttributionOpt = Annotated[Optional[Attribution], typer.Option("--attribution", help="Attribution method.")]
ForfeituresOpt = Annotated[Optional[Forfeitures], typer.Option("--forfeitures", help="Forfeiture policy.")]
SharePrice = Annotated[Optional[float], typer.Option("--share-price", metavar="PRICE",
                                                     help="Share price at --through, for intrinsic values.")]
