"""The grid file: every chunk of a study assembled into one NetCDF file, chunk by chunk.

Dimensions: ``strategy`` (the belief-guided strategies), ``landscape``, ``distortion``,
``decay``, ``quantile``, ``exploration``, ``initial``, ``replicate``, ``evaluation``
(1 … budget), ``coordinate`` (one per parameter), and ``baseline``.

Variables of the belief-guided strategies, over (strategy, landscape, distortion, decay,
quantile, exploration, initial, replicate, evaluation): ``best`` (best noise-free value so
far), ``regret``, ``normalized_regret``, ``observed`` (what the strategy saw), ``value``
(noise-free), ``failed`` (1 where the evaluation failed), ``weight`` (λ(t)), ``threshold``
(f_γ(t)); ``point`` (user units; categorical columns hold the choice index) and ``point_cube``
(unit cube) add the ``coordinate`` dimension. The same names prefixed ``baseline_`` hold the
baselines over (baseline, landscape, distortion, replicate, evaluation).

Per cell: ``mode_value`` (the landscape's value at the belief's mode, the expert's best guess),
``severity_distance`` and ``severity_mass`` over (landscape, distortion, replicate); per
placement ``minimum`` and ``gap`` over (landscape, replicate), and where the (first) global
minimiser lies, ``optimum`` (user units) and ``optimum_cube``, over (landscape, replicate,
coordinate). For a fitted landscape, ``optimum_data_distance`` over (landscape, replicate):
the distance (cube units) from the replicate's optimum to the nearest earlier evaluation it
was fitted to, with ``optimum_text`` (that optimum in the user's units) and the attribute
``far_from_data`` (the distance beyond which it lies far outside the data). Per landscape:
``landscape_kind`` (textbook, drawn, fitted, function),
``landscape_noise`` and ``minimum_estimated`` (1 where the minimum comes from a search rather
than a publication or the user).

What the report draws and decides from, written at run time so that nothing after the run
reads the study or its files: the decision rule as attributes ``decision_rule``,
``decision_weights`` (JSON), ``decision_level`` and ``decision_metric``; the belief marginals of
replicate 0 of the first :data:`BELIEF_LANDSCAPES` landscapes (see
:mod:`workbench.world.marginals`): ``belief_x`` over (landscape, coordinate, belief_grid),
``belief_density`` over (landscape, distortion, coordinate, belief_grid) (discrete parameters:
level probabilities in the first k points), ``belief_optimum`` over (landscape, coordinate), and
the attribute ``belief_parameters`` (JSON: per landscape, its parameters' name, unit, log scale
and level labels; null for a landscape not drawn). When the study has earlier evaluations
(a fitted or likedata landscape), how well each landscape explains them
(:mod:`workbench.study.resemblance`), over ``landscape``: ``resemblance`` (rank agreement,
Spearman; leave-one-out for a fitted landscape), ``resemblance_low`` and ``resemblance_high``
(its 95 % bootstrap interval), ``resemblance_likelihood`` (log marginal likelihood per point;
leave-one-out log predictive density per point for a fitted landscape),
``resemblance_measure`` (``rank_agreement`` or ``loo_rank_agreement``) and
``resemblance_placements`` (the placements the rank agreement is the median of; 0 for fitted),
with the attributes ``resemblance_data`` (where the data come from) and ``resemblance_level``;
absent otherwise.

What the run was: ``study_path`` (relative to the grid's folder), ``version`` (the package's),
``numpy_version``, ``scipy_version``, ``scikit_learn_version``, ``xarray_version``,
``netcdf4_version``, ``blas``, ``kernels`` and ``lbfgsb`` (see :mod:`workbench.study.provenance`).

Repeats, by design: prior-weighted ignores the quantile, so its values repeat across the
``quantile`` levels; no-belief and random ignore the belief, so theirs repeat across
``distortion``. NaN marks a combination the study does not run (a decay level of one strategy
only, for example).

The file is written with netCDF4 directly, one chunk at a time, so memory stays flat however
large the grid; it is written to a temporary name and renamed at the end.
"""

from __future__ import annotations

