"""Can a window be opened? A quick probe of the display, before any work (``bladesolid view``).

A ``DISPLAY`` that is set but does not answer (a closed SSH tunnel, a stopped X server, a
remote host that drops packets) would otherwise let the renderer try, print its own warnings
and return without showing anything, or hang. :func:`display_problem` connects to the X server
(a Unix socket for ``:N``, TCP port 6000 + N for ``host:N`` — the X Window System protocol's
conventions, from memory) with a short timeout, and then, where Xlib is installed, opens the
display as the renderer would (authorisation included), on a thread it does not wait for
longer than the timeout. A Wayland-only session is probed by its socket.
"""

from __future__ import annotations

import os
import re
import socket
import sys
import threading

__all__ = ["PROBE_TIMEOUT_S", "display_problem"]

#: How long the probe waits for the display to answer, seconds.
PROBE_TIMEOUT_S = 2.0


def display_problem(timeout_s: float = PROBE_TIMEOUT_S, environ=None) -> str | None:
    """None when an interactive window can be opened; else why not, in words (one line).

    environ : the environment to read ``DISPLAY`` / ``WAYLAND_DISPLAY`` from (default: this
    process's).

    >>> display_problem(environ={})
    'no display to open a window on (DISPLAY is not set)'
    """
    env = os.environ if environ is None else environ
    disp = env.get("DISPLAY", "")
    if disp:
        return _x_problem(disp, timeout_s)
    way = env.get("WAYLAND_DISPLAY", "")
    if way:
        path = way if os.path.isabs(way) else os.path.join(env.get("XDG_RUNTIME_DIR", "/run/user/%d" % os.getuid()), way)
        if _connect(socket.AF_UNIX, path, timeout_s) is not None:
            return f"the Wayland display {way} does not answer"
        return None
    return "no display to open a window on (DISPLAY is not set)"


def _connect(family, address, timeout_s: float) -> str | None:
    """None when a stream connection to ``address`` succeeds within the timeout, else why not."""
    try:
        if family == socket.AF_UNIX:
            s = socket.socket(family, socket.SOCK_STREAM)
            s.settimeout(timeout_s)
            try:
                s.connect(address)
            finally:
                s.close()
        else:
            socket.create_connection(address, timeout=timeout_s).close()
    except (OSError, socket.timeout) as exc:
        if isinstance(exc, socket.timeout):
            return f"no reply within {timeout_s:g} s"
        return (getattr(exc, "strerror", None) or str(exc) or type(exc).__name__).lower()
    return None


def _x_address(disp: str):
    """(family, address) of the X server of ``DISPLAY``, or None when it cannot be parsed."""
    if os.path.exists(disp.rsplit(".", 1)[0]) and "/" in disp:  # a socket path (XQuartz)
        return socket.AF_UNIX, disp.rsplit(".", 1)[0]
    m = re.fullmatch(r"(?:([^/]*)/)?(.*):(\d+)(?:\.\d+)?", disp)
    if not m:
        return None
    host, number = m.group(2), int(m.group(3))
    if host in ("", "unix") and hasattr(socket, "AF_UNIX"):
        path = f"/tmp/.X11-unix/X{number}"
        if sys.platform.startswith("linux") and not os.path.exists(path):
            return socket.AF_UNIX, "\0" + path  # the abstract socket of the same name
        return socket.AF_UNIX, path
    return socket.AF_INET, (host.strip("[]") or "localhost", 6000 + number)


def _x_problem(disp: str, timeout_s: float) -> str | None:
    where = _x_address(disp)
    if where is None:
        return f"DISPLAY={disp!r} is not a display name (expected e.g. :0 or host:10.0)"
    problem = _connect(*where, timeout_s)
    if problem is not None:
        return f"the display {disp} does not answer ({problem})"
    return _xlib_problem(disp, timeout_s)


def _xlib_problem(disp: str, timeout_s: float) -> str | None:
    """Open and close the display with Xlib (when installed) on a thread, within the timeout."""
    import ctypes
    import ctypes.util

    name = ctypes.util.find_library("X11")
    if not name:
        return None  # the server answered; nothing more to learn without Xlib
    try:
        x11 = ctypes.CDLL(name)
        x11.XOpenDisplay.restype = ctypes.c_void_p
        x11.XOpenDisplay.argtypes = [ctypes.c_char_p]
        x11.XCloseDisplay.argtypes = [ctypes.c_void_p]
    except (OSError, AttributeError):
        return None
    result = {}

    def probe():
        handle = x11.XOpenDisplay(disp.encode())
        result["open"] = bool(handle)
        if handle:
            x11.XCloseDisplay(handle)

    t = threading.Thread(target=probe, name="bladesolid-display-probe", daemon=True)
    t.start()
    t.join(timeout_s)
    if t.is_alive():
        return f"the display {disp} does not answer (no reply within {timeout_s:g} s)"
    if not result.get("open"):
        return f"the display {disp} refused the connection (not authorised?)"
    return None
