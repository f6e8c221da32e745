"""Newick text: writing and reading trees (see kinpress.trees)."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from ..items import escape_name, unescape_name
from .node import Node

# Newick, the open format agreed informally in 1986: nested parentheses, ':' before a branch
# length, a label after each node, single quotes around labels with blanks or punctuation.
_NEEDS_QUOTES = re.compile(r"[\s()\[\]':;,\"\\]")
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_TOKEN = re.compile(r"\s+|\[[^\]]*\]|'(?:[^']|'')*'|[(),:;]|[^\s()\[\]':;,]+")


def _format_label(name: str, internal: bool) -> str:
    # Control characters and bytes that are not UTF-8 are escaped as in every output; a backslash
    # (doubled by the escape) is quoted, as some readers refuse it bare. A numeric internal label
    # would read back as a support value, so it is quoted too.
    label = escape_name(name)
    if label and not _NEEDS_QUOTES.search(label) and not (internal and _NUMBER.fullmatch(label)):
        return label
    return "'" + label.replace("'", "''") + "'"


def _format_number(value: float) -> str:
    if not math.isfinite(value):
        raise ValueError(f"cannot write {value} in Newick")
    # Ten significant digits: far finer than any compression distance, and short to read.
    return f"{float(value):.10g}"


def _newick_suffix(node: Node) -> str:
    if node.children and node.support is not None:
        text = _format_number(node.support)
    elif node.name is not None:
        text = _format_label(node.name, internal=bool(node.children))
    else:
        text = ""
    if node.length is not None:
        text += ":" + _format_number(node.length)
    return text


def to_newick(tree: Node) -> str:
    """Newick text of ``tree``, ending in ``;``.

    Branch lengths follow ``:``; an internal node's support is written as its label (instead of
    its name, if it has both). Names are written by `escape_name` (control characters and bytes
    that are not UTF-8 as backslash escapes); labels with blanks, ``()[]':;,``, ``"`` or a
    backslash are single-quoted with quotes doubled; underscores are written as they are, so
    readers that turn unquoted underscores into spaces need their option to keep them.
    """
    out: list[str] = []
    stack: list[Node | str] = [tree]
    while stack:
        item = stack.pop()
        if isinstance(item, str):
            out.append(item)
        elif item.children:
            out.append("(")
            stack.append(_newick_suffix(item))
            stack.append(")")
            for k, child in enumerate(reversed(item.children)):
                if k:
                    stack.append(",")
                stack.append(child)
        else:
            out.append(_newick_suffix(item))
    out.append(";")
    return "".join(out)


def parse_newick(text: str) -> Node:
    """Read one Newick tree (as written by :func:`to_newick`; ``[...]`` comments are skipped).

    An unquoted numeric label on an internal node is read as its support, any other label as a
    name; quoted labels have doubled quotes undone, escapes of `escape_name` are undone and
    unquoted underscores are kept.
    """
    open_groups: list[list[Node]] = []
    pending = _Pending()
    root: Node | None = None
    position = 0
    while position < len(text):
        match = _TOKEN.match(text, position)
        if match is None:
            raise _fail(f"unexpected {text[position]!r}", position)
        token = match.group()
        skipped = token.isspace() or token.startswith("[")
        if root is not None and not skipped:
            raise _fail("text after the closing ';'", position)
        if not skipped:
            root = _read(token, position, pending, open_groups)
        position = match.end()
    if root is None:
        raise ValueError("bad Newick: no closing ';'")
    return root


def _fail(message: str, position: int) -> ValueError:
    return ValueError(f"bad Newick at character {position + 1}: {message}")


@dataclass
class _Pending:
    """The node being read: its children (once its ')' is read), label and branch length, and
    whether a ':' awaits its length."""

    children: tuple[Node, ...] = ()
    label: str | None = None
    quoted: bool = False
    length: float | None = None
    want_length: bool = False

    def node(self, position: int) -> Node:
        if self.want_length:
            raise _fail("':' without a branch length", position)
        if not self.children:
            return Node(name=self.label, length=self.length)
        if self.label is not None and not self.quoted and _NUMBER.fullmatch(self.label):
            return Node(length=self.length, children=self.children, support=float(self.label))
        return Node(name=self.label, length=self.length, children=self.children)


def _read(
    token: str, position: int, pending: _Pending, open_groups: list[list[Node]]
) -> Node | None:
    """Take one token (not a blank or comment) into `pending` and `open_groups`; the root once
    the closing ';' is read, else None."""
    if token == "(":
        if (
            pending.children
            or pending.label is not None
            or pending.length is not None
            or pending.want_length
        ):
            raise _fail("'(' after a label or length", position)
        open_groups.append([])
    elif token in ",)":
        if not open_groups:
            raise _fail(f"{token!r} outside parentheses", position)
        open_groups[-1].append(pending.node(position))
        pending.children = tuple(open_groups.pop()) if token == ")" else ()
        pending.label, pending.quoted, pending.length = None, False, None
    elif token == ":":
        if pending.length is not None or pending.want_length:
            raise _fail("second branch length", position)
        pending.want_length = True
    elif token == ";":
        if open_groups:
            raise _fail(f"{len(open_groups)} unclosed '('", position)
        return pending.node(position)
    elif pending.want_length:
        if not _NUMBER.fullmatch(token):
            raise _fail(f"branch length {token!r} is not a number", position)
        pending.length = float(token)
        pending.want_length = False
    elif pending.label is not None or pending.length is not None:
        raise _fail(f"unexpected label {token!r}", position)
    elif token.startswith("'"):
        pending.label, pending.quoted = unescape_name(token[1:-1].replace("''", "'")), True
    else:
        pending.label, pending.quoted = unescape_name(token), False
    return None
