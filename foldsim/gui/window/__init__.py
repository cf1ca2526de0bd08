"""The main window and its jobs: files, the loaded model, work off the GUI thread."""
