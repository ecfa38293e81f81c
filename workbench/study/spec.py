"""Studies: a TOML file that describes the grid to simulate, validated into frozen objects.

The format is documented in the README ("The study file"). Reading never half-succeeds: any
wrong value raises :class:`~workbench.validation.InputError` naming the file and the key.
"""

from __future__ import annotations

import hashlib
import itertools
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from ..engine import strategies as st
from ..seeding import MAX_SEED
from ..storage import read_input
from ..validation import (
    InputError,
    check_choice,
    check_keys,
    check_number,
    check_sequence,
    check_size,
    check_string,
    check_table,
    raw,
)
from ..world.distortions import EXACT, MISPLACE, Distortion
from ..world.reference import Belief
from ..world.space import Space
from .decay import Schedule, parse
from .tables import LandscapeEntry, belief_table, landscape_tables, space_table

__all__ = [
    "DESIGNS",
    "Decision",
    "LandscapeEntry",
    "StrategyFactors",
    "Study",
    "load",
    "parse_simulation",
    "parse_text",
    "simulation_document",
]

DESIGNS = ("belief", "sobol", "lhs")

_TOP_KEYS = (
    "title",
    "questions",
    "budget",
    "replicates",
    "seed",
    "target",
    "placement",
    "baselines",
    "initial",
    "landscape",
    "space",
    "belief",
    "distortion",
    "strategy",
    "decision",
    "random_multiple",
    "block",
    "truth",
)
_RULES = ("expected", "minimax", "cvar")
# Replicates of the truth grid: the real order of the settings must be measured well.
TRUTH_REPLICATES = 32
# Size limits, checked when the study is read, so that no value makes a command allocate or run
# without bound. A campaign's GP works on (campaigns, n, n) stacks and its cost grows as n³:
# 1,000 evaluations is far beyond a real experimental budget yet keeps a batch in memory.
MAX_BUDGET = 1_000
MAX_REPLICATES = 100_000
MAX_RANDOM_MULTIPLE = 10_000
# Replicates per chunk: a chunk's campaigns run as one lock-step batch held in memory.
MAX_BLOCK = 256
# A study file is a page of TOML; its data live in the CSV files it names.
MAX_STUDY_BYTES = 10 * 2**20


@dataclass(frozen=True)
class StrategyFactors:
    """A belief-guided strategy and the levels of its factors."""

    name: str
    decay: tuple[Schedule, ...]
    quantile: tuple[float, ...] = (st.DEFAULT_QUANTILE,)
    exploration: tuple[float, ...] = (st.DEFAULT_EXPLORATION,)


# How a decision standardises the metric within each landscape before landscapes are combined
# (see :mod:`workbench.analysis.standardise`), and the word that derives landscape weights
# from each landscape's resemblance to the study's earlier evaluations.
SCORES = ("raw", "ranks", "saving")
RESEMBLANCE = "resemblance"
EQUAL = "equal"


@dataclass(frozen=True)
class Decision:
    """The decision rule the recommendation uses (see :mod:`workbench.analysis`).

    ``weights`` are over distortions; ``landscapes`` over landscapes (by label or by kind, a
    kind's weight shared by its landscapes), ``"resemblance"`` or ``"equal"``; empty means
    resemblance when the study has earlier evaluations, else equal.
    ``score`` standardises the metric within each landscape (``SCORES``)."""

    rule: str = "expected"
    weights: dict = field(default_factory=dict)
    level: float = 0.25
    metric: str = "evaluations_to_target"
    landscapes: dict | str = field(default_factory=dict)
    score: str = "raw"


