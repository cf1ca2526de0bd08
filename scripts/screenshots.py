"""Make the README screenshots from the app itself.

Run under a display (``xvfb-run -a python scripts/screenshots.py`` on a headless
machine). It opens the bundled models in the real main window at a fixed size,
sets the drive and the camera, and saves

    assets/screenshots/flat.png        the gift box as a flat pattern (t = 0)
    assets/screenshots/collision.png   the overfolding tray mid-fold, two walls colliding
    assets/screenshots/closed.png      the gift box closed (t = 1)
    assets/screenshots/view-collision.png  the 3D view alone at 2x, for a close look

Settings go to a temporary file, so the user's recent-files list is left alone.
"""

import argparse
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from PySide6 import QtCore, QtGui, QtWidgets  # noqa: E402

from foldsim.gui.window.app import MainWindow  # noqa: E402

ASSETS = ROOT / "assets"
OUT = ASSETS / "screenshots"
WINDOW = (1280, 800)


def settle(app, window, ms=300):
    """Let the window lay out, finish its collision sweep and repaint."""
    clock = QtCore.QElapsedTimer()
    clock.start()
    while window.sweeping() and clock.elapsed() < 120000:
        app.processEvents(QtCore.QEventLoop.ProcessEventsFlag.AllEvents, 50)
    clock.restart()
    while clock.elapsed() < ms:
        app.processEvents(QtCore.QEventLoop.ProcessEventsFlag.AllEvents, 20)


def shoot(app, window, name):
    settle(app, window)
    path = OUT / name
    window.grab().save(str(path))
    print(path.relative_to(ROOT))


def save_pixels(pixels, path):
    h, w = pixels.shape[:2]
    QtGui.QImage(pixels.data, w, h, 4 * w, QtGui.QImage.Format.Format_RGBA8888).save(str(path))
    print(path.relative_to(ROOT))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.parse_args(argv)
    OUT.mkdir(parents=True, exist_ok=True)
    app = QtWidgets.QApplication.instance() or QtWidgets.QApplication([sys.argv[0]])
    with tempfile.TemporaryDirectory() as tmp:
        settings = QtCore.QSettings(str(Path(tmp) / "settings.ini"), QtCore.QSettings.Format.IniFormat)
        window = MainWindow(settings)
        window.resize(*WINDOW)
        window.show()
        settle(app, window)

        window.open_path(ASSETS / "gift-box.mech.json")
        window.drive.set_t(0.0)
        window.view.set_view("iso")
        shoot(app, window, "flat.png")

        window.open_path(ASSETS / "tray-overfold.mech.json")
        window.drive.set_t(0.93)
        window.view.set_view("iso")
        window.view.orbit(-20, 8)
        window.view.fit()
        window._select_hinge_row(int(window.model.mech.face_hinge[7]))
        shoot(app, window, "collision.png")
        save_pixels(window.view.render_image(2 * window.view.width(), 2 * window.view.height()),
                    OUT / "view-collision.png")

        window.open_path(ASSETS / "gift-box.mech.json")
        window._select_hinge_row(-1)
        window.drive.set_t(1.0)
        window.view.set_view("iso")
        window.view.fit(margin=1.5)
        shoot(app, window, "closed.png")
        window.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
