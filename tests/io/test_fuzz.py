"""Property-based fuzzing of the ledger reader (hypothesis)."""

import copy
import datetime as dt
import tempfile
import pathlib

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from grantval import api
from grantval.io.convert import csv_folder_to_workbook, workbook_to_csv_folder
from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS
from tests.factory import write_ledger

SCHEDULES = [(48, 12, 0), (48, 1, 12), (36, 36, 0), (36, 3, 12), (12, 12, 0)]


@st.composite
def ledgers(draw):
    n_dates = draw(st.integers(1, 3))
    dates = sorted({dt.date(2027, 1, 1) + dt.timedelta(days=draw(st.integers(0, 900))) for _ in range(n_dates)})
    assumptions = [{"assumption_set": "", "grant_date": d.isoformat(),
                    "share_price": repr(round(draw(st.floats(1, 200)), 2)),
                    "volatility": repr(round(draw(st.floats(0.1, 1.2)), 4)),
                    "risk_free_rate": repr(round(draw(st.floats(0.0, 0.08)), 4)),
                    "dividend_yield": repr(round(draw(st.floats(0.0, 0.05)), 4)), "expected_term_years": "",
                    "model": "bsm", "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": ""}
                   for d in dates]
    grants = []
    for i in range(draw(st.integers(1, 6))):
        d = dates[draw(st.integers(0, len(dates) - 1))]
        months, every, cliff = SCHEDULES[draw(st.integers(0, len(SCHEDULES) - 1))]
        rsu = draw(st.booleans())
        grants.append({"grant_id": f"F{i}", "holder_id": draw(st.sampled_from(["H1", "Zoë", "=cmd", "-7", "a,b"])),
                       "group": draw(st.sampled_from(["", "eng", "ops"])), "award_type": "rsu" if rsu else "option",
                       "grant_date": d.isoformat(), "quantity": str(draw(st.integers(1, 10**7))),
                       "exercise_price": "" if rsu else repr(round(draw(st.floats(0.5, 300)), 2)),
                       "expiration_date": "" if rsu else dt.date(d.year + 10, d.month, min(d.day, 28)).isoformat(),
                       "vest_start_date": "", "vest_months": str(months), "vest_every_months": str(every),
                       "cliff_months": str(cliff), "assumption_set": ""})
    return {"grants": grants, "assumptions": assumptions}


def _typed(folder):
    led = api.check(folder).ledger
    assert led is not None
    return led


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(ledgers())
def test_csv_xlsx_csv_round_trip_is_unchanged(data):
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        first = write_ledger(tmp / "a", data)
        csv_folder_to_workbook(first, tmp / "b.xlsx", TABLE_NAMES, TEXT_COLUMNS)
        workbook_to_csv_folder(tmp / "b.xlsx", tmp / "c", TABLE_NAMES)
        a, c = _typed(first), _typed(tmp / "c")
        cols = [col for col in a.grants.columns if col not in ("_source",)]
        assert a.grants[cols].equals(c.grants[cols])
        assert a.assumptions.drop(columns="_row").equals(c.assumptions.drop(columns="_row"))
        fa = api.value(first).fair_values.table
        fc = api.value(tmp / "c").fair_values.table
        assert fa.equals(fc)


CORRUPTIONS = ["", "abc", "1e400", "-1", "0", "NaN", "inf", "2027-13-01", "=1+1", "  ", "1,5", "35%", "\u00e9\u00e8",
               "9" * 30, "2027-02-29", "0.000001", "TRUE"]


@settings(max_examples=60, deadline=None)
@given(ledgers(), st.data())
def test_single_cell_corruption_is_caught_or_harmless(data, draw):
    table = draw.draw(st.sampled_from(["grants", "assumptions"]))
    i = draw.draw(st.integers(0, len(data[table]) - 1))
    col = draw.draw(st.sampled_from(sorted(data[table][i])))
    bad = copy.deepcopy(data)
    bad[table][i][col] = draw.draw(st.sampled_from(CORRUPTIONS))
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        good_run = api.value(write_ledger(tmp / "good", data)).fair_values.table.set_index("grant_id")
        report = api.check(write_ledger(tmp / "bad", bad))
        if not report.ok:
            assert report.errors and all(p.source.endswith(".csv") for p in report.errors)
            return
        bad_run = api.value(tmp / "bad").fair_values.table
        # nothing is dropped: every grant read is valued
        assert len(bad_run) == len(bad["grants"])
        touched = set()
        if table == "grants":
            touched.add(bad["grants"][i]["grant_id"])
            touched.add(data["grants"][i]["grant_id"])
        else:
            key = data["assumptions"][i]["grant_date"]
            touched |= {g["grant_id"] for g in data["grants"] if g["grant_date"] == key}
        for gid, row in bad_run.set_index("grant_id").iterrows():
            if gid in touched or gid not in good_run.index:
                continue
            assert np.isclose(row["fair_value_per_unit"], good_run.at[gid, "fair_value_per_unit"], rtol=0, atol=0)
