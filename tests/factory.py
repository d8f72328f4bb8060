"""Small invented ledgers for tests (invented data; not from any source)."""

from __future__ import annotations

import copy
import csv
import pathlib

BASE: dict[str, list[dict]] = {
    "grants": [
        {"grant_id": "G1", "holder_id": "H1", "group": "eng", "award_type": "option", "grant_date": "2027-01-01",
         "quantity": "1000", "exercise_price": "10", "expiration_date": "2037-01-01", "vest_start_date": "",
         "vest_months": "48", "vest_every_months": "12", "cliff_months": "0", "assumption_set": ""},
        {"grant_id": "G2", "holder_id": "H2", "group": "ops", "award_type": "rsu", "grant_date": "2027-01-01",
         "quantity": "400", "exercise_price": "", "expiration_date": "", "vest_start_date": "",
         "vest_months": "36", "vest_every_months": "3", "cliff_months": "12", "assumption_set": ""},
        {"grant_id": "G3", "holder_id": "H3", "group": "eng", "award_type": "option", "grant_date": "2027-04-01",
         "quantity": "900", "exercise_price": "12", "expiration_date": "2037-04-01", "vest_start_date": "",
         "vest_months": "36", "vest_every_months": "36", "cliff_months": "0", "assumption_set": "lat"},
    ],
    "assumptions": [
        {"assumption_set": "", "grant_date": "2027-01-01", "share_price": "10", "volatility": "0.4",
         "risk_free_rate": "0.04", "dividend_yield": "0", "expected_term_years": "", "model": "bsm",
         "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": ""},
        {"assumption_set": "lat", "grant_date": "", "share_price": "12", "volatility": "0.45",
         "risk_free_rate": "0.04", "dividend_yield": "0.01", "expected_term_years": "", "model": "lattice",
         "exercise_multiple": "2.5", "post_vest_exit_rate": "0.05", "fair_value": ""},
    ],
}


def tables(**changes) -> dict[str, list[dict]]:
    """A deep copy of :data:`BASE` with whole tables replaced or added."""
    t = copy.deepcopy(BASE)
    t.update(copy.deepcopy(changes))
    return t


def write_ledger(folder: pathlib.Path, data: dict[str, list[dict] | list[list]]) -> pathlib.Path:
    """Write tables as CSV files; a table is a list of dicts, or a list of rows with the header first."""
    folder.mkdir(parents=True, exist_ok=True)
    for name, rows in data.items():
        with open(folder / f"{name}.csv", "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            if rows and isinstance(rows[0], dict):
                header = list(rows[0])
                w.writerow(header)
                for r in rows:
                    w.writerow([r.get(h, "") for h in header])
            else:
                for r in rows:
                    w.writerow(r)
    return folder


def set_cell(data, table: str, index: int, column: str, value: str):
    """Return a copy of ``data`` with one cell changed (index is 0-based over data rows)."""
    d = copy.deepcopy(data)
    d[table][index][column] = value
    return d
