"""Writing a recording's files: MP4 and GIF writers over PyAV, the GIF palette, atomic targets.

Every file is written beside its target under a temporary name (`_AtomicTarget`)
and renamed into place when complete. The MP4 writer encodes H.264 in yuv420p
with BT.709 colour; the GIF writer maps every frame onto one palette for the
whole clip (`choose_palette`, by median cut) and loops forever.
"""

import contextlib
import math
import os
import tempfile
from fractions import Fraction
from pathlib import Path

import numpy as np

from ...errors import FoldsimError
from ...io.mechanism_json import share_like_target

GIF_CELL_BITS = 5
"""Bits per channel of the colour grid the GIF palette is chosen and looked up on."""


def check_target(path):
    """Refuse a target whose folder does not exist (one-line FoldsimError)."""
    parent = Path(path).parent
    if not parent.is_dir():
        raise FoldsimError(f"{path}: cannot write file: folder {parent} does not exist")


class _AtomicTarget:
    """A temporary file beside ``target``, renamed onto it by `commit`, else removed."""

    def __init__(self, target):
        self.target = Path(target)
        check_target(self.target)
        try:
            fd, name = tempfile.mkstemp(dir=self.target.parent, prefix=f".{self.target.name}.", suffix=".part")
        except OSError as exc:
            raise FoldsimError(f"{self.target}: cannot write file: {exc.strerror or exc}") from None
        os.close(fd)
        self.path = Path(name)

    def commit(self):
        share_like_target(self.path, self.target)
        try:
            os.replace(self.path, self.target)
        except OSError as exc:
            self.discard()
            raise FoldsimError(f"{self.target}: cannot write file: {exc.strerror or exc}") from None

    def discard(self):
        try:
            self.path.unlink()
        except FileNotFoundError:
            pass


def _av():
    try:
        import av
    except ImportError:
        raise FoldsimError("recording MP4 and GIF needs PyAV (pip install av)") from None
    return av


class _AvWriter:
    """Frames encoded into one video stream of a PyAV container, muxed as they come.

    A subclass opens the container and its stream and turns each RGBA frame into
    a `VideoFrame` for `_encode`.
    """

    def __init__(self, container, stream):
        self.container = container
        self.stream = stream
        self.frames = 0

    def _encode(self, frame):
        """Stamp a frame with the next frame number as its time, encode it and mux its packets."""
        frame.pts = self.frames
        self.frames += 1
        self._mux(self.stream.encode(frame))

    def _mux(self, packets):
        for packet in packets:
            self.container.mux(packet)

    def close(self):
        """Flush the encoder and finish the file."""
        self._mux(self.stream.encode())
        self.container.close()

    def abort(self):
        """Close the container after a failure, ignoring FFmpeg's and the OS's errors: the file is removed anyway."""
        with contextlib.suppress(_av().error.FFmpegError, OSError):
            self.container.close()


class _Mp4Writer(_AvWriter):
    """H.264 (libx264), yuv420p with BT.709 colour, in an MP4 with the index up front."""

    def __init__(self, path, size, fps):
        av = _av()
        from av.video.reformatter import ColorRange, Colorspace

        self._space, self._range, self._full = Colorspace.ITU709, ColorRange.MPEG, ColorRange.JPEG
        container = av.open(str(path), mode="w", format="mp4", container_options={"movflags": "+faststart"})
        codec = "libx264" if "libx264" in av.codecs_available else "h264"
        stream = container.add_stream(codec, rate=int(fps))
        stream.width, stream.height = size
        stream.pix_fmt = "yuv420p"
        stream.options = {"crf": "18", "preset": "medium", "tune": "animation"}
        ctx = stream.codec_context
        ctx.colorspace = ctx.color_primaries = ctx.color_trc = 1  # BT.709
        ctx.color_range = 1  # limited (MPEG) range
        super().__init__(container, stream)

    def write(self, rgba):
        from av.video.frame import VideoFrame

        frame = VideoFrame.from_ndarray(np.ascontiguousarray(rgba[..., :3]), format="rgb24")
        frame = frame.reformat(format="yuv420p", src_colorspace=self._space, dst_colorspace=self._space,
                               src_color_range=self._full, dst_color_range=self._range,
                               dst_color_trc=1, dst_color_primaries=1)
        self._encode(frame)


def _cells(rgb):
    """Index of every pixel's cell on the palette grid (`GIF_CELL_BITS` per channel)."""
    shift = 8 - GIF_CELL_BITS
    q = (np.asarray(rgb, dtype=np.uint32) >> shift).reshape(-1, 3)
    return (q[:, 0] << (2 * GIF_CELL_BITS)) | (q[:, 1] << GIF_CELL_BITS) | q[:, 2]


