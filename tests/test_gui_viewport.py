"""The 3D view on its own: display frame, camera, rays and offscreen frames."""

import math
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pyqtgraph")

from foldsim.geometry import transform_points  # noqa: E402
from foldsim.gui.view import palette  # noqa: E402
from foldsim.gui.view.viewport import FoldView, stage_transform  # noqa: E402
from foldsim.io.mechanism_json import from_document  # noqa: E402

from test_gui import strip150_document, warning_pixels  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def shown_view(qtbot, mech):
    """A 400 x 300 view on the screen, showing mech."""
    v = FoldView()
    qtbot.addWidget(v)
    v.resize(400, 300)
    v.show()
    qtbot.waitExposed(v)
    v.set_mechanism(mech)
    return v


@pytest.fixture
def view(qtbot):
    return shown_view(qtbot, from_document(strip150_document()))


def display(view, face, points):
    """Display-frame coordinates of flat-frame points of one face at the view's t."""
    stage = stage_transform(view.mech)
    return transform_points(stage @ view.poses[face], np.asarray(points, float))


def test_root_lies_in_the_floor_and_panels_fold_upward(view):
    view.set_t(0.5)
    corners = display(view, 1, view.mech.flat_faces[1])
    np.testing.assert_allclose(corners[:, 2], 0.0, atol=1e-12)
    np.testing.assert_allclose(corners.mean(axis=0), 0.0, atol=1e-12)
    # Face 0's far edge is 1 from its hinge; at t = 0.5 the hinge is at 75°, so
    # the edge rises to sin 75° above the floor (hand check).
    far = display(view, 0, [[0.0, 0.0, 0.0], [0.0, 1.0, 0.0]])
    np.testing.assert_allclose(far[:, 2], math.sin(math.radians(75)), atol=1e-12)


def test_top_view_of_the_flat_strip_keeps_its_proportions(view):
    view.set_t(0.0)
    view.set_view("top")
    view.fit()
    corners = np.concatenate(view.mech.flat_faces)
    px = view.model_to_pixels(corners)
    w, h = np.ptp(px, axis=0)
    # Three unit squares seen square-on: 3 wide, 1 high, at the same scale.
    np.testing.assert_allclose(w / h, 3.0, rtol=1e-9)
    # Fitted: the strip spans most of the width and stays inside the view.
    assert 0.7 * view.width() < w < view.width()
    assert (px >= 0).all() and (px[:, 0] <= view.width()).all() and (px[:, 1] <= view.height()).all()


def test_front_view_sees_the_flat_strip_edge_on(view):
    view.set_t(0.0)
    view.set_view("front")
    view.fit()  # the flat shape alone: the camera sits level with it
    px = view.model_to_pixels(np.concatenate(view.mech.flat_faces))
    np.testing.assert_allclose(px[:, 1], px[0, 1], atol=1e-6)


def test_the_ray_through_a_pixel_projects_back_onto_it(view):
    view.set_t(0.3)
    view.set_view("iso")
    for x, y in ((200, 150), (37.5, 250.25), (390, 10)):
        origin, direction = view.ray_at(x, y)
        np.testing.assert_allclose(np.linalg.norm(direction), 1.0)
        along = origin + np.outer([0.5, 3.0, 20.0], direction)
        np.testing.assert_allclose(view.model_to_pixels(along), [[x, y]] * 3, atol=1e-6)


def test_picking_the_pixel_of_each_panel_centre(view):
    view.set_t(0.4)
    view.set_view("top")
    for face in range(3):
        centre = view.poses[face, :3, :3] @ view.mech.flat_faces[face].mean(axis=0) + view.poses[face, :3, 3]
        x, y = view.model_to_pixels(centre)[0]
        assert view.pick(x, y) == face
    assert view.pick(2, 2) == -1


def test_selected_face_is_tinted_and_outlined(view):
    view.set_t(0.4)
    view.set_view("iso")
    front_before, _ = view.panel_colors()
    assert pixels(view.render_image(400, 300), palette.HIGHLIGHT) == 0
    view.select_face(0)
    front, _ = view.panel_colors()
    assert not np.allclose(front[0], front_before[0])
    np.testing.assert_allclose(front[1:], front_before[1:])
    assert pixels(view.render_image(400, 300), palette.HIGHLIGHT) > 50


def pixels(img, rgb, tol=10):
    return int((np.abs(img[..., :3].astype(int) - np.array(rgb)) <= tol).all(axis=-1).sum())


