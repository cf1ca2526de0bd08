"""Numbers in the 3D view: faces at panel centres, hinges on hinge lines, cut edges at edge midpoints.

The numbers are those of the tables and the reports ("faces 0 and 7", "edge 5"),
so a reviewer can match a line of a table to a place in the picture. Anchors come
from the core's poses (`anchor_points`); `draw_numbers` projects them to pixels
and paints each in a small box of a fixed text size (readable at any zoom),
leaving out any that would cover one already drawn (gap labels go first).
"""

import numpy as np
from PySide6 import QtCore, QtGui

from ...geometry import transform_points
from . import palette

NUMBERS_UP_TO = 100
"""Models with fewer panels than this show their numbers when they open."""

KINDS = ("face", "hinge", "edge")
"""Kinds of number, in drawing order (earlier kinds win where two would overlap)."""

PREFIX = {"face": "", "hinge": "h", "edge": "e"}
"""What goes before each kind's number: a bare number is a face."""

LEGEND_TEXT = {"face": "face number", "hinge": "hinge number", "edge": "cut-edge number"}


def number_text(kind, index):
    """The text of one number.

    Examples
    --------
    >>> number_text("face", 3), number_text("hinge", 2), number_text("edge", 11)
    ('3', 'h2', 'e11')
    """
    return f"{PREFIX[kind]}{int(index)}"


def face_centres(mech):
    """Each face's centre (F, 3) in its flat frame: the area centroid of the polygon."""
    out = np.zeros((mech.n_faces, 3))
    for f, poly in enumerate(mech.flat_faces):
        a, b = poly[:-2] - poly[0], poly[1:-1] - poly[0]
        area = np.linalg.norm(np.cross(a, b), axis=1)
        mids = (poly[0] + poly[1:-1] + poly[2:]) / 3.0
        out[f] = (area @ mids) / area.sum() if area.sum() > 0 else poly.mean(axis=0)
    return out


def anchor_points(mech, poses, centres=None):
    """Where every number sits now, in the model frame.

    Parameters
    ----------
    mech : Mechanism
    poses : (F, 4, 4) float
        The faces' poses at the current t.
    centres : (F, 3) float, optional
        `face_centres`, if already known.

    Returns
    -------
    dict
        Kind -> (points (n, 3) float, numbers (n,) int): face centres (F),
        hinge-line midpoints (H), and the midpoints of both copies of every cut
        edge (2E: each copy is numbered where it lies on its panel; where the
        two meet, one tag covers the other and only one is drawn).
    """
    centres = face_centres(mech) if centres is None else centres
    faces = transform_points(poses[:, None], centres[:, None])[:, 0]
    if mech.n_hinges:
        mids = mech.axes.mean(axis=1)
        hinges = transform_points(poses[mech.parent][:, None], mids[:, None])[:, 0]
    else:
        hinges = np.zeros((0, 3))
    if len(mech.cut_faces):
        a = transform_points(poses[mech.cut_faces[:, 0]][:, None], mech.cut_points[:, 0]).mean(axis=1)
        b = transform_points(poses[mech.cut_faces[:, 1]][:, None], mech.cut_points[:, 1]).mean(axis=1)
        edges = np.stack([a, b], axis=1).reshape(-1, 3)
    else:
        edges = np.zeros((0, 3))
    return {"face": (faces, np.arange(len(faces))), "hinge": (hinges, np.arange(len(hinges))),
            "edge": (edges, np.arange(len(edges)) // 2)}


def _style(kind):
    """(fill, text, border) colours of a kind's box; border None for none."""
    if kind == "face":
        return QtGui.QColor(255, 255, 255, 230), QtGui.QColor(*palette.LABEL_TEXT), QtGui.QColor(*palette.OUTLINE)
    if kind == "hinge":
        return QtGui.QColor(*palette.HINGE, 225), QtGui.QColor(255, 255, 255), None
    return QtGui.QColor(255, 255, 255, 215), QtGui.QColor(*palette.GAP), None


def tag_box(metrics, text, scale):
    """The box (QRectF, centred on 0, 0) of one number's tag."""
    box = metrics.boundingRect(text).adjusted(-3 * scale, -1 * scale, 3 * scale, 1 * scale)
    box.moveCenter(QtCore.QPointF(0.0, 0.0))
    return box


def paint_tag(painter, box, text, kind, scale):
    """Paint one number's tag in its kind's style (also used by the legend)."""
    fill, ink, border = _style(kind)
    if border is None:
        painter.setPen(QtCore.Qt.PenStyle.NoPen)
    else:
        pen = QtGui.QPen(border)
        pen.setWidthF(scale)
        painter.setPen(pen)
    painter.setBrush(fill)
    painter.drawRoundedRect(box, 2.5 * scale, 2.5 * scale)
    painter.setPen(ink)
    painter.drawText(box, QtCore.Qt.AlignmentFlag.AlignCenter, text)


def number_font(base, scale):
    """The numbers' font: the widget's, a little smaller, bold; grown by ``scale``."""
    font = QtGui.QFont(base)
    size = font.pointSizeF() if font.pointSizeF() > 0 else 9.0
    font.setPointSizeF(0.9 * size * scale)
    font.setBold(True)
    return font


def draw_numbers(painter, view, anchors, width, height, scale, placed):
    """Paint the numbers that fit; return the kinds drawn.

    Parameters
    ----------
    painter : QPainter
    view : FoldView
        For `model_to_pixels` and the font.
    anchors : dict
        `anchor_points`.
    width, height : int
        The frame's size in pixels.
    scale : float
        Text size factor (1 on screen).
    placed : list of QRectF
        Boxes already drawn (gap labels); a number that would meet one, or an
        earlier number, is left out. Grows with the boxes drawn here. A number
        whose point other panels hide (`FoldView.hidden_points`) is left out too.

    Returns
    -------
    set of str
    """
    font = number_font(view.font(), scale)
    painter.setFont(font)
    metrics = QtGui.QFontMetricsF(font)
    drawn = set()
    frame = QtCore.QRectF(0, 0, width, height)
    kinds, numbers, points = [], [], []
    for kind in KINDS:
        at, index = anchors.get(kind, (np.zeros((0, 3)), np.zeros(0, int)))
        kinds.extend([kind] * len(at))
        numbers.append(np.asarray(index, dtype=np.int64))
        points.append(np.asarray(at, dtype=float).reshape(-1, 3))
    points = np.concatenate(points)
    if not len(points):
        return drawn
    where = view.model_to_pixels(points, width, height)
    where[view.hidden_points(points)] = np.nan  # behind other panels: not drawn over them
    for kind, index, (x, y) in zip(kinds, np.concatenate(numbers).tolist(), where):
        if not (np.isfinite(x) and np.isfinite(y)):
            continue
        text = number_text(kind, index)
        box = tag_box(metrics, text, scale)
        box.moveCenter(QtCore.QPointF(x, y))
        if not frame.contains(box) or any(box.intersects(other) for other in placed):
            continue
        placed.append(box)
        paint_tag(painter, box, text, kind, scale)
        drawn.add(kind)
    return drawn
