"""Linearised stack-up: analytic Jacobians of the gaps and panel vertices, worst case and RSS."""

from dataclasses import dataclass

import numpy as np

from .. import geometry
from ..gearing import fold_schedule
from ..kinematics import face_poses
from .inputs import DEFAULT_TIMES, N_KINDS, _chunks, _closure_index, _times
from .sources import _sparse_backlash, gear_tree, hinge_frames


def _paths(mech):
    """(F, D) hinges on each face's path from the root, padded with the dummy index H.

    ``D`` is the depth of the hinge tree; entry ``d`` of a face's row is the hinge at
    depth ``d + 1`` on its path (the root's row is all padding).
    """
    out = np.full((mech.n_faces, max(1, len(mech.levels))), mech.n_hinges, dtype=np.int64)
    for d, level in enumerate(mech.levels):
        out[mech.child[level]] = out[mech.parent[level]]
        out[mech.child[level], d] = level
    return out


@dataclass(frozen=True)
class _Pose:
    """What the Jacobian needs at one set of ideal angles (hinge arrays carry a zero dummy row H)."""

    poses: np.ndarray       # (F, 4, 4) ideal poses
    dirs: np.ndarray        # (H + 1, 3, 3) posed u, w, n of every hinge
    mids: np.ndarray        # (H + 1, 3) posed midpoints
    paths: np.ndarray       # (F, D) from _paths
    mesh: object            # (H, C) backlash matrix, scipy.sparse CSR


def _pose_context(mech, theta, frames, paths, mesh):
    poses = face_poses(mech, np.asarray(theta, dtype=float)[None])[0]
    dirs, mids = frames
    parent = poses[mech.parent]
    posed_dirs = np.zeros((mech.n_hinges + 1, 3, 3))
    posed_mids = np.zeros((mech.n_hinges + 1, 3))
    posed_dirs[:-1] = np.einsum("hij,hkj->hki", parent[:, :3, :3], dirs)
    posed_mids[:-1] = geometry.transform_points(parent, mids)
    return _Pose(poses, posed_dirs, posed_mids, paths, mesh)


def _path_jacobian(ctx, points, faces):
    """Derivatives of posed points w.r.t. the sources on their root paths.

    Parameters
    ----------
    ctx : _Pose
    points : (K, 3) float
        Posed points.
    faces : (K,) int
        Face each point belongs to.

    Returns
    -------
    idx : (K, D) int
        Hinges on each point's path (H = padding).
    hinge : (K, D, 6, 3) float
        ``d point / d source`` for the six kinds at each of those hinges (zero at
        padding): a turn about a line through ``a`` along ``w`` moves the point by
        ``w x (p - a)``, a slide along ``v`` by ``v``.
    mesh : (K, 3, C) float
        ``d point / d backlash``: the play columns carried through the gear tree.
    """
    idx = ctx.paths[faces]
    dirs = ctx.dirs[idx]                                          # (K, D, 3, 3)
    rel = points[:, None, :] - ctx.mids[idx]
    hinge = np.empty(idx.shape + (N_KINDS, 3))
    hinge[:, :, :3] = np.cross(dirs, rel[:, :, None, :])
    hinge[:, :, 3:] = dirs
    n_h, n_c = ctx.mesh.shape
    if n_c == 0:
        return idx, hinge, np.zeros((len(points), 3, 0))
    play = np.zeros((n_h + 1, len(points), 3))
    play[idx, np.arange(len(points))[:, None]] = hinge[:, :, 0]   # padding rows collect zeros
    mesh = np.asarray(ctx.mesh.T @ play[:n_h].reshape(n_h, -1)).reshape(n_c, len(points), 3)
    return idx, hinge, mesh.transpose(1, 2, 0)