@dataclass(frozen=True)
class Study:
    """A validated study. ``space`` is None when beliefs are Gaussians of ``spread`` (cube units)
    centred on each landscape's optimum, on that landscape's own domain."""

    name: str
    title: str
    text: str
    budget: int
    replicates: int
    seed: int
    target: float
    initial: tuple[str, ...]
    initial_size: int | None
    landscapes: tuple[LandscapeEntry, ...]
    space: Space | None
    belief: Belief
    spread: float
    distortions: tuple[Distortion, ...]
    strategies: tuple[StrategyFactors, ...]
    baselines: tuple[str, ...]
    placement: str
    questions: tuple[str, ...]
    decision: Decision
    path: str = "<study>"
    random_multiple: int = 1
    block: int = 8
    truth: LandscapeEntry | None = None
    truth_replicates: int = 32

    @property
    def digest(self) -> str:
        """SHA-256 of the study text and of the files its landscapes read: a changed study,
        data file or function is a different grid."""
        h = hashlib.sha256(self.text.encode("utf-8"))
        for entry in self.landscapes:
            h.update(entry.label.encode())
            if entry.spec is not None and getattr(entry.spec, "digest", ""):
                h.update(entry.spec.digest.encode())
        return h.hexdigest()

    @property
    def without_belief(self) -> tuple[str, ...]:
        """The space's parameters that have no ``[belief.<name>]`` table: the belief is
        uniform over their range."""
        if self.space is None:
            return ()
        given = tomllib.loads(self.text).get("belief", {})
        return () if "points" in given else tuple(n for n in self.space.names if n not in given)

    def truth_study(self) -> Study:
        """The same campaigns on the truth: its one landscape, its replicates, no truth."""
        if self.truth is None:
            raise InputError("truth", "a [truth] table in the study", raw("none"), self.path)
        return replace(
            self,
            name=f"{self.name}-truth",
            landscapes=(self.truth,),
            replicates=self.truth_replicates,
            truth=None,
        )

    def design_size(self, dim: int) -> int:
        return self.initial_size if self.initial_size is not None else dim + 1

    @property
    def decay_levels(self) -> tuple[str, ...]:
        return _union(str(d) for s in self.strategies for d in s.decay)

    @property
    def quantile_levels(self) -> tuple[float, ...]:
        levels = _union(q for s in self.strategies if st.uses_quantile(s.name) for q in s.quantile)
        return levels or StrategyFactors.__dataclass_fields__["quantile"].default

    @property
    def exploration_levels(self) -> tuple[float, ...]:
        return _union(e for s in self.strategies for e in s.exploration)

    def settings(self):
        """Every (strategy, decay, quantile, exploration, initial) the study runs.

        Prior-weighted does not use the quantile: it runs at the first quantile level only and
        the grid repeats its result across the other levels.
        """
        for s in self.strategies:
            quantiles = s.quantile if st.uses_quantile(s.name) else s.quantile[:1]
            for d, q, e, i in itertools.product(s.decay, quantiles, s.exploration, self.initial):
                yield s.name, d, q, e, i


def _union(values) -> tuple:
    out: list = []
    for v in values:
        if v not in out:
            out.append(v)
    return tuple(out)


# --------------------------------------------------------------------------- reading


def load(path: str | Path) -> Study:
    """Read and validate a study file; every error names the file."""
    path = Path(path)
    where = str(path)
    data = read_input(path, "study", "a study file", MAX_STUDY_BYTES)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError("study", "UTF-8 text", raw("bytes that are not UTF-8"), where) from None
    return parse_text(text, name=path.stem, where=where)


def parse_text(
    text: str, *, name: str = "study", where: str = "<study>", base: str | Path | None = None
) -> Study:
    """Validate a study given as TOML text; files it names are found relative to ``base``
    (default: the folder of ``where`` when that is a file, else the working folder)."""
    if base is None:
        base = Path(where).parent if Path(where).is_file() else Path.cwd()
    base = Path(base)
    try:
        if not text.strip():
            raise InputError("study", "a TOML study", raw("an empty file"))
        try:
            doc = tomllib.loads(text)
        except tomllib.TOMLDecodeError as err:
            raise InputError("study", "valid TOML", raw(str(err))) from None
        return _parse(doc, text, name, where, base)
    except InputError as err:
        raise err.located(where) from None


