"""Newick text: writing and reading trees (see kinpress.trees)."""

from __future__ import annotations

import math
import re

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
    children: tuple[Node, ...] = ()
    label: str | None = None
    quoted = False
    length: float | None = None
    want_length = False
    root: Node | None = None

    def fail(message: str, position: int) -> ValueError:
        return ValueError(f"bad Newick at character {position + 1}: {message}")

    def finish(position: int) -> Node:
        if want_length:
            raise fail("':' without a branch length", position)
        if not children:
            return Node(name=label, length=length)
        if label is not None and not quoted and _NUMBER.fullmatch(label):
            return Node(length=length, children=children, support=float(label))
        return Node(name=label, length=length, children=children)

    position = 0
    while position < len(text):
        match = _TOKEN.match(text, position)
        if match is None:
            raise fail(f"unexpected {text[position]!r}", position)
        token = match.group()
        if root is not None and not (token.isspace() or token.startswith("[")):
            raise fail("text after the closing ';'", position)
        if token.isspace() or token.startswith("["):
            pass
        elif token == "(":
            if children or label is not None or length is not None or want_length:
                raise fail("'(' after a label or length", position)
            open_groups.append([])
        elif token in ",)":
            if not open_groups:
                raise fail(f"{token!r} outside parentheses", position)
            open_groups[-1].append(finish(position))
            children = tuple(open_groups.pop()) if token == ")" else ()
            label, quoted, length = None, False, None
        elif token == ":":
            if length is not None or want_length:
                raise fail("second branch length", position)
            want_length = True
        elif token == ";":
            if open_groups:
                raise fail(f"{len(open_groups)} unclosed '('", position)
            root = finish(position)
        elif want_length:
            if not _NUMBER.fullmatch(token):
                raise fail(f"branch length {token!r} is not a number", position)
            length = float(token)
            want_length = False
        elif label is not None or length is not None:
            raise fail(f"unexpected label {token!r}", position)
        elif token.startswith("'"):
            label, quoted = unescape_name(token[1:-1].replace("''", "'")), True
        else:
            label, quoted = unescape_name(token), False
        position = match.end()
    if root is None:
        raise ValueError("bad Newick: no closing ';'")
    return root
