"""Files: atomic writes (temporary file, then rename) and output-path safety."""

from __future__ import annotations

import contextlib
import os
import pathlib
import tempfile
from typing import Iterator, Sequence

from grantval.errors import OutputError


def refuse_overwriting_inputs(outputs: Sequence[pathlib.Path], inputs: Sequence[str]) -> None:
    """Raise :class:`OutputError` when an output path is one of the input files or folders."""
    ins = []
    for i in inputs:
        p = pathlib.Path(i).resolve()
        ins.append(p)
    for o in outputs:
        op = pathlib.Path(o).resolve()
        for ip in ins:
            if op == ip:
                raise OutputError(f"the output {o} is one of the inputs; choose another path")


@contextlib.contextmanager
def atomic_path(target: pathlib.Path) -> Iterator[pathlib.Path]:
    """Yield a temporary path beside ``target``; rename it to ``target`` on success."""
    target = pathlib.Path(target)
    if target.exists() and target.is_dir():
        raise OutputError(f"the output {target} is a folder; give a file name")
    parent = target.parent if str(target.parent) else pathlib.Path(".")
    if not parent.exists():
        raise OutputError(f"the folder {parent} for the output {target.name} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=parent)
    os.close(fd)
    tmp_path = pathlib.Path(tmp)
    try:
        yield tmp_path
        os.replace(tmp_path, target)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp_path.unlink()
        raise