import errno
import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import __version__
from ..engine import strategies as st
from ..storage import atomic_path
from ..world.history import FAR_FROM_DATA, distance_to_data
from ..world.marginals import GRID_POINTS, marginal_curves
from .cells import SEVERITY_RADIUS, Cell
from .grid import Chunk, settings
from .resemblance import resemblance_table
from .spec import Decision, Study

__all__ = ["BASELINE_DIMS", "BELIEF_LANDSCAPES", "GUIDED_DIMS", "assemble", "decision_attributes"]

# The report draws the beliefs of this many landscapes (the first ones).
BELIEF_LANDSCAPES = 4

_SERIES = (
    "best",
    "regret",
    "normalized_regret",
    "observed",
    "value",
    "failed",
    "weight",
    "threshold",
)
GUIDED_DIMS = (
    "strategy",
    "landscape",
    "distortion",
    "decay",
    "quantile",
    "exploration",
    "initial",
    "replicate",
)
BASELINE_DIMS = ("baseline", "landscape", "distortion", "replicate")


def _coordinate_names(study: Study) -> list[str]:
    if study.space is not None:
        return study.space.names
    return [f"x{j + 1}" for j in range(max(e.dim for e in study.landscapes))]


def _strings(ds, name: str, values, dim: str | None = None) -> None:
    var = ds.createVariable(name, str, (dim or name,))
    var[:] = np.array(list(values), dtype=object)


def _define(ds, study: Study) -> None:
    guided, baseline = settings(study)
    strategies = list(dict.fromkeys(s.strategy for s in guided))
    sizes = {
        "strategy": len(strategies),
        "landscape": len(study.landscapes),
        "distortion": len(study.distortions),
        "decay": len(study.decay_levels),
        "quantile": len(study.quantile_levels),
        "exploration": len(study.exploration_levels),
        "initial": len(study.initial),
        "replicate": study.replicates,
        "evaluation": study.budget,
        "coordinate": len(_coordinate_names(study)),
        "baseline": len(baseline),
    }
    for name, size in sizes.items():
        ds.createDimension(name, size)
    _strings(ds, "strategy", strategies)
    _strings(ds, "landscape", [e.label for e in study.landscapes])
    _strings(ds, "distortion", [d.name for d in study.distortions])
    _strings(ds, "decay", study.decay_levels)
    _strings(ds, "initial", study.initial)
    _strings(ds, "coordinate", _coordinate_names(study))
    _strings(ds, "baseline", [b.strategy for b in baseline])
    for name, values in (
        ("quantile", study.quantile_levels),
        ("exploration", study.exploration_levels),
        ("replicate", range(study.replicates)),
        ("evaluation", range(1, study.budget + 1)),
    ):
        var = ds.createVariable(
            name, "f8" if name in ("quantile", "exploration") else "i4", (name,)
        )
        var[:] = np.array(list(values))
    for name, values in (
        ("distortion_shift", [d.shift for d in study.distortions]),
        ("distortion_scale", [d.scale for d in study.distortions]),
    ):
        ds.createVariable(name, "f8", ("distortion",))[:] = np.array(values, dtype=float)
    _strings(ds, "distortion_misplace", [d.misplace or "" for d in study.distortions], "distortion")
    ds.createVariable("landscape_noise", "f8", ("landscape",))[:] = np.array(
        [e.noise for e in study.landscapes]
    )
    _strings(ds, "landscape_kind", [e.kind for e in study.landscapes], "landscape")
    ds.createVariable("minimum_estimated", "i1", ("landscape",))[:] = np.array(
        [e.spec is not None and e.spec.minimum_estimated for e in study.landscapes], dtype="i1"
    )

    for prefix, dims in (("", GUIDED_DIMS), ("baseline_", BASELINE_DIMS)):
        for name in _SERIES:
            kind = "i1" if name == "failed" else "f8"
            fill = -1 if name == "failed" else np.nan
            ds.createVariable(prefix + name, kind, (*dims, "evaluation"), fill_value=fill)
        for name in ("point", "point_cube"):
            ds.createVariable(
                prefix + name, "f8", (*dims, "evaluation", "coordinate"), fill_value=np.nan
            )
    for name in ("mode_value", "severity_distance", "severity_mass"):
        ds.createVariable(name, "f8", ("landscape", "distortion", "replicate"), fill_value=np.nan)
    for name in ("minimum", "gap"):
        ds.createVariable(name, "f8", ("landscape", "replicate"), fill_value=np.nan)
    for name in ("optimum", "optimum_cube"):
        ds.createVariable(name, "f8", ("landscape", "replicate", "coordinate"), fill_value=np.nan)
    # Fitted landscapes: how far each replicate's optimum lies from the data it was fitted to.
    ds.createVariable("optimum_data_distance", "f8", ("landscape", "replicate"), fill_value=np.nan)
    text = ds.createVariable("optimum_text", str, ("landscape", "replicate"))
    text[:] = np.full((sizes["landscape"], sizes["replicate"]), "", dtype=object)
    ds.far_from_data = FAR_FROM_DATA

    ds.title = study.title
    ds.study_name = study.name
    ds.study = study.text
    ds.root_seed = study.seed
    ds.version = __version__
    ds.budget = study.budget
    ds.target = study.target
    ds.severity_radius = SEVERITY_RADIUS
    ds.units = json.dumps(
        {p.name: p.unit for p in study.space.parameters} if study.space is not None else {}
    )
    ds.repeats = (
        "prior-weighted ignores the quantile: its values repeat across quantile levels; "
        "no-belief and random ignore the belief: theirs repeat across distortions"
    )
    ds.setncatts(decision_attributes(study.decision))


