"""The last lines of defence: Ctrl-C during native code, and errors nobody foresaw.

``InterruptWatch``: Python turns Ctrl-C into KeyboardInterrupt only between bytecodes, so a
search inside the CP-SAT solver (native code, the interpreter lock released) would finish its
whole time limit first. A watcher thread wakes on the signal itself (``signal.set_wakeup_fd``)
and, if the main thread has not ended within a short grace period, reports "interrupted" and
ends the process with exit 130 without printing any result.

``crash_report``: an exception that escaped every handler is written, with its traceback, to
a crash log in the user's state directory (or the temporary directory); the user sees one
line with the log's path.
"""

from __future__ import annotations

import contextlib
import os
import platform
import signal
import socket
import sys
import tempfile
import threading
import time
import traceback
from collections.abc import Iterator
from pathlib import Path

from tristock import __version__
from tristock.cli.exits import INTERRUPTED
from tristock.cli.output import complain

#: Seconds the main thread has to end by itself after Ctrl-C before the watcher ends it.
GRACE_S = 0.5
INTERRUPTED_LINE = "tristock: interrupted"


class InterruptWatch:
    """Within ``with InterruptWatch():`` Ctrl-C raises KeyboardInterrupt in the main thread as
    usual, and if the main thread is still busy ``grace_s`` seconds later (stuck in native
    code), the watcher reports it and ends the process with exit 130. Outside the main thread
    it does nothing. ``report()`` prints "interrupted" once, whoever sees the signal first."""

    def __init__(self, grace_s: float = GRACE_S) -> None:
        self.grace_s = grace_s
        self._reported = threading.Lock()
        self._done = threading.Event()
        self._stack = contextlib.ExitStack()

    def report(self) -> bool:
        """Print "interrupted" unless it was printed already; True if this call printed it."""
        if not self._reported.acquire(blocking=False):
            return False
        complain(INTERRUPTED_LINE)
        return True

    def __enter__(self) -> InterruptWatch:
        if threading.current_thread() is threading.main_thread():
            self._stack.enter_context(self._watching())
        return self

    def __exit__(self, *exc: object) -> None:
        self._stack.close()

    @contextlib.contextmanager
    def _watching(self) -> Iterator[None]:
        reader, writer = socket.socketpair()
        writer.setblocking(False)
        try:
            previous_fd = signal.set_wakeup_fd(writer.fileno(), warn_on_full_buffer=False)
        except ValueError:  # not the main interpreter: leave signals alone
            reader.close()
            writer.close()
            yield
            return
        previous_handler = signal.signal(signal.SIGINT, signal.default_int_handler)
        watcher = threading.Thread(
            target=self._watch, args=(reader,), name="tristock-interrupt-watch", daemon=True
        )
        watcher.start()
        try:
            yield
        finally:
            self._done.set()
            signal.set_wakeup_fd(previous_fd)
            signal.signal(signal.SIGINT, previous_handler)
            with contextlib.suppress(OSError):
                writer.send(b"\0")  # wakes the watcher, which sees it is done and returns
            watcher.join(timeout=1.0)
            reader.close()
            writer.close()

    def _watch(self, reader: socket.socket) -> None:
        while True:
            try:
                data = reader.recv(64)
            except OSError:
                return
            if self._done.is_set() or not data:
                return
            if signal.SIGINT in data and not self._done.wait(self.grace_s) and self.report():
                os._exit(INTERRUPTED)


def crash_dir() -> Path:
    """Where crash logs go: the platform's per-user state or log directory.

    Linux and other Unix: ``$XDG_STATE_HOME/tristock`` (default ``~/.local/state/tristock``);
    macOS: ``~/Library/Logs/tristock``; Windows: ``%LOCALAPPDATA%\\tristock\\Logs``.
    """
    home = Path.home()
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or str(home / "AppData" / "Local")
        return Path(base) / "tristock" / "Logs"
    if sys.platform == "darwin":
        return home / "Library" / "Logs" / "tristock"
    state = os.environ.get("XDG_STATE_HOME")
    base_dir = Path(state) if state and Path(state).is_absolute() else home / ".local" / "state"
    return base_dir / "tristock"


def _write_log(directory: Path, prefix: str, text: str) -> Path:
    """A new private file ``prefix*.log`` in ``directory`` (never one that exists)."""
    directory.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix=prefix, suffix=".log", dir=directory)
    with os.fdopen(fd, "w", encoding="utf-8") as stream:
        stream.write(text)
    return Path(name)


def crash_report(err: BaseException, argv: list[str]) -> str:
    """Write ``err``'s traceback to a crash log; the one line to show the user."""
    prefix = f"crash-{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}-"
    text = (
        f"tristock {__version__} crashed at {time.strftime('%Y-%m-%d %H:%M:%S %z')}\n"
        f"python {platform.python_version()} on {platform.platform()}\n"
        f"arguments: {argv!r}\n\n" + "".join(traceback.format_exception(err))
    )
    summary = f"{type(err).__name__}: {err}".splitlines()[0][:200]
    user = os.getuid() if hasattr(os, "getuid") else "user"
    fallback = Path(tempfile.gettempdir()) / f"tristock-{user}"
    for directory in (crash_dir(), fallback):
        try:
            path = _write_log(directory, prefix, text)
        except OSError:
            continue
        return f"tristock: internal error ({summary}); details written to {path}"
    return f"tristock: internal error ({summary}); no crash log could be written"
