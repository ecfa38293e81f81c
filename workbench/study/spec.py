"""Studies: a TOML file that describes the grid to simulate, validated into frozen objects.

The format is documented in the README ("The study file"). Reading never half-succeeds: any
wrong value raises :class:`~workbench.validation.InputError` naming the file and the key.
"""

from __future__ import annotations

import hashlib
import itertools
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..validation import (
    InputError,
    check_choice,
    check_keys,
    check_number,
    check_sequence,
    check_string,
    check_table,
    raw,
)
from ..world import beliefs as bl
from ..world.distortions import EXACT, MISPLACE, Distortion
from ..world.reference import Belief
from ..world.space import Categorical, Continuous, Integer, Space
from .decay import Schedule, parse

__all__ = [
    "BASELINES",
    "BELIEF_STRATEGIES",
    "DESIGNS",
    "LandscapeEntry",
    "StrategyFactors",
    "Study",
    "load",
    "parse_decision",
    "parse_text",
]

BELIEF_STRATEGIES = ("pseudo-posterior", "prior-weighted")
BASELINES = ("no-belief", "random", "belief-sampling")
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
)
_RULES = ("expected", "minimax", "cvar")


@dataclass(frozen=True)
class LandscapeEntry:
    """A landscape of the study: name, dimension, observation noise and kind.

    ``noise`` is the observation noise's standard deviation as a fraction of the landscape's
    reference gap (median minus minimum), so that noise levels compare across landscapes.
    ``kind`` is one of :data:`workbench.world.kinds.KINDS`; for all but ``textbook``, ``spec``
    builds each replicate's landscape (:mod:`workbench.world.kinds`).
    """

    name: str
    dim: int
    noise: float = 0.0
    label: str = ""
    kind: str = "textbook"
    spec: Any = None

    def __post_init__(self):
        if not self.label:
            object.__setattr__(self, "label", self.name)

    @property
    def placed_at_belief(self) -> bool:
        """Whether the truth is moved to the belief's mode (not for fitted landscapes and the
        user's objective: there the data or the function say where the optimum is)."""
        return self.kind in ("textbook", "drawn")


@dataclass(frozen=True)
class StrategyFactors:
    """A belief-guided strategy and the levels of its factors."""

    name: str
    decay: tuple[Schedule, ...]
    quantile: tuple[float, ...] = (0.25,)
    exploration: tuple[float, ...] = (0.0,)


@dataclass(frozen=True)
class Decision:
    """The decision rule the recommendation uses (see :mod:`workbench.analysis`)."""

    rule: str = "expected"
    weights: dict = field(default_factory=dict)
    level: float = 0.25
    metric: str = "evaluations_to_target"


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

    @property
    def digest(self) -> str:
        """SHA-256 of the study text and of the files its landscapes read: a changed study,
        data file or objective is a different grid."""
        h = hashlib.sha256(self.text.encode("utf-8"))
        for entry in self.landscapes:
            if entry.spec is not None and getattr(entry.spec, "digest", ""):
                h.update(entry.spec.digest.encode())
        return h.hexdigest()

    def design_size(self, dim: int) -> int:
        return self.initial_size if self.initial_size is not None else dim + 1

    @property
    def decay_levels(self) -> tuple[str, ...]:
        return _union(str(d) for s in self.strategies for d in s.decay)

    @property
    def quantile_levels(self) -> tuple[float, ...]:
        levels = _union(
            q for s in self.strategies if s.name == "pseudo-posterior" for q in s.quantile
        )
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
            quantiles = s.quantile if s.name == "pseudo-posterior" else s.quantile[:1]
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
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError("study", "an existing file", raw(f"no file at {where}"), where) from None
    except OSError as err:
        raise InputError("study", "a readable file", raw(err.strerror or str(err)), where) from None
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


def parse_decision(text: str) -> Decision:
    """The [decision] table of a study's text alone (what the analysis needs from a grid's
    study, without reading the files its landscapes name)."""
    doc = tomllib.loads(text)
    return _decision(doc.get("decision", {}), _distortions(doc.get("distortion", {})))


