"""Sampled builds: error draws, exactly perturbed poses, and the Monte Carlo over many samples."""

from dataclasses import dataclass

import numpy as np

from .. import geometry
from ..analysis.closure import cut_edge_gaps
from ..errors import ModelError
from ..gearing import fold_schedule
from ..kinematics import face_poses
from .inputs import DEFAULT_SAMPLES, DEFAULT_TIMES, N_KINDS, _check_dist, _chunks, _times
from .sources import gear_tree, hinge_frames, transmitted_errors

# ---------------------------------------------------------------- draws and poses


@dataclass(frozen=True)
class Errors:
    """Drawn error values, one row per sample.

    Attributes
    ----------
    hinge : (N, H, 6) float
        Value of each kind of `KINDS` at each hinge.
    mesh : (N, C) float
        Backlash angle at each coupling's driven gear.
    """

    hinge: np.ndarray
    mesh: np.ndarray

    def __len__(self):
        return self.hinge.shape[0]


def draw_errors(spec, n, rng, dist="uniform"):
    """Draw n samples of every source.

    The draws come from one ``(n, 6H + C)`` block of the generator, so drawing
    samples in chunks gives the same values as drawing them at once.

    Parameters
    ----------
    spec : PlaySpec
    n : int
    rng : numpy.random.Generator
    dist : {"uniform", "normal"}
        Uniform within ± bound, or normal with sigma = bound / 3.

    Returns
    -------
    Errors
    """
    _check_dist(dist)
    bounds = spec.bounds
    if dist == "uniform":
        values = rng.uniform(-1.0, 1.0, (n, len(bounds))) * bounds
    else:
        values = rng.standard_normal((n, len(bounds))) * (bounds / 3.0)
    n_h = spec.hinge.shape[0]
    return Errors(values[:, :N_KINDS * n_h].reshape(n, n_h, N_KINDS), values[:, N_KINDS * n_h:])


def _skew(v):
    """(..., 3, 3) cross-product matrices of vectors (..., 3)."""
    k = np.zeros(v.shape[:-1] + (3, 3))
    k[..., 0, 1], k[..., 0, 2] = -v[..., 2], v[..., 1]
    k[..., 1, 0], k[..., 1, 2] = v[..., 2], -v[..., 0]
    k[..., 2, 0], k[..., 2, 1] = -v[..., 1], v[..., 0]
    return k


def _rotvec_matrices(v):
    """(..., 3, 3) rotation matrices of rotation vectors (..., 3), exact for any size.

    Examples
    --------
    >>> np.round(_rotvec_matrices(np.array([0.0, 0.0, np.pi / 2])) @ [1.0, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    theta2 = (v**2).sum(axis=-1)[..., None, None]
    theta = np.sqrt(theta2)
    a = np.sinc(theta / np.pi)                       # sin(theta) / theta
    b = 0.5 * np.sinc(theta / (2.0 * np.pi)) ** 2     # (1 - cos(theta)) / theta**2
    outer = v[..., :, None] * v[..., None, :]
    return np.eye(3) + a * _skew(v) + b * (outer - theta2 * np.eye(3))


def _hinge_generators(mech):
    """(H, 4, 4) pair ``A, B`` with ``rotation about hinge line by phi = I + sin(phi) A + (1 - cos(phi)) B``."""
    a = mech.axes[:, 0]
    u = geometry.unit(mech.axes[:, 1] - a)
    k = _skew(u)
    q = u[:, :, None] * u[:, None, :] - np.eye(3)
    gen_a = np.zeros((mech.n_hinges, 4, 4))
    gen_b = np.zeros((mech.n_hinges, 4, 4))
    gen_a[:, :3, :3], gen_a[:, :3, 3] = k, -np.einsum("hij,hj->hi", k, a)
    gen_b[:, :3, :3], gen_b[:, :3, 3] = q, -np.einsum("hij,hj->hi", q, a)
    return gen_a, gen_b


def _offsets(mech, errors, frames):
    """(N, H, 4, 4) extra rigid motion of each hinge, in the parent's flat frame, or None if all zero."""
    dirs, mids = frames
    e = errors.hinge
    if not e[..., 1:].any():
        return None
    rotvec = e[..., 1, None] * dirs[None, :, 1] + e[..., 2, None] * dirs[None, :, 2]
    shift = (e[..., 3, None] * dirs[None, :, 0] + e[..., 4, None] * dirs[None, :, 1]
             + e[..., 5, None] * dirs[None, :, 2])
    rot = _rotvec_matrices(rotvec)
    out = np.zeros(e.shape[:2] + (4, 4))
    out[..., :3, :3] = rot
    out[..., :3, 3] = mids - (rot @ mids[..., None])[..., 0] + shift
    out[..., 3, 3] = 1.0
    return out