def test_offscreen_frame_matches_the_widget_at_its_own_size(view):
    view.set_t(0.6)
    view.set_view("iso")
    view.repaint()
    on_screen = view.grabFramebuffer().convertToFormat(view.grabFramebuffer().Format.Format_RGBA8888)
    from foldsim.gui.view.viewport import image_array

    screen = image_array(on_screen).astype(int)
    frame = view.render_image(view.width(), view.height()).astype(int)
    # Same scene and camera; anti-aliased edges may differ by a little.
    close = (np.abs(screen[..., :3] - frame[..., :3]).max(axis=-1) <= 24).mean()
    assert close > 0.97


def test_render_image_needs_a_shown_view(qtbot):
    v = FoldView()
    qtbot.addWidget(v)
    with pytest.raises(RuntimeError, match="shown"):
        v.render_image(10, 10)


def test_warning_colour_follows_the_sweeps_collisions_from_frame_to_frame(view):
    # The strip's outer squares pass through each other for t > 0.8 (hand check in
    # test_gui.strip150_document). With the sweep's intervals a frame rebuilds the
    # colours only when the colliding panels change; a cached colour must follow the
    # state it caches (common practice), so the warning comes and goes with t.
    from foldsim.analysis.collision import collision_intervals

    intervals = collision_intervals(view.mech, view.schedule, 0.0, 1.0, pan=view.pan)
    assert [c["faces"] for c in intervals] == [[0, 2]]
    view.set_known_collisions(intervals, (0.0, 1.0))
    view.set_view("iso")
    plain, _ = view.panel_colors()
    for t, hot in [(0.5, False), (0.95, True), (0.9, True), (0.6, False), (0.99, True), (0.3, False)]:
        view.set_t(t)
        assert view.colliding.tolist() == ([[0, 2]] if hot else [])
        assert (warning_pixels(view.render_image(400, 300)) > 200) is hot
        front, _ = view.panel_colors()
        assert np.allclose(front[1], plain[1]) and np.allclose(front[[0, 2]], plain[[0, 2]]) is not hot


def _nearest(img, xy, rgb, reach=3):
    """Smallest colour distance to rgb among the pixels within reach of a pixel position."""
    x, y = (int(round(c)) for c in xy)
    patch = img[max(y - reach, 0):y + reach + 1, max(x - reach, 0):x + reach + 1, :3].astype(int)
    return int(np.abs(patch - np.array(rgb)).max(axis=-1).min())


def test_panels_draw_their_outline_and_hinge_lines(view):
    # The fills draw the outline and hinge lines as bands along their edges
    # (Baerentzen et al., "Single-pass wireframe rendering", SIGGRAPH 2006): at the
    # middle of a hinge the hinge colour shows, at the middle of a free edge the
    # outline colour, and in the middle of a panel neither (common practice for a
    # wireframe over shaded faces).
    view.set_t(0.3)
    view.set_view("top")
    img = view.render_image(400, 300)
    mech = view.mech
    for h in range(mech.n_hinges):
        pose = view.poses[mech.parent[h]]
        mid = transform_points(pose, mech.axes[h].mean(axis=0))
        assert _nearest(img, view.model_to_pixels(mid[None])[0], palette.HINGE) <= 12
    # Face 0's edges away from the hinge are free: its far edge's middle.
    face = mech.flat_faces[0]
    hinge_ends = {tuple(np.round(p, 9)) for p in mech.axes[0]}
    free = [(a, b) for a, b in zip(face, np.roll(face, -1, axis=0))
            if not {tuple(np.round(a, 9)), tuple(np.round(b, 9))} <= hinge_ends]
    for a, b in free:
        mid = transform_points(view.poses[0], (a + b) / 2)
        assert _nearest(img, view.model_to_pixels(mid[None])[0], palette.OUTLINE) <= 20
    centre = transform_points(view.poses[0], face.mean(axis=0))
    assert _nearest(img, view.model_to_pixels(centre[None])[0], palette.OUTLINE, reach=2) > 40


def test_a_cut_edges_line_follows_whether_it_has_met(qtbot):
    # The gift box's cut edges all meet at t = 1 (its closed state). Where an edge
    # has met, each of its two panels draws half the line on its side; an open edge
    # takes the whole width on its one side, so calling every edge open draws more
    # line pixels, and closing them again gives the first picture back (common
    # practice for state kept on the GPU: a change is sent, no change costs nothing).
    from foldsim.io.mechanism_json import load

    v = shown_view(qtbot, load(ROOT / "assets" / "gift-box.mech.json"))
    v.set_t(1.0)
    v.set_view("iso")
    assert len(v.mech.cut_faces) and not v.open_edge_mask().any()
    met = v.render_image(400, 300)
    v._layer.set_open_cuts(np.ones(len(v.mech.cut_faces), bool))
    opened = v.render_image(400, 300)
    assert pixels(opened, palette.OUTLINE, tol=24) > pixels(met, palette.OUTLINE, tol=24) + 100
    v.set_t(1.0)
    np.testing.assert_array_equal(v.render_image(400, 300), met)