def decision_attributes(decision: Decision) -> dict:
    """The study's decision rule as the grid file's attributes (what
    :func:`workbench.analysis.decision_rule` reads back)."""
    return {
        "decision_rule": decision.rule,
        "decision_weights": json.dumps({k: float(v) for k, v in decision.weights.items()}),
        "decision_level": float(decision.level),
        "decision_metric": decision.metric,
        "decision_landscapes": json.dumps(decision.landscapes),
        "decision_score": decision.score,
    }


@dataclass(frozen=True)
class Extras:
    """What the grid file holds beside the campaigns, computed from the study alone: the
    belief marginals of replicate 0 of the first landscapes (exact and distorted, as the
    report draws them; None for a landscape past :data:`BELIEF_LANDSCAPES`) and the
    resemblance table (None without earlier evaluations). The runner computes them while
    the chunks run (:func:`grid_extras`), so that assembling waits for neither."""

    curves: tuple
    resemblance: object


def grid_extras(study: Study) -> Extras:
    """The :class:`Extras` of ``study`` (it builds replicate 0's placements)."""
    curves = []
    for li in range(len(study.landscapes)):
        if li >= BELIEF_LANDSCAPES:
            curves.append(None)
            continue
        cells = [Cell(study, li, d, 0) for d in range(len(study.distortions))]
        beliefs = {study.distortions[c.distortion].name: c.belief for c in cells}
        at = np.asarray(cells[0].placement.minimisers[0])
        curves.append(tuple(marginal_curves(cells[0].space, beliefs, optimum=at)))
    # After the beliefs: replicate 0's surfaces are built and cached by then.
    return Extras(tuple(curves), resemblance_table(study))


def _write_beliefs(ds, study: Study, extras: Extras) -> None:
    """The belief marginals of :class:`Extras`."""
    # Continuous marginals take GRID_POINTS points; a discrete one a point per level, which
    # for an integer parameter may be more (batch sizes 16 to 512: 497).
    levels = [p.levels for p in (study.space.parameters if study.space is not None else ())]
    ds.createDimension("belief_grid", max([GRID_POINTS, *(n for n in levels if n)]))
    x = ds.createVariable(
        "belief_x", "f8", ("landscape", "coordinate", "belief_grid"), fill_value=np.nan
    )
    density = ds.createVariable(
        "belief_density",
        "f8",
        ("landscape", "distortion", "coordinate", "belief_grid"),
        fill_value=np.nan,
    )
    optimum = ds.createVariable(
        "belief_optimum", "f8", ("landscape", "coordinate"), fill_value=np.nan
    )
    parameters: list = []
    for li, curves in enumerate(extras.curves):
        if curves is None:
            parameters.append(None)
            continue
        for j, c in enumerate(curves):
            x[li, j, 0 : len(c.x)] = c.x
            for d, values in enumerate(c.densities.values()):
                density[li, d, j, 0 : len(values)] = values
            optimum[li, j] = np.nan if c.optimum is None else c.optimum
        parameters.append(
            [
                {"name": c.name, "unit": c.unit, "log": c.log, "labels": list(c.labels)}
                for c in curves
            ]
        )
    ds.belief_parameters = json.dumps(parameters)


