"""The desktop app: a 3D view of a folding mechanism, a drive slider and its analysis.

Qt and OpenGL are imported here and nowhere else in foldsim. The GUI does no
kinematics: it asks the core for poses and analysis at a drive value t and draws
them. `viewport.FoldView` is the 3D view (reusable on its own, and the source of
recorded frames through `FoldView.render_image`); `app.MainWindow` is the window.
"""