def choose_palette(frames, colours=256):
    """A palette for a set of frames by median cut over their pixels.

    Parameters
    ----------
    frames : sequence of (h, w, 3 or 4) uint8
    colours : int

    Returns
    -------
    (k, 3) uint8
        At most ``colours`` colours, each the mean of the pixels it stands for.

    Examples
    --------
    >>> f = np.zeros((2, 2, 3), np.uint8); f[0, 0] = (200, 10, 10); f[1, 1] = (10, 10, 200)
    >>> sorted(map(tuple, choose_palette([f]).tolist()))
    [(0, 0, 0), (10, 10, 200), (200, 10, 10)]
    """
    n_cells = 1 << (3 * GIF_CELL_BITS)
    counts = np.zeros(n_cells)
    sums = np.zeros((n_cells, 3))
    for frame in frames:
        rgb = np.asarray(frame)[..., :3].reshape(-1, 3).astype(float)
        cells = _cells(rgb)
        counts += np.bincount(cells, minlength=n_cells)
        for k in range(3):
            sums[:, k] += np.bincount(cells, weights=rgb[:, k], minlength=n_cells)
    used = np.flatnonzero(counts)
    weight = counts[used]
    mean = sums[used] / weight[:, None]
    boxes = [np.arange(len(used))]
    while len(boxes) < colours:
        # Split the box whose colours spread widest, weighted gently by how many
        # pixels it holds, so small but distinct marks (a red dot, a yellow line)
        # keep their own colours.
        scores = [np.ptp(mean[b], axis=0).max() * math.log2(2 + weight[b].sum()) if len(b) > 1 else -1
                  for b in boxes]
        k = int(np.argmax(scores))
        if scores[k] <= 0:
            break
        box = boxes.pop(k)
        axis = int(np.argmax(np.ptp(mean[box], axis=0)))
        order = box[np.argsort(mean[box, axis], kind="stable")]
        cum = np.cumsum(weight[order])
        cut = int(np.searchsorted(cum, cum[-1] / 2))
        cut = min(max(cut, 1), len(order) - 1)
        boxes += [order[:cut], order[cut:]]
    pal = [np.average(mean[b], axis=0, weights=weight[b]) for b in boxes]
    return np.clip(np.round(pal), 0, 255).astype(np.uint8)


def palette_lookup(pal):
    """For every cell of the palette grid, the index of the nearest palette colour."""
    n = 1 << GIF_CELL_BITS
    step = 1 << (8 - GIF_CELL_BITS)
    axis = np.arange(n) * step + step / 2 - 0.5
    grid = np.stack(np.meshgrid(axis, axis, axis, indexing="ij"), axis=-1).reshape(-1, 3)
    pal = pal.astype(float)
    out = np.empty(len(grid), np.uint8)
    for start in range(0, len(grid), 4096):
        part = grid[start:start + 4096]
        d = ((part[:, None, :] - pal[None, :, :]) ** 2).sum(axis=-1)
        out[start:start + 4096] = np.argmin(d, axis=1)
    # A cell holding a palette colour exactly maps to that colour, not to a neighbour.
    out[_cells(pal.astype(np.uint8))] = np.arange(len(pal), dtype=np.uint8)
    return out


class _GifWriter(_AvWriter):
    """An animated GIF looping forever, one palette for all frames (set by `set_palette`)."""

    def __init__(self, path, size, fps):
        av = _av()
        container = av.open(str(path), mode="w", format="gif", container_options={"loop": "0"})
        stream = container.add_stream("gif", rate=int(fps))
        stream.width, stream.height = size
        stream.pix_fmt = "pal8"
        super().__init__(container, stream)
        self.fps = int(fps)
        self.argb = None
        self.lookup = None

    def set_palette(self, pal):
        argb = np.zeros((256, 4), np.uint8)
        argb[:, 0] = 255
        argb[:len(pal), 1:] = pal
        self.argb = argb
        self.lookup = palette_lookup(pal)

    def write(self, rgba):
        from av.video.frame import VideoFrame

        h, w = rgba.shape[:2]
        index = self.lookup[_cells(rgba[..., :3])].reshape(h, w)
        frame = VideoFrame.from_ndarray((np.ascontiguousarray(index), self.argb), format="pal8")
        # The muxer counts in hundredths of a second: rounding each frame's time
        # (not its delay) keeps the clip's length at frame rates like 30.
        frame.time_base = Fraction(1, self.fps)
        self._encode(frame)


_WRITERS = {"mp4": _Mp4Writer, "gif": _GifWriter}
