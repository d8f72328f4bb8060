"""Reader limits: environment values refused when malformed, real sizes in messages, every file size-checked.

Invented data (tests/factory.py); the expected messages are grantval's own (common practice).
"""

import pathlib
import shutil

import pytest

from grantval.cli import main
from grantval.errors import LedgerError, UsageError
from grantval.io import limits
from tests.factory import tables, write_ledger

MARKET = pathlib.Path(__file__).resolve().parents[2] / "sample_grants" / "market"
EVENTS = [{"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100",
           "share_price": "15"}]


def run(argv, capsys):
    with pytest.raises(SystemExit) as exit_info:
        main([str(a) for a in argv])
    out = capsys.readouterr()
    return exit_info.value.code, out.out + out.err


@pytest.mark.parametrize("variable", ["GRANTVAL_MAX_FILE_MB", "GRANTVAL_MAX_ROWS"])
@pytest.mark.parametrize("value", ["0.5", "abc", "-3", "0", "1e3"])
def test_malformed_limit_is_a_usage_error_naming_the_variable(tmp_path, monkeypatch, capsys, variable, value):
    # before: the default was used without a word (and GRANTVAL_MAX_FILE_MB=0 refused every file as "0 MiB")
    folder = write_ledger(tmp_path / "l", tables())
    monkeypatch.setenv(variable, value)
    code, text = run(["check", folder], capsys)
    assert code == 2, text
    assert f"environment variable {variable}={value!r} is not a positive whole number" in text
    assert "Traceback" not in text and "internal error" not in text


def test_limit_functions_read_the_environment_at_use(monkeypatch):
    monkeypatch.setenv("GRANTVAL_MAX_FILE_MB", "3")
    monkeypatch.setenv("GRANTVAL_MAX_ROWS", "1_000")
    assert limits.max_file_bytes() == 3 * 2**20
    assert limits.max_unzipped_bytes() == 24 * 2**20
    assert limits.max_rows() == 1000
    monkeypatch.delenv("GRANTVAL_MAX_FILE_MB")
    assert limits.max_file_bytes() == 64 * 2**20  # README: default 64 MiB
    monkeypatch.setenv("GRANTVAL_MAX_ROWS", "many")
    with pytest.raises(UsageError, match="GRANTVAL_MAX_ROWS"):
        limits.max_rows()


def test_module_constants_still_import():
    from grantval.io.read import MAX_FILE_BYTES, MAX_ROWS, MAX_UNZIPPED_BYTES

    assert MAX_FILE_BYTES > 0 and MAX_ROWS > 0 and MAX_UNZIPPED_BYTES == 8 * MAX_FILE_BYTES


@pytest.mark.parametrize("n, text", [(0, "0 bytes"), (1, "1 byte"), (1023, "1,023 bytes"), (1024, "1.0 KiB"),
                                     (1536, "1.5 KiB"), (5 * 2**20 + 2**19, "5.5 MiB"), (300 * 2**20, "300 MiB"),
                                     (3 * 2**30, "3.0 GiB")])
def test_sizes_are_shown_in_units_people_read(n, text):
    assert limits.format_size(n) == text


def test_size_message_shows_real_sizes(tmp_path, monkeypatch, capsys):
    # before: "the file is 2 MiB, larger than the limit of 1 MiB" for 1.5 MiB, and "0 MiB ... 0 MiB" for small files;
    # and with events present the run ended in an internal error (IndexError, exit 70)
    folder = write_ledger(tmp_path / "l", tables(events=EVENTS))
    with open(folder / "grants.csv", "ab") as fh:
        fh.write(b"\n" * (3 * 2**19))  # blank lines: 1.5 MiB plus the rows
    size = (folder / "grants.csv").stat().st_size
    monkeypatch.setenv("GRANTVAL_MAX_FILE_MB", "1")
    for command in (["check", folder], ["value", folder, "-o", tmp_path / "v.xlsx"]):
        code, text = run(command, capsys)
        assert code == 1, text
        assert f"grants.csv: the file is 1.5 MiB ({size:,} bytes), larger than the limit of 1.0 MiB" in text
        assert "internal error" not in text
    assert not (tmp_path / "v.xlsx").exists()


def test_market_files_are_size_checked(tmp_path, monkeypatch):
    # before: market files were read whatever their size
    from grantval.market.derive import MarketOptions, derive_assumptions

    prices = tmp_path / "prices.csv"
    shutil.copy(MARKET / "prices.csv", prices)
    assert prices.stat().st_size > 2**20 // 4
    with open(prices, "ab") as fh:
        fh.write(b"\n" * 2**20)
    monkeypatch.setenv("GRANTVAL_MAX_FILE_MB", "1")
    with pytest.raises(LedgerError) as info:
        derive_assumptions(prices, MARKET / "curve.csv", dates=["2026-05-15"],
                           options=MarketOptions(ticker="CRVN", lookback=2.0, expected_term=6.0))
    assert any(p.source == "prices.csv" and "larger than the limit of 1.0 MiB" in p.message
               for p in info.value.problems)


def test_market_field_over_the_csv_field_limit_is_located(tmp_path):
    # before: _csv.Error "field larger than field limit (131072)", an internal error (exit 70)
    from grantval.market.derive import MarketOptions, derive_assumptions

    prices = tmp_path / "prices.csv"
    lines = (MARKET / "prices.csv").read_text().splitlines()
    header = lines[0].split(",")
    row = lines[5].split(",")
    row[header.index("ticker")] = "T" * 140_000
    lines[5] = ",".join(row)
    prices.write_text("\n".join(lines) + "\n")
    with pytest.raises(LedgerError) as info:
        derive_assumptions(prices, MARKET / "curve.csv", dates=["2026-05-15"],
                           options=MarketOptions(ticker="CRVN", lookback=2.0, expected_term=6.0))
    hits = [p for p in info.value.problems if "140,000 characters long" in p.message]
    assert [(p.source, p.row, p.column) for p in hits] == [("prices.csv", 6, "ticker")]


def test_row_limit_is_read_when_the_ledger_is_read(tmp_path, monkeypatch, capsys):
    # before: the limit was read once at import, so setting GRANTVAL_MAX_ROWS later had no effect
    folder = write_ledger(tmp_path / "l", tables())
    monkeypatch.setenv("GRANTVAL_MAX_ROWS", "2")
    code, text = run(["check", folder], capsys)
    assert code == 1
    assert "grants.csv, row 4: the table has more than 2 data rows, the limit (environment variable " \
        "GRANTVAL_MAX_ROWS); nothing beyond was read" in text
