"""The study file's world tables: ``[space]``, ``[[landscape]]`` and ``[belief]``, validated
into a space, landscape entries and a belief (part of the one parser, :mod:`.spec`).

Every value is checked here, under its key; the constructors of :mod:`workbench.world` take
cube-level values and raise plain errors, which these functions turn into the key's error.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

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
from ..world import beliefs as bl
from ..world import kinds, surfaces
from ..world import landscapes as ls
from ..world.history import GOALS, read_history
from ..world.likeness import LikeData
from ..world.space import Categorical, Continuous, Integer, Space
from ..world.table import LOOKUPS, MeasuredTable

__all__ = [
    "MAX_CHOICES",
    "MAX_FEATURES",
    "MAX_LEVELS",
    "MAX_WIDTH",
    "LandscapeEntry",
    "belief_table",
    "landscape_tables",
    "space_table",
]

# Size limits of the world tables, checked when the study is read. A space has at most
# MAX_DIM parameters (the landscapes' own limit); an integer parameter at most MAX_LEVELS
# values (beliefs and figures hold one number per value: use a continuous parameter beyond);
# a categorical one at most MAX_CHOICES (each is one column of the GP's inputs).
MAX_LEVELS = 10_000
MAX_CHOICES = 100
# Random Fourier features of a drawn or fitted surface.
MAX_FEATURES = 65_536
# The widest Gaussian belief, in ranges of its parameter: wider is flat on the range.
MAX_WIDTH = 100.0


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
        """Whether the truth is moved to the belief's mode: textbook functions and surfaces
        drawn per replicate are; fitted surfaces, tables and the user's function are not
        (there the data or the function say where the optimum is). The kind says."""
        return self.spec is None or self.spec.placed_at_belief


def space_table(table) -> Space:
    table = check_table(table, "space")
    if not table:
        raise InputError("space", "at least one parameter", [])
    if len(table) > ls.MAX_DIM:
        raise InputError(
            "space",
            f"at most {ls.MAX_DIM} parameters (the limit on a study's dimension)",
            raw(f"{len(table)} parameters"),
        )
    params = []
    for name, spec in table.items():
        key = f"space.{name}"
        spec = check_table(spec, key)
        if "choices" in spec:
            check_keys(spec, key, ("choices", "unit"))
            choices = _choices(spec["choices"], key, name)
            params.append(Categorical(name, choices, spec.get("unit", "")))
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
        if kind == "integer" and scale == "log":
            # A log-scale integer (a batch size): the log coordinate, rounded (see space.py).
            check_string(name, "name")
            lower = check_number(spec["lower"], f"{key}.lower", low=1, integer=True)
            upper = check_number(spec["upper"], f"{key}.upper", integer=True)
            if lower >= upper:
                raise InputError(f"{key}.upper", f"an integer greater than lower ({lower})", upper)
            params.append(Continuous(name, lower, upper, True, unit, integer=True))
        elif kind == "integer":
            check_string(name, "name")
            lower = check_number(spec["lower"], f"{key}.lower", integer=True)
            upper = check_number(spec["upper"], f"{key}.upper", integer=True)
            if lower >= upper:
                raise InputError(f"{key}.upper", f"an integer greater than lower ({lower})", upper)
            if upper - lower + 1 > MAX_LEVELS:
                raise InputError(
                    f"{key}.upper",
                    f"at most {MAX_LEVELS - 1} above lower (the limit on an integer parameter's "
                    f"values; use a continuous one)",
                    spec["upper"],
                )
            params.append(Integer(name, lower, upper, unit))
        else:
            check_string(name, "name")
            lower = check_number(spec["lower"], f"{key}.lower")
            upper = check_number(spec["upper"], f"{key}.upper")
            if lower >= upper:
                raise InputError(f"{key}.upper", f"greater than lower ({lower:g})", upper)
            if scale == "log" and lower <= 0:
                raise InputError(f"{key}.lower", "positive on a log scale", lower)
            params.append(Continuous(name, lower, upper, scale == "log", unit))
    return Space(tuple(params))


def _choices(value, key: str, name: str) -> tuple[str, ...]:
    """A categorical parameter's choices: at least 2 distinct non-empty strings, at most
    :data:`MAX_CHOICES`."""
    choices = check_sequence(value, f"{key}.choices", min_length=2)
    if len(choices) > MAX_CHOICES:
        raise InputError(
            f"{key}.choices",
            f"at most {MAX_CHOICES} choices (the limit on a categorical parameter)",
            raw(f"{len(choices)} choices"),
        )
    check_string(name, "name")
    for choice in choices:
        check_string(choice, f"{key}.choices")
    if len(set(choices)) != len(choices):
        dup = next(c for c in choices if choices.count(c) > 1)
        raise InputError(f"{key}.choices", "a list of distinct choices", raw(f"{dup!r} twice"))
    return tuple(choices)


_KIND_KEYS = {
    "textbook": ("name", "dim", "noise", "label"),
    "drawn": ("drawn", "dim", "noise", "label"),
    "fitted": ("data", "response", "goal", "data_noise", "features", "warp", "noise", "label"),
    "likedata": ("drawn_like", "response", "goal", "features", "noise", "label"),
    "table": ("table", "response", "goal", "lookup", "noise", "label"),
    "function": ("function", "goal", "minimum", "maximum", "time_limit", "noise", "label"),
}
# The key that names each kind of landscape.
_KIND_OF = {
    "name": "textbook",
    "drawn": "drawn",
    "data": "fitted",
    "drawn_like": "likedata",
    "table": "table",
    "function": "function",
}
_NAMING_KEYS = ", ".join(f"'{k}'" for k in _KIND_OF)


def landscape_tables(entries, space: Space | None, base: Path) -> tuple[LandscapeEntry, ...]:
    if entries is None:
        raise InputError("landscape", "at least one [[landscape]] table", raw("nothing"))
    entries = check_sequence(entries, "landscape")
    out = []
    for i, entry in enumerate(entries):
        key = f"landscape[{i}]"
        entry = check_table(entry, key)
        if "objective" in entry:  # the old name of the key: refused by name
            raise InputError(
                f"{key}.objective", "written 'function' (the key's new name)", raw("'objective'")
            )
        kinds = [k for k in _KIND_OF if k in entry]
        if len(kinds) != 1:
            raise InputError(key, f"exactly one of {_NAMING_KEYS}", raw(", ".join(kinds) or "none"))
        kind = _KIND_OF[kinds[0]]
        check_keys(entry, key, _KIND_KEYS[kind])
        if kind != "textbook" and kind != "drawn" and space is None:
            raise InputError(
                key, f"a study with a [space] (a {kind} landscape lives on it)", raw("none")
            )
        noise = check_number(entry.get("noise", 0.0), f"{key}.noise", low=0.0)
        item = _PARSERS[kind](entry, key, space, noise, base)
        if "label" in entry:
            label = check_string(entry["label"], f"{key}.label")
            item = replace(item, label=label)
        if any(o.label == item.label for o in out):
            raise InputError(f"{key}.label", "a label used once", raw(f"{item.label} again"))
        out.append(item)
    return tuple(out)


def _textbook(entry, key, space, noise, base) -> LandscapeEntry:

    name = check_choice(entry["name"], f"{key}.name", ls.catalogue())
    dim = entry.get("dim")
    lowest, highest = ls.dimensions(name)
    if dim is None and space is not None:
        # A generic landscape takes the space's dimension; a fixed one keeps its own.
        dim = space.dim if lowest <= space.dim <= highest else None
    elif lowest == highest:
        if dim is not None and (isinstance(dim, bool) or dim != lowest):
            raise InputError(f"{key}.dim", f"{lowest} for {name}", dim)
    elif dim is not None:
        dim = check_number(dim, f"{key}.dim", low=lowest, high=highest, integer=True)
    landscape = ls.get(name, dim)
    if space is not None and landscape.dim != space.dim:
        raise InputError(
            f"{key}.name",
            f"a landscape of dimension {space.dim} (the space's)",
            raw(f"{name} of dimension {landscape.dim}"),
        )
    label = name if landscape.dim == ls.get(name).dim else f"{name}-{landscape.dim}d"
    return LandscapeEntry(name, landscape.dim, noise, label)


def _drawn(entry, key, space, noise, base) -> LandscapeEntry:

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

    value = table.get("features", surfaces.DEFAULT_FEATURES)
    return check_size(
        value, f"{key}.features", low=16, high=MAX_FEATURES, limit="the limit on features"
    )


def _goal(entry, key) -> str:

    return check_choice(entry.get("goal", "minimise"), f"{key}.goal", GOALS)


def _response_file(entry, key, file_key, space, base, min_rows=None):
    """The earlier evaluations a landscape reads: file, response column and goal, checked."""
    file = check_string(entry[file_key], f"{key}.{file_key}")
    if "response" not in entry:
        raise InputError(f"{key}.response", "the name of the response column", raw("nothing"))
    response = check_string(entry["response"], f"{key}.response")
    history = read_history(base / file, space, response, _goal(entry, key), min_rows=min_rows)
    return file, history


def _fitted(entry, key, space, noise, base) -> LandscapeEntry:

    file, history = _response_file(entry, key, "data", space, base)
    data_noise = entry.get("data_noise", "estimated")
    if data_noise != "estimated":
        data_noise = float(check_number(data_noise, f"{key}.data_noise", low=0.0, closed="neither"))
    else:
        data_noise = None
    warp = entry.get("warp", False)
    if not isinstance(warp, bool):
        raise InputError(f"{key}.warp", "true or false", warp)
    spec = kinds.Fitted.from_history(
        history, noise_sd=data_noise, features=_features(entry, key), warp=warp
    )
    return LandscapeEntry("fitted", space.dim, noise, f"fitted-{Path(file).stem}", "fitted", spec)


def _likedata(entry, key, space, noise, base) -> LandscapeEntry:

    file, history = _response_file(entry, key, "drawn_like", space, base)
    spec = LikeData.from_history(history, space, features=_features(entry, key))
    return LandscapeEntry(
        "likedata", space.dim, noise, f"likedata-{Path(file).stem}", "likedata", spec
    )


def _table(entry, key, space, noise, base) -> LandscapeEntry:

    file, history = _response_file(entry, key, "table", space, base, min_rows=2)
    lookup = check_choice(entry.get("lookup", "exact"), f"{key}.lookup", LOOKUPS)
    try:
        spec = MeasuredTable(
            X=tuple(map(tuple, history.X.tolist())),
            y=tuple(history.y.tolist()),
            levels=tuple(int(v) for v in space.levels),
            source=f"{history.rows} measured configurations in {Path(file).name}",
            lookup=lookup,
            digest=history.digest,
            response=history.response,
            goal=history.goal,
            lines=history.lines,
        )
    except ValueError as err:
        raise InputError(
            f"{key}.table",
            "a table that measures each configuration once",
            raw(str(err)),
            history.path,
        ) from None
    return LandscapeEntry("table", space.dim, noise, f"table-{Path(file).stem}", "table", spec)


def _user_function(entry, key, space, noise, base) -> LandscapeEntry:

    goal = _goal(entry, key)
    path, name = kinds.find_function(entry["function"], base, None, f"{key}.function")
    wrong = "maximum" if goal == "minimise" else "minimum"
    if wrong in entry:
        raise InputError(f"{key}.{wrong}", f"absent when goal = {goal!r}", entry[wrong])
    known = "minimum" if goal == "minimise" else "maximum"
    best = entry.get(known)
    if best is not None:
        best = float(check_number(best, f"{key}.{known}"))
        best = best if goal == "minimise" else -best
    # Seconds one evaluation may take before it is a failed one (default 10 s).
    limit = check_number(
        entry.get("time_limit", kinds.isolation.DEFAULT_TIME_LIMIT),
        f"{key}.time_limit",
        low=0.0,
        closed="neither",
    )
    spec = kinds.UserFunction(
        path, name, space, goal, best, digest=kinds.file_digest(path), time_limit=float(limit)
    )
    return LandscapeEntry("function", space.dim, noise, f"function-{name}", "function", spec)


# How each kind of landscape entry is parsed.
_PARSERS = {
    "textbook": _textbook,
    "drawn": _drawn,
    "fitted": _fitted,
    "likedata": _likedata,
    "table": _table,
    "function": _user_function,
}


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


def belief_table(table, space: Space | None):
    """The exact belief (None in landscape mode) and the spread used in landscape mode."""
    table = check_table(table, "belief")
    if space is None:
        check_keys(table, "belief", ("spread",))
        spread = check_number(
            table.get("spread", 0.1), "belief.spread", low=0.0, high=MAX_WIDTH, closed="right"
        )
        return None, spread
    if "points" in table:
        check_keys(table, "belief", ("points",))
        return _points_belief(table["points"], space), 0.0
    check_keys(table, "belief", space.names)
    marginals = []
    for p in space.parameters:
        spec = table.get(p.name, {"uniform": True})
        key = f"belief.{p.name}"
        try:
            marginals.append(_marginal(p, check_table(spec, key), key))
        except InputError:
            raise
        except ValueError as err:  # a constructor's own check, should the parser miss one
            raise InputError(key, "a possible belief", raw(str(err))) from None
    return bl.Product(tuple(marginals)), 0.0


def _marginal(p, spec: dict, key: str):
    check_keys(spec, key, _BELIEF_KEYS)
    discrete = isinstance(p, (Integer, Categorical))
    if "probabilities" in spec:
        check_keys(spec, key, ("probabilities",))
        probabilities = _probabilities(p, spec["probabilities"], key)
        with warnings.catch_warnings():  # the parser's warning names the key instead
            warnings.simplefilter("ignore", UserWarning)
            return bl.probabilities_for(p, probabilities)
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
            parts.append(_gaussian(p, part, pkey))
        if not any(weights):
            raise InputError(f"{key}.mixture", "weights that are not all 0", raw("all 0"))
        return bl.Mixture(tuple(parts), tuple(weights))
    if "centre" in spec:
        check_keys(spec, key, ("centre", "spread", "within", "factor"))
        return _gaussian(p, spec, key)
    raise InputError(key, "one of " + ", ".join(_BELIEF_KEYS), raw("none of them"))


def _gaussian(p, spec, key: str):
    """A Gaussian marginal from ``centre`` and one of ``spread``, ``within``, ``factor``."""
    given = [k for k in ("spread", "within", "factor") if k in spec]
    if len(given) != 1:
        raise InputError(
            key, "exactly one of 'spread', 'within', 'factor'", raw(", ".join(given) or "none")
        )
    (how,) = given
    centre = check_number(spec["centre"], f"{key}.centre", low=p.lower, high=p.upper)
    log = isinstance(p, Continuous) and p.log
    if how == "within" and log:
        raise InputError(f"{key}.within", "'factor' on a log-scale parameter", raw("'within'"))
    if how == "factor" and not log:
        raise InputError(
            f"{key}.factor", "'within' or 'spread' on a linear parameter", raw("'factor'")
        )
    # A belief wider than MAX_WIDTH ranges is flat on the range (say uniform = true); wider
    # ones only overflow. Each way of giving the width is bounded at that many ranges.
    if how == "factor":
        high = float(np.exp(min(MAX_WIDTH * np.log(p.upper / p.lower), 700.0)))
        value = check_number(spec[how], f"{key}.factor", low=1.0, high=high, closed="right")
    elif how == "within":
        width = p.levels if isinstance(p, Integer) else p.upper - p.lower
        value = check_number(
            spec[how], f"{key}.within", low=0.0, high=MAX_WIDTH * width, closed="right"
        )
    else:
        value = check_number(spec[how], f"{key}.spread", low=0.0, high=MAX_WIDTH, closed="right")
    return bl.gaussian_for(p, centre, **{how: value})


def _probabilities(p, probabilities, key: str):
    """A discrete parameter's probabilities (a list, or a table by level), each checked."""
    if isinstance(p, Continuous):
        raise InputError(
            key,
            "a Gaussian, Beta or uniform belief on a continuous parameter",
            raw("probabilities"),
        )
    key = f"{key}.probabilities"
    labels = bl.level_labels(p)
    if isinstance(probabilities, dict):
        for name in probabilities:
            if str(name) not in labels:
                check_choice(str(name), key, labels)
        values = list(probabilities.values())
    else:
        if not isinstance(probabilities, list) or len(probabilities) != len(labels):
            raise InputError(key, f"a list of {len(labels)} probabilities", probabilities)
        values = probabilities
    for v in values:
        check_number(v, key, low=0.0)
    total = float(sum(values))
    if total <= 0:
        raise InputError(key, "a list that is not all zero", values)
    if abs(total - 1.0) > 1e-9:
        warnings.warn(f"{key} sum to {total:g}; normalised to 1", stacklevel=2)
    return probabilities


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
