"""The terminal console every command prints through (rich, stdout)."""

from __future__ import annotations

from rich.console import Console

__all__ = ["make_console"]


class _Console(Console):
    """rich's console, except that a closed pipe is left to the command line.

    rich exits with status 1 when the reader of its output goes away
    (``stockbias stock check FILE | head -1``); the application ends such a run
    quietly with 0, in one place (``cli/app.py``), whatever printed last.
    """

    def on_broken_pipe(self) -> None:
        self.quiet = True
        raise BrokenPipeError


def make_console(stderr: bool = False) -> Console:
    """A console that never hard-wraps text lines (tables still fit the width)."""
    return _Console(soft_wrap=True, highlight=False, stderr=stderr)
