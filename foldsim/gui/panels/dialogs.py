"""The app's dialogs: exports, a new model from a shape, clips and screenshots.

Each dialog only gathers options and turns them into the arguments the core (or
the recorder) takes; the main window (`foldsim.gui.window.app`) runs the work. Values
the command line would refuse are passed on as they are, so the core refuses
them with the command line's own one-line message.
"""

from pathlib import Path

from PySide6 import QtCore, QtWidgets

from ...design import MESH_SUFFIXES, shape_args
from ...errors import FoldsimError

EXPORT_KINDS = (
    # suffix, what the menu says
    (".glb", "glTF, binary: the hinges as an animated node tree"),
    (".gltf", "glTF, text: the hinges as an animated node tree"),
    (".svg", "Flat pattern at true scale (SVG)"),
    (".csv", "Fold angles and gaps over t (CSV table)"),
    (".json", "Fold angles and gaps over t (JSON table)"),
    (".html", "Design review report (HTML, runs the check)"),
    (".stl", "Posed mesh at one t (STL)"),
    (".obj", "Posed mesh at one t (OBJ)"),
)

EXPORT_CAUTIONS = {
    ".svg": "Check the scale bar of a test print before cutting. Tabs are not checked against other "
            "panels: look at the drawing.",
    ".stl": "Panels have no thickness here: give them thickness in CAD before printing. Strength and fit "
            "of printed parts vary by process, material and machine; defer to the manufacturer's data.",
    ".html": "The report's cautions apply: the model is idealised (no thickness, no play), and moving "
             "panels can pinch fingers.",
}
EXPORT_CAUTIONS[".obj"] = EXPORT_CAUTIONS[".stl"]

SOLIDS = ("cube", "tetrahedron", "octahedron", "dodecahedron", "icosahedron", "truncated-tetrahedron",
          "cuboctahedron", "prism:5", "antiprism:5", "geodesic:1", "geodesic:2")
"""Built-in solids offered in the shape list (any spec `foldsim new` takes can be typed)."""

NET_CHOICES = (("min-diameter", "Shortest longest hinge chain"), ("bfs", "Breadth-first from the root face"),
               ("cut", "Cut these face pairs apart"))
GEAR_CHOICES = (("auto", "Bevel and spur pairs, remote bevels where needed"), ("simple", "Bevel and spur pairs only"),
                ("none", "No gears (ideal schedule)"))
CLIP_FORMATS = ((".mp4", "MP4 video"), (".gif", "Animated GIF"), (".png", "PNG still"))
FRAMING_CLIP = (("range", "Fit every shape of the clip"), ("pose", "Fit the last frame's pose"),
                ("motion", "Fit the whole motion, flat to closed"), ("keep", "Keep the camera as it is"))
FRAMING_STILL = (("pose", "Fit the pose shown"), ("motion", "Fit the whole motion, flat to closed"),
                 ("keep", "Keep the camera as it is"))
"""Framing choices of clips and stills: key (the recorder's ``fit``, "keep" for False), what the list says."""


def _spin(low, high, value, decimals=3, step=0.1, special=None):
    box = QtWidgets.QDoubleSpinBox()
    box.setRange(low, high)
    box.setDecimals(decimals)
    box.setSingleStep(step)
    box.setValue(value)
    if special:
        box.setSpecialValueText(special)
    return box


def _int_spin(low, high, value, special=None):
    box = QtWidgets.QSpinBox()
    box.setRange(low, high)
    box.setValue(value)
    if special:
        box.setSpecialValueText(special)
    return box


def _browse_row(edit, browse):
    row = QtWidgets.QHBoxLayout()
    row.setContentsMargins(0, 0, 0, 0)
    row.addWidget(edit, 1)
    button = QtWidgets.QPushButton("Browse…")
    button.clicked.connect(browse)
    row.addWidget(button)
    holder = QtWidgets.QWidget()
    holder.setLayout(row)
    return holder


def parse_views(text):
    """Drive values typed as ``T,T,...``, or None when empty.

    Examples
    --------
    >>> parse_views("0, 0.5,1"), parse_views("  ")
    ([0.0, 0.5, 1.0], None)
    >>> parse_views("a,b")
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: Pictures at t: must be comma-separated numbers, not 'a,b'
    """
    if not text.strip():
        return None
    try:
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise FoldsimError(f"Pictures at t: must be comma-separated numbers, not {text!r}") from None


