"""KiCad's S-expressions read with the place of every token kept.

KiCad writes its netlists (``.net``) and schematics (``.kicad_sch``) as
S-expressions: lists in parentheses of bare symbols and double-quoted strings.
Inside a string a backslash escapes the next character (``\\"``, ``\\\\``,
``\\n``).  :func:`parse` returns :class:`Node` trees whose atoms remember their
character offsets in the text, so that a caller can replace one string token and
leave every other byte as it was (the schematic write-back needs exactly that).
Standard library only.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field

from ..errors import InputError

__all__ = ["Atom", "Node", "parse", "quote", "unquote"]

_ESCAPES = {"n": "\n", "t": "\t", "r": "\r", "\\": "\\", '"': '"'}
_MAX_DEPTH = 200


@dataclass
class Atom:
    """A symbol or a string; ``start``/``end`` are offsets of its text (quotes included)."""

    value: str
    quoted: bool
    start: int
    end: int


@dataclass
class Node:
    """A parenthesised list; ``start`` is the ``(``, ``end`` one past the ``)``."""

    items: list[Atom | Node] = field(default_factory=list)
    start: int = 0
    end: int = 0

    @property
    def head(self) -> str:
        """The first symbol (``"comp"``, ``"property"``), or ``""``."""
        first = self.items[0] if self.items else None
        return first.value if isinstance(first, Atom) else ""

    def children(self, head: str | None = None) -> Iterator[Node]:
        """Direct sub-lists, optionally only those whose head is ``head``."""
        for item in self.items:
            if isinstance(item, Node) and (head is None or item.head == head):
                yield item

    def child(self, head: str) -> Node | None:
        """The first direct sub-list with this head, or None."""
        return next(self.children(head), None)

    def atoms(self) -> list[Atom]:
        """The atoms after the head, in order."""
        return [a for a in self.items[1:] if isinstance(a, Atom)]

    def text(self, head: str, default: str = "") -> str:
        """The first atom of the sub-list ``(head "text")``, or ``default``."""
        sub = self.child(head)
        if sub is None:
            return default
        atoms = sub.atoms()
        return atoms[0].value if atoms else default


def unquote(raw: str) -> str:
    """The text of a quoted KiCad string without its quotes, escapes resolved."""
    out: list[str] = []
    i, body = 0, raw[1:-1]
    while i < len(body):
        ch = body[i]
        if ch == "\\" and i + 1 < len(body):
            out.append(_ESCAPES.get(body[i + 1], body[i + 1]))
            i += 2
            continue
        out.append(ch)
        i += 1
    return "".join(out)


def quote(text: str) -> str:
    """``text`` as a KiCad string token: quoted, backslash and quote escaped, line breaks as
    ``\\n`` (the way KiCad writes them)."""
    body = (text.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n")
            .replace("\r", "\\r").replace("\t", "\\t"))
    return f'"{body}"'


def _line(text: str, offset: int) -> int:
    return text.count("\n", 0, offset) + 1


def parse(text: str, path: str = "<netlist>") -> Node:
    """The first S-expression of ``text`` as a :class:`Node` tree.

    Raises
    ------
    InputError
        Unbalanced parentheses, an unterminated string or nesting deeper than any
        KiCad file has; the message names the file and line.
    """
    stack: list[Node] = []
    root: Node | None = None
    i, n = 0, len(text)
    while i < n:
        ch = text[i]
        if ch in " \t\r\n":
            i += 1
        elif ch == "(":
            if len(stack) >= _MAX_DEPTH:
                raise InputError("lists nested too deeply for a KiCad file", file=path,
                                 line=_line(text, i))
            node = Node(start=i)
            if stack:
                stack[-1].items.append(node)
            elif root is None:
                root = node
            else:
                raise InputError("text after the end of the first expression", file=path,
                                 line=_line(text, i))
            stack.append(node)
            i += 1
        elif ch == ")":
            if not stack:
                raise InputError("a ')' closes nothing", file=path, line=_line(text, i))
            node = stack.pop()
            node.end = i + 1
            i += 1
        elif ch == '"':
            j = i + 1
            while j < n and text[j] != '"':
                j += 2 if text[j] == "\\" else 1
            if j >= n:
                raise InputError("a string is not closed", file=path, line=_line(text, i))
            atom = Atom(unquote(text[i:j + 1]), True, i, j + 1)
            if not stack:
                raise InputError("text outside any list", file=path, line=_line(text, i))
            stack[-1].items.append(atom)
            i = j + 1
        else:
            j = i
            while j < n and text[j] not in ' \t\r\n()"':
                j += 1
            if not stack:
                raise InputError("text outside any list", file=path, line=_line(text, i),
                                 text=text[i:j][:40])
            stack[-1].items.append(Atom(text[i:j], False, i, j))
            i = j
    if stack:
        raise InputError("a '(' is never closed", file=path, line=_line(text, stack[-1].start))
    if root is None:
        raise InputError("no S-expression in the file", file=path)
    return root
