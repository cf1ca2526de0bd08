"""The desktop app: a 3D view of a folding mechanism, a drive slider and its analysis.

Qt and OpenGL are imported here and nowhere else in foldsim. The GUI does no
kinematics: it asks the core for poses and analysis at a drive value t and draws
them. Its rooms:

- `view`: the 3D view and its drawing (`view.viewport.FoldView`, reusable on its
  own and the source of recorded frames through `FoldView.render_image`);
- `record`: recording clips and screenshots of a view, and a virtual display;
- `panels`: the side panels and the dialogs;
- `window`: the main window (`window.app.MainWindow`) and its jobs: files, the
  loaded model, work off the GUI thread.

`bench` measures how fast the view follows the drive (``python -m foldsim.gui.bench``).
"""
