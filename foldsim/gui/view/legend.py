"""The key in the 3D view's corner: what each mark on screen means.

`legend_entries` lists only the marks the view shows now — colliding panels,
where they cut each other, open gaps, the selection, gear bodies, the sampled-build outlines,
the part-type colours and the kinds of number — and `draw_legend` paints them in
a pale box in the view's bottom-left corner. The main window can hide it
(View ▸ Legend).
"""

from dataclasses import dataclass

from PySide6 import QtCore, QtGui

from . import palette
from .numbers import LEGEND_TEXT, number_font, number_text, paint_tag, tag_box

MAX_TYPES = 9
"""Part types listed by name; beyond these the legend says how many more."""


@dataclass(frozen=True)
class Entry:
    """One line of the legend.

    Attributes
    ----------
    key : str
        What it explains: ``collision``, ``crossing``, ``gap``, ``selection``,
        ``envelope``, ``gear-body``, ``part-type``, ``face``, ``hinge``, ``edge`` or ``more``.
    text : str
    color : tuple
        0-255 RGB of the swatch (or of the tag's ink for numbers).
    shape : str
        ``panel`` (a filled square), ``line``, ``tag`` (a number's tag) or ``none``.
    """

    key: str
    text: str
    color: tuple
    shape: str


def legend_entries(view, max_rows=None):
    """The legend's lines for what the view shows now (list of `Entry`).

    With ``max_rows``, part types beyond what fits are summed up in one line.
    """
    if view.mech is None:
        return []
    out = []
    if len(view.colliding):
        out.append(Entry("collision", "colliding panels", palette.WARNING, "panel"))
    if view._crossings.visible():
        out.append(Entry("crossing", "where they cut each other", palette.INTERSECTION, "line"))
    if view._gap_lines.visible():
        out.append(Entry("gap", "open cut edge (gap length)" if view._labels else "open cut edge",
                         palette.GAP, "line"))
    if view._face_mark.visible() or view._hinge_mark.visible():
        what = [w for w, item in (("panel", view._face_mark), ("hinge", view._hinge_mark)) if item.visible()]
        out.append(Entry("selection", "selected " + " and ".join(what), palette.HIGHLIGHT, "line"))
    if view.solids and any(s.kind != "panel" for s in view.solids):
        out.append(Entry("gear-body", "gear body (build)", palette.GEAR_BODY, "panel"))
    if view._envelope is not None and view._envelope.visible():
        out.append(Entry("envelope", "sampled builds (play and backlash)", view.envelope_color, "line"))
    numbers = [Entry(kind, LEGEND_TEXT[kind], palette.LABEL_TEXT, "tag")
               for kind in sorted(view.numbers_drawn, key=("face", "hinge", "edge").index)]
    types = view.part_types or []
    listed = MAX_TYPES if max_rows is None else max(1, min(MAX_TYPES, max_rows - len(out) - len(numbers) - 1))
    if len(types) <= listed + (1 if len(types) == listed + 1 else 0):
        listed = len(types)
    for name, rgb in types[:listed]:
        out.append(Entry("part-type", f"part {name}", tuple(rgb), "panel"))
    if len(types) > listed:
        rest = len(types) - listed
        repeat = " (colours repeat)" if len(types) > MAX_TYPES else ""
        out.append(Entry("more", f"+{rest} more part types{repeat}", palette.OUTLINE, "none"))
    return out + numbers


def draw_legend(painter, view, entries, width, height, scale=1.0):
    """Paint the legend in the bottom-left corner; return its box (QRectF), or None with no entries."""
    if not entries:
        return None
    font = QtGui.QFont(view.font())
    size = font.pointSizeF() if font.pointSizeF() > 0 else 9.0
    font.setPointSizeF(0.9 * size * scale)
    metrics = QtGui.QFontMetricsF(font)
    tag_font = number_font(view.font(), scale)
    tag_metrics = QtGui.QFontMetricsF(tag_font)
    row = max(metrics.height(), tag_metrics.height()) + 3 * scale
    swatch = 22 * scale
    pad = 6 * scale
    text_width = max(metrics.horizontalAdvance(e.text) for e in entries)
    box = QtCore.QRectF(pad, height - pad - (2 * pad + row * len(entries)),
                        2 * pad + swatch + pad + text_width, 2 * pad + row * len(entries))
    painter.setRenderHints(QtGui.QPainter.RenderHint.Antialiasing | QtGui.QPainter.RenderHint.TextAntialiasing)
    painter.setPen(QtGui.QPen(QtGui.QColor(*palette.OUTLINE, 90), scale))
    painter.setBrush(QtGui.QColor(255, 255, 255, 220))
    painter.drawRoundedRect(box, 4 * scale, 4 * scale)
    y = box.top() + pad
    for entry in entries:
        mid = y + row / 2
        left = box.left() + pad
        if entry.shape == "panel":
            painter.setPen(QtGui.QPen(QtGui.QColor(*palette.OUTLINE), scale))
            painter.setBrush(QtGui.QColor(*entry.color[:3]))
            painter.drawRect(QtCore.QRectF(left + 3 * scale, mid - 6 * scale, swatch - 6 * scale, 12 * scale))
        elif entry.shape == "line":
            pen = QtGui.QPen(QtGui.QColor(*entry.color[:3]), 3.5 * scale)
            pen.setCapStyle(QtCore.Qt.PenCapStyle.FlatCap)
            painter.setPen(pen)
            painter.drawLine(QtCore.QPointF(left, mid), QtCore.QPointF(left + swatch, mid))
        elif entry.shape == "tag":
            painter.setFont(tag_font)
            text = number_text(entry.key, 3)
            tag = tag_box(tag_metrics, text, scale)
            tag.moveCenter(QtCore.QPointF(left + swatch / 2, mid))
            paint_tag(painter, tag, text, entry.key, scale)
        painter.setFont(font)
        painter.setPen(QtGui.QColor(*palette.LABEL_TEXT))
        painter.drawText(QtCore.QRectF(left + swatch + pad, y, text_width + pad, row),
                         QtCore.Qt.AlignmentFlag.AlignVCenter | QtCore.Qt.AlignmentFlag.AlignLeft, entry.text)
        y += row
    return box
