"""The terminal console every command prints through (rich, stdout), and line wrapping.

Plain lines (a sentence, an "Assumptions: …" list, a command to copy) wrap to the
console width: rich's own width (the terminal's, or ``COLUMNS``, or 80 when the
output is piped).  A line breaks only between words, and a number never parts from
its unit or its sign (``12.6 V``, ``≥ 3 V``, ``β 525``), so values are never cut.
Tables and blocks that are already laid out to the width are printed as they are
(``soft_wrap=True``).
"""

from __future__ import annotations

import re
from typing import Any

from rich.console import Console
from rich.text import Text

__all__ = ["WrappingConsole", "break_points", "keep_together", "layout", "make_console",
           "wrap_plain"]

#: Stands for a space that must not break a line (a file path with spaces in it); the
#: console prints it as a space.
_HARD_SPACE = "\ue000"


def keep_together(text: str) -> str:
    """``text`` (a file path, a command word) never broken at its own spaces."""
    return text.replace(" ", _HARD_SPACE)

#: A space that must not break a line: between a number and its unit or per cent sign,
#: after a comparison or a β, between a range's ends and the dash.
_GLUE = re.compile(
    r"(?<=[\d)])[ ](?=(?:[pnµumkMG]?(?:Ω|V/V|V|A|W|Hz|s)|°C|%|ppm|pk)(?![A-Za-z]))"
    r"|(?<=[≤≥±β~])[ ](?=[\d\-−+.])|[ ](?=[≤≥] )"
    r"|(?<=[A-Za-z0-9|][+−~])[ ](?=[\dβ])"
    r"|(?<=\d)[ ](?=[…–]\s?\d)|(?<=[…–])[ ](?=\d)"
)


#: A file path: a word with a slash or backslash in it.
_PATH = re.compile(r"[^ ]*[/\\][^ ]*")

#: The start of a stockbias command line shown for copying.
_COMMAND = re.compile(
    r"(?<![`\w./-])(?:[\w.-]*/)*stockbias "
    r"(?:demo|stock|check|design|substitute|consolidate|export|board|sweep)\b")

#: A label this short before a path stays on the path's line ("Report written: /a/b").
_LABEL_MAX = 24


def _glued(plain: str) -> str:
    glued = _GLUE.sub("\x00", plain)
    for m in _PATH.finditer(glued):
        before = glued[:m.start()]
        if len(before.strip()) <= _LABEL_MAX:
            glued = before.replace(" ", "\x00") + glued[m.start():]
        break
    return glued


def break_points(plain: str, width: int, indent: int) -> list[tuple[int, int]]:
    """The (start, end) of each wrapped line of ``plain`` (one paragraph, no newline).

    Lines hold whole words only; the first line is ``width`` wide, the others
    ``width − indent`` (they are printed after ``indent`` spaces).  A word longer
    than a line (a long path) gets a line of its own and is never split, and a short
    label stays with the path after it.
    """
    glued = _glued(plain)
    spans: list[tuple[int, int]] = []
    start, end = -1, -1
    for m in re.finditer(r"[^ ]+", glued):
        room = width if not spans else width - indent
        if start < 0:
            start, end = 0, m.end()
        elif m.end() - start > room:
            spans.append((start, end))
            start, end = m.start(), m.end()
        else:
            end = m.end()
    if start >= 0:
        spans.append((start, end))
    return spans or [(0, 0)]


def layout(plain: str, width: int) -> list[tuple[int, int, str, str]]:
    """One paragraph as lines: (start, end, text before, text after) each.

    Continuation lines are indented two spaces beyond the paragraph's own indent.  A
    stockbias command that does not fit starts a line of its own and continues with
    a shell line continuation (`` \\``), so it can still be copied as it is.
    """
    lead = len(plain) - len(plain.lstrip(" "))
    indent = lead + 2
    cmd = _COMMAND.search(plain)
    if len(plain) <= width or cmd is None:
        return [(a, b, " " * indent if i else "", "")
                for i, (a, b) in enumerate(break_points(plain, width, indent))]
    out: list[tuple[int, int, str, str]] = []
    head = plain[:cmd.start()].rstrip()
    if head.strip():
        out = [(a, b, " " * indent if i else "", "")
               for i, (a, b) in enumerate(break_points(head, width, indent))]
    tail = plain[cmd.start():]
    first = indent if out else 0
    spans = break_points(" " * first + tail, width - 2, 2)  # room for " \\"
    for i, (a, b) in enumerate(spans):
        a, b = max(a - first, 0) + cmd.start(), b - first + cmd.start()
        pre = " " * (first if i == 0 else first + 2)
        out.append((a, b, pre, " \\" if i < len(spans) - 1 else ""))
    return out


def wrap_plain(text: str, width: int, indent: int = 2) -> list[str]:
    """``text`` wrapped to ``width`` columns (continuation lines indented by ``indent``)."""
    out: list[str] = []
    for para in text.split("\n"):
        spans = break_points(para, width, indent)
        out += [(" " * indent if i else "") + para[a:b].replace(_HARD_SPACE, " ")
                for i, (a, b) in enumerate(spans)]
    return out


class WrappingConsole(Console):
    """A console whose plain lines wrap to its width without cutting a value.

    ``print`` of strings (markup allowed; a ``Text`` is taken as laid out) wraps them
    between words (see
    :func:`break_points`), continuation lines indented two spaces beyond the line's
    own indent; anything else (tables, or a call with ``soft_wrap`` given) is printed
    by rich unchanged.
    """

    def on_broken_pipe(self) -> None:
        """A closed pipe is left to the command line: rich would exit with status 1 when
        the reader goes away (``stockbias stock check FILE | head -1``); the application
        ends such a run quietly with 0, in one place (``cli/app.py``)."""
        self.quiet = True
        raise BrokenPipeError

    def print(self, *objects: Any, **kwargs: Any) -> None:
        if (kwargs.get("soft_wrap") is not None or not objects
                or not all(isinstance(o, str) for o in objects)
                or set(kwargs) - {"style", "markup", "highlight", "sep"}):
            super().print(*objects, **kwargs)
            return
        markup = kwargs.get("markup")
        sep = kwargs.get("sep", " ")
        parts = [self.render_str(o, markup=markup, highlight=False) for o in objects]
        text = Text(sep).join(parts)
        style = kwargs.get("style")
        width = max(self.width, 20)
        for para in text.split("\n", allow_blank=True):
            for a, b, pre, post in layout(para.plain, width):
                line = para[a:b]
                if _HARD_SPACE in line.plain:
                    line = Text(line.plain.replace(_HARD_SPACE, " "), style=line.style,
                                spans=line.spans, end="")
                super().print(Text(pre) + line + Text(post), style=style, soft_wrap=True,
                              highlight=False)


def make_console(stderr: bool = False) -> Console:
    """The console of a command: plain lines wrap to the width, tables fit it."""
    return WrappingConsole(soft_wrap=True, highlight=False, stderr=stderr)
