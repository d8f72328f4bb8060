"""Checks on a workbook before and while it is parsed: sizes, entities, hidden and formula-only content."""

from __future__ import annotations

import pathlib
import zipfile
from dataclasses import dataclass, field

from grantval.errors import Problem
from grantval.io.limits import MAX_UNZIPPED_BYTES


@dataclass
class SheetInfo:
    """What the workbook's XML says about one sheet, before openpyxl reads it."""

    name: str
    part: str
    state: str = "visible"
    merged: list[str] = field(default_factory=list)
    has_formulas: bool = False


_SCAN_CHUNK = 1 << 20


def _scan_part(zf: zipfile.ZipFile, name: str, needles: tuple[bytes, ...]) -> set[bytes]:
    """Which of ``needles`` occur in one zip member (read in chunks)."""
    found: set[bytes] = set()
    tail = b""
    keep = max(len(n) for n in needles)
    with zf.open(name) as fh:
        while True:
            chunk = fh.read(_SCAN_CHUNK)
            if not chunk:
                break
            data = tail + chunk
            for n in needles:
                if n in data:
                    found.add(n)
            tail = data[-keep:]
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
        if total > MAX_UNZIPPED_BYTES:
            return [], [Problem(src, None, None, f"the workbook unpacks to {total / 2**20:.0f} MiB, more than the limit "
                                f"of {MAX_UNZIPPED_BYTES / 2**20:.0f} MiB")]
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


def zlib_error():
    import zlib

    return zlib.error



def _xml_unescape(text: str) -> str:
    return text.replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"').replace("&apos;", "'").replace("&amp;", "&")
