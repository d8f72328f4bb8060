"""openpyxl charts from a :class:`~grantval.io.xlsx.sheet.Chart` spec, drawn from the sheet's own cells.

Every series and label refers to worksheet cells (no copied values), so a chart follows the
cells when a spreadsheet recalculates them.  Charts are made to be read printed: a title and
axis titles in words, text category labels (turned when there are many), value axes without
decimals, lines without smoothing, and horizontal bars (for a tornado: low and high bars on one
row, widest swing on top, labels at the left edge clear of the bars).
"""

from __future__ import annotations

from grantval.io.xlsx.sheet import Chart

#: category labels are turned 45 degrees above this many categories
TURN_LABELS_ABOVE = 8


#: font sizes of axis labels, axis titles and the chart title, in hundredths of a point
LABEL_SIZE = 900


AXIS_TITLE_SIZE = 1000


TITLE_SIZE = 1200


def build_chart(spec: Chart, ws):
    """The openpyxl chart of ``spec``; its cells are on the sheet titled ``spec.source``, or on ``ws``.

    Parameters
    ----------
    spec : Chart
        What to draw and from which cells.
    ws : openpyxl Worksheet
        The sheet the chart is placed on.  A ``source`` sheet is named by its title only, so it
        may come later in the workbook (write-only sheets are created in order).
    """
    from openpyxl.chart import Reference
    from openpyxl.chart.reference import DummyWorksheet

    src = ws if spec.source is None else DummyWorksheet(spec.source)
    chart = _new_chart(spec)
    for c0, r0, c1, r1 in spec.ranges():
        chart.add_data(Reference(src, min_col=c0, min_row=r0, max_col=c1, max_row=r1), titles_from_data=True)
    _categories(chart, spec, src)
    _axes(chart, spec)
    chart.title = _title(spec.title, TITLE_SIZE)
    chart.width, chart.height = spec.size
    if spec.legend is None:
        chart.legend = None
    else:
        chart.legend.position = spec.legend
    return chart


def _new_chart(spec: Chart):
    """An empty chart of the spec's kind, with its kind's settings."""
    from openpyxl.chart import BarChart, LineChart, ScatterChart

    if spec.kind == "bar":
        chart = BarChart()
        chart.type = "bar" if spec.horizontal else "col"
        chart.grouping = "clustered"
        chart.gapWidth = 60
        if spec.overlap is not None:
            chart.overlap = spec.overlap
        return chart
    if spec.kind == "line":
        return LineChart()
    if spec.kind == "scatter":
        return ScatterChart()
    raise ValueError(f"unknown chart kind {spec.kind!r}")


def _categories(chart, spec: Chart, src) -> None:
    """Labels as text references (or x values of a scatter chart); lines straight, points marked."""
    from openpyxl.chart import Reference
    from openpyxl.chart.data_source import AxDataSource, NumDataSource, NumRef, StrRef
    from openpyxl.chart.marker import Marker

    c0, r0, c1, r1 = spec.categories
    ref = str(Reference(src, min_col=c0, min_row=r0, max_col=c1, max_row=r1))
    for s in chart.series:
        if spec.kind == "scatter":
            s.xVal = AxDataSource(numRef=NumRef(f=ref))
            s.yVal = NumDataSource(numRef=NumRef(f=s.val.numRef.f))
            s.val = None
        else:
            s.cat = AxDataSource(strRef=StrRef(f=ref))
        if spec.kind in ("line", "scatter"):
            s.smooth = False
            s.marker = Marker(symbol="circle", size=5)


def _axes(chart, spec: Chart) -> None:
    """Axis titles, number formats, label size and turn; the tornado's category axis reversed."""
    from openpyxl.chart.axis import ChartLines

    cat, val = chart.x_axis, chart.y_axis
    cat.title = _title(spec.x_title, AXIS_TITLE_SIZE) if spec.x_title else None
    val.title = _title(spec.y_title, AXIS_TITLE_SIZE) if spec.y_title else None
    cat.delete = val.delete = False  # shown (openpyxl 3.1 leaves it unset and some readers hide the axis)
    val.number_format = spec.value_format
    val.numFmt.sourceLinked = False
    val.majorGridlines = ChartLines()
    turn = spec.kind != "scatter" and not spec.horizontal and spec.n_categories() > TURN_LABELS_ABOVE
    cat.txPr = _label_text(-45 if turn else 0)
    val.txPr = _label_text(0)
    cat.majorTickMark = val.majorTickMark = "out"
    if spec.kind == "scatter":
        cat.number_format = spec.category_format
        cat.numFmt.sourceLinked = False
    cat.tickLblPos = "low"  # labels at the edge (left, or bottom), clear of bars and lines below zero
    if spec.kind == "bar" and spec.horizontal and spec.first_on_top:
        cat.scaling.orientation = "maxMin"
        val.crosses = "max"  # with the categories reversed, keeps the value axis at the bottom


def _label_text(degrees: int):
    """Axis label text properties: size ``LABEL_SIZE``, turned by ``degrees``."""
    from openpyxl.chart.text import RichText
    from openpyxl.drawing.text import (
        CharacterProperties,
        Paragraph,
        ParagraphProperties,
        RichTextProperties,
    )

    props = CharacterProperties(sz=LABEL_SIZE)
    return RichText(bodyPr=RichTextProperties(rot=degrees * 60000, vert="horz"),
                    p=[Paragraph(pPr=ParagraphProperties(defRPr=props), endParaRPr=props)])


def _title(text: str, size: int):
    """A chart or axis title of ``text`` in bold at ``size`` (hundredths of a point)."""
    from openpyxl.chart.text import RichText, Text
    from openpyxl.chart.title import Title
    from openpyxl.drawing.text import (
        CharacterProperties,
        Paragraph,
        ParagraphProperties,
        RegularTextRun,
    )

    props = CharacterProperties(sz=size, b=True)
    para = Paragraph(pPr=ParagraphProperties(defRPr=props), r=[RegularTextRun(rPr=props, t=text)])
    return Title(tx=Text(rich=RichText(p=[para])), overlay=False)
