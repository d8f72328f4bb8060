"""``disclose``: the ASC 718-10-50 activity tables and grant figures for a window."""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

from grantval.attribution.inputs import build_inputs
from grantval.errors import UsageError
from grantval.io.csv import write_csv
from grantval.io.files import refuse_overwriting_inputs
from grantval.io.xlsx.sheet import Formula
from grantval.io.xlsx.write import write_workbook
from grantval.ledger import Ledger, load_ledger
from grantval.measurement.fairvalue import FairValues, compute_fair_values
from grantval.policy import Policy, resolve_policy
from grantval.reporting.disclosure import Disclosure, compute_disclosure
from grantval.runs.common import as_day, csv_paths, ledger_inputs
from grantval.runs.expense import ExpenseOutputs

CSV_NAMES = ["option_activity.csv", "rsu_activity.csv", "grant_disclosures.csv"]


@dataclass
class DisclosureRun:
    """Disclosure tables of a ledger for one window."""

    ledger: Ledger
    policy: Policy
    fair_values: FairValues
    disclosure: Disclosure
    sections: object = None


def disclose(location, *, start, through, share_price: float | None = None, period=None, standard=None,
             attribution=None, forfeitures=None) -> DisclosureRun:
    """Option and RSU activity and grant figures (ASC 718-10-50-2) for the window ``start``..``through``."""
    s, t = as_day(start, "start"), as_day(through, "through")
    if s is None or t is None:
        raise UsageError("give both {start} and {through}", ("start", "through"))
    if s > t:
        raise UsageError(f"{{start}} {s} is after {{through}} {t}", ("start", "through"))
    from grantval.runs.expense import check_share_price

    check_share_price(share_price)
    ledger = load_ledger(location)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures)
    fv = compute_fair_values(ledger, policy)
    inp = build_inputs(ledger, fv, policy)
    from grantval.reporting.disclosure_features import feature_sections

    return DisclosureRun(ledger, policy, fv, compute_disclosure(ledger, fv, inp, policy, s, t, share_price),
                         feature_sections(ledger, policy, fv, inp, s, t))


def _checks(d) -> list:
    """Roll-forward ties, with the workbook's own formulas over the activity tables."""
    from grantval.reporting.checks import disclosure_ties

    ties = disclosure_ties(d)
    ties[0].a = Formula("=option_activity!B2+option_activity!B3-option_activity!B4-option_activity!B5"
                        "-option_activity!B6")
    ties[0].b = Formula("=option_activity!B7")
    ties[1].a = Formula("=rsu_activity!B2+rsu_activity!B3-rsu_activity!B4-rsu_activity!B5")
    ties[1].b = Formula("=rsu_activity!B6")
    return ties


def _feature_sheets(run) -> list:
    from grantval.reporting.disclosure_features import feature_sheets

    return feature_sheets(run.sections) if run.sections is not None else []


def write_disclosure(run: DisclosureRun, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None,
                     command: str = "", timestamp: bool = True) -> ExpenseOutputs:
    """Write the disclosure workbook and/or ``option_activity.csv``, ``rsu_activity.csv``, ``grant_disclosures.csv``."""
    from grantval.reporting.checks import checks_sheet
    from grantval.reporting.disclosure_book import disclosure_sheets
    from grantval.reporting.run_sheet import RunInfo, notes_sheet, run_sheet

    d = run.disclosure
    extra = dict(run.sections.tables) if run.sections is not None else {}
    names = CSV_NAMES + (["performance_unit_activity.csv"] if d.performance_units is not None else [])
    paths = csv_paths(csv_dir, names + list(extra))
    outputs = paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    refuse_overwriting_inputs(outputs, ledger_inputs(run.ledger))
    checks = _checks(d) + (list(run.sections.checks) if run.sections is not None else [])
    if paths:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        for path, frame in zip(paths, (d.options, d.rsus, d.grants)):
            write_csv(path, frame)
        if d.performance_units is not None:
            write_csv(paths[3], d.performance_units)
        for path, frame in zip(paths[len(names):], extra.values()):
            write_csv(path, frame)
    if xlsx is not None:
        info = RunInfo("grantval disclose: stock-based compensation disclosure tables", command or "(Python API)",
                       run.ledger.location, run.ledger.files,
                       [("from", str(d.start)), ("through", str(d.through)),
                        ("share price at the end", "(not given)" if d.share_price is None else repr(d.share_price))],
                       run.policy.describe(), timestamp)
        sheets = [run_sheet(info, info.workbook_time()), *disclosure_sheets(d), *_feature_sheets(run), checks_sheet(checks),
                  notes_sheet([], run.ledger.warnings)]
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time(), footer=info.footer())
    return ExpenseOutputs(outputs, checks)
