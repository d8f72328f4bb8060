"""Checks on a workbook before and while it is parsed: sizes, entities, hidden and formula-only content."""

from __future__ import annotations

import pathlib
import zipfile
from dataclasses import dataclass, field

from grantval.errors import Problem
from grantval.io import limits


@dataclass
class SheetInfo:
    """What the workbook's XML says about one sheet, before openpyxl reads it."""

    name: str
    part: str
    state: str = "visible"
    merged: list[str] = field(default_factory=list)
    has_formulas: bool = False


_SCAN_CHUNK = 1 << 20


def _windows(zf: zipfile.ZipFile, name: str, keep: int):
    """One zip member read in chunks, each yielded with the last ``keep`` bytes of the one before it in front."""
    tail = b""
    with zf.open(name) as fh:
        while True:
            chunk = fh.read(_SCAN_CHUNK)
            if not chunk:
                return
            data = tail + chunk
            yield data
            tail = data[-keep:] if keep else b""


def _scan_part(zf: zipfile.ZipFile, name: str, needles: tuple[bytes, ...]) -> set[bytes]:
    """Which of ``needles`` occur in one zip member (read in chunks)."""
    found: set[bytes] = set()
    for data in _windows(zf, name, max(len(n) for n in needles)):
        found.update(n for n in needles if n in data)
    return found


def inspect_xlsx(path: pathlib.Path) -> tuple[list[SheetInfo], list[Problem]]:
    """Check a workbook's parts before parsing: size, XML entity declarations, sheet states, merges, formulas.

    A part that declares a document type or entities is refused outright
    (entity expansion, "billion laughs"); so is a workbook whose parts would
    unpack to more than the limit.
    """
    import re

    src = path.name
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError) as exc:
        return [], [Problem(src, None, None, f"the workbook cannot be read: it is not a complete .xlsx file ({exc})")]
    with zf:
        infos = zf.infolist()
        total = sum(i.file_size for i in infos)
        limit = limits.max_unzipped_bytes()
        if total > limit:
            return [], [Problem(src, None, None, f"the workbook unpacks to {limits.format_size(total)}, more than the "
                                f"limit of {limits.format_size(limit)} (8 times GRANTVAL_MAX_FILE_MB)")]
        names = {i.filename for i in infos}
        if "xl/workbook.xml" not in names:
            return [], [Problem(src, None, None, "the file is a zip archive but not an Excel .xlsx workbook")]
        try:
            for i in infos:
                if i.filename.endswith((".xml", ".rels")):
                    hit = _scan_part(zf, i.filename, (b"<!DOCTYPE", b"<!ENTITY"))
                    if hit:
                        return [], [Problem(src, None, None, f"the workbook part {i.filename} declares XML entities or a "
                                            "document type; grantval refuses such files (they can expand without bound)")]
            unused = _unused_strings(zf, infos)
            if unused:
                return [], [Problem(src, None, None, unused)]
            wb_xml = zf.read("xl/workbook.xml").decode("utf-8", "replace")
            rels = zf.read("xl/_rels/workbook.xml.rels").decode("utf-8", "replace") if \
                "xl/_rels/workbook.xml.rels" in names else ""
        except (zipfile.BadZipFile, OSError, EOFError, zlib_error()) as exc:
            return [], [Problem(src, None, None, f"the workbook cannot be read: it is damaged ({exc})")]
        targets = {m.group(1): m.group(2) for m in re.finditer(r'<Relationship[^>]*Id="([^"]+)"[^>]*Target="([^"]+)"', rels)}
        targets.update({m.group(2): m.group(1) for m in re.finditer(r'<Relationship[^>]*Target="([^"]+)"[^>]*Id="([^"]+)"', rels)})
        sheets = []
        for m in re.finditer(r"<(?:\w+:)?sheet\b([^>]*)/?>", wb_xml):
            attrs = dict(re.findall(r'([\w:]+)="([^"]*)"', m.group(1)))
            rid = next((v for k, v in attrs.items() if k.endswith(":id")), "")
            target = targets.get(rid, "")
            part = target.lstrip("/") if target.startswith("/") else "xl/" + target
            info = SheetInfo(_xml_unescape(attrs.get("name", "")), part, attrs.get("state", "visible"))
            if part in names:
                hit = _scan_part(zf, part, (b"<mergeCell ", b"<f>", b"<f ", b"<f/>"))
                info.has_formulas = bool(hit & {b"<f>", b"<f ", b"<f/>"})
                if b"<mergeCell " in hit:
                    info.merged = re.findall(r'<mergeCell ref="([^"]+)"', zf.read(part).decode("utf-8", "replace"))
            sheets.append(info)
    return sheets, []


def _count_part(zf: zipfile.ZipFile, name: str, needles: tuple[bytes, ...]) -> int:
    """How many times ``needles`` occur in one zip member, read in chunks (a needle split by a chunk end counts once)."""
    keep = max(len(n) for n in needles) - 1  # shorter than a needle: none is counted twice
    return sum(sum(data.count(n) for n in needles) for data in _windows(zf, name, keep))


def _unused_strings(zf: zipfile.ZipFile, infos) -> str | None:
    """The refusal of a shared-string table far larger than the cells of the sheets could use, else None.

    openpyxl loads every shared string before the first cell is read; a
    table of millions of strings no cell refers to costs minutes and
    gigabytes for nothing.  Counting ``<si>`` and ``<c>`` elements is one
    streamed pass over the parts.
    """
    strings = [i.filename for i in infos if i.filename.lower().endswith("sharedstrings.xml")]
    if not strings:
        return None
    n_strings = sum(_count_part(zf, s, (b"<si>", b"<si ")) for s in strings)
    if n_strings <= limits.SHARED_STRING_SLACK:
        return None
    n_cells = sum(_count_part(zf, i.filename, (b"<c ", b"<c>")) for i in infos
                  if i.filename.startswith("xl/worksheets/") and i.filename.endswith(".xml"))
    if n_strings <= n_cells + limits.SHARED_STRING_SLACK:
        return None
    return (f"the workbook's shared-string table holds {n_strings:,} strings but its sheets have only {n_cells:,} "
            "cells; grantval refuses such files (the unused strings cost time and memory for nothing): copy the "
            "sheets into a new workbook and save that")


def zlib_error():
    import zlib

    return zlib.error



def _xml_unescape(text: str) -> str:
    return text.replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"').replace("&apos;", "'").replace("&amp;", "&")
