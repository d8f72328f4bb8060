"""``check``: read and check a ledger, listing every problem."""

from __future__ import annotations

from dataclasses import dataclass

from grantval.errors import Problem
from grantval.ledger import Ledger, read_ledger
from grantval.progress import stage


@dataclass
class CheckReport:
    """Outcome of checking a ledger."""

    location: str
    problems: list[Problem]
    ledger: Ledger | None

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "error"]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.problems if p.severity == "warning"]

    @property
    def ok(self) -> bool:
        return not self.errors


def check(location) -> CheckReport:
    """Read and check a ledger, returning every problem found (never raises for data problems)."""
    with stage("read+check"):
        ledger, problems = read_ledger(location)
    return CheckReport(str(location), problems, ledger)