def _write_resemblance(ds, extras: Extras) -> None:
    """How well each landscape explains the study's earlier evaluations (nothing without
    them)."""
    table = extras.resemblance
    if table is None:
        return
    columns = {
        "resemblance": [r.estimate for r in table.rows],
        "resemblance_low": [r.low for r in table.rows],
        "resemblance_high": [r.high for r in table.rows],
        "resemblance_likelihood": [r.likelihood for r in table.rows],
    }
    for name, values in columns.items():
        ds.createVariable(name, "f8", ("landscape",), fill_value=np.nan)[:] = np.array(values)
    _strings(ds, "resemblance_measure", [r.measure for r in table.rows], "landscape")
    ds.createVariable("resemblance_placements", "i4", ("landscape",))[:] = np.array(
        [r.placements for r in table.rows]
    )
    ds.resemblance_data = table.source
    ds.resemblance_level = table.level


def _point_text(space, u: np.ndarray) -> str:
    """A cube point in the user's units, ``name = value unit, ...``."""
    units = {p.name: p.unit for p in space.parameters}
    parts = []
    for k, v in space.format_point(u).items():
        value = f"{v:.4g}" if isinstance(v, float) else str(v)
        parts.append(f"{k} = {value}" + (f" {units[k]}" if units.get(k) else ""))
    return ", ".join(parts)


def _fill_from_chunk(ds, study: Study, chunk: Chunk, data) -> float:
    """Write every replicate of one chunk (its arrays as
    :func:`~workbench.study.grid.run_chunk` gives them, stacked over (replicate, setting)),
    each variable in one call over the chunk's consecutive replicates; returns the lowest
    normalized regret among its campaigns. (One call per replicate and variable spent most of
    its time in netCDF4's slicing.)"""
    guided, baseline = settings(study)
    strategies = list(dict.fromkeys(s.strategy for s in guided))
    decay_index = {d: i for i, d in enumerate(study.decay_levels)}
    quantiles = list(study.quantile_levels)
    explorations = list(study.exploration_levels)
    initials = list(study.initial)
    bases = [b.strategy for b in baseline]
    li, d = chunk.landscape, chunk.distortion
    reps = slice(chunk.replicates[0], chunk.replicates[-1] + 1)
    n_rep = len(chunk.replicates)
    width = data["points"].shape[-1]
    # The guided campaigns of one (landscape, distortion) over the chunk's replicates fill one
    # slab over (strategy, decay, quantile, exploration, initial, replicate): built here,
    # written in one call.
    slab_shape = (len(strategies), len(decay_index), len(quantiles), len(explorations))
    slab_shape += (len(initials), n_rep, study.budget)
    width_all = ds.dimensions["coordinate"].size
    slabs = {name: np.full(slab_shape, -1 if name == "failed" else np.nan) for name in _SERIES}
    slabs |= {name: np.full((*slab_shape, width_all), np.nan) for name in ("point", "point_cube")}
    any_guided = False
    for k, s in enumerate(chunk.settings):
        series = {name: data[name][:, k] for name in _SERIES}
        series["failed"] = series["failed"].astype("i1")
        pts = {"point": data["user_points"][:, k], "point_cube": data["points"][:, k]}
        if s.strategy in strategies:
            any_guided = True
            qs = (
                [quantiles.index(s.quantile)]
                if st.uses_quantile(s.strategy)
                else range(len(quantiles))
            )
            for q in qs:
                at = (
                    strategies.index(s.strategy),
                    decay_index[str(s.decay)],
                    q,
                    explorations.index(s.exploration),
                    initials.index(s.initial),
                )
                for name, v in series.items():
                    slabs[name][at] = v
                for name, v in pts.items():
                    slabs[name][(*at, slice(None), slice(None), slice(0, width))] = v
        else:
            targets = range(len(study.distortions)) if not st.uses_belief(s.strategy) else [d]
            for dd in targets:
                at = (bases.index(s.strategy), li, dd, reps)
                for name, v in series.items():
                    ds["baseline_" + name][at] = v
                for name, v in pts.items():
                    ds["baseline_" + name][(*at, slice(None), slice(0, width))] = v
    if any_guided:
        every = slice(None)
        for name, slab in slabs.items():
            if name == "failed":
                slab = slab.astype("i1")
            ds[name][every, li, d, every, every, every, every, reps] = slab
    for name in ("mode_value", "severity_distance", "severity_mass"):
        ds[name][li, d, reps] = data[name][:, 0]
    for name in ("minimum", "gap"):
        ds[name][li, reps] = data[name][:, 0]
    for name in ("optimum", "optimum_cube"):
        if name in data:
            ds[name][li, reps, 0 : data[name].shape[-1]] = data[name]
    entry = study.landscapes[li]
    if entry.kind == "fitted" and "optimum_cube" in data:
        U = np.asarray(data["optimum_cube"], dtype=float)
        ds["optimum_data_distance"][li, reps] = distance_to_data(U, np.array(entry.spec.X))
        if study.space is not None:
            for r, u in zip(chunk.replicates, U, strict=True):
                ds["optimum_text"][li, r] = _point_text(study.space, u)
    return float(np.nanmin(data["normalized_regret"]))