def _parse(doc: dict, text: str, name: str, where: str, base: Path) -> Study:
    check_keys(doc, "", _TOP_KEYS, required=("title",))
    title = check_string(doc["title"], "title")
    questions: tuple[str, ...] = ()
    if "questions" in doc:
        questions = tuple(
            check_string(q, "questions") for q in check_sequence(doc["questions"], "questions")
        )
    budget = check_number(doc.get("budget", 30), "budget", low=2, integer=True)
    replicates = check_number(doc.get("replicates", 8), "replicates", low=1, integer=True)
    seed = check_number(doc.get("seed", 0), "seed", low=0, integer=True)
    target = check_number(doc.get("target", 0.05), "target", low=0.0, high=1.0, closed="right")
    placement = check_choice(doc.get("placement", "random"), "placement", ("random", "native"))

    space = _space(doc["space"]) if "space" in doc else None
    landscapes = _landscapes(doc.get("landscape"), space, base)
    belief, spread = _belief(doc.get("belief", {}), space)

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
        size = check_number(size, "initial.size", low=1, integer=True)
    for entry in landscapes:
        n0 = size if size is not None else entry.dim + 1
        if budget <= n0:
            raise InputError("budget", f"larger than the initial design ({n0})", budget)

    distortions = _distortions(doc.get("distortion", {}))
    strategies = _strategies(doc.get("strategy"))
    baselines = doc.get("baselines", list(BASELINES))
    baselines = tuple(
        check_choice(b, "baselines", BASELINES)
        for b in check_sequence(baselines, "baselines", min_length=0, unique=True)
    )
    decision = _decision(doc.get("decision", {}), distortions)
    multiple = check_number(doc.get("random_multiple", 1), "random_multiple", low=1, integer=True)
    block = check_number(doc.get("block", 8), "block", low=1, integer=True)
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
    )


def _space(table) -> Space:
    table = check_table(table, "space")
    params = []
    for name, spec in table.items():
        key = f"space.{name}"
        spec = check_table(spec, key)
        if "choices" in spec:
            check_keys(spec, key, ("choices", "unit"))
            choices = check_sequence(spec["choices"], f"{key}.choices", min_length=2)
            params.append(Categorical(name, tuple(choices), spec.get("unit", "")))
            continue
        check_keys(
            spec, key, ("lower", "upper", "scale", "type", "unit"), required=("lower", "upper")
        )
        kind = check_choice(
            spec.get("type", "continuous"), f"{key}.type", ("continuous", "integer")
        )
        scale = check_choice(spec.get("scale", "linear"), f"{key}.scale", ("linear", "log"))
        unit = spec.get("unit", "")
        if not isinstance(unit, str):
            raise InputError(f"{key}.unit", "a string", unit)
        if kind == "integer":
            if scale == "log":
                raise InputError(f"{key}.scale", "'linear' for an integer parameter", scale)
            params.append(Integer(name, spec["lower"], spec["upper"], unit))
        else:
            params.append(Continuous(name, spec["lower"], spec["upper"], scale == "log", unit))
    return Space(tuple(params))


_KIND_KEYS = {
    "textbook": ("name", "dim", "noise", "label"),
    "drawn": ("drawn", "dim", "noise", "label"),
    "fitted": ("data", "response", "goal", "data_noise", "features", "noise", "label"),
    "objective": ("objective", "goal", "minimum", "maximum", "noise", "label"),
}
_KIND_OF = {"name": "textbook", "drawn": "drawn", "data": "fitted", "objective": "objective"}


def _landscapes(entries, space: Space | None, base: Path) -> tuple[LandscapeEntry, ...]:
    if entries is None:
        raise InputError("landscape", "at least one [[landscape]] table", raw("nothing"))
    entries = check_sequence(entries, "landscape")
    out = []
    for i, entry in enumerate(entries):
        key = f"landscape[{i}]"
        entry = check_table(entry, key)
        kinds = [k for k in _KIND_OF if k in entry]
        if len(kinds) != 1:
            raise InputError(
                key,
                "exactly one of 'name', 'drawn', 'data' or 'objective'",
                raw(", ".join(kinds) or "none"),
            )
        kind = _KIND_OF[kinds[0]]
        check_keys(entry, key, _KIND_KEYS[kind])
        if kind != "textbook" and kind != "drawn" and space is None:
            raise InputError(
                key, f"a study with a [space] (a {kind} landscape lives on it)", raw("none")
            )
        noise = check_number(entry.get("noise", 0.0), f"{key}.noise", low=0.0)
        if kind == "textbook":
            item = _textbook(entry, key, space, noise)
        elif kind == "drawn":
            item = _drawn(entry, key, space, noise)
        elif kind == "fitted":
            item = _fitted(entry, key, space, noise, base)
        else:
            item = _objective(entry, key, space, noise, base)
        if "label" in entry:
            label = check_string(entry["label"], f"{key}.label")
            item = replace(item, label=label)
        if any(o.label == item.label for o in out):
            raise InputError(f"{key}.label", "a label used once", raw(f"{item.label} again"))
        out.append(item)
    return tuple(out)


