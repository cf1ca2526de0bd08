"""The caption drawn over a recorded frame: the model's name, t and the collision state.

The lines come from the core (`clip_captions` for a whole clip before any
frame is drawn, `overlay_lines` for the view as it is); `draw_overlay` paints
them with Qt into a pale box in the frame's top-left corner, sized to the
frame so the text reads the same at any resolution. Qt is imported only by the
functions that draw.
"""

import numpy as np

from ...errors import FoldsimError
from .framing import _clip_poses


def collision_text(pairs, shown=3):
    """The caption's collision line for the colliding face pairs (k, 2).

    Examples
    --------
    >>> collision_text(np.zeros((0, 2), int))
    'no collision'
    >>> collision_text(np.array([[0, 2]]))
    'collision: panels 0 and 2'
    >>> collision_text(np.array([[0, 2], [1, 4], [3, 5], [6, 7]]))
    'collision: panels 0–2, 1–4, 3–5 and 1 more pair'
    """
    pairs = np.asarray(pairs).reshape(-1, 2)
    if not len(pairs):
        return "no collision"
    if len(pairs) == 1:
        return f"collision: panels {pairs[0, 0]} and {pairs[0, 1]}"
    text = "collision: panels " + ", ".join(f"{a}–{b}" for a, b in pairs[:shown].tolist())
    rest = len(pairs) - shown
    if rest > 0:
        text += f" and {rest} more pair{'s' if rest != 1 else ''}"
    return text


def overlay_lines(viewport, title=None):
    """The caption for the view's current state: name, drive value, collision line.

    Parameters
    ----------
    viewport : FoldView
    title : str, optional
        Default the model's name.

    Returns
    -------
    list of str
        Three lines.
    """
    mech = viewport.mech
    name = title if title is not None else (getattr(mech, "name", None) or "mechanism")
    return [str(name), t_text(viewport.t), collision_text(viewport.colliding)]


def t_text(t):
    """The caption's drive line, with a true minus sign, rounded as the app's t field rounds.

    Three decimals of the exact binary value, a tie going away from zero, as Qt's
    number field shows it (Python's own format would send a tie to the even
    digit: 0.0625 as 0.062 where the field says 0.063). The status bar uses the
    same words.

    Examples
    --------
    >>> t_text(0.5), t_text(-1), t_text(-0.0)
    ('t = 0.500', 't = −1.000', 't = 0.000')
    >>> t_text(0.0625), t_text(-0.8125), t_text(-0.0004)
    ('t = 0.063', 't = −0.813', 't = 0.000')
    """
    from decimal import ROUND_HALF_UP, Decimal

    shown = Decimal(float(t)).quantize(Decimal("0.001"), rounding=ROUND_HALF_UP)
    if shown == 0:
        return "t = 0.000"
    return f"t = {shown:.3f}" if shown > 0 else f"t = −{-shown:.3f}"


def _qimage(rgba):
    """A QImage viewing an (h, w, 4) uint8 RGBA array (keep the array alive)."""
    from PySide6 import QtGui

    h, w = rgba.shape[:2]
    return QtGui.QImage(rgba.data, w, h, 4 * w, QtGui.QImage.Format.Format_RGBA8888)


def _font_families():
    from PySide6 import QtGui

    return QtGui.QFontDatabase.families()


class _Caption:
    """Fonts and sizes of the caption for one frame size (Qt needed)."""

    def __init__(self, size):
        from PySide6 import QtGui

        if not _font_families():
            raise FoldsimError("no fonts to write the caption with: install a font package "
                               "(e.g. sudo apt-get install fonts-dejavu-core) or record with --no-overlay")
        w, h = size
        self.px = max(12, round(min(h, 1.25 * w) * 0.03))
        self.pad = 0.6 * self.px
        self.regular = QtGui.QFont()
        self.regular.setPixelSize(self.px)
        self.bold = QtGui.QFont(self.regular)
        self.bold.setBold(True)
        self.dot = 0.55 * self.px
        # Room for a line of text: the frame less the box's margins and padding.
        self.room = max(1.0, w - 4 * self.pad)

    def fonts(self, colliding):
        return [self.bold, self.regular, self.bold if colliding else self.regular]

    def fitted(self, lines, colliding):
        """The lines, each cut short with an ellipsis where it would run past the frame."""
        from PySide6 import QtCore, QtGui

        out = []
        for k, (text, font) in enumerate(zip(lines, self.fonts(colliding))):
            room = self.room - (self.dot + 0.4 * self.px if colliding and k == len(lines) - 1 else 0.0)
            out.append(QtGui.QFontMetricsF(font).elidedText(text, QtCore.Qt.TextElideMode.ElideRight, room))
        return out

    def box(self, lines, colliding):
        """(width, height) of the caption's box for these lines (cut short to fit, `fitted`)."""
        from PySide6 import QtGui

        lines = self.fitted(lines, colliding)
        metrics = [QtGui.QFontMetricsF(f) for f in self.fonts(colliding)]
        widths = [m.horizontalAdvance(text) for m, text in zip(metrics, lines)]
        if colliding:
            widths[-1] += self.dot + 0.4 * self.px
        return max(widths) + 2 * self.pad, sum(m.height() for m in metrics) + 1.9 * self.pad

    def corner(self, all_lines, all_colliding):
        """Width and height from the frame's top-left corner that the widest caption covers, with a gap."""
        boxes = [self.box(lines, c) for lines, c in zip(all_lines, all_colliding)]
        return (self.pad + max(b[0] for b in boxes) + self.pad,
                self.pad + max(b[1] for b in boxes) + self.pad)