def parse_length(text, name):
    """A length typed in a field, or None when empty.

    Examples
    --------
    >>> parse_length("0.5", "--gap-tol"), parse_length("", "--gap-tol")
    (0.5, None)
    """
    if not text.strip():
        return None
    try:
        return float(text)
    except ValueError:
        raise FoldsimError(f"{name}: must be a number, not {text!r}") from None


def with_suffix(path, suffix):
    """``path`` with its export or clip suffix replaced (or added).

    Examples
    --------
    >>> with_suffix("out/box.glb", ".svg"), with_suffix("box", ".html"), with_suffix("a.mech.json", ".csv")
    ('out/box.svg', 'box.html', 'a.mech.csv')
    """
    p = Path(path)
    if p.suffix.lower() in {s for s, _ in EXPORT_KINDS} | {s for s, _ in CLIP_FORMATS}:
        p = p.with_suffix("")
    return str(p) + suffix


class _FormDialog(QtWidgets.QDialog):
    """A dialog with a form, a caution line and OK / Cancel."""

    def __init__(self, title, parent=None):
        super().__init__(parent)
        self.setWindowTitle(title)
        self.form = QtWidgets.QFormLayout()
        self.form.setFieldGrowthPolicy(QtWidgets.QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        self.caution = QtWidgets.QLabel()
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("color: #6a4a00")
        self.caution.setVisible(False)
        self.buttons = QtWidgets.QDialogButtonBox(QtWidgets.QDialogButtonBox.StandardButton.Ok
                                                  | QtWidgets.QDialogButtonBox.StandardButton.Cancel)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        column = QtWidgets.QVBoxLayout(self)
        column.addLayout(self.form)
        column.addWidget(self.caution)
        column.addWidget(self.buttons)
        self.rows = {}

    REMEMBERED = ()
    """Keys of `rows` (or attribute names) whose values `remember` keeps."""

    def _widgets(self):
        for key in self.REMEMBERED:
            widget = getattr(self, key, None)
            if widget is None:
                widget = self.rows.get(key)
            if widget is not None:
                yield key, widget

    def remember(self, settings, group):
        """Keep the remembered fields' values in QSettings under ``group`` (this session and the next)."""
        for key, widget in self._widgets():
            if isinstance(widget, QtWidgets.QComboBox):
                value = widget.currentData()
            elif isinstance(widget, (QtWidgets.QSpinBox, QtWidgets.QDoubleSpinBox)):
                value = widget.value()
            elif isinstance(widget, QtWidgets.QAbstractButton):
                value = widget.isChecked()
            else:
                value = widget.text()
            settings.setValue(f"{group}/{key}", value)

    def restore(self, settings, group):
        """Put back the values `remember` kept (fields never kept, or unreadable, keep their defaults)."""
        for key, widget in self._widgets():
            value = settings.value(f"{group}/{key}")
            if value is None:
                continue
            try:
                if isinstance(widget, QtWidgets.QComboBox):
                    index = widget.findData(value)
                    if index >= 0:
                        widget.setCurrentIndex(index)
                elif isinstance(widget, QtWidgets.QSpinBox):
                    widget.setValue(int(float(value)))
                elif isinstance(widget, QtWidgets.QDoubleSpinBox):
                    widget.setValue(float(value))
                elif isinstance(widget, QtWidgets.QAbstractButton):
                    widget.setChecked(value in (True, "true", "1", 1))
                else:
                    widget.setText(str(value))
            except (TypeError, ValueError):
                continue

    def set_caution(self, text):
        """The caution line under the form (hidden when empty)."""
        self.caution.setText(text)
        self.caution.setVisible(bool(text))

    def add_row(self, key, label, widget):
        self.form.addRow(label, widget)
        self.rows[key] = widget
        return widget

    def show_rows(self, keys):
        """Show only these rows (the rest are hidden)."""
        for key, widget in self.rows.items():
            self.form.setRowVisible(widget, key in keys)


class ExportDialog(_FormDialog):
    """File ▸ Export…: the target file, its format and the options that format takes.

    Parameters
    ----------
    start : str
        Path offered first; its suffix picks the format (default .glb).
    t_now : float
        The view's drive value, offered as the pose of a mesh export.
    units : str
        The model's length unit, shown beside lengths.
    """

    ROWS = {
        ".glb": ("format", "file", "t_from", "t_to", "frames", "seconds"),
        ".svg": ("format", "file", "seam_gap", "tabs", "labels"),
        ".csv": ("format", "file", "t_from", "t_to", "frames"),
        ".html": ("format", "file", "t_from", "t_to", "frames", "views", "clearance", "gap_tol", "sheet"),
        ".stl": ("format", "file", "t"),
    }
    ROWS[".gltf"], ROWS[".json"], ROWS[".obj"] = ROWS[".glb"], ROWS[".csv"], ROWS[".stl"]
    REMEMBERED = ("kind", "t_from", "t_to", "frames", "seconds", "seam_gap", "tabs", "labels", "views",
                  "clearance", "gap_tol", "sheet")
    TERMS = {"--views": "Pictures at t", "--gap-tol": "Gap that counts as met", "--from": "Motion from t",
             "--to": "to t", "--frames": "Drive values sampled", "--seconds": "Animation length",
             "--t": "Pose at t", "--seam-gap": "Seam gap", "--tabs": "Tab width", "--clearance": "Clearance"}
    """Command-line flags in the core's messages, and the fields of this dialog that set them."""

    def __init__(self, start, t_now=1.0, units="", parent=None):
        super().__init__("Export", parent)
        self.kind = self.add_row("format", "Format", QtWidgets.QComboBox())
        for suffix, text in EXPORT_KINDS:
            self.kind.addItem(text, suffix)
        self.path = QtWidgets.QLineEdit(start)
        self.add_row("file", "File", _browse_row(self.path, self._browse))
        self.t_from = self.add_row("t_from", "Motion from t", _spin(-1, 1, 0.0, step=0.05))
        self.t_to = self.add_row("t_to", "to t", _spin(-1, 1, 1.0, step=0.05))
        self.frames = self.add_row("frames", "Drive values sampled", _int_spin(0, 100000, 0, "as the command line"))
        self.frames.setToolTip("Table rows (default 11), report plot samples (default 41), or the least "
                               "number of glTF keyframes (default: as few as exact interpolation needs)")
        self.seconds = self.add_row("seconds", "Animation length (s)", _spin(0.1, 600, 4.0, decimals=2, step=0.5))
        self.t = self.add_row("t", "Pose at t", _spin(-1, 1, float(t_now), step=0.05))
        self.seam_gap = self.add_row("seam_gap", "Seam gap", _spin(0, 1e6, 0.0, decimals=4))
        self.tabs = self.add_row("tabs", "Tab width", _spin(0, 1e6, 0.0, decimals=4))
        self.labels = self.add_row("labels", "", QtWidgets.QCheckBox("Number faces, hinges and cut edges"))
        self.labels.setChecked(True)
        self.views = self.add_row("views", "Pictures at t", QtWidgets.QLineEdit())
        self.views.setPlaceholderText("first, middle and last of the motion; or e.g. -1,0,1")
        self.clearance = self.add_row("clearance", "Clearance", _spin(0, 1e6, 0.0, decimals=4))
        self.gap_tol = self.add_row("gap_tol", "Gap that counts as met", QtWidgets.QLineEdit())
        self.gap_tol.setPlaceholderText("1e-4 of the model's size")
        self.sheet = self.add_row("sheet", "", QtWidgets.QCheckBox("Cut from one sheet (a self-overlapping "
                                                                   "flat layout is a problem)"))
        if units:
            for box in (self.seam_gap, self.tabs, self.clearance):
                box.setSuffix(f" {units}")
            self.gap_tol.setPlaceholderText(f"1e-4 of the model's size (in {units})")
        suffix = Path(start).suffix.lower()
        index = self.kind.findData(suffix)
        self.kind.setCurrentIndex(max(index, 0))
        self.kind.currentIndexChanged.connect(self._kind_changed)
        self.path.editingFinished.connect(self._path_edited)
        self._kind_changed()
        self.resize(560, self.sizeHint().height())

    def suffix(self):
        return self.kind.currentData()

    def set_path(self, path):
        """Set the target file; a known suffix also picks the format."""
        self.path.setText(str(path))
        self._path_edited()

    def _path_edited(self):
        index = self.kind.findData(Path(self.path.text()).suffix.lower())
        if index >= 0 and index != self.kind.currentIndex():
            self.kind.setCurrentIndex(index)

    def _kind_changed(self):
        suffix = self.suffix()
        if self.path.text() and Path(self.path.text()).suffix.lower() != suffix:
            self.path.setText(with_suffix(self.path.text(), suffix))
        self.show_rows(self.ROWS[suffix])
        self.set_caution(EXPORT_CAUTIONS.get(suffix, ""))
        self.adjustSize()

    def _browse(self):
        suffix = self.suffix()
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Export to", self.path.text(),
                                                        f"{suffix[1:].upper()} files (*{suffix});;All files (*)")
        if path:
            self.set_path(path)

    def target(self):
        return Path(self.path.text().strip())

    def options(self):
        """Keyword arguments of `foldsim.export.export` for the chosen format.

        Raises
        ------
        FoldsimError
            A field that is not a number where one is needed.
        """
        suffix = self.suffix()
        rows = self.ROWS[suffix]
        out = {}
        if "t_from" in rows:
            out.update(t_from=self.t_from.value(), t_to=self.t_to.value(), frames=self.frames.value() or None)
        if "seconds" in rows:
            out["seconds"] = self.seconds.value()
        if "t" in rows:
            out["t"] = self.t.value()
        if "seam_gap" in rows:
            out.update(seam_gap=self.seam_gap.value(), tabs=self.tabs.value(), labels=self.labels.isChecked())
        if "views" in rows:
            out.update(views=parse_views(self.views.text()), clearance=self.clearance.value(),
                       gap_tol=parse_length(self.gap_tol.text(), "Gap that counts as met"),
                       sheet=self.sheet.isChecked())
        return out


