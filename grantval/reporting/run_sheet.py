"""The run sheet (what was run, on what, when) and the notes sheet of every workbook."""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass
from grantval import __version__
from grantval.io.xlsx.sheet import FIXED_TIME, Sheet
from grantval.reporting.notes import REVIEW, VALUATION_METHODS


@dataclass
class RunInfo:
    """What a run sheet states."""

    title: str
    command: str
    ledger: str
    files: list[tuple[str, str]]
    dates: list[tuple[str, str]]
    policies: list[tuple[str, str]]
    timestamp: bool = True

    def footer(self) -> str:
        """The run's identity for printed pages: tool version, command and a digest of the input files."""
        import hashlib

        digest = hashlib.sha256("".join(sorted(d for _, d in self.files)).encode()).hexdigest()[:12]
        return f"grantval {__version__} | {self.title.split(':')[0]} | inputs SHA-256 {digest}"

    def workbook_time(self) -> _dt.datetime:
        return _dt.datetime.now().replace(microsecond=0) if self.timestamp else FIXED_TIME


def run_sheet(info: RunInfo, when: _dt.datetime) -> Sheet:
    rows: list[list] = [[info.title], ["Tool", f"grantval {__version__}"], ["Command", info.command]]
    rows.append(["Run at", when.isoformat(sep=" ") if info.timestamp else "(not recorded: --no-timestamp)"])
    rows.append(["Ledger", info.ledger])
    rows.append([])
    rows.append(["Input file", "SHA-256"])
    rows += [[p, d] for p, d in info.files]
    rows.append([])
    rows.append(["Dates"])
    rows += [[k, v] for k, v in info.dates]
    rows.append([])
    rows.append(["Policies"])
    rows += [[k, v] for k, v in info.policies]
    rows.append([])
    rows.append(["Review", REVIEW])
    return Sheet("run", rows=rows, widths={1: 30, 2: 90})


def notes_sheet(extra: list[tuple[str, str]], warnings) -> Sheet:
    rows: list[list] = [["Notes"], [], ["Review", REVIEW], [], ["Valuation methods"]]
    rows += [[k, v] for k, v in VALUATION_METHODS]
    if extra:
        rows.append([])
        rows.append(["Expense rules"])
        rows += [[k, v] for k, v in extra]
    if warnings:
        rows.append([])
        rows.append(["Warnings from the ledger check"])
        rows += [[str(w)] for w in warnings]
    return Sheet("notes", rows=rows, widths={1: 28, 2: 120})
