"""What commands show on stderr while they work: a campaign bar and a status line, in a
terminal only."""

import io
import sys
import time

from workbench.cli_progress import CampaignBar, status


class _Terminal(io.StringIO):
    """A text stream that says it is a terminal."""

    def isatty(self) -> bool:
        return True


def test_the_rate_after_a_resume_counts_only_the_campaigns_computed_now():
    stream = _Terminal()
    bar = CampaignBar(stream=stream)
    bar.update(900, 1000)  # 900 campaigns resumed from disk
    start = time.monotonic()
    time.sleep(0.3)
    bar.update(910, 1000)  # 10 computed now
    elapsed = time.monotonic() - start
    info = bar.bar.format_dict
    rate = info["rate"] or (info["n"] - info["initial"]) / info["elapsed"]
    bar.close()
    # rate = new campaigns / time (10 in about 0.3 s, about 33/s); counting the resumed ones
    # would show 910 / 0.3 s, about 3000/s
    assert 0.5 * 10 / elapsed < rate < 1.5 * 10 / elapsed
    assert "910/1000" in stream.getvalue()


def test_nothing_is_drawn_when_stderr_is_not_a_terminal(capsys):
    stream = io.StringIO()
    with CampaignBar(stream=stream) as bar:
        bar.update(0, 10)
        bar.update(10, 10)
    with status("working", stream=stream, every=0.01):
        time.sleep(0.05)
        print("result")
    assert stream.getvalue() == ""
    assert capsys.readouterr().out == "result\n"


def test_the_status_line_ticks_and_is_erased_before_the_result(capsys):
    stream, before = _Terminal(), sys.stdout
    with status("running the pilot", stream=stream, every=0.02):
        time.sleep(0.15)
        print("replicates: 12")
        time.sleep(0.1)  # no more ticks once the result is printed
    shown = stream.getvalue()
    assert shown.startswith("\r\x1b[Kworkbench: running the pilot … 0 s")
    assert shown.endswith("\r\x1b[K") and shown.count("running the pilot") >= 2
    ticks = shown.count("running the pilot")
    assert capsys.readouterr().out == "replicates: 12\n"
    assert stream.getvalue().count("running the pilot") == ticks
    assert sys.stdout is before  # the watch on stdout ends with the block
