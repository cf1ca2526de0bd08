"""An X display for drawing when there is none: a virtual X server (Xvfb).

The 3D view draws with OpenGL, and on Linux Qt can only create a GL context on a
real display server; its ``offscreen`` platform cannot. A recording started on a
machine without a desktop (a build server, an SSH session) therefore starts
``Xvfb`` on a free display number, points ``DISPLAY`` at it for this process and
stops it when the process ends. Under Xvfb, Mesa's software renderer (llvmpipe)
draws real GL.

Nothing here imports Qt: the display must exist before the Qt application does.
"""

import atexit
import os
import select
import shutil
import signal
import subprocess
import sys
import tempfile
import time

from ...errors import FoldsimError

SCREEN = "1920x1080x24"
"""Size and depth of the virtual screen (width x height x bits per pixel)."""

START_TIMEOUT = 15.0
"""Seconds to wait for the virtual server to say it is ready before giving up."""

STOP_TIMEOUT = 5.0
"""Seconds to wait for the virtual server to exit after being asked to."""

SYSTEM_PACKAGES = (
    "xvfb", "xauth", "libgl1", "libglx-mesa0", "libgl1-mesa-dri", "libegl1", "libfontconfig1",
    "libdbus-1-3", "libglib2.0-0", "libxkbcommon-x11-0", "libx11-xcb1", "libxcb-cursor0",
    "libxcb-icccm4", "libxcb-image0", "libxcb-keysyms1", "libxcb-randr0", "libxcb-render-util0",
    "libxcb-shape0", "libxcb-xkb1", "libxcb-glx0",
)
"""Debian/Ubuntu packages for drawing without a desktop (the README's list)."""

INSTALL_HINT = "sudo apt-get install " + " ".join(SYSTEM_PACKAGES)
"""The command a user is told to run when Xvfb is missing."""

GL_PLATFORMS_REFUSED = ("offscreen", "minimal")
"""Qt platforms that cannot create a GL context; recording ignores them."""


class VirtualDisplay:
    """One Xvfb server started by this process.

    Parameters
    ----------
    screen : str
        ``WIDTHxHEIGHTxDEPTH`` of screen 0.
    executable : str
        The server's program, looked up on PATH unless it is a path.
    timeout : float
        Seconds to wait for the server to be ready.

    Attributes
    ----------
    display : str or None
        ``":N"`` once started.

    Examples
    --------
    >>> VirtualDisplay(executable="no-such-x-server").start()
    Traceback (most recent call last):
    ...
    foldsim.errors.FoldsimError: no display to draw on: DISPLAY is not set and no-such-x-server ...
    """

    def __init__(self, screen=SCREEN, executable="Xvfb", timeout=START_TIMEOUT):
        self.screen = screen
        self.executable = executable
        self.timeout = float(timeout)
        self.display = None
        self._process = None

    def command(self, fd):
        """The server's command line, telling it to write its display number to ``fd``."""
        return [self.executable, "-displayfd", str(fd), "-screen", "0", self.screen, "-nolisten", "tcp",
                "-noreset"]

    def start(self):
        """Start the server on a free display number and wait until it accepts clients.

        Returns
        -------
        str
            The display name, e.g. ``":3"``.

        Raises
        ------
        FoldsimError
            The server is not installed, exits at once, or is not ready within
            ``timeout`` seconds (it is killed then).
        """
        program = shutil.which(self.executable)
        if program is None:
            raise FoldsimError(f"no display to draw on: DISPLAY is not set and {self.executable} (a virtual X "
                               f"server) is not installed; install it with: {INSTALL_HINT}")
        read_fd, write_fd = os.pipe()
        log = tempfile.TemporaryFile()
        try:
            self._process = subprocess.Popen(
                [program, *self.command(write_fd)[1:]], stdin=subprocess.DEVNULL, stdout=log, stderr=log,
                pass_fds=(write_fd,), preexec_fn=_die_with_parent, close_fds=True)
        except OSError as exc:
            os.close(read_fd)
            os.close(write_fd)
            log.close()
            raise FoldsimError(f"cannot start {program}: {exc.strerror or exc}") from None
        os.close(write_fd)
        try:
            number = self._read_number(read_fd)
        except FoldsimError:
            self.stop()
            raise FoldsimError(f"{self.executable} did not start{_last_line(log)}") from None
        finally:
            os.close(read_fd)
            log.close()
        self.display = f":{number}"
        return self.display

    def _read_number(self, fd):
        """Read the display number the server writes when ready; FoldsimError on exit or timeout."""
        deadline = time.monotonic() + self.timeout
        text = b""
        while b"\n" not in text:
            left = deadline - time.monotonic()
            if left <= 0:
                raise FoldsimError("timed out")
            ready, _, _ = select.select([fd], [], [], min(left, 0.25))
            if ready:
                chunk = os.read(fd, 64)
                if not chunk:
                    raise FoldsimError("exited")
                text += chunk
            elif self._process.poll() is not None:
                raise FoldsimError("exited")
        try:
            return int(text.split(b"\n")[0])
        except ValueError:
            raise FoldsimError(f"wrote {text!r} for its display number") from None

    def running(self):
        """Whether the server process is alive."""
        return self._process is not None and self._process.poll() is None

    def stop(self):
        """Stop the server (terminate, then kill if it lingers); a no-op if not running."""
        process, self._process = self._process, None
        if process is None:
            return
        if process.poll() is None:
            process.terminate()
            try:
                process.wait(STOP_TIMEOUT)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait(STOP_TIMEOUT)

    def __enter__(self):
        self.start()
        return self

    def __exit__(self, *exc):
        self.stop()