class ShapeDialog(_FormDialog):
    """File ▸ New from shape…: a built-in solid or a mesh file, the net and the gears.

    `recipe` gives the options of `foldsim new` (`foldsim.design.build`).
    """

    TERMS = {"--size": "Size", "--units": "Units", "--net": "Net", "--root": "Fixed face",
             "--cut": "Face pairs to cut", "--gears": "Gears", "--teeth": "Teeth"}

    def __init__(self, folder="", parent=None):
        super().__init__("New from shape", parent)
        self.folder = str(folder)
        self.use_solid = QtWidgets.QRadioButton("Built-in solid")
        self.use_mesh = QtWidgets.QRadioButton("Mesh file")
        self.use_solid.setChecked(True)
        self.solid = QtWidgets.QComboBox()
        self.solid.setEditable(True)
        self.solid.addItems(SOLIDS)
        self.solid.setToolTip("cube, prism:N, antiprism:N, geodesic:K, ... (as for foldsim new)")
        self.mesh = QtWidgets.QLineEdit()
        self.mesh.setPlaceholderText("an OBJ, OFF, STL or PLY file of a closed solid")
        self.add_row("solid_choice", self.use_solid, self.solid)
        self.add_row("mesh_choice", self.use_mesh, _browse_row(self.mesh, self._browse))
        self.size = self.add_row("size", "Size", _spin(0, 1e6, 0.0, decimals=4, step=1.0, special="default (1)"))
        self.size.setToolTip("Edge length of a built-in solid (circumradius for geodesic:K); a mesh keeps its own")
        self.units = self.add_row("units", "Units", QtWidgets.QComboBox())
        self.units.setEditable(True)
        self.units.addItems(["mm", "cm", "m", "in"])
        self.net = self.add_row("net", "Net", QtWidgets.QComboBox())
        for key, text in NET_CHOICES:
            self.net.addItem(text, key)
        self.root = self.add_row("root", "Fixed face", _int_spin(-1, 1_000_000, -1, "default"))
        self.root.setToolTip("Default: the net's centre face (face 0 for breadth-first and cut lists)")
        self.cut = self.add_row("cut", "Face pairs to cut", QtWidgets.QLineEdit())
        self.cut.setPlaceholderText("e.g. 0-1,2-3")
        self.gears = self.add_row("gears", "Gears", QtWidgets.QComboBox())
        for key, text in GEAR_CHOICES:
            self.gears.addItem(text, key)
        self.teeth = self.add_row("teeth", "Teeth", QtWidgets.QLineEdit())
        self.teeth.setPlaceholderText("MIN:MAX, e.g. 12:60 (empty: exact ratios)")
        self.set_caution("The new model is not saved until you save it (File ▸ Save As).")
        self.use_mesh.toggled.connect(self._update)
        self.mesh.textEdited.connect(lambda _: self.use_mesh.setChecked(True))
        self.net.currentIndexChanged.connect(self._update)
        self.gears.currentIndexChanged.connect(self._update)
        self._update()
        self.resize(520, self.sizeHint().height())

    def _update(self):
        self.size.setEnabled(not self.use_mesh.isChecked())
        self.cut.setEnabled(self.net.currentData() == "cut")
        self.teeth.setEnabled(self.gears.currentData() != "none")

    def _browse(self):
        pattern = " ".join(f"*{s}" for s in MESH_SUFFIXES)
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self, "Mesh file", self.folder,
                                                        f"Meshes ({pattern});;All files (*)")
        if path:
            self.mesh.setText(path)
            self.use_mesh.setChecked(True)

    def recipe(self):
        """The options of `foldsim new` (an argparse namespace) for these choices."""
        mesh = self.use_mesh.isChecked()
        shape = self.mesh.text().strip() if mesh else self.solid.currentText().strip()
        if mesh and not shape:
            raise FoldsimError("choose a mesh file (OBJ, OFF, STL or PLY)")
        net = self.net.currentData()
        teeth = self.teeth.text().strip() if self.gears.currentData() != "none" else ""
        return shape_args(shape, size=None if mesh or self.size.value() == 0 else self.size.value(),
                          units=self.units.currentText().strip() or "mm",
                          net=None if net in ("min-diameter", "cut") else net,
                          root=None if self.root.value() < 0 else self.root.value(),
                          cut=self.cut.text().strip() if net == "cut" else None,
                          gears=self.gears.currentData(), teeth=teeth or None)


