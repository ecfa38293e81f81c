"""What every HTML page of the tool shares: one stylesheet, the head, the links to the other
pages beside it, and tables with a CSV download.

The report, the plan, the audit and the monitor pages all import this module (report is the
lowest of their stages). Every page stays one self-contained file: the style is inline, a
table's CSV is a ``data:`` link inside the page, and the links between pages are relative.

The links are a ``<nav class="pages">`` line; writing a page rewrites that line in the pages
already beside it (:func:`write_page_linked`), so every page links to all the others whichever
was written last.
"""

from __future__ import annotations

import csv
import html
import io
import os
import re
from collections.abc import Iterable, Sequence
from pathlib import Path
from urllib.parse import quote

from ..storage import write_text

__all__ = [
    "STYLE",
    "Group",
    "csv_text",
    "head",
    "links",
    "table",
    "write_page_linked",
]

STYLE = """
body { font-family: system-ui, "Segoe UI", Helvetica, Arial, sans-serif; color: #1e1e1e;
  background: #fff; max-width: 64rem; margin: 2rem auto; padding: 0 1.2rem; line-height: 1.5; }
h1 { font-size: 1.7rem; margin-bottom: 0.2rem; }
h2 { font-size: 1.3rem; border-bottom: 1px solid #888; padding-bottom: 0.15rem;
  margin-top: 2.2rem; }
h3 { font-size: 1.08rem; margin-top: 1.6rem; }
nav.pages { font-size: 0.9rem; color: #555; margin-bottom: 1rem; }
nav.pages a, nav.pages strong { margin-right: 0.9rem; }
p.meta { color: #555; margin-top: 0; }
.answer, .verdict { border-left: 4px solid #333; background: #f5f4ef; padding: 0.6rem 1.1rem; }
.answer p.choice, p.verdict { font-size: 1.2rem; margin: 0.3rem 0 0.6rem 0; }
.warning { border-left: 4px solid #c60; background: #fff4e8; padding: 0.5em 0.8em; }
table { border-collapse: collapse; margin: 0.6rem 0 0.2rem 0; font-size: 0.86rem; }
th, td { border-bottom: 1px solid #ccc; padding: 0.22rem 0.55rem; vertical-align: top;
  text-align: left; }
th { border-bottom: 2px solid #666; font-weight: bold; }
td.n { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.n span { display: block; color: #555; font-size: 0.8rem; }
tr.group th { background: #eeede8; border-bottom: 1px solid #999; font-style: italic; }
table.kv { width: 100%; }
table.kv td:first-child { width: 12rem; font-weight: bold; }
p.csv { font-size: 0.8rem; margin: 0 0 1rem 0; }
pre { background: #f6f6f6; padding: 0.6em; overflow-x: auto; }
figure { margin: 1.4rem 0; }
img, figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
figcaption { font-size: 0.9rem; color: #333; margin-top: 0.3rem; }
ul li { margin-bottom: 0.35rem; }
fieldset { border: 1px solid #ccc; margin: 0.5rem 0; }
input[type=number] { width: 6rem; }
.browser { border: 1px dashed #888; padding: 0.4rem 1rem 1rem 1rem; }
.browser pre { white-space: pre-wrap; overflow-wrap: anywhere; }
"""

# The pages that link to each other, by file name (a report for another rule is report-RULE).
PAGE_NAMES = ("report.html", "plan.html", "audit.html", "monitor.html")
_REPORT_OTHER = "report-*.html"
# Where the commands put their pages by default: the results folder, and audit/ and monitor/
# inside it.
_SUBFOLDERS = ("audit", "monitor")
_NAV = re.compile(r'<nav class="pages">.*?</nav>', re.S)


def escape(text) -> str:
    return html.escape(str(text), quote=True)


class Group(str):
    """A row of a table that heads a group of rows (a distortion, say)."""


def _folders(folder: Path) -> list[Path]:
    """The folders whose pages belong with one in ``folder``: it, its parent when it is an
    audit/ or monitor/ folder, and their audit/ and monitor/ folders."""
    top = folder.parent if folder.name in _SUBFOLDERS else folder
    return list(dict.fromkeys([top, *(top / s for s in _SUBFOLDERS), folder]))


def _sorted(pages: Iterable[Path]) -> list[Path]:
    """Pages in a fixed order: the study's report, the other rules' reports, plan, audit,
    monitor."""
    order = {n: i for i, n in enumerate(PAGE_NAMES)}
    unique = {p.resolve(): p for p in pages}.values()
    return sorted(unique, key=lambda p: (order.get(p.name, 0), p.name != "report.html", p))