def _textbook(entry, key, space, noise) -> LandscapeEntry:
    from ..world import landscapes as ls

    name = check_choice(entry["name"], f"{key}.name", ls.catalogue())
    dim = entry.get("dim")
    try:
        if dim is None and space is not None:
            # A generic landscape takes the space's dimension; a fixed one keeps its own.
            try:
                landscape = ls.get(name, space.dim)
            except InputError:
                landscape = ls.get(name)
        else:
            landscape = ls.get(name, dim)
    except InputError as err:
        raise InputError(f"{key}.dim", err.expected, err.got) from None
    if space is not None and landscape.dim != space.dim:
        raise InputError(
            f"{key}.name",
            f"a landscape of dimension {space.dim} (the space's)",
            raw(f"{name} of dimension {landscape.dim}"),
        )
    label = name if landscape.dim == ls.get(name).dim else f"{name}-{landscape.dim}d"
    return LandscapeEntry(name, landscape.dim, noise, label)


def _drawn(entry, key, space, noise) -> LandscapeEntry:
    from ..world import kinds, surfaces
    from ..world import landscapes as ls

    table = check_table(entry["drawn"], f"{key}.drawn")
    check_keys(table, f"{key}.drawn", ("smoothness", "length_scale", "features"))
    if space is not None:
        if "dim" in entry:
            raise InputError(
                f"{key}.dim", "absent (a drawn landscape takes the space's)", entry["dim"]
            )
        dim = space.dim
    else:
        dim = check_number(entry.get("dim", 2), f"{key}.dim", low=1, high=ls.MAX_DIM, integer=True)
    smoothness = check_number(table.get("smoothness", 2.5), f"{key}.drawn.smoothness")
    if float(smoothness) not in surfaces.SMOOTHNESS_VALUES:
        allowed = ", ".join(f"{v:g}" for v in surfaces.SMOOTHNESS_VALUES)
        raise InputError(f"{key}.drawn.smoothness", f"one of {allowed}", smoothness)
    scale = table.get("length_scale", 0.2)
    scales = [scale] if not isinstance(scale, list) else scale
    if len(scales) not in (1, dim):
        raise InputError(
            f"{key}.drawn.length_scale", f"one number or {dim} (one per parameter)", scale
        )
    scales = tuple(
        float(check_number(v, f"{key}.drawn.length_scale", low=0.0, high=10.0, closed="right"))
        for v in scales
    )
    features = _features(table, f"{key}.drawn")
    spec = kinds.Drawn(float(smoothness), scales, features)
    label = f"drawn-{smoothness:g}-{'-'.join(f'{v:g}' for v in scales)}"
    return LandscapeEntry("drawn", dim, noise, label, "drawn", spec)


def _features(table, key) -> int:
    """Random Fourier features of a drawn or fitted surface."""
    from ..world import surfaces

    value = table.get("features", surfaces.DEFAULT_FEATURES)
    return check_number(value, f"{key}.features", low=16, high=65536, integer=True)


def _goal(entry, key) -> str:
    from ..evidence.history import GOALS

    return check_choice(entry.get("goal", "minimise"), f"{key}.goal", GOALS)


def _fitted(entry, key, space, noise, base) -> LandscapeEntry:
    from ..evidence.history import read_history
    from ..world import kinds

    file = check_string(entry["data"], f"{key}.data")
    if "response" not in entry:
        raise InputError(f"{key}.response", "the name of the response column", raw("nothing"))
    response = check_string(entry["response"], f"{key}.response")
    goal = _goal(entry, key)
    data_noise = entry.get("data_noise", "estimated")
    if data_noise != "estimated":
        data_noise = float(check_number(data_noise, f"{key}.data_noise", low=0.0, closed="neither"))
    else:
        data_noise = None
    features = _features(entry, key)
    history = read_history(base / file, space, response, goal)
    spec = kinds.Fitted.from_history(history, noise_sd=data_noise, features=features)
    return LandscapeEntry("fitted", space.dim, noise, f"fitted-{Path(file).stem}", "fitted", spec)