def _dense(idx, hinge, mesh, n_hinges, sign=1.0, out=None):
    """Scatter `_path_jacobian` output into (K, 3, 6H + C), adding ``sign *`` it to ``out``."""
    k = len(idx)
    if out is None:
        out = np.zeros((k, 3, N_KINDS * n_hinges + mesh.shape[2]))
    full = np.zeros((k, n_hinges + 1, N_KINDS, 3))
    full[np.arange(k)[:, None], idx] = hinge
    out[:, :, :N_KINDS * n_hinges] += sign * full[:, :n_hinges].transpose(0, 3, 1, 2).reshape(k, 3, -1)
    out[:, :, N_KINDS * n_hinges:] += sign * mesh
    return out




@dataclass(frozen=True)
class _Context:
    pose: _Pose
    n_hinges: int
    n_sources: int

    @property
    def poses(self):
        return self.pose.poses


def _context(mech, theta, tree=None, frames=None, paths=None, mesh=None):
    tree = gear_tree(mech) if tree is None else tree
    frames = hinge_frames(mech) if frames is None else frames
    paths = _paths(mech) if paths is None else paths
    mesh = _sparse_backlash(mech, tree) if mesh is None else mesh
    pose = _pose_context(mech, theta, frames, paths, mesh)
    return _Context(pose, mech.n_hinges, N_KINDS * mech.n_hinges + len(mech.couplings))


def _cut_posed(mech, poses):
    """Posed cut-edge endpoints on each side: two (E, 2, 3) arrays."""
    pa = geometry.transform_points(poses[mech.cut_faces[:, 0], None], mech.cut_points[:, 0])
    pb = geometry.transform_points(poses[mech.cut_faces[:, 1], None], mech.cut_points[:, 1])
    return pa, pb


def _edge_path_jacobian(ctx, mech, pa, pb, rows, k):
    """Path form (as `_path_jacobian`) of the difference vectors ``pa - pb`` at endpoint k.

    The two faces' paths share their first hinges (the common ancestors); there the
    two sides' columns are merged, so no hinge is listed twice.

    Returns
    -------
    idx : (e, 2D) int
    hinge : (e, 2D, 6, 3) float
    mesh : (e, 3, C) float
    """
    ia, ja, ma = _path_jacobian(ctx.pose, pa[rows, k], mech.cut_faces[rows, 0])
    ib, jb, mb = _path_jacobian(ctx.pose, pb[rows, k], mech.cut_faces[rows, 1])
    same = ia == ib
    ja = ja - np.where(same[..., None, None], jb, 0.0)
    jb = np.where(same[..., None, None], 0.0, -jb)
    ib = np.where(same, ctx.n_hinges, ib)
    return np.concatenate([ia, ib], axis=1), np.concatenate([ja, jb], axis=1), ma - mb


def _edge_jacobian(ctx, mech, pa, pb, rows):
    """(e, 2, 3, S) Jacobian of the difference vectors of cut edges ``rows``."""
    parts = [_dense(*_edge_path_jacobian(ctx, mech, pa, pb, rows, k), ctx.n_hinges) for k in range(2)]
    return np.stack(parts, axis=1)


def gap_jacobian(mech, theta, tree=None):
    """Jacobian of every cut edge's endpoint difference vectors.

    Parameters
    ----------
    mech : Mechanism
    theta : (H,) float
        Ideal fold angles.
    tree : GearTree, optional

    Returns
    -------
    points : (E, 2, 3) float
        Ideal posed endpoints on the first face of each cut edge (``cut_faces[:, 0]``).
    diff : (E, 2, 3) float
        Ideal difference vectors ``p_a - p_b`` between the copies of each endpoint.
    jac : (E, 2, 3, 6H + C) float
        Their derivatives w.r.t. every source (hinge-major, then couplings).
    """
    ctx = _context(mech, theta, tree)
    pa, pb = _cut_posed(mech, ctx.poses)
    return pa, pa - pb, _edge_jacobian(ctx, mech, pa, pb, slice(None))


def _vertex_table(mech):
    """Every face vertex: (K,) face index and (K, 3) flat position."""
    faces = np.concatenate([np.full(len(p), f) for f, p in enumerate(mech.flat_faces)])
    return faces, np.concatenate(mech.flat_faces)