def perturbed_poses(mech, angles, errors, tree=None, frames=None, stops=None):
    """Face poses of every sample at every set of ideal fold angles.

    Each hinge's transform becomes ``E @ R(theta + e)``: ``R`` the rotation about
    the hinge line by the ideal angle plus the hinge's play and the error its gears
    pass on, ``E`` the small rigid motion of its tilts and slides about the hinge
    midpoint. The tree is walked one depth level at a time for all samples at once.

    Parameters
    ----------
    mech : Mechanism
    angles : (T, H) float
        Ideal fold angles, radians.
    errors : Errors
        N samples.
    tree : GearTree, optional
    frames : tuple, optional
        `hinge_frames(mech)`.
    stops : (H,) float, optional
        Stop angles (`PlaySpec.stops`): a hinge's error never takes it past its stop.

    Returns
    -------
    (N, T, F, 4, 4) float

    Examples
    --------
    Zero errors give the ideal poses (to round-off); play of 0.1 rad adds to the angle:

    >>> from foldsim.model import build_mechanism
    >>> sq = [[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]]
    >>> m = build_mechanism(sq, [[0, 1, 2, 3], [1, 4, 5, 2]], [[0, 1]], state="flat", closed_angles=[1.0])
    >>> zero = Errors(np.zeros((2, 1, 6)), np.zeros((2, 0)))
    >>> np.allclose(perturbed_poses(m, [[0.7]], zero), face_poses(m, np.array([[0.7]])), rtol=0, atol=1e-15)
    True
    >>> play = Errors(np.array([[[0.1, 0, 0, 0, 0, 0]]]), np.zeros((1, 0)))
    >>> np.allclose(perturbed_poses(m, [[0.7]], play)[0], face_poses(m, np.array([[0.8]])))
    True
    """
    angles = np.atleast_2d(np.asarray(angles, dtype=float))
    out = np.empty((len(errors), len(angles), mech.n_faces, 4, 4))
    for i, poses in enumerate(_pose_batches(mech, angles, errors, tree, frames, stops)):
        out[:, i] = poses
    return out


def stopped_errors(theta, eps, stops):
    """Angle errors cut where they would take a hinge past its stop (a one-sided bound).

    Parameters
    ----------
    theta : (H,) float
        Ideal fold angles.
    eps : (N, H) float
        Angle errors of N samples.
    stops : (H,) float or None

    Returns
    -------
    (N, H) float

    Examples
    --------
    A hinge at 1.0 rad with its stop at 1.0 keeps only the errors toward less fold:

    >>> stopped_errors(np.array([1.0]), np.array([[0.1], [-0.1]]), np.array([1.0])).tolist()
    [[0.0], [-0.1]]
    """
    if stops is None:
        return eps
    side = np.where(stops >= 0, 1.0, -1.0)
    room = np.maximum(side * (stops - theta), 0.0)
    return side * np.minimum(side * eps, room)


def _pose_batches(mech, angles, errors, tree=None, frames=None, stops=None):
    """Yield the (N, F, 4, 4) perturbed poses at each row of angles (T, H) in turn."""
    tree = gear_tree(mech) if tree is None else tree
    frames = hinge_frames(mech) if frames is None else frames
    gen_a, gen_b = _hinge_generators(mech)
    eps = errors.hinge[..., 0] + transmitted_errors(tree, errors.mesh, mech.n_hinges)
    offsets = _offsets(mech, errors, frames)
    for theta in angles:
        phi = theta[None] + stopped_errors(theta, eps, stops)
        local = (np.eye(4) + np.sin(phi)[..., None, None] * gen_a
                 + (2.0 * np.sin(0.5 * phi) ** 2)[..., None, None] * gen_b)
        if offsets is not None:
            local = offsets @ local
        poses = np.empty((len(errors), mech.n_faces, 4, 4))
        poses[:, mech.root] = np.eye(4)
        for level in mech.levels:
            poses[:, mech.child[level]] = poses[:, mech.parent[level]] @ local[:, level]
        yield poses


def _padded_faces(mech):
    """(F, k_max, 3) flat vertices of every face, short faces padded with their first vertex."""
    k_max = max(len(f) for f in mech.flat_faces)
    out = np.empty((mech.n_faces, k_max, 3))
    for f, pts in enumerate(mech.flat_faces):
        out[f, :len(pts)] = pts
        out[f, len(pts):] = pts[0]
    return out


def tip_deviations(poses, ideal, padded):
    """Largest vertex displacement of every face from its ideal pose.

    Parameters
    ----------
    poses : (..., F, 4, 4) float
    ideal : (F, 4, 4) float
    padded : (F, k, 3) float
        From `_padded_faces`.

    Returns
    -------
    (..., F) float
    """
    delta = poses - ideal
    moved = delta[..., :3, :3] @ padded.transpose(0, 2, 1) + delta[..., :3, 3, None]   # (..., F, 3, k)
    return np.sqrt((moved**2).sum(axis=-2)).max(axis=-1)


