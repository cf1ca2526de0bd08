"""The Help menu: the bundled guide and About (version, licence).

`HelpMenu` is a part of `app.MainWindow`.
"""

from pathlib import Path

from PySide6 import QtCore, QtGui, QtWidgets

from ... import __version__

DOCS = Path(__file__).resolve().parents[3] / "docs" / "app.md"
"""The bundled guide to the app (Help ▸ Guide to the app)."""

LICENCE = "MIT (see the LICENSE file)"


class HelpMenu:
    """Help ▸ Guide to the app and Help ▸ About foldsim (a mixin of `app.MainWindow`)."""

    def open_docs(self):
        """Help ▸ Guide to the app: the bundled docs/app.md in the desktop's viewer."""
        if DOCS.is_file():
            QtGui.QDesktopServices.openUrl(QtCore.QUrl.fromLocalFile(str(DOCS)))
        else:
            self.show_error(f"foldsim: {DOCS}: the guide is not installed here")

    def about_text(self):
        """What Help ▸ About says: version, licence, where the guide is."""
        return (f"<b>foldsim {__version__}</b><br>Kinematics and checks for gear-coupled rigid folding "
                f"mechanisms.<br><br>Licence: {LICENCE}.<br>Guide: <a href=\"{DOCS.as_uri()}\">{DOCS}</a>"
                "<br><br>Moving panels can pinch fingers; printed parts' strength varies by process and "
                "material: defer to the manufacturer's data.")

    def about(self):
        """Help ▸ About foldsim."""
        box = QtWidgets.QMessageBox(QtWidgets.QMessageBox.Icon.Information, "About foldsim", self.about_text(),
                                    QtWidgets.QMessageBox.StandardButton.Ok, self)
        box.setTextFormat(QtCore.Qt.TextFormat.RichText)
        box.open()
        self.dialog = box
        return box
