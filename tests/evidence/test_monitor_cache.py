"""The monitor keeps up with a live campaign: it trains once per grid and strategy, keeps the
classifiers beside the grid, answers the next evaluation from them, and checks its arguments
before any training."""

import json
import re
import shutil

import numpy as np
import pytest

from workbench.analysis import open_grid
from workbench.cli import main
from workbench.evidence import cache
from workbench.evidence import monitor as mo
from workbench.evidence.commands import monitor_steps
from workbench.study.spec import load
from workbench.world.history import read_history

ROWS = ["5,5,3.1", "4,6,2.0", "6,4,2.5", "5.5,5.2,1.1", "4.8,5.1,0.9", "5.1,4.7,0.7"]
SETTING = "prior-weighted, decay hyperbolic:2"


@pytest.fixture(scope="module")
def small_grid(monitor_grid, tmp_path_factory):
    """A copy of the monitor tests' grid (s.toml, g: tests/helpers.py, MONITOR_STUDY): these
    tests write the monitor's cache beside the grid and their observation files beside it."""
    root = tmp_path_factory.mktemp("monitor-cache") / "copy"
    shutil.copytree(monitor_grid, root)
    return root


class _Counted:
    """Counts the calls of a function and passes them on (or refuses them)."""

    def __init__(self, func=None):
        self.func, self.calls = func, 0

    def __call__(self, *args, **kwargs):
        self.calls += 1
        if self.func is None:
            raise AssertionError("no training expected")
        return self.func(*args, **kwargs)


def _live(root, rows: int):
    path = root / f"live{rows}.csv"
    path.write_text("x1,x2,y\n" + "\n".join(ROWS[:rows]) + "\n")
    return path


def _monitor(root, live, *extra):
    argv = ["monitor", str(root / "s.toml"), "--observations", str(live), "--grid"]
    argv += [str(root / "g"), "--response", "y", "--goal", "minimise", "--json", *extra]
    if "--out" not in extra:  # --json writes the page too: keep it out of the working folder
        argv += ["--out", str(root / "monitor-page")]
    return main([*argv, "--setting", SETTING])


def test_the_next_evaluation_is_read_from_the_cache_with_a_fresh_trainings_probabilities(
    small_grid, monkeypatch, capsys
):
    folder = small_grid / "g" / cache.CACHE_FOLDER
    for old in folder.glob("*.joblib") if folder.exists() else ():
        old.unlink()
    original = mo.train
    train = _Counted(original)
    monkeypatch.setattr(mo, "train", train)
    assert _monitor(small_grid, _live(small_grid, 5)) == 0
    captured = capsys.readouterr()
    first = json.loads(captured.out)
    assert train.calls == 1 and len(list(folder.glob("*.joblib"))) == 1
    # Not a terminal: one status line says what the first call is doing; its time is measured.
    assert captured.err.startswith("monitor: training 3 classifiers on ")
    assert sum(line.startswith("monitor: training") for line in captured.err.splitlines()) == 1
    assert 0 < first["training_seconds"] <= first["seconds"] and not first["from_cache"]
    # One more evaluation: no training at all, the classifiers come from the cache.
    monkeypatch.setattr(mo, "train", _Counted())
    assert _monitor(small_grid, _live(small_grid, 6)) == 0
    captured = capsys.readouterr()
    second = json.loads(captured.out)
    assert (
        "training" not in captured.err
        and second["from_cache"]
        and second["training_seconds"] is None
    )
    assert [s["t"] for s in second["steps"]] == [4, 5, 6]
    assert second["steps"][:2] == first["steps"]
    # The same probabilities as a monitor trained afresh on the same campaigns.
    study, ds = load(small_grid / "s.toml"), open_grid(small_grid / "g")
    table = mo.training_table(ds, mo.grid_beliefs(study, ds), monitor_steps(study))
    fresh = original(mo.restrict(table, table.strategies == "prior-weighted"), seed=0)
    live = read_history(_live(small_grid, 6), study.space, "y", min_rows=2)
    advice = mo.advise(fresh, ds, live.X, live.y, study.belief, SETTING)
    cached = [[s["probabilities"][d] for d in second["distortions"]] for s in second["steps"]]
    np.testing.assert_allclose(cached, advice.probabilities, rtol=0, atol=1e-12)


def test_a_changed_grid_or_a_damaged_file_is_not_read(small_grid, tmp_path):
    study = load(small_grid / "s.toml")
    key = cache.MonitorKey.of(small_grid / "g", "prior-weighted", monitor_steps(study), 0.25, 0)
    assert len(key.grid_sha256) == 64
    other = cache.MonitorKey("0" * 64, key.strategy, key.steps, key.quantile, key.seed)
    assert other.name != key.name and cache.load(small_grid / "g", other) is None
    (tmp_path / "grid.nc").write_bytes(b"not a grid")
    damaged = cache.MonitorKey.of(tmp_path, "prior-weighted", (4,), 0.25, 0)
    path = tmp_path / cache.CACHE_FOLDER / damaged.name
    path.parent.mkdir()
    path.write_bytes(b"\x80 damaged")
    assert cache.load(tmp_path, damaged) is None


