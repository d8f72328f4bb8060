"""Output locations checked before computing; output sets written aside, renamed together, stamped.

The rules under test are the ones grantval.io.outputs states (module docstring): every
check exits 2 with one line; outputs never replace inputs (symbolic links, ``..``, hard
links); a set is all-or-nothing; files are created ``0666 & ~umask``; a folder is locked
while written; a killed run's temporaries are removed by the next run.  They are
project rules ("common practice" for atomic replacement by rename, POSIX rename(2)).
"""

from __future__ import annotations

import hashlib
import json
import os
import pathlib
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
import time

import numpy as np
import pandas as pd
import pytest

from grantval.errors import GrantvalError, InputError, OutputError, OutputPathError
from grantval.io import files as F
from grantval.io.csv import write_csv
from grantval.io.files import atomic_path, refuse_overwriting_inputs
from grantval.io.outputs import plan_outputs, read_manifest, tidy_folder, verify_manifest

ROOT = pathlib.Path(__file__).resolve().parents[2]


def _ledger(folder: pathlib.Path) -> pathlib.Path:
    folder.mkdir(parents=True)
    (folder / "grants.csv").write_text("grant_id\nG1\n")
    (folder / "assumptions.csv").write_text("assumption_key\nA\n")
    return folder


def _digest(path: pathlib.Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _tree(folder: pathlib.Path) -> dict[str, bytes]:
    """The visible files of a folder (temporaries start with a dot) and their bytes."""
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file() and not p.name.startswith(".")}


def _refused(match: str, **kw) -> OutputPathError:
    with pytest.raises(OutputPathError) as info:
        plan_outputs(**kw)
    err = info.value
    assert err.exit_code == 2 and isinstance(err, GrantvalError)
    assert "\n" not in str(err), str(err)
    assert match in str(err), str(err)
    return err


# ---------------------------------------------------------------- checks before computing

def test_missing_folder_of_o_is_refused(tmp_path):
    _refused(f"the folder {tmp_path / 'nope'} for the output {tmp_path / 'nope' / 'e.xlsx'} (-o) does not exist",
             files={"-o": tmp_path / "nope" / "e.xlsx"})


def test_csv_dir_that_is_a_file_is_refused(tmp_path):
    (tmp_path / "x").write_text("a file")
    _refused(f"the output folder {tmp_path / 'x'} (--csv-dir) is an existing file",
             folders={"--csv-dir": (tmp_path / "x", ["expense.csv"])})


def test_o_that_is_a_folder_is_refused(tmp_path):
    (tmp_path / "e.xlsx").mkdir()
    _refused(f"the output {tmp_path / 'e.xlsx'} (-o) is a folder", files={"-o": tmp_path / "e.xlsx"})


def test_file_expected_in_csv_dir_is_a_folder(tmp_path):
    (tmp_path / "out" / "expense.csv").mkdir(parents=True)
    _refused("expense.csv (--csv-dir) is a folder", folders={"--csv-dir": (tmp_path / "out", ["expense.csv"])})


@pytest.mark.parametrize("how", ["same", "symlink", "dotdot", "hardlink"])
def test_output_that_is_an_input_is_refused(tmp_path, how):
    ledger = _ledger(tmp_path / "l")
    book = tmp_path / "book.xlsx"
    book.write_bytes(b"PK not really")
    (tmp_path / "sub").mkdir()
    out = {"same": book, "symlink": tmp_path / "link.xlsx", "dotdot": tmp_path / "sub" / ".." / "book.xlsx",
           "hardlink": tmp_path / "hard.xlsx"}[how]
    if how == "symlink":
        out.symlink_to(book)
    if how == "hardlink":
        os.link(book, out)
    _refused(f"the output {out} (-o) is one of the inputs", files={"-o": out}, inputs=[book], ledgers=[ledger])
    assert book.read_bytes() == b"PK not really"
    # control: the same call with another path is accepted
    plan_outputs(files={"-o": tmp_path / "other.xlsx"}, inputs=[book], ledgers=[ledger])


