"""The report's interactive decision: the numbers a decision rule combines, embedded in the page
as JSON, and a small script of our own (``decision.js``, inline, nothing fetched) that lets the
reader change the rule, the CVaR level, the distortion and landscape weights and recomputes
the recommendation, the runner-up, the value's interval and the ranking in the browser.

What is embedded, per belief-guided setting s, landscape l and distortion d:

- ``scored[s][l][d]``: the metric standardised by the rule's score within each landscape and
  averaged over replicates (Python's :func:`workbench.analysis.standardise.standardise`); the
  browser combines it as :func:`workbench.analysis.recommendation.setting_scores` does:
  ``Σ_l w_l x[s,l,d]`` with the landscape weights normalised to sum 1, then the rule over
  distortions (expected ``Σ_d v_d m_d``; minimax ``max_{v_d>0} m_d``; CVaR at level α
  ``(1/α) Σ_i min(v_(i), max(0, α − V_(i−1))) m_(i)``, worst first);
- ``means[s][l][d]``: the raw metric's mean over replicates (the value shown is the raw
  metric under the rule, whatever the score that chose);
- ``replicates[s][l][d][r]`` and ``index[draw][r]``: the campaigns' raw metric and the
  bootstrap's replicate indices (the same seed as Python's), from which the browser recomputes
  every draw's means and the percentile interval.

The stability and the leave-one-landscape-out choices are Python's only, for the study's rule.
"""

from __future__ import annotations

import json
import math
import shlex
from importlib import resources

import numpy as np
import xarray as xr

from .. import analysis as an
from ..analysis.dataset import RULES, coordinate_names
from ..analysis.recommendation import decision_values, stored_decision
from ..analysis.standardise import AVERAGED, standardise
from .page import escape

__all__ = ["COMMAND", "decision_data", "decision_section"]

# The command that reproduces a decision on the command line.
COMMAND = "workbench decide"


def _plain(a: np.ndarray) -> list:
    """An array as nested lists, NaN and ±inf as null (JSON has neither)."""
    if a.ndim == 0:
        v = float(a)
        return v if math.isfinite(v) else None
    return [_plain(x) for x in a]


def _cube(values: xr.DataArray) -> np.ndarray:
    return values.transpose("setting", "landscape", "distortion", ...).values.astype(float)


def decision_data(
    ds: xr.Dataset, rule: an.Rule, rs: an.Resampling, rec: an.Recommendation, folder: str
) -> dict:
    """Everything the page's script needs, as plain JSON-ready values (see the module)."""
    values = decision_values(ds, rule)
    std = standardise(values, rule.score)
    std = std.mean([d for d in AVERAGED if d in std.dims])
    settings = [str(s) for s in std["setting"].values]
    raw = values.sel(setting=settings)
    means = raw.mean("replicate")
    distortions = coordinate_names(ds, "distortion")
    landscapes = coordinate_names(ds, "landscape")
    stored = stored_decision(ds)["weights"]
    # The inputs start at the study's own numbers (normalised by the browser as by Python).
    given = stored if stored and rule.weights == _normalised(stored, distortions) else None
    weights = [float((given or rule.weights).get(d, 0.0)) for d in distortions]
    lw = rule.weights_over(landscapes)
    options = [
        f"--metric {rule.metric}",
        f"--score {rule.score}",
        *(
            f"{flag} {value}"
            for flag, value, default in (
                ("--draws", rs.draws, 1000),
                ("--confidence", rs.level, 0.95),
                ("--seed", rs.seed, 0),
            )
            if value != default
        ),
    ]
    return {
        "settings": settings,
        "distortions": distortions,
        "landscapes": landscapes,
        "rules": list(RULES),
        "rule": rule.rule,
        "level": rule.level,
        "weights": weights,
        "landscape_weights": None if lw is None else [lw[n] for n in landscapes],
        "metric": an.METRIC_NAMES[rule.metric][0],
        "unit": an.METRIC_NAMES[rule.metric][1],
        "score": rule.score,
        "confidence": rs.level,
        "scored": _plain(_cube(std)),
        "means": _plain(_cube(means)),
        "replicates": _plain(_cube(raw)),
        "index": rs.indices(raw.sizes["replicate"]).tolist(),
        "command": f"{COMMAND} {shlex.quote(folder)}",
        "options": " ".join(options),
        "python": {
            "setting": rec.setting,
            "value": rec.value,
            "interval": list(rec.interval),
            "runner_up": None if rec.runner_up is None else rec.runner_up["setting"],
        },
    }


def _normalised(weights: dict, names: list[str]) -> dict:
    total = float(sum(weights.values()))
    return {n: float(weights.get(n, 0.0)) / total for n in names}


def _json_for_script(data: dict) -> str:
    """JSON that cannot close the ``<script>`` element holding it: every ``<`` escaped."""
    return json.dumps(data, allow_nan=False, separators=(",", ":")).replace("<", "\\u003c")


def _inputs(kind: str, names: list[str]) -> str:
    return "".join(
        f'<label>{escape(n)} <input type="number" min="0" step="any" class="w-{kind}" '
        f'data-index="{i}"></label> '
        for i, n in enumerate(names)
    )


def decision_section(data: dict) -> list[str]:
    """The page's part: what is exact and what the browser recomputes, the controls, the live
    answer and ranking, the command, the embedded data and the script."""
    script = resources.files(__package__).joinpath("decision.js").read_text(encoding="utf-8")
    level = f"{100 * data['confidence']:.0f} %"
    rules = "".join(f'<option value="{r}">{r}</option>' for r in data["rules"])
    return [
        '<section id="explore" class="browser">',
        "<h3>Change the rule and the weights</h3>",
        "<p>Everything above this box and below it is computed by Python for the study's rule "
        "(exact, as <code>workbench decide</code> prints it). The numbers inside this box are "
        "recomputed by the script of this page, in your browser, from the per-setting, "
        "per-landscape and per-distortion means embedded in it: the choice, the value and the "
        "ranking with Python's formulas, adding in Python's order (the same numbers the command "
        f"prints), the {level} interval from the same bootstrap draws of the replicates (the "
        "same seed; it may differ from Python's in the last digits). Stability and the choice "
        "without each landscape are Python's only: run the command below for them. Weights "
        "need not sum to 1; each set is divided by its sum.</p>",
        "<noscript><p>This box needs JavaScript; the rest of the page does not.</p></noscript>",
        '<form id="decision-form">',
        f'<label>rule <select id="rule">{rules}</select></label> ',
        '<label>CVaR level (worst share of the weight) <input type="number" id="level" '
        'min="0" max="1" step="any"></label>',
        f"<fieldset><legend>distortion weights</legend>{_inputs('d', data['distortions'])}"
        "</fieldset>",
        f"<fieldset><legend>landscape weights</legend>{_inputs('l', data['landscapes'])}"
        "</fieldset>",
        '<button type="button" id="reset">back to the study\'s rule</button>',
        "</form>",
        '<p class="choice">Recommended (in the browser): <strong id="live-choice"></strong></p>',
        '<p id="live-value"></p>',
        '<p id="live-runner"></p>',
        '<p id="live-note" class="warning" hidden></p>',
        '<table id="live-ranking"></table>',
        "<p>The same decision on the command line:</p>",
        '<pre><code id="live-command"></code></pre>',
        f'<script type="application/json" id="decision-data">{_json_for_script(data)}</script>',
        f"<script>\n{script}</script>",
        "</section>",
    ]