def _die_with_parent():
    """In the child before exec: have the kernel end it if this process dies (Linux)."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGTERM))  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass


def _last_line(log):
    """``": <last line of the server's output>"``, or "" if it said nothing."""
    log.seek(0)
    lines = [line.strip() for line in log.read().decode("utf-8", "replace").splitlines() if line.strip()]
    return f": {lines[-1]}" if lines else ""


def needs_display(environ=None, platform=None):
    """Whether drawing with GL here needs a display server that is not there.

    Parameters
    ----------
    environ : mapping, optional
        Default ``os.environ``.
    platform : str, optional
        Default ``sys.platform``.

    Examples
    --------
    >>> needs_display({}, "linux"), needs_display({"DISPLAY": ":0"}, "linux"), needs_display({}, "darwin")
    (True, False, False)
    >>> needs_display({"WAYLAND_DISPLAY": "wayland-0"}, "linux")
    False
    """
    environ = os.environ if environ is None else environ
    platform = sys.platform if platform is None else platform
    if not platform.startswith("linux"):
        return False
    return not (environ.get("DISPLAY") or environ.get("WAYLAND_DISPLAY"))


_started = None


def ensure_display(executable="Xvfb", timeout=START_TIMEOUT):
    """Make sure this process can draw GL: start Xvfb and set DISPLAY if there is no display.

    Call it before the Qt application is made. On Linux without DISPLAY (or
    WAYLAND_DISPLAY) it starts a virtual X server on a free display number, sets
    ``DISPLAY`` and ``QT_QPA_PLATFORM=xcb`` for this process and registers its
    stop at exit. A ``QT_QPA_PLATFORM`` of ``offscreen`` or ``minimal`` is dropped,
    since those platforms cannot create a GL context. Elsewhere, or with a
    display already there, it changes nothing.

    Parameters
    ----------
    executable : str
        The virtual X server's program.
    timeout : float
        Seconds to wait for it to start.

    Returns
    -------
    VirtualDisplay or None
        The server started, or None if none was needed.

    Raises
    ------
    FoldsimError
        Xvfb is needed but missing (the message says what to install), or does
        not start in time.
    """
    global _started
    if os.environ.get("QT_QPA_PLATFORM", "").split(":")[0] in GL_PLATFORMS_REFUSED:
        del os.environ["QT_QPA_PLATFORM"]
    if _started is not None and _started.running():
        return _started
    if not needs_display():
        return None
    server = VirtualDisplay(executable=executable, timeout=timeout)
    os.environ["DISPLAY"] = server.start()
    os.environ["QT_QPA_PLATFORM"] = "xcb"
    atexit.register(server.stop)
    _started = server
    return server