# ---------------------------------------------------------------- Monte Carlo


@dataclass(frozen=True)
class MonteCarloResult:
    """Sampled stack-up at several drive values.

    Attributes
    ----------
    times : (T,) float
    samples : int
    seed : int or None
    dist : str
    ideal_gaps : (T, E) float
    gap_median, gap_p95, gap_max, gap_rms : (T, E) float
        Statistics of each cut edge's gap over the samples.
    tip_median, tip_p95, tip_max, tip_rms : (T, F) float
        Statistics of each face's largest vertex displacement from its ideal pose.
    gaps : (N, T, E) float or None
        Every sample's gaps (with ``keep=True``).
    tips : (N, T, F) float or None
    """

    times: np.ndarray
    samples: int
    seed: object
    dist: str
    ideal_gaps: np.ndarray
    gap_median: np.ndarray
    gap_p95: np.ndarray
    gap_max: np.ndarray
    gap_rms: np.ndarray
    tip_median: np.ndarray
    tip_p95: np.ndarray
    tip_max: np.ndarray
    tip_rms: np.ndarray
    gaps: object = None
    tips: object = None


def _chunk_size(mech, n_times=1, budget=8e6):
    """Samples per chunk: about ``budget`` bytes of (samples, faces, 4, 4) poses (small batches stay in cache)."""
    return max(1, int(budget // (128 * max(mech.n_faces, mech.n_hinges) * max(1, n_times))))


def _stats(values):
    """median, 95th percentile, max, RMS over axis 0 of (N, ...) values."""
    median, p95 = np.quantile(values, [0.5, 0.95], axis=0)
    return median, p95, values.max(axis=0), np.sqrt((values**2).mean(axis=0))


def monte_carlo(mech, spec, samples=DEFAULT_SAMPLES, seed=0, dist="uniform", times=DEFAULT_TIMES,
                chunk=None, keep=False, schedule=None, progress=None):
    """Sample the built mechanism many times and measure gaps and panel deviations.

    Parameters
    ----------
    mech : Mechanism
    spec : PlaySpec
    samples : int
    seed : int or numpy.random.SeedSequence
        Seeds ``numpy.random.default_rng``; the same seed gives the same samples at
        every drive value and for every chunk size.
    dist : {"uniform", "normal"}
    times : sequence of float
        Drive values; t = 1 is added when missing.
    chunk : int, optional
        Samples per batch (default: about 8 MB of poses).
    keep : bool
        Return every sample's gaps and deviations too.
    schedule : Schedule, optional
    progress : callable, optional
        Called as ``progress(done, samples)`` after each chunk; it may raise to
        abandon the run (the exception reaches the caller).

    Returns
    -------
    MonteCarloResult

    Notes
    -----
    The percentiles need every sample, so ``samples * T * (E + F)`` floats are held
    (10,000 samples of a 1,280-panel model at one t: about 150 MB).
    """
    _check_dist(dist)
    for value, name in ((samples, "samples"), (1 if chunk is None else chunk, "chunk")):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
            raise ModelError(f"{name}: must be a positive integer, not {value!r}")
    times = _times(times)
    schedule = fold_schedule(mech) if schedule is None else schedule
    tree, frames = gear_tree(mech), hinge_frames(mech)
    chunk = _chunk_size(mech) if chunk is None else int(chunk)
    padded = _padded_faces(mech)
    angles = schedule.rates[None] * times[:, None]
    ideal_poses = face_poses(mech, angles)
    ideal_gaps = cut_edge_gaps(mech, ideal_poses)
    n_e, n_f = len(mech.cut_faces), mech.n_faces
    gaps = np.empty((samples, len(times), n_e))
    tips = np.empty((samples, len(times), n_f))
    rng = np.random.default_rng(seed)
    for sl in _chunks(samples, chunk):
        errors = draw_errors(spec, sl.stop - sl.start, rng, dist)
        for i, poses in enumerate(_pose_batches(mech, angles, errors, tree, frames, spec.stops)):
            gaps[sl, i] = cut_edge_gaps(mech, poses)
            tips[sl, i] = tip_deviations(poses, ideal_poses[i], padded)
        if progress is not None:
            progress(sl.stop, samples)
    g = [s.reshape(len(times), n_e) for s in _stats(gaps)]
    p = [s.reshape(len(times), n_f) for s in _stats(tips)]
    return MonteCarloResult(times, int(samples), seed, dist, ideal_gaps, *g, *p,
                            gaps if keep else None, tips if keep else None)
