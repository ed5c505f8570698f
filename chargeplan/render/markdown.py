"""User text in Markdown, made inert: what a name, id, owner or note says is shown as written,
never run as HTML, never turned into a link, an image or a table cell of its own.

Markdown passes raw HTML through (CommonMark, "Raw HTML"; most renderers do), so ``<script>``
or ``<img onerror=...>`` in a battery's name would reach the reader's browser. Every
user-supplied string in a Markdown template goes through :func:`md_text` (registered as the
``md_text`` filter, and as ``md``, in every Markdown environment by :func:`register`).
HTML pages keep jinja's autoescape.
"""

from __future__ import annotations

import re
from typing import Any

__all__ = ["md_code_block", "md_text", "register"]

#: Markdown punctuation that would start emphasis, code, a link or an image, or end a table
#: cell; a backslash before it shows it as itself (CommonMark, "Backslash escapes").
_SYNTAX = re.compile(r"([\\`*\[\]|~]|(?<![A-Za-z0-9])_|_(?![A-Za-z0-9]))")
#: (An underscore inside a word, as in ``state_of_charge``, never makes emphasis: left as is.)
#: Line breaks of every kind: a user string stays on its line (and in its table cell).
_BREAKS = re.compile(r"[\r\n\v\f\x1c-\x1e\x85\u2028\u2029]+")


#: Any character that :func:`md_text` changes: a text without one is inert as it is.
_PLAIN = re.compile(r"[\\`*\[\]|~_&<\r\n\v\f\x1c-\x1e\x85\u2028\u2029]")


def md_text(value: object) -> str:
    """``value`` as inert Markdown text: ``<`` and ``&`` as entities (no tag or entity can
    start, so quotes need nothing; a ``>`` inside a line starts nothing and stays as written,
    so ``bulk -> absorption`` reads as it should), a leading ``>`` and Markdown punctuation
    backslash-escaped, line breaks as spaces.

    >>> print(md_text('<img src=x onerror="alert(1)"> | [x](javascript:1)'))
    &lt;img src=x onerror="alert(1)"> \\| \\[x\\](javascript:1)
    >>> md_text("Mower battery, bay 3")
    'Mower battery, bay 3'
    >>> print(md_text("> quoted, bulk -> absorption"))
    \\> quoted, bulk -> absorption
    """
    text = "" if value is None else str(value)
    if _PLAIN.search(text) is None and not text.lstrip(" ").startswith(">"):
        return text  # nothing in it that Markdown reads (most names and ids)
    text = _BREAKS.sub(" ", text)
    text = _SYNTAX.sub(r"\\\1", text.replace("&", "&amp;").replace("<", "&lt;"))
    stripped = text.lstrip(" ")
    if stripped.startswith(">"):  # a block quote only at the start of a line (CommonMark)
        text = text[:len(text) - len(stripped)] + "\\" + stripped
    return text


def md_code_block(value: object) -> str:
    """``value`` as a fenced code block whose fence is longer than any run of backticks in
    it, so no line of it can close the block early (CommonMark, "Fenced code blocks"); inside,
    HTML is shown as text.

    >>> print(md_code_block("a ```\\n  ``` <b>x</b>"))
    ````
    a ```
      ``` <b>x</b>
    ````
    """
    text = "" if value is None else str(value)
    longest = max((len(run) for run in re.findall(r"`+", text)), default=0)
    fence = "`" * max(3, longest + 1)
    return f"{fence}\n{text.rstrip(chr(10))}\n{fence}"


def register(env: Any) -> Any:
    """Add the ``md_text`` filter (and its short name ``md``) and ``md_code_block`` to a
    Markdown document's jinja environment (not to an autoescaping HTML one: there jinja
    escapes every value)."""
    env.filters["md_text"] = md_text
    env.filters["md"] = md_text
    env.filters["md_code_block"] = md_code_block
    return env