def draw_overlay(rgba, lines, colliding, box_width=None):
    """Draw the caption into the top-left corner of a frame.

    A pale rounded box with the model's name (bold), t and the collision line —
    in the warning red with a red dot when panels collide. Text size follows the
    frame's size, so it reads the same at any resolution.

    Parameters
    ----------
    rgba : (h, w, 4) uint8
        The frame; not changed.
    lines : sequence of str
        `overlay_lines`.
    colliding : bool
    box_width : float, optional
        Width of the box in pixels (a clip keeps one width for all its frames);
        default: as wide as the text.

    Returns
    -------
    (h, w, 4) uint8
        A new frame with the caption.

    Raises
    ------
    FoldsimError
        Qt finds no font to write with.
    """
    from PySide6 import QtCore, QtGui

    from ..view import palette

    out = np.ascontiguousarray(rgba, dtype=np.uint8).copy()
    h, w = out.shape[:2]
    cap = _Caption((w, h))
    bw, bh = cap.box(lines, colliding)
    lines = cap.fitted(lines, colliding)
    box = QtCore.QRectF(cap.pad, cap.pad, max(bw, box_width or 0.0), bh)
    image = _qimage(out)
    painter = QtGui.QPainter(image)
    try:
        painter.setRenderHints(QtGui.QPainter.RenderHint.Antialiasing | QtGui.QPainter.RenderHint.TextAntialiasing)
        edge = QtGui.QColor(*palette.WARNING) if colliding else QtGui.QColor(*palette.OUTLINE, 90)
        pen = QtGui.QPen(edge)
        pen.setWidthF(max(1.0, cap.px / 9))
        painter.setPen(pen)
        painter.setBrush(QtGui.QColor(255, 255, 255, 235))
        painter.drawRoundedRect(box, 0.35 * cap.px, 0.35 * cap.px)
        y = box.top() + cap.pad
        colours = [palette.LABEL_TEXT, palette.LABEL_TEXT, palette.WARNING if colliding else (70, 90, 80)]
        for k, (text, font) in enumerate(zip(lines, cap.fonts(colliding))):
            m = QtGui.QFontMetricsF(font)
            painter.setFont(font)
            x = box.left() + cap.pad
            if k == len(lines) - 1 and colliding:
                painter.setPen(QtCore.Qt.PenStyle.NoPen)
                painter.setBrush(QtGui.QColor(*palette.WARNING))
                painter.drawEllipse(QtCore.QRectF(x, y + (m.height() - cap.dot) / 2, cap.dot, cap.dot))
                x += cap.dot + 0.4 * cap.px
            painter.setPen(QtGui.QColor(*colours[k]))
            painter.drawText(QtCore.QPointF(x, y + m.ascent()), text)
            y += m.height()
    finally:
        painter.end()
    return out


def clip_captions(viewport, t_values, title=None):
    """Every frame's caption lines and collision state, from the core, before drawing.

    Returns
    -------
    lines : list of list of str
    colliding : list of bool
    """
    from ...analysis.collision import colliding_pairs

    mech = viewport.mech
    name = title if title is not None else (getattr(mech, "name", None) or "mechanism")
    lines, colliding = [], []
    for t, poses in zip(t_values, _clip_poses(viewport, t_values)):
        pairs = colliding_pairs(mech, poses, pan=viewport.pan)
        lines.append([str(name), t_text(t), collision_text(pairs)])
        colliding.append(len(pairs) > 0)
    return lines, colliding