def _objective(entry, key, space, noise, base) -> LandscapeEntry:
    from ..world import kinds

    goal = _goal(entry, key)
    path, name = kinds.find_function(entry["objective"], base, None, f"{key}.objective")
    wrong = "maximum" if goal == "minimise" else "minimum"
    if wrong in entry:
        raise InputError(f"{key}.{wrong}", f"absent when goal = {goal!r}", entry[wrong])
    known = "minimum" if goal == "minimise" else "maximum"
    best = entry.get(known)
    if best is not None:
        best = float(check_number(best, f"{key}.{known}"))
        best = best if goal == "minimise" else -best
    spec = kinds.Objective(path, name, space, goal, best, digest=kinds.file_digest(path))
    return LandscapeEntry("objective", space.dim, noise, f"objective-{name}", "objective", spec)


_BELIEF_KEYS = (
    "centre",
    "spread",
    "within",
    "factor",
    "beta",
    "uniform",
    "probabilities",
    "mixture",
)


def _belief(table, space: Space | None):
    """The exact belief (None in landscape mode) and the spread used in landscape mode."""
    table = check_table(table, "belief")
    if space is None:
        check_keys(table, "belief", ("spread",))
        spread = check_number(table.get("spread", 0.1), "belief.spread", low=0.0, closed="right")
        return None, spread
    if "points" in table:
        check_keys(table, "belief", ("points",))
        return _points_belief(table["points"], space), 0.0
    check_keys(table, "belief", space.names)
    marginals = []
    for p in space.parameters:
        spec = table.get(p.name, {"uniform": True})
        marginals.append(_marginal(p, check_table(spec, f"belief.{p.name}"), f"belief.{p.name}"))
    return bl.Product(tuple(marginals)), 0.0


def _marginal(p, spec: dict, key: str):
    check_keys(spec, key, _BELIEF_KEYS)
    discrete = isinstance(p, (Integer, Categorical))
    if "probabilities" in spec:
        check_keys(spec, key, ("probabilities",))
        return bl.probabilities_for(p, spec["probabilities"], key=key)
    if "uniform" in spec:
        check_keys(spec, key, ("uniform",))
        if spec["uniform"] is not True:
            raise InputError(f"{key}.uniform", "true", spec["uniform"])
        return bl.Discrete(tuple([1.0] * p.levels)) if discrete else bl.Uniform()
    if isinstance(p, Categorical):
        raise InputError(
            key,
            "'probabilities' or 'uniform' for a categorical parameter",
            raw(", ".join(spec) or "nothing"),
        )
    if "beta" in spec:
        check_keys(spec, key, ("beta",))
        ab = check_sequence(spec["beta"], f"{key}.beta", min_length=2)
        if len(ab) != 2:
            raise InputError(f"{key}.beta", "two numbers [a, b]", ab)
        beta = bl.Beta(
            check_number(ab[0], f"{key}.beta", low=0.0, closed="right"),
            check_number(ab[1], f"{key}.beta", low=0.0, closed="right"),
        )
        return bl.Discrete.from_marginal(beta, p.levels) if discrete else beta
    if "mixture" in spec:
        check_keys(spec, key, ("mixture",))
        parts, weights = [], []
        for i, part in enumerate(check_sequence(spec["mixture"], f"{key}.mixture", min_length=2)):
            pkey = f"{key}.mixture[{i}]"
            part = check_table(part, pkey)
            check_keys(
                part,
                pkey,
                ("centre", "spread", "within", "factor", "weight"),
                required=("centre", "weight"),
            )
            weights.append(check_number(part["weight"], f"{pkey}.weight", low=0.0))
            g = {k: v for k, v in part.items() if k not in ("weight", "centre")}
            parts.append(bl.gaussian_for(p, part["centre"], key=pkey, **g))
        return bl.Mixture(tuple(parts), tuple(weights))
    if "centre" in spec:
        check_keys(spec, key, ("centre", "spread", "within", "factor"))
        g = {k: v for k, v in spec.items() if k != "centre"}
        return bl.gaussian_for(p, spec["centre"], key=key, **g)
    raise InputError(key, "one of " + ", ".join(_BELIEF_KEYS), raw("none of them"))


