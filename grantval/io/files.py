"""File mechanics of every output: temporary files, folder locks, path identity, input guards.

Every file grantval writes is first written to a temporary file beside its target,
named ``.<name>.<run>.part`` (``<run>``: 16 hexadecimal digits), created with mode
``0666 & ~umask`` like any file a program creates, then renamed onto the target.
Writers into a folder hold an exclusive ``flock`` on the folder itself (no lock file
is left behind) while they write and rename; a writer that finds the lock free removes
the temporary files of earlier writers that were killed (only names of that pattern).

Output *sets* (all files of one run, renamed together, stamped by a manifest) are
built on these pieces in :mod:`grantval.io.outputs`; :func:`atomic_path` writes into
the active set when a command is writing one.
"""

from __future__ import annotations

import contextlib
import contextvars
import errno
import hashlib
import os
import pathlib
import re
import secrets
import stat
import time
from typing import Iterable, Iterator, Sequence

from grantval.errors import OutputError

try:  # POSIX only; elsewhere folders are not locked
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None

#: name of the manifest of the grantval outputs of a folder
MANIFEST = "grantval-manifest.json"
#: temporary files (``part``) and commit records (``commit``) of grantval writers
TEMP_RE = re.compile(r"^\.(?P<name>.+)\.(?P<run>[0-9a-f]{16})\.(?P<kind>part|commit)$")
#: seconds a writer waits for another writer's lock on a folder (GRANTVAL_LOCK_TIMEOUT)
LOCK_TIMEOUT = 30.0

#: the output set being written, if any (see grantval.io.outputs.OutputPlan.writing)
ACTIVE_SET: contextvars.ContextVar = contextvars.ContextVar("grantval_active_output_set", default=None)


def new_run_id() -> str:
    """A fresh random run identity: 16 hexadecimal digits."""
    return secrets.token_hex(8)


def temp_path(target: pathlib.Path, run_id: str, kind: str = "part") -> pathlib.Path:
    """The temporary name of ``target`` for run ``run_id``: ``.<name>.<run>.part`` beside it."""
    return target.with_name(f".{target.name}.{run_id}.{kind}")