# The simulate command's options and the study keys they fill: an error under a key names the
# option (longest key first, so that 'initial.size' is not read as 'initial').
SIMULATION_OPTIONS = {
    "budget": "--budget",
    "replicates": "--replicates",
    "seed": "--seed",
    "target": "--target",
    "placement": "--placement",
    "random_multiple": "--random-multiple",
    "initial": "--initial",
    "landscape[0].name": "--landscape",
    "landscape[0].dim": "--dim",
    "landscape[0].noise": "--noise",
    "landscape[0]": "--landscape",
    "belief.spread": "--belief-spread",
    "distortion.distorted.shift": "--shift",
    "distortion.distorted.scale": "--scale",
    "distortion.distorted.misplace": "--misplace",
    "strategy": "--strategy",
}
_FACTOR_OPTIONS = {"decay": "--decay", "quantile": "--quantile", "exploration": "--exploration"}


def simulation_document(options: Mapping[str, Any]) -> dict:
    """The ``simulate`` command's options as a study document: one textbook landscape in its
    own domain (labelled by its name), a Gaussian belief of ``belief_spread``, one distortion
    named ``distorted`` (``exact`` when it distorts nothing), one strategy with one level of
    each factor. ``initial`` is ``design`` or ``design:N``."""
    design, _, size = str(options["initial"]).partition(":")
    initial: dict[str, Any] = {"design": [design]}
    if size:
        initial["size"] = int(size) if size.isdigit() else size
    landscape = {"name": options["landscape"], "label": options["landscape"]}
    landscape["noise"] = options["noise"]
    if options.get("dim") is not None:
        landscape["dim"] = options["dim"]
    distorted = {"shift": options["shift"], "scale": options["scale"]}
    if options.get("misplace") is not None:
        distorted["misplace"] = options["misplace"]
    strategy = options["strategy"]
    return {
        "title": f"{strategy} on {options['landscape']}",
        "budget": options["budget"],
        "replicates": options["replicates"],
        "seed": options["seed"],
        "target": options["target"],
        "placement": options["placement"],
        "random_multiple": options["random_multiple"],
        "initial": initial,
        "landscape": [landscape],
        "belief": {"spread": options["belief_spread"]},
        "distortion": {"distorted": distorted},
        "strategy": {
            str(strategy): {
                "decay": [options["decay"]],
                "quantile": [options["quantile"]],
                "exploration": [options["exploration"]],
            }
        },
    }


def _option(key: str, strategy: str) -> str:
    """The command-line option that fills study key ``key``."""
    for factor, option in _FACTOR_OPTIONS.items():
        if key == f"strategy.{strategy}.{factor}":
            return option
    for prefix, option in sorted(SIMULATION_OPTIONS.items(), key=lambda kv: -len(kv[0])):
        if key == prefix or key.startswith(prefix + "."):
            return option
    return key


def parse_simulation(
    options: Mapping[str, Any], *, text: str = ""
) -> tuple[Study, StrategyFactors]:
    """The one-cell study of the ``simulate`` command, parsed by the study file's parser from
    :func:`simulation_document`, and its strategy's factor levels (a baseline's too, though it
    uses none); errors name the option and the command line."""
    where = "command line"
    try:
        doc = simulation_document(options)
        study = _parse(doc, text, "simulate", where, Path.cwd(), one_cell=True)
    except InputError as err:
        key = _option(err.key, str(options["strategy"]))
        raise InputError(key, err.expected, err.got, where) from None
    ((name, spec),) = doc["strategy"].items()
    return study, _factors(name, spec, _ONE_CELL_FACTORS)


