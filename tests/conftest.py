"""Fixtures shared by every test module."""

import sys

import pytest


@pytest.fixture(autouse=True)
def unsaved_models_are_discarded(monkeypatch):
    """A window closed at a test's end with an unsaved model would ask Save / Discard / Cancel
    and wait for an answer; tests that do not answer themselves answer Discard."""
    if "PySide6.QtWidgets" not in sys.modules:
        yield
        return
    from PySide6 import QtWidgets

    monkeypatch.setattr(QtWidgets.QMessageBox, "question",
                        lambda *args, **kwargs: QtWidgets.QMessageBox.StandardButton.Discard)
    yield