def test_case_variant_of_an_input_is_refused_where_case_is_folded(tmp_path):
    (tmp_path / "Probe").write_text("")
    if not (tmp_path / "probe").exists():
        pytest.skip("this file system tells letter case apart; case variants are different files here")
    ledger = _ledger(tmp_path / "l")
    _refused("is one of the inputs", files={"-o": ledger / "GRANTS.CSV"}, inputs=[ledger / "grants.csv"])


def test_csv_dir_over_an_input_file_inside_it_is_refused(tmp_path):
    # the what-if --planned file: a CSV output of the same name in the same folder
    planned = tmp_path / "p"
    planned.mkdir()
    (planned / "scenarios.csv").write_text("grant_id\nP1\n")
    _refused(f"the output {planned / 'scenarios.csv'} (--csv-dir) is one of the inputs",
             folders={"--csv-dir": (planned, ["scenarios.csv", "tornado.csv"])}, inputs=[planned / "scenarios.csv"])


def test_csv_dir_that_is_the_ledger_folder_is_refused(tmp_path):
    # the issue: expense --csv-dir LEDGER on a ledger without tranches.csv wrote tranches.csv there
    ledger = _ledger(tmp_path / "l")
    _refused(f"the output folder {ledger} (--csv-dir) is the ledger folder",
             folders={"--csv-dir": (ledger, ["tranches.csv"])}, inputs=[ledger / "grants.csv"], ledgers=[ledger])
    assert sorted(p.name for p in ledger.iterdir()) == ["assumptions.csv", "grants.csv"]


def test_csv_dir_that_is_another_ledger_folder_is_refused(tmp_path):
    other = tmp_path / "other"
    other.mkdir()
    (other / "Grants.CSV").write_text("grant_id\nG1\n")
    _refused("is a ledger folder (it holds grants.csv)", folders={"--csv-dir": (other, ["expense.csv"])})
    # a conversion writes a ledger: allowed there
    plan_outputs(folders={"--dir": (other, ["grants.csv"])}, ledger_output=True)


def test_symlink_to_the_ledger_folder_is_refused(tmp_path):
    ledger = _ledger(tmp_path / "l")
    (tmp_path / "alias").symlink_to(ledger, target_is_directory=True)
    _refused("is the ledger folder", folders={"--csv-dir": (tmp_path / "alias", ["tranches.csv"])}, ledgers=[ledger])


def test_ledger_table_name_written_into_the_ledger_folder_is_refused(tmp_path):
    ledger = _ledger(tmp_path / "l")
    _refused("would be read as the tranches table of the ledger", files={"-o": ledger / "Tranches.csv"},
             ledgers=[ledger])
    plan_outputs(files={"-o": ledger / "e.xlsx"}, ledgers=[ledger])  # not a table name: fine


def test_output_named_twice_is_refused(tmp_path):
    _refused("is named twice (-o and --csv-dir)", files={"-o": tmp_path / "expense.csv"},
             folders={"--csv-dir": (tmp_path, ["expense.csv"])})


def test_missing_csv_dir_is_created_and_said(tmp_path):
    plan = plan_outputs(folders={"--csv-dir": (tmp_path / "new", ["a.csv"])})
    assert plan.notices == [f"created folder {tmp_path / 'new'} for --csv-dir"]
    assert (tmp_path / "new").is_dir()
    plan.discard()  # the run failed before writing: the empty folder goes again
    assert not (tmp_path / "new").exists()
    _refused(f"the folder {tmp_path / 'a'} for the output folder {tmp_path / 'a' / 'b'} (--csv-dir) does not exist",
             folders={"--csv-dir": (tmp_path / "a" / "b", ["a.csv"])})
    assert not (tmp_path / "a").exists()


def test_plan_as_context_removes_its_folder_when_the_run_fails(tmp_path):
    with pytest.raises(RuntimeError):
        with plan_outputs(folders={"--csv-dir": (tmp_path / "new", ["a.csv"])}):
            raise RuntimeError("the computation failed")
    assert not (tmp_path / "new").exists()


