"""The command's last line of defence: crash reports and interrupts.

Two things no command should ever show a user: a Python traceback and a
Ctrl-C that is ignored.  :func:`write_crash_report` keeps the traceback of an
unexpected exception in a file for a bug report (the terminal gets one line);
:func:`watch_interrupts` makes Ctrl-C end the process even while the main
thread is inside a long native call (a CP-SAT solve) that Python cannot
interrupt until it returns.
"""

from __future__ import annotations

import contextlib
import os
import platform
import signal
import sys
import tempfile
import threading
import traceback
from datetime import UTC, datetime

from .. import __version__

__all__ = [
    "EXIT_BAD_INPUT",
    "EXIT_DONE",
    "EXIT_INTERNAL",
    "EXIT_INTERRUPTED",
    "EXIT_NOT_MET",
    "INTERRUPT_GRACE_S",
    "interrupt_handled",
    "output_closed",
    "watch_interrupts",
    "write_crash_report",
]

EXIT_DONE = 0
EXIT_NOT_MET = 1
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3
EXIT_INTERRUPTED = 130  # 128 + SIGINT, the shells' convention

#: Seconds the main thread has to turn Ctrl-C into KeyboardInterrupt before the
#: watcher ends the process itself.
INTERRUPT_GRACE_S = 2.0

#: Set once the main thread has seen the interrupt (it then exits on its own).
interrupt_handled = threading.Event()


def write_crash_report(exc: BaseException, argv: list[str]) -> str:
    """Write the traceback and the context of an unexpected exception to a new file.

    Parameters
    ----------
    exc : BaseException
        The exception that reached the command line.
    argv : list of str
        The command line as given.

    Returns
    -------
    str
        Path of the report, a new file in the system temporary folder (never an
        existing file); ``""`` when no file could be written.
    """
    lines = [
        "stockbias internal error report",
        f"time: {datetime.now(UTC).isoformat(timespec='seconds')}",
        f"stockbias: {__version__}",
        f"python: {sys.version.split()[0]} ({platform.python_implementation()})",
        f"platform: {platform.platform()}",
        f"argv: {argv!r}",
        "",
        *traceback.format_exception(type(exc), exc, exc.__traceback__),
    ]
    try:
        fd, path = tempfile.mkstemp(prefix="stockbias-crash-", suffix=".txt", text=True)
        with os.fdopen(fd, "w", encoding="utf-8", errors="backslashreplace") as out:
            out.write("\n".join(line.rstrip("\n") for line in lines) + "\n")
    except (OSError, MemoryError):
        return ""
    return path


def watch_interrupts() -> None:
    """End the process on Ctrl-C even while the main thread is stuck in native code.

    Python runs its SIGINT handler only between bytecodes of the main thread, so a
    KeyboardInterrupt waits for a CP-SAT step to return (up to the whole time
    limit).  The C-level handler still writes the signal to a wake-up pipe; a
    daemon thread reads it and, if the main thread has not handled the interrupt
    within :data:`INTERRUPT_GRACE_S`, prints ``stockbias: interrupted`` and exits
    130 at once.  No output file is being written then: outputs are written after
    the search, in Python code that the KeyboardInterrupt reaches first.

    Does nothing outside the main thread, or when SIGINT is ignored or has a
    handler of someone else's.
    """
    if threading.current_thread() is not threading.main_thread():
        return
    if signal.getsignal(signal.SIGINT) is not signal.default_int_handler:
        return
    read_fd, write_fd = os.pipe()
    os.set_blocking(write_fd, False)
    try:
        signal.set_wakeup_fd(write_fd, warn_on_full_buffer=False)
    except ValueError:  # pragma: no cover - not the main thread after all
        os.close(read_fd)
        os.close(write_fd)
        return

    def watch() -> None:
        while True:
            try:
                data = os.read(read_fd, 64)
            except OSError:  # pragma: no cover - pipe closed at shutdown
                return
            if not data:  # pragma: no cover
                return
            if signal.SIGINT in data and not interrupt_handled.wait(INTERRUPT_GRACE_S):
                try:
                    sys.stderr.write("stockbias: interrupted\n")
                    sys.stderr.flush()
                finally:
                    os._exit(EXIT_INTERRUPTED)

    threading.Thread(target=watch, name="stockbias-interrupt-watch", daemon=True).start()


def output_closed() -> None:
    """The reader of stdout went away (``stockbias stock check FILE | head -1``).

    Nobody is left to read the rest, so it is not an error: whatever is still
    buffered for stdout goes to the null device, so that the interpreter's last
    flush is quiet too, and the command ends with exit 0 (the caller exits).
    """
    with contextlib.suppress(OSError, ValueError):
        sys.stdout.flush()
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):  # not a real file (a test runner's)
        return
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
    except OSError:  # pragma: no cover - no null device
        return
    try:
        os.dup2(devnull, fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(devnull)