class ClipDialog(_FormDialog):
    """File ▸ Record clip… and Save screenshot…: what to draw and where to write it.

    Parameters
    ----------
    start : str
        Path offered first.
    size : (int, int)
        Frame size offered.
    still : bool
        A screenshot (one PNG at t) instead of a clip.
    t_now : float
    """

    REMEMBERED = ("kind", "t_from", "t_to", "seconds", "fps", "width_box", "height_box", "orbit", "orbit_degrees",
                  "caption", "fit")
    TERMS = {"--size": "Width and height", "--fps": "Frames per second", "--seconds": "Length",
             "--from": "From t", "--to": "To t", "--orbit": "Orbit"}

    def __init__(self, start, size=(1280, 720), still=False, t_now=0.0, parent=None):
        super().__init__("Save screenshot" if still else "Record clip", parent)
        self.still = still
        self.kind = self.add_row("format", "Format", QtWidgets.QComboBox())
        for suffix, text in (CLIP_FORMATS[2:] if still else CLIP_FORMATS):
            self.kind.addItem(text, suffix)
        self.path = QtWidgets.QLineEdit(start)
        self.add_row("file", "File", _browse_row(self.path, self._browse))
        self.t_from = self.add_row("t_from", "From t", _spin(-1, 1, 0.0, step=0.05))
        self.t_to = self.add_row("t_to", "At t" if still else "To t", _spin(-1, 1, t_now if still else 1.0, step=0.05))
        self.seconds = self.add_row("seconds", "Length (s)", _spin(0.1, 600, 4.0, decimals=2, step=0.5))
        self.fps = self.add_row("fps", "Frames per second", _int_spin(1, 120, 30))
        self.width_box = self.add_row("width", "Width (px)", _int_spin(16, 7680, int(size[0])))
        self.height_box = self.add_row("height", "Height (px)", _int_spin(16, 7680, int(size[1])))
        orbit = QtWidgets.QHBoxLayout()
        orbit.setContentsMargins(0, 0, 0, 0)
        self.orbit = QtWidgets.QCheckBox("Turn the camera by")
        self.orbit_degrees = _spin(-360, 360, 40.0, decimals=1, step=5)
        self.orbit_degrees.setSuffix("°")
        orbit.addWidget(self.orbit)
        orbit.addWidget(self.orbit_degrees, 1)
        holder = QtWidgets.QWidget()
        holder.setLayout(orbit)
        self.add_row("orbit", "Orbit", holder)
        self.caption = self.add_row("caption", "", QtWidgets.QCheckBox("Caption: name, t and collisions"))
        self.caption.setChecked(not still)
        self.fit = self.add_row("fit", "Framing", QtWidgets.QComboBox())
        for key, text in (FRAMING_STILL if still else FRAMING_CLIP):
            self.fit.addItem(text, key)
        self.fit.setCurrentIndex(self.fit.findData("keep" if still else "range"))
        self.fit.setToolTip("Where the camera stands: fitted to the pose shown (a closed model fills the "
                            "frame), to the whole motion, or as it is in the view")
        self.width_box.setToolTip("MP4 (H.264) needs an even width and height")
        self.height_box.setToolTip(self.width_box.toolTip())
        for box in (self.width_box, self.height_box):
            box.editingFinished.connect(self._even_size)
        self.kind.currentIndexChanged.connect(self._kind_changed)
        self._kind_changed()
        self.resize(480, self.sizeHint().height())

    def _kind_changed(self):
        suffix = self.kind.currentData()
        if self.path.text() and Path(self.path.text()).suffix.lower() != suffix:
            self.path.setText(with_suffix(self.path.text(), suffix))
        still = suffix == ".png"
        keys = {"format", "file", "t_to", "width", "height", "caption", "fit"}
        if not still:
            keys |= {"t_from", "seconds", "fps", "orbit"}
        self.show_rows(keys)
        self.fps.setMaximum(50 if suffix == ".gif" else 120)
        # MP4 frames have an even width and height: offer only even values.
        for box in (self.width_box, self.height_box):
            box.setSingleStep(2 if suffix == ".mp4" else 1)
        self._even_size()
        self.adjustSize()

    def _even_size(self):
        if self.kind.currentData() == ".mp4":
            for box in (self.width_box, self.height_box):
                if box.value() % 2:
                    box.setValue(box.value() + 1 if box.value() < box.maximum() else box.value() - 1)

    def _browse(self):
        suffix = self.kind.currentData()
        path, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save to", self.path.text(),
                                                        f"{suffix[1:].upper()} files (*{suffix})")
        if path:
            self.path.setText(path)

    def target(self):
        return Path(self.path.text().strip())

    def options(self):
        """Keyword arguments of `record.recorder.record_clip` (or `save_screenshot` for a still)."""
        self._even_size()
        size = (self.width_box.value(), self.height_box.value())
        fit = {"keep": False}.get(self.fit.currentData(), self.fit.currentData())
        if self.kind.currentData() == ".png":
            return {"size": size, "t": self.t_to.value(), "overlay": self.caption.isChecked(), "fit": fit}
        return {"t_from": self.t_from.value(), "t_to": self.t_to.value(), "seconds": self.seconds.value(),
                "fps": self.fps.value(), "size": size,
                "orbit": self.orbit_degrees.value() if self.orbit.isChecked() else False,
                "overlay": self.caption.isChecked(), "fit": fit}


def in_dialog_terms(message, terms):
    """A refusal worded for a dialog: the command-line flags it names become the dialog's field names.

    Examples
    --------
    >>> in_dialog_terms("--size 1281x720: MP4 needs an even width", {"--size": "Width and height"})
    'Width and height 1281x720: MP4 needs an even width'
    >>> in_dialog_terms("--to-t 2: out of range", {"--to": "To t"})
    '--to-t 2: out of range'
    """
    import re

    def field(match):
        return terms.get(match.group(0), match.group(0))

    return re.sub(r"--[a-z][a-z0-9-]*", field, str(message))


def busy_dialog(parent, text, cancel_text="Cancel"):
    """A progress dialog that blocks the window, shows after a moment and can be cancelled."""
    dialog = QtWidgets.QProgressDialog(text, cancel_text, 0, 0, parent)
    dialog.setWindowTitle("foldsim")
    dialog.setWindowModality(QtCore.Qt.WindowModality.WindowModal)
    dialog.setMinimumDuration(400)
    dialog.setAutoClose(False)
    dialog.setAutoReset(False)
    return dialog
