"""The terminal console every command prints through (rich, stdout)."""

from __future__ import annotations

from rich.console import Console

__all__ = ["make_console"]


def make_console(stderr: bool = False) -> Console:
    """A console that never hard-wraps text lines (tables still fit the width)."""
    return Console(soft_wrap=True, highlight=False, stderr=stderr)
