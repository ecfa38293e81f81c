"""One look and links: the report, plan, audit and monitor pages share one stylesheet, link to
each other whichever is written last, and offer every table as CSV."""

import csv
import io
import re
import shutil
from pathlib import Path
from urllib.parse import unquote

from hypothesis import given
from hypothesis import strategies as st

from workbench.evidence.pages import PageTable, write_page
from workbench.report import page as pg


def _csv_links(text: str) -> dict[str, list[list[str]]]:
    """Every CSV download of a page, read back with the standard library's csv module."""
    found = re.findall(r'<a download="([^"]+)" href="data:text/csv;charset=utf-8,([^"]*)"', text)
    return {name: list(csv.reader(io.StringIO(unquote(data)))) for name, data in found}


def test_every_table_of_the_report_downloads_as_csv(shared_grid):
    text = (shared_grid / "report.html").read_text(encoding="utf-8")
    links = _csv_links(text)
    # One download beneath every table Python wrote (the decision box's table is the
    # browser's own, filled by its script).
    assert len(links) == text.count("<table") - 1
    ranking = links["ranking.csv"]
    rows = re.search(r"ranked by the rule</h3>.*?<tbody>(.*?)</tbody>", text, re.S).group(1)
    assert len(ranking) - 1 == rows.count("<tr>") == 5
    # A value shown with its interval beneath becomes two columns: value, then interval.
    head = ranking[0]
    assert head[:2] == ["rank", "setting"]
    assert head[2] == "score (expected)" and head[3] == "score (expected) interval"
    first = re.search(r"<tr><td[^>]*>1</td><td[^>]*>([^<]*)</td>", rows).group(1)
    assert ranking[1][1] == first.replace("&#x27;", "'")
    assert all(re.fullmatch(r"\[.*, .*\]", row[3]) for row in ranking[1:])
    # Rows under a group heading (a distortion) carry it in a leading column.
    distortions = links["summary.csv"]
    assert distortions[0][0] == "group"
    assert {row[0] for row in distortions[1:]} == {
        "distortion: exact",
        "distortion: shifted",
        "distortion: misplaced",
    }


@given(st.lists(st.lists(st.text(), min_size=3, max_size=3), max_size=5))
def test_a_table_survives_its_csv_whatever_its_text(rows):
    # Reference reader: Python's csv module (RFC 4180 quoting of commas, quotes, newlines).
    back = list(csv.reader(io.StringIO(pg.csv_text(["a", "b,", 'c"'], rows), newline="")))
    assert back == [["a", "b,", 'c"'], *rows]


def _style(text: str) -> str:
    return re.search(r"<style>(.*?)</style>", text, re.S).group(1)


def test_pages_share_one_stylesheet_and_link_to_each_other(shared_grid, tmp_path):
    folder = tmp_path / "results"
    folder.mkdir()
    shutil.copy(shared_grid / "report.html", folder / "report.html")
    table = PageTable("Readings", "How to read it.", ("t", "p"), ((1, "0.50"),), "readings")
    lines = ["what was read", "verdict: consistent", "finding: value"]
    # The audit first (the report was written before it: its links line is rewritten).
    _, audit = write_page(folder / "audit", "audit", "Audit <i>", lines, None, [table])
    _, monitor = write_page(folder / "monitor", "monitor", "Monitor", lines, None, [table])
    pages = {p: p.read_text(encoding="utf-8") for p in (folder / "report.html", audit, monitor)}
    for path, text in pages.items():
        assert _style(text) == pg.STYLE
        nav = re.search(r'<nav class="pages">(.*?)</nav>', text).group(1)
        hrefs = re.findall(r'href="([^"]+)"', nav)
        # Every other page, by a relative link that resolves to it; itself in bold.
        assert sorted((path.parent / h).resolve() for h in hrefs) == sorted(
            p.resolve() for p in pages if p != path
        )
        assert f"<strong>{path.stem}</strong>" in nav
    assert 'href="../report.html"' in pages[audit]
    # An audit page: the verdict once, headed tables with their CSV.
    text = pages[audit]
    assert text.count("verdict: consistent") == 1
    assert "<thead><tr><th>t</th><th>p</th>" in text and "readings.csv" in text
    assert "Audit &lt;i&gt;" in text


def test_a_report_for_another_rule_is_linked_beside_the_studys(shared_grid, tmp_path):
    from workbench import cli

    shutil.copy(shared_grid / "grid.nc", tmp_path / "grid.nc")
    shutil.copy(shared_grid / "report.html", tmp_path / "report.html")
    before = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert cli.main(["report", str(tmp_path), "--rule", "cvar", "--draws", "50"]) == 0
    other = (tmp_path / "report-cvar.html").read_text(encoding="utf-8")
    assert 'href="report.html"' in other
    after = (tmp_path / "report.html").read_text(encoding="utf-8")
    # The study's report keeps its numbers; only its links line now names the new page.
    assert 'href="report-cvar.html"' in after
    strip = re.compile(r'<nav class="pages">.*?</nav>')
    assert strip.sub("", after) == strip.sub("", before)
    assert Path(tmp_path / "summary-cvar.md").exists()
