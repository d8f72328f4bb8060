"""Output sets: every output of a run checked up front, written aside and renamed in together.

A command uses this module in two steps (see :func:`plan_outputs`):

1. **plan**, before any computing: every output location is checked (missing or
   wrong-kind folders, outputs that are inputs or ledger folders, outputs named twice,
   write permission) and a missing ``--csv-dir`` folder is created (said in the notices);
2. **write**, in ``with plan.writing() as out:``: the output folders are locked, files
   left by killed runs are tidied, every writer writes a temporary ``.<name>.<run>.part``
   beside its target (:func:`grantval.io.files.atomic_path` does so by itself), and when
   the block ends without an exception the set is *committed*; on any exception,
   KeyboardInterrupt included, the temporaries are removed and the previous outputs
   are left untouched.

The commit, with every output folder locked and SIGINT/SIGTERM held back until it
ends (they are delivered, to the usual handler, when it is complete):

a. each temporary is flushed (fsync) and hashed, and each folder's new manifest is
   written and renamed to a commit record ``.grantval-manifest.json.<run>.commit``:
   from here on the set is decided;
b. the temporaries are renamed onto their targets, one atomic rename(2) per file;
c. each commit record is renamed onto ``grantval-manifest.json`` (manifests last);
d. files left from an earlier set that this set partly replaced (``forecast.csv`` of
   an earlier run with ``--forecast-through``) are deleted if unchanged.  Earlier sets
   of other commands in the same folder, untouched by this one, are kept and listed.

Guarantee.  Each rename is atomic per file, so a reader sees each file either old or
new.  An exception or signal before (a) completes leaves every previous output as it
was (the temporaries are removed).  Only a crash that cannot be caught (SIGKILL, power
loss) between (a) and (c) can leave a folder whose files are partly old and partly
new; its manifest then does not match them and there is a pending commit record, so
:func:`verify_manifest` reports it, and the next grantval run into that folder
completes the commit from the record and the remaining temporaries (checking each by
its SHA-256) before it writes anything; so does a file-system error raised after (a).
A crash between (c) and (d) leaves a file
:func:`verify_manifest` reports as left over; the next run deletes it.  A set spread
over two folders (a workbook and a CSV folder) is committed folder by folder: each
folder is consistent on its own, and the manifests of one set share ``set_sha256``.
Without ``fcntl`` (Windows) folders are not locked and temporaries are not tidied.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import json
import os
import pathlib
import signal
import stat
import threading
import time
from dataclasses import dataclass, field
from typing import Iterable, Iterator, Mapping, Sequence

from grantval.errors import InputError, OutputError, OutputPathError
from grantval.io import files as F

MANIFEST_FORMAT = 1


def ledger_table_names() -> tuple[str, ...]:
    """The table names of the ledger format (``grants``, ``assumptions``, ``tranches``, ...)."""
    from grantval.ledger.schema import TABLE_NAMES

    return tuple(TABLE_NAMES)


def looks_like_ledger_folder(folder) -> bool:
    """Whether ``folder`` holds ``grants.csv`` (in any letter case): it is a CSV ledger."""
    try:
        return any(n.lower() == "grants.csv" for n in os.listdir(folder))
    except OSError:
        return False


# ---------------------------------------------------------------------------- the plan

@dataclass
class _Target:
    option: str
    shown: pathlib.Path     # as the user gave it (messages)
    real: pathlib.Path      # absolute, symbolic links resolved (where the file goes)


@dataclass
class _Folder:
    option: str
    shown: pathlib.Path
    real: pathlib.Path
    names: tuple[str, ...]


@dataclass
class OutputPlan:
    """The checked output locations of one run; see :func:`plan_outputs`.

    Attributes
    ----------
    notices : list of str
        Lines for the command to print ("created folder ..."; after writing also
        what was tidied or completed from an interrupted earlier run).
    run_id : str
        The run's identity (16 hexadecimal digits unless given); names the temporaries.
    """

    files: list[_Target]
    folders: list[_Folder]
    inputs: list[tuple[str, str | None]]
    ledgers: list[str]
    command: str
    timestamp: bool
    run_id: str
    manifest: bool
    lock_timeout: float | None
    notices: list[str] = field(default_factory=list)
    created: list[pathlib.Path] = field(default_factory=list)
    explicit_run_id: bool = False
    ledger_output: bool = False

    def targets(self) -> list[pathlib.Path]:
        """Every declared output file (real paths)."""
        return [t.real for t in self.files] + [f.real / n for f in self.folders for n in f.names]

    def output_folders(self) -> list[pathlib.Path]:
        """Every folder the set writes into (real paths, each once)."""
        seen: dict[str, pathlib.Path] = {}
        for p in [f.real for f in self.folders] + [t.real.parent for t in self.files]:
            seen.setdefault(os.path.normcase(str(p)), p)
        return list(seen.values())

    def discard(self) -> None:
        """Remove the folders the plan created if they are still empty (the run failed before writing)."""
        for folder in reversed(self.created):
            with contextlib.suppress(OSError):
                folder.rmdir()
        self.created.clear()

    def __enter__(self) -> "OutputPlan":
        return self

    def __exit__(self, kind, err, tb) -> None:
        if kind is not None:
            self.discard()

    @contextlib.contextmanager
    def writing(self) -> Iterator["OutputSet"]:
        """Lock the output folders, tidy them, yield the :class:`OutputSet`, and commit it on success.

        On any exception in the block (KeyboardInterrupt too) the temporaries are
        removed and the previous outputs stay as they were.  :func:`grantval.io.files.atomic_path`
        (so ``write_csv`` and ``write_workbook``) finds the set through a context variable:
        call writers in the thread that entered the block, or pass ``out.path(target)``.
        """
        folders = self.output_folders()
        missing = [f for f in folders if not f.is_dir()]
        if missing:
            raise OutputPathError(f"the output folder {missing[0]} no longer exists")
        try:
            with F.folder_locks(folders, self.lock_timeout):
                out = OutputSet(self)
                try:
                    if F.fcntl is not None:  # without locks another writer's temporaries may be live
                        for folder in folders:
                            out.notices += tidy_folder(folder)
                    _check_all(self, create=False)
                    token = F.ACTIVE_SET.set(out)
                    try:
                        yield out
                    finally:
                        F.ACTIVE_SET.reset(token)
                    out.commit()
                except BaseException:
                    out.abort()
                    raise
                finally:
                    self.notices += out.notices
        except BaseException:
            self.discard()  # folders this plan created, if still empty
            raise


def plan_outputs(files: Mapping[str, object] | None = None,
                 folders: Mapping[str, tuple[object, Sequence[str]]] | None = None, *,
                 inputs: Iterable = (), ledgers: Iterable = (), command: str = "", timestamp: bool = True,
                 run_id: str | None = None, manifest: bool = True, lock_timeout: float | None = None,
                 ledger_output: bool = False) -> OutputPlan:
    """Check every output location of a run before it computes anything.

    Parameters
    ----------
    files : mapping of str to path or None
        Single output files by the option that names them, e.g. ``{"-o": xlsx}``;
        None values (option not given) are skipped.
    folders : mapping of str to (path or None, sequence of str)
        Output folders by option, with the file names the run writes there, e.g.
        ``{"--csv-dir": (csv_dir, ["expense.csv", ...])}``.
    inputs : iterable of path or (path, sha256)
        Every file (or folder) the run reads; no output may be one of them.
    ledgers : iterable of path
        The ledger location(s) read; an output folder may not be one, and no output
        named like a ledger table may be written into one.
    command : str
        The command line, recorded in the manifest.
    timestamp : bool
        Record the run's time and identity in the manifest; False makes reruns byte-identical.
    run_id : str, optional
        The run's identity (recorded even without ``timestamp``); default a random one.
    manifest : bool
        Write ``grantval-manifest.json`` in every output folder.
    lock_timeout : float, optional
        Seconds to wait for another run writing into the same folder (default
        GRANTVAL_LOCK_TIMEOUT or 30).
    ledger_output : bool
        The run writes a ledger (a conversion): its output folder may hold ``grants.csv``.

    Returns
    -------
    OutputPlan
        Its ``notices`` are for the command to print; ``plan.writing()`` writes the set.

    Raises
    ------
    OutputPathError
        (exit code 2) naming the option and path at fault, on the first problem.
    """
    given = run_id is not None
    if given and not F.TEMP_RE.match(f".x.{run_id}.part"):
        raise InputError(f"run_id {run_id!r} must be 16 lower-case hexadecimal digits")
    plan = OutputPlan(
        files=[_Target(opt, pathlib.Path(p), _real(p)) for opt, p in (files or {}).items() if p is not None],
        folders=[_Folder(opt, pathlib.Path(p), _real(p), tuple(names))
                 for opt, (p, names) in (folders or {}).items() if p is not None],
        inputs=[(str(i[0]), i[1]) if isinstance(i, (tuple, list)) else (str(i), None) for i in inputs if i is not None],
        ledgers=[str(x) for x in ledgers if x is not None],
        command=command, timestamp=timestamp, run_id=run_id or F.new_run_id(), manifest=manifest,
        lock_timeout=lock_timeout, explicit_run_id=given, ledger_output=ledger_output)
    try:
        _check_all(plan, create=True)
    except BaseException:
        plan.discard()
        raise
    return plan


def _real(p) -> pathlib.Path:
    return pathlib.Path(os.path.realpath(os.path.abspath(os.fspath(p))))


def _check_all(plan: OutputPlan, create: bool) -> None:
    """Every check of the plan, in the order a user would fix them; raises on the first problem."""
    ins = [(s, F.identity(s)) for s, _ in plan.inputs] + [(s, F.identity(s)) for s in plan.ledgers]
    ledger_dirs = [F.identity(s) for s in plan.ledgers if os.path.isdir(s)]
    for fo in plan.folders:
        _check_folder(plan, fo, ins, ledger_dirs, create)
    for t in plan.files:
        _check_file(t.option, t.shown, ins, ledger_dirs)
    for fo in plan.folders:
        for n in fo.names:
            _check_file(fo.option, fo.shown / n, ins, ledger_dirs, in_folder=True)
    seen: dict[str, str] = {}
    for opt, shown, real in ([(t.option, t.shown, t.real) for t in plan.files]
                             + [(f.option, f.shown / n, f.real / n) for f in plan.folders for n in f.names]):
        key = os.path.normcase(str(real))
        if key in seen:
            raise OutputPathError(f"the output {shown} is named twice ({seen[key]} and {opt}); "
                                  "give each output its own path")
        seen[key] = opt


def _check_folder(plan: OutputPlan, fo: _Folder, ins, ledger_dirs, create: bool) -> None:
    where = f"the output folder {fo.shown} ({fo.option})"
    me = F.identity(fo.shown)
    for shown, ident in ins:
        if F.same_path(me, ident):
            if os.path.isdir(shown):
                name = "" if str(fo.shown) == shown else f" {shown}"
                raise OutputPathError(f"{where} is the ledger folder{name}; its outputs would be read as "
                                      "ledger tables by the next run: choose another folder")
            raise OutputPathError(f"{where} is the input file {shown}; choose a folder")
    if fo.shown.exists() and not fo.shown.is_dir():
        raise OutputPathError(f"{where} is an existing file; give a folder")
    if not plan.ledger_output and (any(F.same_path(me, d) for d in ledger_dirs) or looks_like_ledger_folder(fo.shown)):
        raise OutputPathError(f"{where} is a ledger folder (it holds grants.csv); its outputs would be read as "
                              "ledger tables by the next run: choose another folder")
    if not fo.shown.exists():
        parent = fo.real.parent
        if not parent.is_dir():
            raise OutputPathError(f"the folder {fo.shown.parent} for {where} does not exist")
        _check_writable(parent, where)
        if not create:
            raise OutputPathError(f"{where} no longer exists")
        try:
            fo.real.mkdir()
        except OSError as err:
            raise OutputPathError(f"{where} cannot be created: {err.strerror}") from None
        plan.created.append(fo.real)
        plan.notices.append(f"created folder {fo.shown} for {fo.option}")
    _check_writable(fo.real, where)


def _check_file(option: str, shown: pathlib.Path, ins, ledger_dirs, in_folder: bool = False) -> None:
    where = f"the output {shown} ({option})"
    me = F.identity(shown)
    if any(F.same_path(me, ident) for _, ident in ins):
        raise OutputPathError(f"{where} is one of the inputs; choose another path")
    if shown.is_dir():
        raise OutputPathError(f"{where} is a folder; give a file name")
    parent = _real(shown).parent
    if not in_folder:
        if not parent.exists():
            raise OutputPathError(f"the folder {shown.parent} for {where} does not exist")
        if not parent.is_dir():
            raise OutputPathError(f"{shown.parent}, the folder for {where}, is a file")
    if shown.suffix.lower() == ".csv" and shown.stem.lower() in ledger_table_names():
        pid = F.identity(parent)
        if any(F.same_path(pid, d) for d in ledger_dirs):
            raise OutputPathError(f"{where} would be read as the {shown.stem.lower()} table of the ledger in "
                                  f"{shown.parent}; choose another folder")
    _check_writable(parent, where)


def _check_writable(folder: pathlib.Path, where: str) -> None:
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputPathError(f"cannot write {where}: no permission to create files in {folder}")


# ---------------------------------------------------------------------------- the set

@dataclass
class _Part:
    target: pathlib.Path
    part: pathlib.Path
    mode: int
    sha256: str = ""
    size: int = 0


class OutputSet:
    """The files of one run being written; obtained from :meth:`OutputPlan.writing`.

    Attributes
    ----------
    written : list of pathlib.Path
        After the commit: every file of the set (real paths), manifests excluded.
    manifests : list of pathlib.Path
        After the commit: the manifest of each output folder.
    notices : list of str
        What was tidied or completed in the folders before writing.
    """

    def __init__(self, plan: OutputPlan):
        self.plan = plan
        self.parts: dict[str, _Part] = {}
        self.records: list[tuple[pathlib.Path, pathlib.Path]] = []  # (commit record, manifest)
        self.parts_of_records: list[pathlib.Path] = []
        self.obsolete: list[pathlib.Path] = []
        self.decided = False
        self.committed = False
        self.written: list[pathlib.Path] = []
        self.manifests: list[pathlib.Path] = []
        self.notices: list[str] = []
        self._declared = {os.path.normcase(str(t)) for t in plan.targets()}
        self._folders = {os.path.normcase(str(f.real)) for f in plan.folders}

    def path(self, target) -> pathlib.Path:
        """The temporary file to write for ``target`` (a declared output, or a new name in a declared folder)."""
        real = _real(target)
        key = os.path.normcase(str(real))
        if key in self.parts:
            return self.parts[key].part
        if key not in self._declared:
            if os.path.normcase(str(real.parent)) not in self._folders:
                raise OutputError(f"the output {target} was not planned (grantval.io.outputs.plan_outputs)")
            ins = [(s, F.identity(s)) for s, _ in self.plan.inputs] + [(s, F.identity(s)) for s in self.plan.ledgers]
            _check_file("written", pathlib.Path(target), ins, [], in_folder=True)
        part = F.temp_path(real, self.plan.run_id)
        mode = F.create_part(part)
        self.parts[key] = _Part(real, part, mode)
        _pause(f"part:{len(self.parts)}")
        return part

    def abort(self) -> None:
        """Remove the temporaries (before the commit's decision point); restore nothing else."""
        if self.committed:
            return
        if self.decided:
            self.notices.append("the commit was interrupted after its decision point; the next grantval run "
                                "into the folder completes it")
            return
        for p in list(self.parts.values()):
            with contextlib.suppress(OSError):
                p.part.unlink()
        for record in [r for r, _ in self.records] + self.parts_of_records:
            with contextlib.suppress(OSError):
                record.unlink()
        self.plan.discard()

    def commit(self) -> None:
        """Flush, hash, record, rename; see the module docstring for the order and the guarantee."""
        with _signals_held():
            _pause("commit")
            by_folder: dict[pathlib.Path, list[_Part]] = {}
            for p in self.parts.values():
                _finish_part(p)
                by_folder.setdefault(p.target.parent, []).append(p)
            if self.plan.manifest:
                self._write_records(by_folder)
            for folder in by_folder:
                F.fsync_path(folder, folder=True)
            self.decided = True
            _pause("decided")
            for k, p in enumerate(self.parts.values(), start=1):
                os.replace(p.part, p.target)
                self.written.append(p.target)
                _pause(f"rename:{k}")
            for folder in by_folder:
                F.fsync_path(folder, folder=True)
            _pause("manifest")
            for record, manifest in self.records:
                os.replace(record, manifest)
                self.manifests.append(manifest)
            for folder in by_folder:
                F.fsync_path(folder, folder=True)
            _pause("obsolete")
            for folder in {p.parent for p in self.obsolete}:
                settle_obsolete(folder, self.plan.run_id)
            self.plan.created.clear()
            self.committed = True

    def _write_records(self, by_folder: dict[pathlib.Path, list[_Part]]) -> None:
        set_sha = hashlib.sha256(json.dumps(sorted([p.target.name, p.sha256] for p in self.parts.values()))
                                 .encode()).hexdigest()
        entry = {"tool": "grantval", "version": _version(), "command": self.plan.command, "set_sha256": set_sha}
        if self.plan.timestamp or self.plan.explicit_run_id:
            entry["run_id"] = self.plan.run_id
        if self.plan.timestamp:
            entry["created"] = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
        entry["inputs"] = [{"path": s, **({"sha256": d} if d else {})} for s, d in self.plan.inputs]
        pending = []
        for folder, parts in by_folder.items():
            mine = dict(entry, files=sorted(({"name": p.target.name, "sha256": p.sha256, "bytes": p.size}
                                             for p in parts), key=lambda e: e["name"]))
            sets, obsolete = _carry_forward(folder, {p.target.name for p in parts})
            manifest = {"format": MANIFEST_FORMAT, "tool": "grantval",
                        "sets": sorted(sets + [mine], key=lambda s: s["files"][0]["name"] if s["files"] else "")}
            if obsolete:
                manifest["obsolete"] = obsolete
                self.obsolete += [folder / e["name"] for e in obsolete]
            part = F.temp_path(folder / F.MANIFEST, self.plan.run_id)
            F.create_part(part)
            self.parts_of_records.append(part)
            with open(part, "wb") as fh:
                fh.write(manifest_bytes(manifest))
                fh.flush()
                os.fsync(fh.fileno())
            pending.append((part, folder))
        for part, folder in pending:  # each record appears whole or not at all
            record = F.temp_path(folder / F.MANIFEST, self.plan.run_id, "commit")
            os.replace(part, record)
            self.records.append((record, folder / F.MANIFEST))


def _finish_part(p: _Part) -> None:
    """Give a written temporary its creation mode back (a writer may have replaced it), flush and hash it."""
    st = os.stat(p.part)
    if stat.S_IMODE(st.st_mode) != p.mode:
        os.chmod(p.part, p.mode)
    F.fsync_path(p.part)
    p.sha256, p.size = F.sha256_file(p.part)


def _carry_forward(folder: pathlib.Path, new_names: set[str]) -> tuple[list[dict], list[dict]]:
    """The earlier sets of ``folder``'s manifest that this set leaves whole, and the files to delete.

    An earlier set none of whose files this set rewrites is kept (another command's
    outputs in the same folder).  An earlier set this set partly rewrites is dropped,
    and its files this set does not rewrite are deleted if unchanged (they would make a mix).
    """
    old = read_manifest(folder)
    if old is None:
        return [], []
    keep, obsolete = [], []
    for s in old.get("sets", []):
        names = {e["name"] for e in s.get("files", [])}
        if not names & new_names:
            if any((folder / n).exists() for n in names):
                keep.append(s)
            continue
        for e in s.get("files", []):
            if e["name"] not in new_names and _matches(folder / e["name"], e):
                obsolete.append({"name": e["name"], "sha256": e["sha256"]})
    return keep, sorted(obsolete, key=lambda e: e["name"])


def _matches(path: pathlib.Path, entry: dict) -> bool:
    try:
        if not stat.S_ISREG(os.lstat(path).st_mode):
            return False
        return F.sha256_file(path)[0] == entry.get("sha256")
    except OSError:
        return False


def _version() -> str:
    from grantval import __version__

    return __version__


def manifest_bytes(manifest: dict) -> bytes:
    """The stored form of a manifest: sorted keys, two-space indents, a final newline."""
    return (json.dumps(manifest, indent=2, sort_keys=True, ensure_ascii=False) + "\n").encode("utf-8")


def read_manifest(folder: pathlib.Path) -> dict | None:
    """The manifest of ``folder``, or None when there is none or it is not a grantval manifest."""
    try:
        data = json.loads((pathlib.Path(folder) / F.MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("tool") != "grantval" or not isinstance(data.get("sets"), list):
        return None
    return data


#: the signals held back by the commit in progress (the kill tests' pause ends when one arrives)
_HELD: list[int] = []


@contextlib.contextmanager
def _signals_held() -> Iterator[None]:
    """Hold SIGINT and SIGTERM back during a commit; deliver them (to the usual handler) after it."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    pending = _HELD
    pending.clear()
    saved = {}
    for sig in (signal.SIGINT, signal.SIGTERM):
        old = signal.getsignal(sig)
        if old is None or old is signal.SIG_IGN:
            continue
        saved[sig] = old
        signal.signal(sig, lambda s, _frame: pending.append(s))
    try:
        yield
    finally:
        for sig, old in saved.items():
            signal.signal(sig, old)
        held = list(pending)
        pending.clear()
        for sig in held:
            signal.raise_signal(sig)


def _pause(point: str) -> None:
    """Test hook: stop at ``point`` when GRANTVAL_TEST_PAUSE_AT names it (kill tests)."""
    if os.environ.get("GRANTVAL_TEST_PAUSE_AT") != point:
        return
    note = os.environ.get("GRANTVAL_TEST_PAUSE_FILE")
    if note:  # written aside and renamed, so that a watcher never reads it half written
        pathlib.Path(note + ".tmp").write_text(point)
        os.replace(note + ".tmp", note)
    # until the time is up, or a signal held back by the commit has arrived: the test then sees the commit
    # finish after the signal however slowly it was sent (a signal not held back interrupts the sleep)
    deadline = time.monotonic() + float(os.environ.get("GRANTVAL_TEST_PAUSE_SECONDS", "30"))
    while time.monotonic() < deadline and not _HELD:
        time.sleep(0.01)


# ---------------------------------------------------------------------------- tidying and checking

def tidy_folder(folder: pathlib.Path) -> list[str]:
    """Complete or undo interrupted commits in ``folder`` and remove killed writers' temporaries.

    Call only while holding the folder's lock.  Returns notices for the user.
    """
    folder = pathlib.Path(folder)
    notices = []
    for record in sorted(F.stale_temporaries(folder, "commit"), key=lambda p: p.stat().st_mtime):
        notices.append(_complete(folder, record))
    notices += settle_obsolete(folder, F.new_run_id())
    removed = F.remove_stale_parts(folder)
    if removed:
        notices.append(f"removed {len(removed)} temporary file(s) an interrupted grantval run left in {folder}")
    return notices


def settle_obsolete(folder: pathlib.Path, run_id: str) -> list[str]:
    """Delete the leftovers the manifest of ``folder`` lists as obsolete, then drop that list from it.

    Call only while holding the folder's lock.  Returns notices for the user.
    """
    manifest = read_manifest(folder)
    if not manifest or "obsolete" not in manifest:
        return []
    notices = []
    for e in manifest.pop("obsolete"):
        if _matches(folder / e["name"], e):
            (folder / e["name"]).unlink()
            notices.append(f"removed {folder / e['name']}, left from an earlier run whose other files were replaced")
    part = F.temp_path(folder / F.MANIFEST, run_id)
    with contextlib.suppress(FileNotFoundError):
        part.unlink()
    F.create_part(part)
    with open(part, "wb") as fh:
        fh.write(manifest_bytes(manifest))
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(part, folder / F.MANIFEST)
    F.fsync_path(folder, folder=True)
    return notices


def _complete(folder: pathlib.Path, record: pathlib.Path) -> str:
    """Finish the commit ``record`` describes, or drop it when its temporaries are gone."""
    run = F.TEMP_RE.match(record.name)["run"]
    try:
        manifest = json.loads(record.read_text(encoding="utf-8"))
        entries = [e for s in manifest["sets"] for e in s["files"]]
    except (OSError, ValueError, KeyError, TypeError):
        record.unlink()
        return f"removed an unreadable commit record {record}"
    moves = []
    for e in entries:
        target = folder / e["name"]
        if _matches(target, e):
            continue
        part = F.temp_path(target, run)
        if not _matches(part, e):
            record.unlink()
            return (f"an interrupted grantval run (run {run}) left a mixed set of files in {folder}; "
                    "run the command again")
        moves.append((part, target))
    for part, target in moves:
        os.replace(part, target)
    F.fsync_path(folder, folder=True)
    os.replace(record, folder / F.MANIFEST)
    F.fsync_path(folder, folder=True)
    return f"completed the interrupted write of run {run} in {folder} ({len(moves)} file(s) renamed)"


def verify_manifest(location, strict: bool = False) -> list[str]:
    """Check a folder's outputs (or one output file) against the manifest; return the problems.

    Parameters
    ----------
    location : path
        An output folder, its ``grantval-manifest.json``, or one output file (then
        only the set holding that file is checked).
    strict : bool
        Also report temporaries of interrupted runs and files the manifest does not list.

    Returns
    -------
    list of str
        One line per problem; empty when every listed file matches its SHA-256.
    """
    loc = pathlib.Path(location)
    folder, only = (loc, None) if loc.is_dir() else (loc.parent, None if loc.name == F.MANIFEST else loc.name)
    manifest = read_manifest(folder)
    if manifest is None:
        return [f"{folder}: no readable grantval manifest ({F.MANIFEST})"]
    problems = []
    sets = [s for s in manifest["sets"] if only is None or any(e["name"] == only for e in s["files"])]
    if only is not None and not sets:
        problems.append(f"{loc}: not listed in {folder / F.MANIFEST}")
    for s in sets:
        for e in s["files"]:
            path = folder / e["name"]
            if not path.exists():
                problems.append(f"{path}: missing (listed in the manifest, command {s.get('command', '')!r})")
            elif not _matches(path, e):
                problems.append(f"{path}: differs from the manifest (written by another run, or changed since)")
    for e in manifest.get("obsolete", []):
        if _matches(folder / e["name"], e):
            problems.append(f"{folder / e['name']}: left from an earlier run whose other files were replaced")
    for record in F.stale_temporaries(folder, "commit"):
        problems.append(f"{folder}: an interrupted commit is pending ({record.name}); the next grantval run "
                        "into this folder completes it")
    if strict:
        problems += _strict_problems(folder, manifest)
    return problems


def _strict_problems(folder: pathlib.Path, manifest: dict) -> list[str]:
    listed = {e["name"] for s in manifest["sets"] for e in s["files"]} | {F.MANIFEST}
    out = [f"{p}: temporary file of an interrupted run" for p in F.stale_temporaries(folder, "part")]
    for name in sorted(os.listdir(folder)):
        p = folder / name
        if name not in listed and not name.startswith(".") and p.is_file():
            out.append(f"{p}: not listed in the manifest")
    return out
