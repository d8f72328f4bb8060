"""``whatif``: re-value and re-expense under shifted assumptions."""

from __future__ import annotations

import pathlib

import pandas as pd

from grantval.errors import UsageError
from grantval.io.csv import write_csv
from grantval.io.files import refuse_overwriting_inputs
from grantval.io.xlsx.write import write_workbook
from grantval.ledger import load_ledger
from grantval.policy import resolve_policy
from grantval.runs.common import as_day, csv_paths, ledger_inputs

CSV_NAMES = ["scenarios.csv", "sensitivity.csv", "tornado.csv", "fair_values_by_scenario.csv",
             "expense_by_scenario.csv", "sensitivities_bsm.csv"]


def whatif(location, *, vary: list[str], grants_from=None, grants_through=None, through=None,
           forecast_through=None, planned=None, period=None, standard=None, attribution=None,
           forfeitures=None):
    """Value and expense a ledger under the base and every scenario of ``vary``.

    Parameters
    ----------
    vary : list of str
        ``NAME=SPEC[,SPEC...]`` texts (see :func:`grantval.scenarios.whatif.parse_vary`);
        several give the full grid.
    grants_from, grants_through : date, optional
        Only grants dated in this window are re-valued.
    through : date, optional
        Last day of the expense; default the last vesting date of the ledger.
    planned : path, optional
        Hypothetical grants (grants format) valued and expensed as if granted.
    """
    from grantval.scenarios.whatif import parse_vary, run_scenarios

    if not vary:
        raise UsageError("give at least one {vary} NAME=SPEC", ("vary",))
    varies = [parse_vary(v) for v in vary]
    dates = dict(grants_from=as_day(grants_from, "grants_from"), grants_through=as_day(grants_through, "grants_through"),
                 through=as_day(through, "through"), forecast_through=as_day(forecast_through, "forecast_through"))
    ledger = load_ledger(location, planned)
    policy = resolve_policy(ledger.policy_values, period=period, standard=standard, attribution=attribution,
                            forfeitures=forfeitures)
    run = run_scenarios(ledger, policy, varies, **dates)
    run.planned = None if planned is None else str(planned)
    return run


def _tables(run) -> dict:
    from grantval.scenarios import whatif as WI

    scen = pd.DataFrame({"scenario": [r.scenario.id for r in run.results],
                         "description": [r.scenario.description for r in run.results]})
    return dict(scen=scen, sens=WI.sensitivity_table(run), torn=WI.tornado_table(run),
                fvs=WI.fair_values_by_scenario(run), exp=WI.expense_by_period(run), greeks=WI.greeks_table(run),
                curve=WI.volatility_curve(run))


def _money_columns(frame) -> tuple[str, ...]:
    """Currency columns of a what-if table (written to cents): amounts and their changes, not percentages."""
    return tuple(c for c in frame.columns if not c.endswith("percent") and frame[c].dtype.kind == "f"
                 and any(w in c for w in ("fair_value", "expense", "forecast", "change", "range")))


def write_whatif(run, xlsx: pathlib.Path | None, csv_dir: pathlib.Path | None, command: str = "",
                 timestamp: bool = True) -> list[pathlib.Path]:
    """Write the what-if workbook and/or its CSV tables; returns the paths written."""
    from grantval.reporting.run_sheet import RunInfo
    from grantval.reporting.whatif_book import whatif_sheets

    paths = csv_paths(csv_dir, CSV_NAMES)
    outputs = paths + ([pathlib.Path(xlsx)] if xlsx is not None else [])
    planned = [run.planned] if run.planned else []
    refuse_overwriting_inputs(outputs, ledger_inputs(run.ledger) + planned)
    t = _tables(run)
    if paths:
        pathlib.Path(csv_dir).mkdir(parents=True, exist_ok=True)
        write_csv(paths[0], t["scen"])
        write_csv(paths[1], t["sens"], money=_money_columns(t["sens"]))
        write_csv(paths[2], t["torn"], money=_money_columns(t["torn"]))
        write_csv(paths[3], t["fvs"].melt(id_vars="grant_id", var_name="scenario", value_name="fair_value_per_unit"))
        write_csv(paths[4], t["exp"].melt(id_vars="period_end", var_name="scenario", value_name="expense"),
                  money=("expense",))
        write_csv(paths[5], t["greeks"])
    if xlsx is not None:
        from grantval.io.tables import sha256_of

        files = list(run.ledger.files) + [(p, sha256_of(pathlib.Path(p))) for p in planned]
        info = RunInfo("grantval whatif: assumption sensitivity", command or "(Python API)", run.ledger.location,
                       files,
                       [("expense from", str(run.start)), ("expense through", str(run.through)),
                        ("grants re-valued", f"{int(run.window_mask.sum())} of {run.ledger.n_grants}"),
                        ("planned grants", str(int(run.ledger.grants["planned"].sum())))],
                       run.policy.describe(), timestamp)
        sheets = whatif_sheets(info, t["scen"], t["sens"], t["torn"], t["fvs"], t["exp"], t["greeks"], t["curve"],
                               run.ledger.warnings)
        write_workbook(pathlib.Path(xlsx), sheets, fixed_time=info.workbook_time(), footer=info.footer())
    return outputs