def _plan_as_nobody(folder: pathlib.Path) -> str:
    """Run plan_outputs in a child process without root's rights; return the message or 'ok'."""
    import grantval.ledger.schema  # noqa: F401  (imported before the rights are dropped)

    read, write = os.pipe()
    pid = os.fork()
    if pid == 0:  # child
        os.close(read)
        msg = "ok"
        try:
            os.setgid(65534)
            os.setuid(65534)
            plan_outputs(files={"-o": folder / "e.xlsx"})
        except OutputPathError as err:
            msg = f"{err.exit_code}:{err}"
        except BaseException as err:  # noqa: BLE001
            msg = f"other:{err!r}"
        os.write(write, msg.encode())
        os._exit(0)
    os.close(write)
    with os.fdopen(read) as fh:
        msg = fh.read()
    os.waitpid(pid, 0)
    return msg


def test_folder_without_write_permission_is_refused():
    base = pathlib.Path(tempfile.mkdtemp(dir="/tmp"))
    try:
        base.chmod(0o755)
        folder = base / "ro"
        folder.mkdir(mode=0o755)
        folder.chmod(0o555 if os.geteuid() else 0o755)  # root's folder: not writable for nobody
        if os.geteuid() == 0:
            msg = _plan_as_nobody(folder)
            assert msg.startswith("2:cannot write the output") and "no permission to create files in" in msg, msg
            folder.chmod(0o777)  # control: writable for everyone, accepted
            assert _plan_as_nobody(folder) == "ok"
        else:
            _refused("no permission to create files in", files={"-o": folder / "e.xlsx"})
            folder.chmod(0o755)
            plan_outputs(files={"-o": folder / "e.xlsx"})
    finally:
        (base / "ro").chmod(0o755)
        shutil.rmtree(base)


# ---------------------------------------------------------------- writing a set

def _frame(seed: int, rows: int = 50) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"grant_id": [f"G{i}" for i in range(rows)], "amount": rng.normal(size=rows).round(2)})


def _write(folder: pathlib.Path, seed: int, names=("a.csv", "b.csv", "c.csv"), fail_after: int | None = None,
           timestamp: bool = False, error=RuntimeError, **kw):
    plan = plan_outputs(folders={"--csv-dir": (folder, list(names))}, command=f"test {seed}",
                        timestamp=timestamp, **kw)
    with plan.writing() as out:
        for k, name in enumerate(names):
            if fail_after is not None and k == fail_after:
                raise error("stopped")
            write_csv(folder / name, _frame(seed * 100 + k))
    return plan, out


def test_set_is_written_with_a_manifest_that_verifies(tmp_path):
    plan, out = _write(tmp_path / "o", 1)
    folder = tmp_path / "o"
    assert sorted(p.name for p in folder.iterdir()) == ["a.csv", "b.csv", "c.csv", "grantval-manifest.json"]
    man = read_manifest(folder)
    (entry,) = man["sets"]
    assert [e["name"] for e in entry["files"]] == ["a.csv", "b.csv", "c.csv"]
    for e in entry["files"]:
        assert e["sha256"] == _digest(folder / e["name"]) and e["bytes"] == (folder / e["name"]).stat().st_size
    assert entry["command"] == "test 1" and "run_id" not in entry and "created" not in entry
    assert verify_manifest(folder) == [] and verify_manifest(folder / "b.csv") == []
    assert out.written == [folder / n for n in ("a.csv", "b.csv", "c.csv")]


def test_manifest_records_run_and_time_with_timestamp(tmp_path):
    plan, _ = _write(tmp_path / "o", 1, timestamp=True)
    (entry,) = read_manifest(tmp_path / "o")["sets"]
    assert entry["run_id"] == plan.run_id and len(plan.run_id) == 16
    assert entry["created"].endswith("+00:00")
    _write(tmp_path / "p", 1, run_id="0123456789abcdef")  # a caller's identity is kept without timestamp
    assert read_manifest(tmp_path / "p")["sets"][0]["run_id"] == "0123456789abcdef"
    with pytest.raises(InputError, match="run_id"):
        plan_outputs(files={"-o": tmp_path / "x.csv"}, run_id="../x")