def create_part(path: pathlib.Path) -> int:
    """Create the empty file ``path`` exclusively with mode ``0666 & ~umask``; return that mode."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0), 0o666)
    try:
        return stat.S_IMODE(os.fstat(fd).st_mode)
    finally:
        os.close(fd)


def sha256_file(path: pathlib.Path) -> tuple[str, int]:
    """SHA-256 hex digest and size in bytes of a file."""
    h = hashlib.sha256()
    size = 0
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
            size += len(chunk)
    return h.hexdigest(), size


def fsync_path(path: pathlib.Path, folder: bool = False) -> None:
    """Flush a file (or a folder's entries) to disk; folders that cannot be opened are skipped."""
    try:
        fd = os.open(path, os.O_RDONLY | (getattr(os, "O_DIRECTORY", 0) if folder else 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def identity(path) -> tuple[str, tuple[int, int] | None]:
    """How a path is compared with another: its real path (case-folded where the system folds case)
    and, when it exists, its (device, inode), which also matches hard links and case variants."""
    real = os.path.normcase(os.path.realpath(os.path.abspath(os.fspath(path))))
    try:
        st = os.stat(path)
        return real, (st.st_dev, st.st_ino)
    except OSError:
        return real, None


def same_path(a: tuple, b: tuple) -> bool:
    """Whether two :func:`identity` values name the same file or folder."""
    return a[0] == b[0] or (a[1] is not None and a[1] == b[1])


def lock_timeout() -> float:
    """Seconds to wait for a folder lock: GRANTVAL_LOCK_TIMEOUT, else :data:`LOCK_TIMEOUT`."""
    try:
        return float(os.environ.get("GRANTVAL_LOCK_TIMEOUT", LOCK_TIMEOUT))
    except ValueError:
        return LOCK_TIMEOUT


@contextlib.contextmanager
def folder_lock(folder: pathlib.Path, timeout: float | None = None) -> Iterator[None]:
    """Hold an exclusive lock on ``folder`` (``flock`` on the folder itself).

    Waits up to ``timeout`` seconds (default :func:`lock_timeout`) for another
    writer, then raises :class:`OutputError`.  Without ``fcntl`` nothing is locked.
    """
    if fcntl is None:
        yield
        return
    timeout = lock_timeout() if timeout is None else timeout
    fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0) | getattr(os, "O_CLOEXEC", 0))
    try:
        deadline = time.monotonic() + timeout
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except OSError as err:
                if err.errno not in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                    break  # a file system without locks: proceed unlocked
                if time.monotonic() >= deadline:
                    raise OutputError(f"another grantval run is writing into {folder}; waited {timeout:g} s "
                                      f"(GRANTVAL_LOCK_TIMEOUT); try again when it has finished") from None
                time.sleep(0.05)
        yield
    finally:
        os.close(fd)  # releases the lock


@contextlib.contextmanager
def folder_locks(folders: Iterable[pathlib.Path], timeout: float | None = None) -> Iterator[None]:
    """Lock several folders, always in the same order (by device and inode) so that runs cannot deadlock."""
    keyed = {}
    for f in folders:
        st = os.stat(f)
        keyed.setdefault((st.st_dev, st.st_ino), pathlib.Path(f))
    with contextlib.ExitStack() as stack:
        for key in sorted(keyed):
            stack.enter_context(folder_lock(keyed[key], timeout))
        yield


def stale_temporaries(folder: pathlib.Path, kind: str = "part") -> list[pathlib.Path]:
    """grantval's temporary files (``kind`` ``part`` or ``commit``) in ``folder``: regular files only."""
    out = []
    try:
        names = sorted(os.listdir(folder))
    except OSError:
        return out
    for name in names:
        m = TEMP_RE.match(name)
        if m and m["kind"] == kind:
            p = pathlib.Path(folder) / name
            with contextlib.suppress(OSError):
                if stat.S_ISREG(os.lstat(p).st_mode):
                    out.append(p)
    return out


def remove_stale_parts(folder: pathlib.Path) -> list[pathlib.Path]:
    """Remove the ``.part`` files killed writers left in ``folder``; call only while holding its lock."""
    removed = []
    for p in stale_temporaries(folder, "part"):
        with contextlib.suppress(FileNotFoundError):
            p.unlink()
            removed.append(p)
    return removed


def _input_identities(inputs: Iterable) -> list[tuple[str, tuple]]:
    out = []
    for i in inputs:
        if i is None or str(i) == "":
            continue
        out.append((str(i), identity(i)))
    return out


def refuse_overwriting_inputs(outputs: Sequence[pathlib.Path], inputs: Sequence[str]) -> None:
    """Raise :class:`OutputError` when an output path is one of the input files or folders.

    The same file is found through symbolic links, ``..``, hard links and case
    variants (by device and inode).  An output named like a ledger table (``tranches.csv``)
    inside an input folder that holds ``grants.csv`` is refused too: the next run would read it.
    """
    from grantval.io.outputs import ledger_table_names, looks_like_ledger_folder

    ins = _input_identities(inputs)
    for o in outputs:
        op = identity(o)
        if any(same_path(op, ip) for _, ip in ins):
            raise OutputError(f"the output {o} is one of the inputs; choose another path")
    folders = [(s, ident) for s, ident in ins if os.path.isdir(s) and looks_like_ledger_folder(s)]
    for o in outputs:
        parent = identity(pathlib.Path(o).parent if str(pathlib.Path(o).parent) else ".")
        if pathlib.Path(o).stem.lower() in ledger_table_names() and pathlib.Path(o).suffix.lower() == ".csv" \
                and any(same_path(parent, ip) for _, ip in folders):
            raise OutputError(f"the output {o} would be read as a table of the ledger in {pathlib.Path(o).parent}; "
                              "choose another folder")


@contextlib.contextmanager
def atomic_path(target: pathlib.Path) -> Iterator[pathlib.Path]:
    """Yield a temporary path beside ``target``; rename it to ``target`` on success.

    While an output set is being written (:meth:`grantval.io.outputs.OutputPlan.writing`),
    the temporary file belongs to that set and is renamed with the set's other files
    when the set is committed.  Otherwise the file is written alone: the folder is
    locked, temporaries of killed writers are removed, and the file is renamed at once.
    On any exception (also KeyboardInterrupt) the temporary file is removed.
    """
    target = pathlib.Path(target)
    active = ACTIVE_SET.get()
    if active is not None:
        yield active.path(target)
        return
    if target.exists() and target.is_dir():
        raise OutputError(f"the output {target} is a folder; give a file name")
    parent = target.parent if str(target.parent) else pathlib.Path(".")
    if not parent.exists():
        raise OutputError(f"the folder {parent} for the output {target.name} does not exist")
    from grantval.io.outputs import tidy_folder

    with folder_lock(parent):
        if fcntl is not None:  # without locks another writer's temporaries may be live
            tidy_folder(parent)
        tmp_path = temp_path(target, new_run_id())
        create_part(tmp_path)
        try:
            yield tmp_path
            fsync_path(tmp_path)
            os.replace(tmp_path, target)
        except BaseException:
            with contextlib.suppress(OSError):
                tmp_path.unlink()
            raise