def vertex_jacobian(mech, theta, tree=None):
    """Jacobian of every posed face vertex.

    Returns
    -------
    points : (K, 3) float
        Posed vertices, faces in order, each face's vertices in order.
    faces : (K,) int
    jac : (K, 3, 6H + C) float
    """
    ctx = _context(mech, theta, tree)
    faces, flat = _vertex_table(mech)
    points = geometry.transform_points(ctx.poses[faces], flat)
    return points, faces, _dense(*_path_jacobian(ctx.pose, points, faces), mech.n_hinges)


def _on_paths(per_hinge, idx):
    """(..., 6) rows of a (H, 6) per-hinge array at path indices ``idx``; zeros at the padding index H."""
    return np.vstack([per_hinge, np.zeros((1, N_KINDS))])[idx]


def _reduce_path(idx, hinge, mesh, spec, sigmas_h, sigmas_m):
    """Per point: worst-case length ``||sum |J| b||`` and RSS length ``sqrt(sum (J s)^2)``.

    Works on the path form of `_path_jacobian`, never building the dense (K, 3, S) array.
    """
    b_h = _on_paths(spec.hinge, idx)   # (K, D, 6)
    s_h = _on_paths(sigmas_h, idx)
    worst = (np.abs(hinge) * b_h[..., None]).sum(axis=(1, 2)) + np.abs(mesh) @ spec.mesh
    var = ((hinge * s_h[..., None]) ** 2).sum(axis=(1, 2, 3)) + ((mesh * sigmas_m) ** 2).sum(axis=(1, 2))
    return np.linalg.norm(worst, axis=-1), np.sqrt(var)


def _edge_shares(idx, hinge, mesh, spec, sigmas_h, sigmas_m):
    """Per-source variance (e, 6H + C) and per-element worst case (e, H + C) from path form."""
    e, n_h = len(idx), spec.hinge.shape[0]
    rows = np.arange(e)[:, None]
    s_h = _on_paths(sigmas_h, idx)
    b_h = _on_paths(spec.hinge, idx)
    var = np.zeros((e, n_h + 1, N_KINDS))
    var[rows, idx] = ((hinge * s_h[..., None]) ** 2).sum(axis=-1)
    bound = np.zeros((e, n_h + 1))
    bound[rows, idx] = np.linalg.norm((np.abs(hinge) * b_h[..., None]).sum(axis=2), axis=-1)
    mesh_var = ((mesh * sigmas_m) ** 2).sum(axis=1)
    mesh_bound = np.linalg.norm(np.abs(mesh) * spec.mesh, axis=1)
    return (np.concatenate([var[:, :n_h].reshape(e, -1), mesh_var], axis=1),
            np.concatenate([bound[:, :n_h], mesh_bound], axis=1))


@dataclass(frozen=True)
class LinearResult:
    """Linearised stack-up at several drive values.

    Attributes
    ----------
    times : (T,) float
    ideal_gaps : (T, E) float
    gap_bound : (T, E) float
        Worst case: ``max_k (|D_k| + ||sum_s |J_ks| b_s||)`` over the endpoints k.
    gap_rss : (T, E) float
        RMS length of the endpoint miss, larger endpoint.
    tip_bound, tip_rss : (T, F) float
        Same for every face's vertices (displacement from the ideal pose).
    variance : (E, 6H + C) float
        At closure (t = 1): each source's share ``sum_c (J s)^2`` of the variance of
        each edge's endpoint with the larger RSS.
    element_bound : (E, H + C) float
        At closure: each hinge's (six sources together) and each mesh's worst-case
        contribution ``||sum_s |J_s| b_s||`` at that endpoint.
    """

    times: np.ndarray
    ideal_gaps: np.ndarray
    gap_bound: np.ndarray
    gap_rss: np.ndarray
    tip_bound: np.ndarray
    tip_rss: np.ndarray
    variance: np.ndarray
    element_bound: np.ndarray