def test_gear_body_outlines_are_its_ends_and_sector_sides():
    # A quarter sector of a cylinder at the coarse bodies' 12 steps to the turn: 3
    # steps, circumscribed, so its arc has 4 facets (half a step at each end, whose
    # corners sit on the circle). Its outline is each end's arc (4 edges each), the
    # two straight sides along the axis, the axis where the sector's flat sides
    # meet, and the four radii at the ends: 2 x 4 + 2 + 1 + 4 = 15 edges (counted by
    # hand). At the panels' 20 degrees the 3 edges between arc facets, 30 degrees
    # apart, would show too.
    import math

    from foldsim.build.gears import sector_frustum
    from foldsim.gui.view.solid_layer import FEATURE_DEG, GEAR_FEATURE_DEG, feature_edges

    tri = sector_frustum(np.zeros(3), np.array([0.0, 0.0, 1.0]), np.array([1.0, 0.0, 0.0]),
                         np.array([0.0, 1.0, 0.0]), (0.0, 2.0), (5.0, 5.0), (0.0, math.pi / 2), 3)
    assert len(feature_edges(tri, GEAR_FEATURE_DEG)) == 15
    assert len(feature_edges(tri, FEATURE_DEG)) == 18


def test_thick_panels_draw_their_outlines_in_the_fills(qtbot):
    # A build's prisms draw their feature edges as bands of their fills (each
    # corner's barycentric coordinate over its screen gradient is the distance in
    # pixels to the opposite edge; common practice in wireframe shaders). Seen
    # from the top while flat, a thin prism's walls are edge-on and its cap's
    # border lies on the panel's outline (hand check: 0.02 thick, under a pixel
    # at this scale): the middle of every free edge shows the outline colour and
    # the middle of the panel does not.
    from dataclasses import replace

    from foldsim.build.prisms import panel_solids
    from foldsim.build.spec import build_spec

    mech = from_document(strip150_document())
    built = replace(mech, extras={**mech.extras, "build": {"thickness": 0.02}})
    v = shown_view(qtbot, built)
    v.set_solids(panel_solids(built, build_spec(built)))
    v.set_t(0.0)
    v.set_view("top")
    v.fit()
    img = v.render_image(800, 600)
    for f in (0, 2):
        face = mech.flat_faces[f]
        hinge = mech.axes[mech.face_hinge[f]]
        ends = {tuple(np.round(p, 9)) for p in hinge}
        for a, b in zip(face, np.roll(face, -1, axis=0)):
            if {tuple(np.round(a, 9)), tuple(np.round(b, 9))} <= ends:
                continue
            mid = transform_points(v.poses[f], (a + b) / 2)
            assert _nearest(img, 2 * v.model_to_pixels(mid[None])[0], palette.OUTLINE, reach=4) <= 12, (f, a, b)
        centre = transform_points(v.poses[f], face.mean(axis=0))
        assert _nearest(img, 2 * v.model_to_pixels(centre[None])[0], palette.OUTLINE, reach=4) > 40


def test_many_gear_bodies_are_drawn_without_multisampling(qtbot, monkeypatch):
    # Multisampling changes only the pixels that a triangle's edge crosses (common
    # practice), so drawing the gear bodies of a large build without it changes
    # the picture only at the bodies' borders: every pixel that differs from the
    # multisampled picture lies next to a pixel the bodies cover (those that
    # change when the bodies are left out), and some do differ.
    from foldsim.build.gears import build_solids
    from foldsim.build.spec import build_spec
    from foldsim.gui.view import solid_layer
    from foldsim.io.mechanism_json import load

    mech = load(ROOT / "assets" / "lantern-build.mech.json")
    solids = build_solids(mech, build_spec(mech))
    assert sum(s.kind != "panel" for s in solids) <= solid_layer.MULTISAMPLED_BODIES
    v = shown_view(qtbot, mech)
    v.set_t(0.4)
    v.set_view("iso")

    def frame(parts):
        v.set_solids(parts)
        return v.render_image(400, 300)[..., :3].astype(int)

    smooth = frame(solids)
    bare = frame([s for s in solids if s.kind == "panel"])
    monkeypatch.setattr(solid_layer, "MULTISAMPLED_BODIES", 0)
    plain = frame(solids)
    assert not v._layer.multisampled_bodies
    bodies = np.abs(smooth - bare).max(axis=-1) > 0
    near = bodies.copy()
    for dy in (-1, 0, 1):
        for dx in (-1, 0, 1):
            near |= np.roll(np.roll(bodies, dy, axis=0), dx, axis=1)
    differ = np.abs(plain - smooth).max(axis=-1) > 0
    assert differ.sum() > 20
    assert not (differ & ~near).any()