def sibling_pages(folder: Path) -> list[Path]:
    """The pages that exist beside a page in ``folder`` (see :func:`_folders`)."""
    found: list[Path] = []
    for f in _folders(Path(folder)):
        found += [f / name for name in PAGE_NAMES if (f / name).is_file()]
        found += sorted(f.glob(_REPORT_OTHER))
    return _sorted(found)


def links(path: Path, pages: Iterable[Path]) -> str:
    """The ``<nav>`` line of the page at ``path``: its own name in bold, the others as
    relative links."""
    path = Path(path)
    parts = []
    for p in pages:
        name = p.stem
        if p.resolve() == path.resolve():
            parts.append(f"<strong>{escape(name)}</strong>")
        else:
            href = os.path.relpath(p, path.parent).replace(os.sep, "/")
            parts.append(f'<a href="{escape(quote(href))}">{escape(name)}</a>')
    return f'<nav class="pages">Pages: {" ".join(parts)}</nav>'


def head(title: str, path: Path) -> list[str]:
    """The opening of a page at ``path``: doctype, head with the shared style, the links line
    (rewritten by :func:`write_page_linked`) and the title as ``<h1>``."""
    return [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{escape(title)}</title>",
        f"<style>{STYLE}</style></head><body>",
        '<nav class="pages"></nav>',
        f"<h1>{escape(title)}</h1>",
    ]


def write_page_linked(path: str | Path, text: str) -> Path:
    """Write the page ``text`` to ``path`` (atomically) with its links line filled in, and
    rewrite the links line of every page beside it so that they link back to it."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    pages = _sorted([*sibling_pages(path.parent), path])
    write_text(path, _NAV.sub(lambda _: links(path, pages), text, count=1))
    for other in pages:
        if other.resolve() == path.resolve():
            continue
        old = other.read_text(encoding="utf-8")
        new = _NAV.sub(lambda _, o=other: links(o, pages), old, count=1)
        if new != old:
            write_text(other, new)
    return path


def _cell_html(v, numeric: bool) -> str:
    cls = ' class="n"' if numeric else ""
    if isinstance(v, tuple):
        return f"<td{cls}>{escape(v[0])}<span>{escape(v[1])}</span></td>"
    return f"<td{cls}>{escape(v)}</td>"


def csv_text(head: Sequence[str], rows: Iterable) -> str:
    """A table as CSV: a cell shown as (value, interval) becomes two columns, ``h`` and
    ``h interval``; a group row becomes a leading ``group`` column of the rows under it."""
    rows = list(rows)
    grouped = any(isinstance(r, Group) for r in rows)
    body = [r for r in rows if not isinstance(r, Group)]
    paired = [any(isinstance(r[j], tuple) for r in body) for j in range(len(head))]
    out = io.StringIO()
    writer = csv.writer(out)  # RFC 4180: CRLF ends a row, a field with CR or LF is quoted
    header = ["group"] if grouped else []
    for h, two in zip(head, paired, strict=True):
        header += [h, f"{h} interval"] if two else [h]
    writer.writerow(header)
    group = ""
    for r in rows:
        if isinstance(r, Group):
            group = str(r)
            continue
        line = [group] if grouped else []
        for v, two in zip(r, paired, strict=True):
            if two:
                line += list(v) if isinstance(v, tuple) else [v, ""]
            else:
                line.append(v)
        writer.writerow(line)
    return out.getvalue()


def table(
    head: Sequence[str],
    rows: Iterable,
    name: str,
    numeric_from: int | None = 1,
    cls: str = "",
) -> str:
    """A headed table and, beneath it, a link that downloads it as ``name.csv`` (a ``data:``
    URI: nothing outside the page). Cells may be (value, interval) pairs, shown one above the
    other; :class:`Group` rows head the rows under them. Columns from ``numeric_from`` on are
    right-aligned (None: none)."""
    rows = list(rows)
    attr = f' class="{cls}"' if cls else ""
    heads = "".join(f"<th>{escape(h)}</th>" for h in head)
    out = [f"<table{attr}>", f"<thead><tr>{heads}</tr></thead><tbody>"]
    for row in rows:
        if isinstance(row, Group):
            out.append(f'<tr class="group"><th colspan="{len(head)}">{escape(row)}</th></tr>')
            continue
        numeric = [numeric_from is not None and j >= numeric_from for j in range(len(row))]
        out.append(
            "<tr>" + "".join(_cell_html(v, n) for v, n in zip(row, numeric, strict=True)) + "</tr>"
        )
    out.append("</tbody></table>")
    data = quote(csv_text(head, rows), safe="")
    out.append(
        f'<p class="csv"><a download="{escape(name)}.csv" '
        f'href="data:text/csv;charset=utf-8,{data}">Download this table as CSV '
        f"({escape(name)}.csv)</a></p>"
    )
    return "\n".join(out)
