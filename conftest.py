"""Collection rules shared by the tests and the doctests.

``--doctest-modules`` imports every module under foldsim/. The desktop app's
modules import Qt when they load, so they are left out only where the ``gui``
extra is not installed; with it installed their doctests run like any other.
"""

from importlib.util import find_spec

collect_ignore = []
if find_spec("PySide6") is None or find_spec("pyqtgraph") is None:
    collect_ignore.append("foldsim/gui")