def test_reruns_without_timestamp_are_byte_identical(tmp_path):
    _write(tmp_path / "a", 1)
    _write(tmp_path / "b", 1)
    first = _tree(tmp_path / "a")
    assert first == _tree(tmp_path / "b")
    _write(tmp_path / "a", 1)  # again into the same folder
    assert _tree(tmp_path / "a") == first


def test_verify_manifest_finds_changed_missing_and_mixed_files(tmp_path):
    folder = tmp_path / "o"
    _write(folder, 1)
    keep = (folder / "b.csv").read_bytes()
    _write(tmp_path / "other", 2)
    shutil.copy(tmp_path / "other" / "b.csv", folder / "b.csv")  # a file of another run: a mix
    (problem,) = verify_manifest(folder)
    assert problem.startswith(f"{folder / 'b.csv'}: differs from the manifest")
    (folder / "b.csv").write_bytes(keep)
    assert verify_manifest(folder) == []
    (folder / "c.csv").unlink()
    assert verify_manifest(folder) == [f"{folder / 'c.csv'}: missing (listed in the manifest, command 'test 1')"]
    assert verify_manifest(tmp_path / "nothing-here") != []


@pytest.mark.parametrize("error", [RuntimeError, KeyboardInterrupt])
def test_failed_run_leaves_the_previous_set_untouched(tmp_path, error):
    folder = tmp_path / "o"
    _write(folder, 1)
    before = _tree(folder)
    with pytest.raises(error):
        _write(folder, 2, fail_after=2, error=error)
    assert _tree(folder) == before
    assert sorted(os.listdir(folder)) == ["a.csv", "b.csv", "c.csv", "grantval-manifest.json"]  # no temporaries
    assert verify_manifest(folder, strict=True) == []


def test_failed_first_run_removes_the_folder_it_created(tmp_path):
    with pytest.raises(RuntimeError):
        _write(tmp_path / "new", 1, fail_after=1)
    assert not (tmp_path / "new").exists()


def test_workbook_and_csv_folder_in_one_set(tmp_path):
    from grantval.io.xlsx.sheet import Sheet
    from grantval.io.xlsx.write import write_workbook

    book, folder = tmp_path / "e.xlsx", tmp_path / "e"
    plan = plan_outputs(files={"-o": book}, folders={"--csv-dir": (folder, ["a.csv"])}, command="t", timestamp=False)
    assert plan.notices == [f"created folder {folder} for --csv-dir"]
    with plan.writing():
        write_csv(folder / "a.csv", _frame(1))
        write_workbook(book, [Sheet("s", frame=_frame(1))])
        assert not book.exists() and not (folder / "a.csv").exists()  # nothing renamed before the commit
    assert book.is_file() and (folder / "a.csv").is_file()
    a, b = read_manifest(tmp_path)["sets"][0], read_manifest(folder)["sets"][0]
    assert [e["name"] for e in a["files"]] == ["e.xlsx"] and a["set_sha256"] == b["set_sha256"]
    assert verify_manifest(book) == [] and verify_manifest(folder) == []


def test_unplanned_output_is_refused_while_a_set_is_written(tmp_path):
    plan = plan_outputs(files={"-o": tmp_path / "a.csv"})
    with pytest.raises(OutputError, match="was not planned"):
        with plan.writing():
            write_csv(tmp_path / "sub" / "b.csv", _frame(1))
    assert not (tmp_path / "a.csv").exists()


def test_new_name_in_a_planned_folder_is_checked_against_inputs(tmp_path):
    folder = tmp_path / "o"
    folder.mkdir()
    (folder / "in.csv").write_text("x\n1\n")
    plan = plan_outputs(folders={"--csv-dir": (folder, ["a.csv"])}, inputs=[folder / "in.csv"])
    with pytest.raises(OutputPathError, match="is one of the inputs"):
        with plan.writing():
            write_csv(folder / "in.csv", _frame(1))
    assert (folder / "in.csv").read_text() == "x\n1\n"