def test_an_unknown_setting_is_refused_before_any_training(small_grid, monkeypatch, capsys):
    monkeypatch.setattr(mo, "train", _Counted())
    monkeypatch.setattr(mo, "grid_beliefs", _Counted())
    live = _live(small_grid, 5)
    argv = ["monitor", str(small_grid / "s.toml"), "--observations", str(live), "--grid"]
    argv += [str(small_grid / "g"), "--response", "y", "--goal", "minimise"]
    out = small_grid / "refused"
    code = main([*argv, "--setting", "prior-weighted, decay hyperbolic:5", "--out", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "'--setting'" in err
    assert '"prior-weighted, decay hyperbolic:2"' in err and "hyperbolic:8" in err
    assert err.startswith("workbench: command line:") and not out.exists()


def test_an_interrupted_monitor_does_not_promise_to_resume(monkeypatch, capsys):
    import workbench.cli as cli

    def interrupted(args):
        raise KeyboardInterrupt

    monkeypatch.setattr(cli, "cmd_monitor", interrupted)
    code = cli.main(["monitor", "s.toml", "--observations", "live.csv", "--grid", "g"])
    err = capsys.readouterr().err.strip()
    assert code == 130 and len(err.splitlines()) == 1
    assert "not kept" in err and "resumes" not in err


def test_a_cache_file_not_signed_by_this_user_is_never_unpickled(tmp_path, monkeypatch):
    # A crafted pickle in someone's results folder must not run code: its signature (HMAC
    # under the user's private key) does not verify, so it is not loaded at all.
    import pickle

    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "home-cache"))
    marker = tmp_path / "ran"

    class Payload:
        def __reduce__(self):
            return (marker.write_text, ("code ran",))

    (tmp_path / "grid.nc").write_bytes(b"a grid")
    key = cache.MonitorKey.of(tmp_path, "prior-weighted", (4,), 0.25, 0)
    path = tmp_path / cache.CACHE_FOLDER / key.name
    path.parent.mkdir()
    path.write_bytes(b"\0" * 32 + pickle.dumps(Payload()))
    assert cache.load(tmp_path, key) is None
    assert not marker.exists()
    # The user's own file round-trips.
    assert cache.save(tmp_path, key, None) is not None
    assert cache.load(tmp_path, key) is None  # not a Monitor: refused after verifying


def test_the_first_training_shows_a_progress_bar_in_a_terminal(monkeypatch):
    import io

    from workbench.evidence import commands

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    screen = Terminal()
    monkeypatch.setattr("sys.stderr", screen)
    with commands._training_progress(4, 96) as progress:
        progress(1, 4)
        assert "training the monitor" in screen.getvalue() and "1/4" in screen.getvalue()
        progress(3, 4)
        assert "3/4" in screen.getvalue()


def test_audit_and_monitor_name_a_distortion_in_the_same_words_and_say_why_they_differ(
    small_grid, tmp_path, capsys
):
    from scipy.stats import qmc

    from workbench.evidence import audit as au
    from workbench.evidence import wording
    from workbench.evidence.pages import audit_lines
    from workbench.study.cells import SEVERITY_RADIUS
    from workbench.world.history import History

    study, ds = load(small_grid / "s.toml"), open_grid(small_grid / "g")
    X = qmc.Sobol(2, scramble=True, seed=1).random(16)
    history = History(X, np.sum((X - 0.45) ** 2, axis=1), "y", "minimise", "t.csv", "")
    severities = au.study_severities(study, ds)
    rng = np.random.default_rng(0)
    a = au.audit(
        history,
        study.belief,
        top=0.25,
        radius=SEVERITY_RADIUS,
        rng=rng,
        draws=8,
        severities=severities,
    )
    audit_out = audit_lines(a, study.space, "t.csv")
    assert _monitor(small_grid, _live(small_grid, 6)) == 0
    advice = json.loads(capsys.readouterr().out)
    argv = ["monitor", str(small_grid / "s.toml"), "--observations", str(_live(small_grid, 6))]
    argv += ["--grid", str(small_grid / "g"), "--response", "y", "--goal", "minimise"]
    assert main([*argv, "--setting", SETTING, "--out", str(tmp_path / "m")]) == 0
    monitor_out = capsys.readouterr().out.splitlines()
    # One phrase for the same measure: the distortion the evidence is most like.
    (said_a,) = [line for line in audit_out if line.startswith(wording.MOST_LIKE)]
    (said_m,) = [line for line in monitor_out if line.startswith(wording.MOST_LIKE)]
    assert said_a.startswith(f"{wording.MOST_LIKE} '{a.distortion}' by ")
    assert wording.READINGS["audit"] in said_a and wording.READINGS["monitor"] in said_m
    # The monitor names its most probable distortion at the last evaluation.
    last = advice["steps"][-1]
    top = max(last["probabilities"], key=last["probabilities"].get)
    assert said_m.startswith(f"{wording.MOST_LIKE} '{top}' by ") and last["most_like"] == said_m
    # And each says, in one line and the same words, why the other may name another one.
    assert audit_out.count(wording.WHY_THEY_DIFFER) == 1
    assert monitor_out.count(wording.WHY_THEY_DIFFER) == 1


def test_monitor_with_json_and_out_writes_a_page_of_headed_tables(small_grid, tmp_path, capsys):
    out = tmp_path / "page"
    assert _monitor(small_grid, _live(small_grid, 5), "--out", str(out)) == 0
    printed = capsys.readouterr()
    advice = json.loads(printed.out)
    assert f"monitor: {out / 'monitor.html'}" in printed.err
    page = (out / "monitor.html").read_text()
    # The advice once, as the verdict; the readings under their column headings.
    assert page.count("; advice: ") == 1 and '<p class="verdict">after evaluation 5' in page
    heads = re.findall(r"<thead><tr>(.*?)</tr></thead>", page)
    assert heads[0].startswith("<th>t</th><th>accuracy</th><th>base accuracy</th>")
    names = [f"<th>p({d})</th>" for d in advice["distortions"]]
    assert heads[1] == "<th>t</th>" + "".join(names) + "<th>cheapest action</th><th>sure</th>"
    rows = page.split("monitor_readings.csv")[0].rsplit("<tbody>", 1)[1]
    assert rows.count("<tr>") == len(advice["steps"])