def run_attributes(study: Study, path: Path, provenance: dict | None) -> dict:
    """The attributes of the run: the study file's path relative to the grid's folder
    (``study_path``; the study's own label when it was not read from a file) and what the
    values were computed with (:func:`workbench.study.provenance.provenance`; ``version`` is
    the package's)."""
    where = Path(study.path)
    if where.is_file():
        where_rel = os.path.relpath(where.resolve(), Path(path).resolve().parent)
    else:
        where_rel = str(study.path)
    return {"study_path": where_rel, **(provenance or {})}


def assemble(
    study: Study,
    chunk_dir: Path,
    path: Path,
    every: list[Chunk],
    provenance: dict | None = None,
    extras: Extras | None = None,
) -> dict[str, float]:
    """Write ``path`` from the chunk files in ``chunk_dir`` (all of ``every`` must be there),
    with :func:`run_attributes` (``provenance``: what the chunks were computed with) and the
    study's :class:`Extras` (computed here unless given).

    Returns the lowest normalized regret of any campaign per landscape label: below zero, a
    campaign found a value lower than the landscape's computed minimum.
    """
    import netCDF4

    lowest: dict[str, float] = {}
    with atomic_path(path) as tmp:
        try:
            with netCDF4.Dataset(tmp, "w", format="NETCDF4") as ds:
                _define(ds, study)
                ds.setncatts(run_attributes(study, path, provenance))
                extras = grid_extras(study) if extras is None else extras
                _write_beliefs(ds, study, extras)
                _write_resemblance(ds, extras)
                for chunk in every:
                    with np.load(chunk_dir / f"{chunk.key}.npz") as npz:
                        # Read every array once: an npz member is decompressed on each access.
                        data = {name: npz[name] for name in npz.files}
                    label = study.landscapes[chunk.landscape].label
                    low = _fill_from_chunk(ds, study, chunk, data)
                    lowest[label] = min(lowest.get(label, np.inf), low)
        except RuntimeError:
            if _disk_full(tmp):
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(tmp)) from None
            raise
    return lowest


# Below this many free bytes beside the grid file, a failed write is taken for a full disk.
FULL_DISK_BYTES = 2**20


def _disk_full(tmp: Path) -> bool:
    """Whether the disk of ``tmp`` is (nearly) full: netCDF4 reports a full disk as
    ``RuntimeError('NetCDF: HDF error')``, without the errno, so the free space beside the
    file tells it from other failures (which are raised as they are)."""
    free = os.statvfs(tmp.parent)
    return free.f_bavail * free.f_frsize < FULL_DISK_BYTES
