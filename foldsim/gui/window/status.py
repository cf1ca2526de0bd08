"""The status bar's words and the side column's shares of height.

`StatusBar` is a part of `app.MainWindow`: the summary of the model at the current
t, what the background collision check has covered, the picked panel, and how
the hinge table, the cut-edge table and the gap plot share the side column.
"""

from ..record.caption import t_text

GAP_PLOT_MIN = 150
"""The gap plot is never squeezed below this height (pixels), panel open or not."""


def t_word(t):
    """A drive value as the status bar writes a range's end, with a true minus sign.

    Examples
    --------
    >>> t_word(-1.0), t_word(0.25), t_word(1)
    ('−1', '0.25', '1')
    """
    text = f"{float(t):.3g}"
    return text.replace("-", "−")


class StatusBar:
    """Status words and side-column heights (a mixin of `app.MainWindow`)."""

    def _update_status(self):
        if self.model is None:
            return
        mech, view = self.model.mech, self.view
        parts = [f"{mech.n_faces} panels, {mech.n_hinges} hinges", t_text(view.t)]
        n = len(view.colliding)
        parts.append(f"{n} colliding pair{'s' if n != 1 else ''}" if n else "no collision here")
        open_ = view.open_edges()
        if len(open_):
            parts.append(f"widest gap {view.gaps[open_].max():.3g} {mech.units}")
        else:
            parts.append("every cut edge meets")
        parts.append(self.sweep_text())
        self.status.setText("   ·   ".join(p for p in parts if p))
        self.picked_label.setText(self.picked_text())

    def sweep_text(self):
        """What the collision check over −1..1 has found: so far while it runs, or up to where it stopped."""
        lo, hi = self.swept
        n = len(self.all_intervals())
        found = f"{n} collision stretch{'es' if n != 1 else ''}" if n else "no collision"
        if hi <= lo:
            return "checking for collisions…" if self.sweep is not None else ""
        span = f"{t_word(lo)}..{t_word(hi)}"
        if self.sweep is not None:
            return f"checking: {found} over {span} so far"
        if self.swept_whole:
            return f"{found} over {span}"
        return f"{found} over {span} (check stopped)"

    def picked_text(self):
        """The status bar's words for the picked panel: face, parent hinge, part type ("" for none)."""
        f = self.picked_face
        if self.model is None or f < 0:
            return ""
        mech = self.model.mech
        if f == mech.root:
            words = f"face {f}: the fixed face"
        else:
            h = int(mech.face_hinge[f])
            words = f"face {f}: hinge {h} from face {int(mech.parent[h])}"
        if self.model.labels is not None:
            words += f", part {self.model.labels[f]}"
        return words

    def share_side_height(self):
        """Give the hinge and cut-edge tables the height their rows need, the gap plot the rest.

        When both cannot show every row, a table that fits in half the room gets
        what it needs and the other the rest, else they halve it: neither holds
        empty space while the other scrolls. The gap plot keeps at least a third
        of the column.
        """
        if self.model is None:
            return
        sizes = self.side.sizes()
        total = sum(sizes)
        if total <= 0:
            return
        needs = []
        for k, table in enumerate((self.hinge_table, self.gap_table)):
            box = self.side.widget(k)
            overhead = max(box.height() - table.viewport().height(), 0)
            rows = max(table.model().rowCount(), 1)
            needs.append(overhead + rows * table.verticalHeader().defaultSectionSize() + 2)
        room = total - max(GAP_PLOT_MIN, total // 3)
        if sum(needs) <= room:
            hinges, edges = needs
        else:
            # One table fits in half: it gets what it needs, the other the rest;
            # else they halve the room and both scroll.
            hinges = int(min(needs[0], max(room / 2, room - needs[1])))
            edges = int(min(needs[1], room - hinges))
        self.side.setSizes([hinges, edges, total - hinges - edges])