def _parse(
    doc: dict, text: str, name: str, where: str, base: Path, one_cell: bool = False
) -> Study:
    """The study of a TOML document; ``one_cell`` is the ``simulate`` command's study (see
    :func:`parse_simulation`): one distortion (no exact one added) and one strategy, which may
    be a baseline."""
    check_keys(doc, "", _TOP_KEYS, required=("title",))
    title = check_string(doc["title"], "title")
    questions: tuple[str, ...] = ()
    if "questions" in doc:
        questions = tuple(
            check_string(q, "questions") for q in check_sequence(doc["questions"], "questions")
        )
    budget = check_size(
        doc.get("budget", 30), "budget", low=2, high=MAX_BUDGET, limit="the limit on a budget"
    )
    replicates = check_size(
        doc.get("replicates", 8),
        "replicates",
        low=1,
        high=MAX_REPLICATES,
        limit="the limit on replicates",
    )
    seed = check_size(
        doc.get("seed", 0), "seed", low=0, high=MAX_SEED, limit="the seeding helper's range"
    )
    target = check_number(doc.get("target", 0.05), "target", low=0.0, high=1.0, closed="right")
    placement = check_choice(doc.get("placement", "random"), "placement", ("random", "native"))

    space = space_table(doc["space"]) if "space" in doc else None
    landscapes = landscape_tables(doc.get("landscape"), space, base)
    belief, spread = belief_table(doc.get("belief", {}), space)

    initial = check_table(doc.get("initial", {}), "initial")
    check_keys(initial, "initial", ("design", "size"))
    designs = initial.get("design", ["belief"])
    designs = [designs] if isinstance(designs, str) else designs
    designs = tuple(
        check_choice(d, "initial.design", DESIGNS)
        for d in check_sequence(designs, "initial.design", unique=True)
    )
    size = initial.get("size")
    if size is not None:
        size = check_size(
            size, "initial.size", low=1, high=MAX_BUDGET, limit="the limit on a budget"
        )
    for entry in landscapes:
        n0 = size if size is not None else entry.dim + 1
        if budget <= n0:
            raise InputError("budget", f"larger than the initial design ({n0})", budget)

    distortions = _distortions(doc.get("distortion", {}), with_exact=not one_cell)
    if one_cell:
        strategies, baselines = _one_strategy(doc.get("strategy"))
    else:
        strategies = _strategies(doc.get("strategy"))
        baselines = doc.get("baselines", list(st.baselines()))
        baselines = tuple(
            check_choice(b, "baselines", st.baselines())
            for b in check_sequence(baselines, "baselines", min_length=0, unique=True)
        )
    for d in distortions:
        for entry in landscapes:
            if d.direction is not None and len(d.direction) != entry.dim:
                raise InputError(
                    f"distortion.{d.name}.direction",
                    f"{entry.dim} component(s), one per parameter of landscape {entry.label}",
                    list(d.direction),
                )
    decision = _decision(doc.get("decision", {}), distortions, landscapes)
    truth, truth_replicates = _truth(doc.get("truth"), space, base)
    multiple = check_size(
        doc.get("random_multiple", 1),
        "random_multiple",
        low=1,
        high=MAX_RANDOM_MULTIPLE,
        limit="the limit on the random baseline's multiple",
    )
    block = check_size(
        doc.get("block", 8), "block", low=1, high=MAX_BLOCK, limit="the limit on a chunk's block"
    )
    return Study(
        name=name,
        title=title,
        text=text,
        budget=budget,
        replicates=replicates,
        seed=seed,
        target=target,
        initial=designs,
        initial_size=size,
        landscapes=landscapes,
        space=space,
        belief=belief,
        spread=spread,
        distortions=distortions,
        strategies=strategies,
        baselines=baselines,
        placement=placement,
        questions=questions,
        decision=decision,
        path=where,
        random_multiple=multiple,
        block=block,
        truth=truth,
        truth_replicates=truth_replicates,
    )


def _truth(table, space, base) -> tuple[LandscapeEntry | None, int]:
    """The ``[truth]`` table: a landscape entry that is the real response (a ``table`` of
    measured configurations or the user's ``function``), and the replicates of its grid."""
    if table is None:
        return None, TRUTH_REPLICATES
    table = dict(check_table(table, "truth"))
    replicates = check_size(
        table.pop("replicates", TRUTH_REPLICATES),
        "truth.replicates",
        low=2,
        high=MAX_REPLICATES,
        limit="the limit on replicates",
    )
    if space is None:
        raise InputError("truth", "a study with a [space] (the truth lives on it)", raw("none"))
    try:
        (entry,) = landscape_tables([table], space, base)
    except InputError as err:
        raise InputError(
            err.key.replace("landscape[0]", "truth"), err.expected, err.got, err.where
        ) from None
    if entry.placed_at_belief:
        raise InputError(
            "truth", "a 'table' or a 'function' (the real response)", raw(f"a {entry.kind}")
        )
    return replace(entry, label="truth"), replicates


