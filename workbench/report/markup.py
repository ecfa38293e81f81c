"""User text made inert where it is written: in Markdown (the report's summary, the plan, the
audit's and the monitor's pages) and in matplotlib figures.

Every sentence the Markdown writers emit is plain text (the same sentences go, HTML-escaped,
into the pages), so each is passed through :func:`md_text` whole, and the writer adds its own
markup (headings, bullets, bold, tables) around it. Titles, labels, units, distortion and
landscape names inside those sentences are therefore never read as markup.
"""

from __future__ import annotations

import re

__all__ = ["md_code", "md_text", "mpl_text"]

# Characters that start Markdown (CommonMark and its common extensions) inline markup:
# emphasis, code, links and images, tables, strikethrough, math, headings, and the
# backslash itself. '<', '>' and '&' become HTML entities instead (raw HTML, autolinks).
_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~$#!])")
# What starts a block when it opens a line (a list item, a numbered item, a setext underline).
_MD_LINE_START = re.compile(r"^(\s*)(?:([-+*](?=\s|$)|=)|(\d{1,9})([.)])(?=\s|$))")
_LINE_BREAKS = re.compile(r"[\r\n\v\f\x85\u2028\u2029]+")


def md_text(text) -> str:
    """``text`` as inert Markdown: one line, HTML's ``& < >`` as entities, Markdown's
    punctuation backslash-escaped, and a leading list or heading marker escaped.

    Rendered, it shows the characters as written: ``<script>`` stays text, ``[x](y)`` is not a
    link, ``# heading`` is not a heading and ``$x$`` is not math.
    """
    one_line = _LINE_BREAKS.sub(" ", str(text))
    entities = one_line.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    escaped = _MD_SPECIAL.sub(r"\\\1", entities)
    return _MD_LINE_START.sub(_line_start, escaped, count=1)


def _line_start(m: re.Match) -> str:
    if m.group(2):
        return f"{m.group(1)}\\{m.group(2)}"
    return f"{m.group(1)}{m.group(3)}\\{m.group(4)}"


def md_code(text: str) -> list[str]:
    """A fenced code block holding ``text`` verbatim: the fence is longer than any run of
    backticks in it, so the text cannot close it."""
    runs = [len(r) for r in re.findall(r"`+", text)]
    fence = "`" * max(3, max(runs, default=0) + 1)
    return [fence, text, fence]


def mpl_text(text) -> str:
    """``text`` for a matplotlib label, title or legend: every ``$`` escaped, so it is drawn as
    written and never parsed as math (an odd pair like ``$\\x$`` would otherwise fail).

    matplotlib reads a string with an even number of unescaped ``$`` as math text and shows
    ``\\$`` as ``$`` (matplotlib's text documentation, "Writing mathematical expressions")."""
    return str(text).replace("$", r"\$")