def _points_belief(points, space: Space):
    rows = []
    for i, point in enumerate(check_sequence(points, "belief.points", min_length=2)):
        key = f"belief.points[{i}]"
        point = check_table(point, key)
        check_keys(point, key, space.names, required=space.names)
        row = []
        for p in space.parameters:
            value = point[p.name]
            if isinstance(p, Categorical):
                row.append(
                    float(
                        p.to_unit(np.array([check_choice(value, f"{key}.{p.name}", p.choices)]))[0]
                    )
                )
            else:
                check_number(value, f"{key}.{p.name}", low=p.lower, high=p.upper)
                row.append(float(p.to_unit(value)))
        rows.append(row)
    return bl.from_points(np.array(rows), space)


def _distortions(table) -> tuple[Distortion, ...]:
    table = check_table(table, "distortion")
    out = [EXACT]
    for name, spec in table.items():
        key = f"distortion.{name}"
        if name == "factorial":
            spec = check_table(spec, key)
            check_keys(spec, key, ("shift", "scale"), required=("shift", "scale"))
            shifts = check_sequence(spec["shift"], f"{key}.shift", unique=True)
            scales = check_sequence(spec["scale"], f"{key}.scale", unique=True)
            for s, f in itertools.product(shifts, scales):
                label = f"shift {s:g} scale {f:g}"
                out.append(Distortion(label, shift=s, scale=f))
            continue
        if name == "exact":
            raise InputError(key, "another name ('exact' is always included)", raw("'exact'"))
        spec = check_table(spec, key)
        check_keys(spec, key, ("shift", "scale", "misplace", "direction"))
        if not spec:
            raise InputError(key, "at least one of shift, scale, misplace", raw("an empty table"))
        misplace = spec.get("misplace")
        if misplace is not None:
            check_choice(misplace, f"{key}.misplace", MISPLACE)
        out.append(
            Distortion(
                name,
                shift=spec.get("shift", 0.0),
                scale=spec.get("scale", 1.0),
                misplace=misplace,
                direction=tuple(spec["direction"]) if "direction" in spec else None,
            )
        )
    names = [d.name for d in out]
    for n in names:
        if names.count(n) > 1:
            raise InputError(f"distortion.{n}", "a distortion named once", raw(f"{n!r} twice"))
    return tuple(out)


def _strategies(table) -> tuple[StrategyFactors, ...]:
    if table is None:
        raise InputError("strategy", "at least one [strategy.<name>] table", raw("nothing"))
    table = check_table(table, "strategy")
    if not table:
        raise InputError("strategy", "at least one [strategy.<name>] table", raw("an empty table"))
    out = []
    for name, spec in table.items():
        check_choice(name, "strategy", BELIEF_STRATEGIES)
        key = f"strategy.{name}"
        spec = check_table(spec, key)
        allowed = ("decay", "quantile", "exploration")
        if name == "prior-weighted":
            allowed = ("decay", "exploration")
        check_keys(spec, key, allowed, required=("decay",))
        decay = tuple(
            parse(d, f"{key}.decay")
            for d in check_sequence(spec["decay"], f"{key}.decay", unique=True)
        )
        quantile = tuple(
            check_number(q, f"{key}.quantile", low=0.0, high=1.0, closed="neither")
            for q in check_sequence(spec.get("quantile", [0.25]), f"{key}.quantile", unique=True)
        )
        exploration = tuple(
            check_number(e, f"{key}.exploration", low=0.0, high=1.0)
            for e in check_sequence(
                spec.get("exploration", [0.0]), f"{key}.exploration", unique=True
            )
        )
        out.append(StrategyFactors(name, decay, quantile, exploration))
    return tuple(out)


def _decision(table, distortions) -> Decision:
    table = check_table(table, "decision")
    check_keys(table, "decision", ("rule", "weights", "level", "metric"))
    rule = check_choice(table.get("rule", "expected"), "decision.rule", _RULES)
    names = [d.name for d in distortions]
    weights = dict(check_table(table.get("weights", {}), "decision.weights"))
    for k, v in weights.items():
        check_choice(k, "decision.weights", names)
        check_number(v, f"decision.weights.{k}", low=0.0)
    level = check_number(
        table.get("level", 0.25), "decision.level", low=0.0, high=1.0, closed="right"
    )
    metric = check_choice(
        table.get("metric", "evaluations_to_target"),
        "decision.metric",
        ("evaluations_to_target", "final_normalized_regret", "log_regret_area"),
    )
    return Decision(rule, weights, level, metric)