def _distortion(name: str, spec, key: str) -> Distortion:
    """One named distortion, every value checked (the constructor only asserts)."""
    spec = check_table(spec, key)
    check_keys(spec, key, ("shift", "scale", "misplace", "direction"))
    if not spec:
        raise InputError(key, "at least one of shift, scale, misplace", raw("an empty table"))
    misplace = spec.get("misplace")
    if misplace is not None:
        misplace = check_choice(misplace, f"{key}.misplace", MISPLACE)
    direction = None
    if "direction" in spec:
        direction = tuple(
            check_number(v, f"{key}.direction")
            for v in check_sequence(spec["direction"], f"{key}.direction")
        )
        if not any(direction):
            raise InputError(f"{key}.direction", "a non-zero vector", list(direction))
    return Distortion(
        name,
        shift=check_number(spec.get("shift", 0.0), f"{key}.shift", low=0.0),
        scale=check_number(spec.get("scale", 1.0), f"{key}.scale", low=0.0, closed="right"),
        misplace=misplace,
        direction=direction,
    )


def _distortions(table, with_exact: bool = True) -> tuple[Distortion, ...]:
    """The distortions of a study: ``exact`` first, then each named one (``with_exact`` false:
    the named ones alone, a named one that distorts nothing being ``exact``)."""
    table = check_table(table, "distortion")
    out = [EXACT] if with_exact else []
    for name, spec in table.items():
        key = f"distortion.{name}"
        if name == "factorial":
            spec = check_table(spec, key)
            check_keys(spec, key, ("shift", "scale"), required=("shift", "scale"))
            shifts = check_sequence(spec["shift"], f"{key}.shift", unique=True)
            scales = check_sequence(spec["scale"], f"{key}.scale", unique=True)
            shifts = [check_number(v, f"{key}.shift", low=0.0) for v in shifts]
            scales = [check_number(v, f"{key}.scale", low=0.0, closed="right") for v in scales]
            for s, f in itertools.product(shifts, scales):
                label = f"shift {s:g} scale {f:g}"
                out.append(Distortion(label, shift=s, scale=f))
            continue
        if name == "exact":
            raise InputError(key, "another name ('exact' is always included)", raw("'exact'"))
        distortion = _distortion(name, spec, key)
        out.append(EXACT if not with_exact and distortion.is_exact else distortion)
    names = [d.name for d in out]
    for n in names:
        if names.count(n) > 1:
            raise InputError(f"distortion.{n}", "a distortion named once", raw(f"{n!r} twice"))
    return tuple(out)


def _factors(name: str, spec, allowed: tuple[str, ...]) -> StrategyFactors:
    """A strategy's factor levels (decay, quantile, exploration), each checked."""
    key = f"strategy.{name}"
    spec = check_table(spec, key)
    check_keys(spec, key, allowed, required=("decay",))
    written = check_sequence(spec["decay"], f"{key}.decay", unique=True)
    decay = tuple(parse(d, f"{key}.decay") for d in written)
    for i, d in enumerate(decay):
        if d in decay[:i]:  # 'hyperbolic:2' and 'hyperbolic:2.0' are one schedule
            first = written[decay.index(d)]
            raise InputError(
                f"{key}.decay",
                "a list of different schedules",
                raw(f"{written[i]!r}, the same schedule as {first!r} ({d})"),
            )
    quantile = tuple(
        check_number(q, f"{key}.quantile", low=0.0, high=1.0, closed="neither")
        for q in check_sequence(
            spec.get("quantile", [st.DEFAULT_QUANTILE]), f"{key}.quantile", unique=True
        )
    )
    exploration = tuple(
        check_number(e, f"{key}.exploration", low=0.0, high=1.0)
        for e in check_sequence(
            spec.get("exploration", [st.DEFAULT_EXPLORATION]), f"{key}.exploration", unique=True
        )
    )
    return StrategyFactors(name, decay, quantile, exploration)