def linear_stackup(mech, spec, times=DEFAULT_TIMES, dist="uniform", schedule=None):
    """Linearised worst case and RSS of every cut edge and every panel.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec
    times : sequence of float
        Drive values; t = 1 (closure) is added when missing.
    dist : {"uniform", "normal"}
        Sets sigma for the RSS (bound / sqrt(3) or bound / 3).
    schedule : Schedule, optional

    Returns
    -------
    LinearResult

    Examples
    --------
    One 10 x 10 panel on a hinge, play ± 0.001 rad: the far edge, 10 from the
    axis, moves at most 0.01.

    >>> from foldsim.model import build_mechanism
    >>> from foldsim.stackup import PlaySpec
    >>> sq = [[0, 0, 0], [10, 0, 0], [10, 10, 0], [0, 10, 0], [20, 0, 0], [20, 10, 0]]
    >>> m = build_mechanism(sq, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat", closed_angles=[1.0])
    >>> spec = PlaySpec(np.array([[0.001, 0, 0, 0, 0, 0]]), np.zeros(0))
    >>> lin = linear_stackup(m, spec, times=(0.0,))
    >>> lin.tip_bound.round(12).tolist()
    [[0.0, 0.01], [0.0, 0.01]]
    """
    times = _times(times)
    schedule = fold_schedule(mech) if schedule is None else schedule
    tree = gear_tree(mech)
    frames, paths, mesh = hinge_frames(mech), _paths(mech), _sparse_backlash(mech, tree)
    bounds, sigmas = spec.bounds, spec.sigmas(dist)
    n_t, n_e, n_h = len(times), len(mech.cut_faces), mech.n_hinges
    sig_h, sig_m = sigmas[:N_KINDS * n_h].reshape(n_h, N_KINDS), sigmas[N_KINDS * n_h:]
    ideal = np.zeros((n_t, n_e))
    gap_bound, gap_rss = np.zeros((n_t, n_e)), np.zeros((n_t, n_e))
    tip_bound, tip_rss = np.zeros((n_t, mech.n_faces)), np.zeros((n_t, mech.n_faces))
    variance = np.zeros((n_e, len(bounds)))
    element = np.zeros((n_e, n_h + len(mech.couplings)))
    closing = _closure_index(times)
    faces, flat = _vertex_table(mech)
    for i, t in enumerate(times):
        ctx = _context(mech, schedule.rates * t, tree, frames, paths, mesh)
        pa, pb = _cut_posed(mech, ctx.poses)
        diff = np.linalg.norm(pa - pb, axis=-1)
        ideal[i] = diff.max(axis=-1, initial=0.0)
        for sl in _chunks(n_e, 512):
            ends = [_edge_path_jacobian(ctx, mech, pa, pb, sl, k) for k in range(2)]
            reduced = [_reduce_path(*e, spec, sig_h, sig_m) for e in ends]
            worst = np.stack([r[0] for r in reduced], axis=1)
            rss = np.stack([r[1] for r in reduced], axis=1)
            gap_bound[i, sl] = (diff[sl] + worst).max(axis=1)
            gap_rss[i, sl] = rss.max(axis=1)
            if i == closing:
                pick = np.argmax(rss, axis=1)
                for k, (idx, hinge, mesh_jac) in enumerate(ends):
                    on = np.flatnonzero(pick == k)
                    if len(on):
                        var_rows, elem_rows = _edge_shares(idx[on], hinge[on], mesh_jac[on], spec,
                                                           sig_h, sig_m)
                        variance[sl][on] = var_rows
                        element[sl][on] = elem_rows
        points = geometry.transform_points(ctx.poses[faces], flat)
        worst_v, rss_v = np.zeros(len(points)), np.zeros(len(points))
        for sl in _chunks(len(points), 4096):
            jac_path = _path_jacobian(ctx.pose, points[sl], faces[sl])
            worst_v[sl], rss_v[sl] = _reduce_path(*jac_path, spec, sig_h, sig_m)
        np.maximum.at(tip_bound[i], faces, worst_v)
        np.maximum.at(tip_rss[i], faces, rss_v)
    return LinearResult(times, ideal, gap_bound, gap_rss, tip_bound, tip_rss, variance, element)