def test_other_commands_sets_in_the_folder_are_kept(tmp_path):
    folder = tmp_path / "o"
    _write(folder, 1, names=("fair_values.csv",))
    _write(folder, 2, names=("expense.csv", "tranches.csv"))
    sets = read_manifest(folder)["sets"]
    assert [[e["name"] for e in s["files"]] for s in sets] == [["expense.csv", "tranches.csv"], ["fair_values.csv"]]
    assert verify_manifest(folder, strict=True) == []


def test_leftover_of_a_partly_replaced_set_is_deleted(tmp_path):
    # expense with --forecast-through, then without: forecast.csv would be left from the first run
    folder = tmp_path / "o"
    _write(folder, 1, names=("expense.csv", "forecast.csv"))
    (folder / "notes.txt").write_text("the user's own file")
    _write(folder, 2, names=("expense.csv",))
    assert sorted(os.listdir(folder)) == ["expense.csv", "grantval-manifest.json", "notes.txt"]
    assert "obsolete" not in read_manifest(folder)  # the note is dropped once the leftover is deleted
    assert verify_manifest(folder) == []
    _write(tmp_path / "fresh", 2, names=("expense.csv",))  # the same as a first run into an empty folder
    assert _tree(tmp_path / "fresh") == {k: v for k, v in _tree(folder).items() if k != "notes.txt"}
    assert verify_manifest(folder, strict=True) == [f"{folder / 'notes.txt'}: not listed in the manifest"]


# ---------------------------------------------------------------- modes