def _strategies(table) -> tuple[StrategyFactors, ...]:
    if table is None:
        raise InputError("strategy", "at least one [strategy.<name>] table", raw("nothing"))
    table = check_table(table, "strategy")
    if not table:
        raise InputError("strategy", "at least one [strategy.<name>] table", raw("an empty table"))
    out = []
    for name, spec in table.items():
        check_choice(name, "strategy", st.belief_strategies())
        key = f"strategy.{name}"
        spec = check_table(spec, key)
        allowed = ("decay", "quantile", "exploration")
        if not st.uses_quantile(name):
            allowed = ("decay", "exploration")
        out.append(_factors(name, spec, allowed))
    return tuple(out)


_ONE_CELL_FACTORS = ("decay", "quantile", "exploration")


def _one_strategy(table) -> tuple[tuple[StrategyFactors, ...], tuple[str, ...]]:
    """The one strategy of a one-cell study, belief-guided or a baseline (whose factor levels
    are checked as well, and then not used)."""
    table = check_table(table, "strategy")
    if len(table) != 1:
        raise InputError("strategy", "exactly one strategy", raw(", ".join(table) or "none"))
    name, spec = next(iter(table.items()))
    check_choice(name, "strategy", (*st.belief_strategies(), *st.baselines()))
    factors = _factors(name, spec, _ONE_CELL_FACTORS)
    if name in st.belief_strategies():
        return (factors,), ()
    return (), (name,)


def _decision(table, distortions, landscapes) -> Decision:
    table = check_table(table, "decision")
    check_keys(table, "decision", ("rule", "weights", "level", "metric", "landscapes", "score"))
    default = Decision()  # the defaults live in one place: the dataclass
    rule = check_choice(table.get("rule", default.rule), "decision.rule", _RULES)
    names = [d.name for d in distortions]
    weights = dict(check_table(table.get("weights", {}), "decision.weights"))
    for k, v in weights.items():
        check_choice(k, "decision.weights", names)
        check_number(v, f"decision.weights.{k}", low=0.0)
    if weights and sum(float(v) for v in weights.values()) <= 0:
        raise InputError("decision.weights", "weights that are not all 0", raw(str(weights)))
    level = check_number(
        table.get("level", default.level), "decision.level", low=0.0, high=1.0, closed="right"
    )
    metric = check_choice(
        table.get("metric", default.metric),
        "decision.metric",
        ("evaluations_to_target", "final_normalized_regret", "log_regret_area"),
    )
    score = check_choice(table.get("score", default.score), "decision.score", SCORES)
    return Decision(rule, weights, level, metric, _landscape_weights(table, landscapes), score)


def _landscape_weights(table, landscapes) -> dict | str:
    """``decision.landscapes``: "resemblance", or weights by landscape label or kind."""
    given = table.get("landscapes", {})
    if isinstance(given, str):
        return check_choice(given, "decision.landscapes", (RESEMBLANCE, EQUAL))
    given = dict(check_table(given, "decision.landscapes"))
    labels = [e.label for e in landscapes]
    kinds = list(dict.fromkeys(e.kind for e in landscapes))
    for k, v in given.items():
        check_choice(k, "decision.landscapes", [*labels, *kinds])
        check_number(v, f"decision.landscapes.{k}", low=0.0)
    for e in landscapes:
        if e.label in given and e.kind in given and e.label != e.kind:
            raise InputError(
                "decision.landscapes", f"{e.label!r} weighted once", raw("by label and by kind")
            )
    if given and sum(float(v) for v in given.values()) <= 0:
        raise InputError("decision.landscapes", "weights that are not all 0", raw(str(given)))
    return {k: float(v) for k, v in given.items()}
