"""The 3D view of a mechanism and its drawing: panels, camera, overlays, colours."""