@pytest.mark.parametrize("mask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_files_are_created_0666_less_umask(tmp_path, mask, mode):
    from grantval.io.xlsx.sheet import Sheet
    from grantval.io.xlsx.write import write_workbook

    old = os.umask(mask)
    try:
        _write(tmp_path / "o", 1)
        write_csv(tmp_path / "alone.csv", _frame(1))  # outside a set
        write_workbook(tmp_path / "alone.xlsx", [Sheet("s", frame=_frame(1))])
        plan = plan_outputs(files={"-o": tmp_path / "replaced.csv"})
        with plan.writing() as out:  # a writer that replaces its temporary by a private file
            part = out.path(tmp_path / "replaced.csv")
            fd, other = tempfile.mkstemp(dir=tmp_path)
            os.close(fd)
            os.replace(other, part)
    finally:
        os.umask(old)
    for p in [tmp_path / "o" / n for n in ("a.csv", "b.csv", "c.csv", "grantval-manifest.json")] + \
             [tmp_path / "alone.csv", tmp_path / "alone.xlsx", tmp_path / "replaced.csv"]:
        assert stat.S_IMODE(p.stat().st_mode) == mode, (p, oct(p.stat().st_mode))


# ---------------------------------------------------------------- locks and temporaries

_HOLD = """
import fcntl, os, sys, time
fd = os.open(sys.argv[1], os.O_RDONLY)
fcntl.flock(fd, fcntl.LOCK_EX)
print("locked", flush=True)
time.sleep(float(sys.argv[2]))
"""


def _hold_lock(folder: pathlib.Path, seconds: float) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-c", _HOLD, str(folder), str(seconds)], stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "locked"
    return proc


def test_second_writer_is_refused_after_the_timeout(tmp_path):
    folder = tmp_path / "o"
    _write(folder, 1)
    before = _tree(folder)
    stale = folder / f".a.csv.{'0' * 16}.part"
    stale.write_text("left by someone")
    holder = _hold_lock(folder, 30)
    try:
        with pytest.raises(OutputError, match=f"another grantval run is writing into {folder}; waited 0.3 s"):
            _write(folder, 2, lock_timeout=0.3)
        assert stale.exists()  # never tidied while the lock is held
    finally:
        holder.kill()
        holder.wait()
    assert _tree(folder) == before
    _write(folder, 2, lock_timeout=0.3)  # the lock is free again
    assert not stale.exists() and verify_manifest(folder) == []


def test_refused_writer_removes_the_folder_it_created(tmp_path):
    holder = _hold_lock(tmp_path, 30)  # the parent of -o is locked by another writer
    try:
        plan = plan_outputs(files={"-o": tmp_path / "e.csv"}, folders={"--csv-dir": (tmp_path / "new", ["a.csv"])},
                            lock_timeout=0.2)
        assert (tmp_path / "new").is_dir()
        with pytest.raises(OutputError, match="another grantval run is writing into"):
            with plan.writing():
                pass
    finally:
        holder.kill()
        holder.wait()
    assert not (tmp_path / "new").exists() and not (tmp_path / "e.csv").exists()


def test_second_writer_waits_for_the_first(tmp_path):
    folder = tmp_path / "o"
    folder.mkdir()
    holder = _hold_lock(folder, 0.5)
    try:
        _write(folder, 1, lock_timeout=20)
    finally:
        holder.wait()
    assert holder.returncode == 0 and verify_manifest(folder) == []


def test_next_run_removes_only_grantval_temporaries(tmp_path):
    folder = tmp_path / "o"
    folder.mkdir()
    ours = [folder / f".a.csv.{'ab' * 8}.part", folder / f".x.xlsx.{'01' * 8}.part"]
    others = [folder / ".a.csv.part", folder / "a.csv.0123456789abcdef.part", folder / f".a.csv.{'AB' * 8}.part"]
    for p in ours + others:
        p.write_text("x")
    (folder / f".d.{'cd' * 8}.part").mkdir()  # a folder of that name is not ours to remove
    plan, out = _write(folder, 1)
    assert out.notices == [f"removed 2 temporary file(s) an interrupted grantval run left in {folder}"]
    assert not any(p.exists() for p in ours) and all(p.exists() for p in others)


def test_plain_atomic_path_tidies_and_locks(tmp_path):
    stale = tmp_path / f".x.csv.{'12' * 8}.part"
    stale.write_text("x")
    with atomic_path(tmp_path / "x.csv") as tmp:
        assert F.TEMP_RE.match(tmp.name) and tmp.parent == tmp_path
        tmp.write_text("new\n")
    assert (tmp_path / "x.csv").read_text() == "new\n" and not stale.exists()
    with pytest.raises(KeyboardInterrupt):
        with atomic_path(tmp_path / "x.csv") as tmp:
            tmp.write_text("half")
            raise KeyboardInterrupt
    assert (tmp_path / "x.csv").read_text() == "new\n" and sorted(os.listdir(tmp_path)) == ["x.csv"]


# ---------------------------------------------------------------- the existing helper

def test_refuse_overwriting_inputs_sees_links_and_ledger_tables(tmp_path):
    ledger = _ledger(tmp_path / "l")
    os.link(ledger / "grants.csv", tmp_path / "hard.csv")
    (tmp_path / "soft.csv").symlink_to(ledger / "assumptions.csv")
    inputs = [str(ledger / "grants.csv"), str(ledger / "assumptions.csv"), str(ledger)]
    for out in (tmp_path / "hard.csv", tmp_path / "soft.csv", ledger / "sub" / ".." / "grants.csv"):
        with pytest.raises(OutputError, match="is one of the inputs") as info:
            refuse_overwriting_inputs([out], inputs)
        assert info.value.exit_code == 1  # the existing helper keeps its exit code
    with pytest.raises(OutputError, match="would be read as a table of the ledger"):
        refuse_overwriting_inputs([ledger / "tranches.csv"], inputs)
    refuse_overwriting_inputs([ledger / "e.xlsx", tmp_path / "tranches.csv"], inputs)  # fine


# ---------------------------------------------------------------- killed runs

_WRITER = """
import pathlib, sys
import numpy as np, pandas as pd
from grantval.io.csv import write_csv
from grantval.io.outputs import plan_outputs

folder, version, count = pathlib.Path(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3])
names = [f"table_{k:02d}.csv" for k in range(count)]
plan = plan_outputs(folders={"--csv-dir": (folder, names)}, command=f"writer {version}", timestamp=False)
rng = np.random.default_rng(version)
with plan.writing() as out:
    for name in names:
        write_csv(folder / name, pd.DataFrame(rng.integers(0, 10**12, size=(50_000, 4)), columns=list("abcd")))
for line in out.notices:
    print(line)
"""
N_FILES = 20


def _run_writer(folder: pathlib.Path, version: int, count: int = N_FILES, env: dict | None = None,
                wait: bool = True):
    cmd = [sys.executable, "-c", _WRITER, str(folder), str(version), str(count)]
    full = dict(os.environ, PYTHONPATH=str(ROOT), **(env or {}))
    if wait:
        return subprocess.run(cmd, env=full, capture_output=True, text=True, timeout=300)
    return subprocess.Popen(cmd, env=full, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.fixture(scope="module")
def reference_sets(tmp_path_factory):
    """The complete sets of writer versions 1 (21 files: one more than later runs) and 2 and 3."""
    base = tmp_path_factory.mktemp("sets")
    out = {}
    for version, count in ((1, N_FILES + 1), (2, N_FILES), (3, N_FILES)):
        r = _run_writer(base / str(version), version, count)
        assert r.returncode == 0, r.stderr
        out[version] = _tree(base / str(version))
    assert all(len(v) == N_FILES + 1 for v in (out[2], out[3])) and len(out[1]) == N_FILES + 2
    assert min(len(b) for n, b in out[2].items() if n.endswith(".csv")) > 2_000_000  # a few MB each
    return out


# where the writer is stopped, and what must be found afterwards
BEFORE_COMMIT = ["part:1", "part:10", f"part:{N_FILES}"]
HELD = ["commit", "decided", "rename:1", "rename:10", f"rename:{N_FILES}", "manifest", "obsolete"]


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGKILL], ids=["SIGINT", "SIGKILL"])
@pytest.mark.parametrize("point", BEFORE_COMMIT + HELD)
def test_killed_run_leaves_old_or_new_set_never_an_undetected_mix(tmp_path, reference_sets, point, sig):
    folder = tmp_path / "o"
    shutil.copytree(_ref_dir(reference_sets, tmp_path), folder)
    note = tmp_path / "paused"
    proc = _run_writer(folder, 2, env={"GRANTVAL_TEST_PAUSE_AT": point, "GRANTVAL_TEST_PAUSE_FILE": str(note),
                                       "GRANTVAL_TEST_PAUSE_SECONDS": "60"},
                       wait=False)
    deadline = time.monotonic() + 120
    while not note.exists() and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.02)
    assert note.exists() and note.read_text() == point, proc.communicate()
    proc.send_signal(sig)
    proc.communicate(timeout=120)
    assert proc.returncode != 0
    now = _tree(folder)
    old, new = reference_sets[1], reference_sets[2]
    temporaries = [n for n in os.listdir(folder) if n.startswith(".")]
    if sig == signal.SIGINT:
        # before the commit: the old set, nothing left over; from the commit on, SIGINT waits: the new set
        assert (now == old if point in BEFORE_COMMIT else now == new) and temporaries == []
    elif point in BEFORE_COMMIT or point == "commit":
        assert now == old and verify_manifest(folder) == []
    else:
        # killed inside the commit: a mix is possible, and is reported until the next run completes it
        assert verify_manifest(folder) != []
        assert any(F.TEMP_RE.match(n)["kind"] == "commit" for n in temporaries) or point == "obsolete"
        assert tidy_folder(folder)
        assert _tree(folder) == new and verify_manifest(folder, strict=True) == []
    # the next run tidies whatever was left and writes its own complete set
    r = _run_writer(folder, 3)
    assert r.returncode == 0, r.stderr
    assert _tree(folder) == reference_sets[3] and verify_manifest(folder, strict=True) == []
    assert not [n for n in os.listdir(folder) if n.startswith(".")]


def _ref_dir(reference_sets, tmp_path) -> pathlib.Path:
    """Materialise writer version 1's set in a fresh folder (the previous outputs)."""
    folder = tmp_path / "v1"
    folder.mkdir()
    for name, data in reference_sets[1].items():
        (folder / name).write_bytes(data)
    return folder
