"""The grid Dataset: opening it, and the setting axis that puts belief-guided settings and
baselines side by side.

The belief-guided settings and the baselines are put side by side along one ``setting``
dimension (:func:`series`), so that a metric of every campaign has the dimensions (setting,
landscape, distortion, replicate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..engine.strategies import reference, uses_quantile
from ..lazy import LazyModule
from ..validation import InputError, raw

if TYPE_CHECKING:
    import xarray as xr
else:  # open_grid checks that the file exists before xarray loads (a second's import)
    xr = LazyModule("xarray")

GRID = "grid.nc"
NO_BELIEF = reference()
RULES = ("expected", "minimax", "cvar")
METRICS = ("evaluations_to_target", "final_normalized_regret", "log_regret_area")
# What each decision metric is called in tables and figures, and its unit.
METRIC_NAMES = {
    "evaluations_to_target": ("evaluations to target", "evaluations"),
    "final_normalized_regret": ("final normalized regret", "normalized regret"),
    "log_regret_area": ("area under the log10 normalized-regret curve", "log10 regret"),
}
SETTING_FACTORS = ("strategy", "decay", "quantile", "exploration", "initial")
_CAMPAIGN = ("setting", "landscape", "distortion", "replicate")
POOLED = ("landscape", "replicate")
# Survival that is ½ in exact arithmetic may come out a rounding error above it.
HALF_TOLERANCE = 1e-9
TEXTBOOK = "textbook"
# What every grid holds (see gridfile): a file without them is not one.
_GRID_NAMES = ("normalized_regret", "baseline_normalized_regret", *SETTING_FACTORS)


def open_grid(path: str | Path) -> xr.Dataset:
    """The grid Dataset of a results folder (or of a grid.nc path), loaded into memory.

    A missing, unreadable, damaged (truncated, overwritten) or foreign file raises
    :class:`InputError` naming it: a grid is a NetCDF file holding the variables and
    dimensions :mod:`workbench.study.gridfile` writes.
    """
    path = Path(path)
    file = path / GRID if path.is_dir() or path.suffix != ".nc" else path
    if not file.is_file():
        raise InputError("DIR", f"a folder holding {GRID}", raw(f"no file at {file}"))
    expected = f"a folder holding a {GRID} written by 'workbench run'"
    try:
        with xr.open_dataset(file) as ds:
            loaded = ds.load()
    except PermissionError as err:
        raise InputError("DIR", expected, raw(f"{file} unreadable ({err.strerror})")) from None
    except Exception as err:
        # netCDF4, h5py and xarray raise OSError, ValueError, RuntimeError, KeyError ... on a
        # file they cannot read: whatever it is, the file is not a readable grid.
        text = str(err).splitlines()[0] if str(err) else type(err).__name__
        reason = "not a NetCDF file" if "did not find a match" in text else text[:100]
        raise InputError("DIR", expected, raw(f"{file} damaged or not NetCDF ({reason})")) from None
    missing = [name for name in _GRID_NAMES if name not in loaded.variables]
    if missing:
        raise InputError(
            "DIR", expected, raw(f"{file} without {', '.join(missing)} (not a workbench grid)")
        )
    return loaded


def coordinate_names(ds: xr.Dataset, dim: str) -> list[str]:
    return [str(v) for v in ds[dim].values]


def _varied(ds: xr.Dataset) -> list[str]:
    return [f for f in ("exploration", "initial") if ds.sizes[f] > 1]


def _label(strategy: str, decay: str, quantile: float, exploration, initial, varied) -> str:
    parts = [strategy, f"decay {decay}"]
    if not math.isnan(quantile):
        parts.append(f"quantile {quantile:g}")
    if "exploration" in varied:
        parts.append(f"exploration {exploration:g}")
    if "initial" in varied:
        parts.append(f"initial {initial}")
    return ", ".join(parts)


def _picks(ds: xr.Dataset) -> list[tuple[tuple[int, ...], dict]]:
    """Index (strategy, decay, quantile, exploration, initial) and factors of every setting
    the grid ran; a quantile-free strategy appears once, at its first quantile level."""
    ran = (
        ds["normalized_regret"]
        .notnull()
        .any(("landscape", "distortion", "replicate", "evaluation"))
        .transpose(*SETTING_FACTORS)
        .values
    )
    varied = _varied(ds)
    out, seen = [], set()
    for index in np.argwhere(ran):
        si, di, qi, ei, ii = (int(i) for i in index)
        strategy = str(ds["strategy"].values[si])
        quantile = float(ds["quantile"].values[qi])
        # The grid repeats the values of a strategy that does not use the quantile across
        # the quantile levels (see gridfile).
        if not uses_quantile(strategy):
            if (si, di, ei, ii) in seen:
                continue
            seen.add((si, di, ei, ii))
            quantile = math.nan
        factors = {
            "strategy": strategy,
            "decay": str(ds["decay"].values[di]),
            "quantile": quantile,
            "exploration": float(ds["exploration"].values[ei]),
            "initial": str(ds["initial"].values[ii]),
        }
        factors["label"] = _label(**{k: factors[k] for k in SETTING_FACTORS}, varied=varied)
        out.append(((si, di, qi, ei, ii), factors))
    return out


def series(ds: xr.Dataset, name: str = "normalized_regret") -> xr.DataArray:
    """A per-evaluation variable of every setting and baseline along one ``setting`` dimension.

    Dimensions (setting, landscape, distortion, replicate, evaluation). The setting label is
    the index; coordinates ``strategy``, ``decay``, ``quantile`` (NaN where it plays no part),
    ``exploration``, ``initial`` and ``kind`` ('guided' or 'baseline') describe each one.
    """
    rest = ("landscape", "distortion", "replicate", "evaluation")
    picks = _picks(ds)
    rows, coords = [], {k: [] for k in (*SETTING_FACTORS, "kind", "setting")}
    if picks:
        guided = ds[name].transpose(*SETTING_FACTORS, *rest).values
        for index, factors in picks:
            rows.append(guided[index])
            for k in SETTING_FACTORS:
                coords[k].append(factors[k])
            coords["kind"].append("guided")
            coords["setting"].append(factors["label"])
    if ds.sizes.get("baseline", 0):
        base = ds["baseline_" + name].transpose("baseline", *rest).values
        for b, label in enumerate(coordinate_names(ds, "baseline")):
            rows.append(base[b])
            coords["strategy"].append(label)
            coords["decay"].append("")
            coords["quantile"].append(math.nan)
            coords["exploration"].append(math.nan)
            coords["initial"].append("")
            coords["kind"].append("baseline")
            coords["setting"].append(label)
    data = np.stack(rows).astype(float)
    return xr.DataArray(
        data,
        dims=("setting", *rest),
        coords={
            "setting": coords["setting"],
            **{k: ("setting", coords[k]) for k in (*SETTING_FACTORS, "kind")},
            "landscape": ds["landscape"].values,
            "distortion": ds["distortion"].values,
            "replicate": ds["replicate"].values,
            "evaluation": ds["evaluation"].values,
        },
        name=name,
    )


def guided_only(values: xr.DataArray) -> xr.DataArray:
    return values.isel(setting=np.flatnonzero(values["kind"].values == "guided"))


def landscape_kinds(ds: xr.Dataset) -> list[str]:
    """The kind of each landscape of the grid, in order."""
    if "landscape_kind" in ds:
        return [str(k) for k in ds["landscape_kind"].values]
    return [TEXTBOOK] * ds.sizes["landscape"]


@dataclass(frozen=True)
class FarOptima:
    """Fitted replicates of one landscape whose optimum lies far outside the data they were
    fitted to: ``far`` of ``replicates``, their indices, distances (cube units) and optima
    (the user's units, as text); ``limit`` the distance beyond which an optimum is far."""

    landscape: str
    far: int
    replicates: int
    indices: tuple[int, ...]
    distances: tuple[float, ...]
    points: tuple[str, ...]
    limit: float


def far_optima(ds: xr.Dataset) -> list[FarOptima]:
    """Per fitted landscape of the grid, its replicates whose optimum is farther than the
    grid's ``far_from_data`` from every earlier evaluation (from ``optimum_data_distance``,
    computed when the grid was run); only landscapes with at least one; [] for a grid
    without that measure."""
    if "optimum_data_distance" not in ds:
        return []
    limit = float(ds.attrs.get("far_from_data", np.nan))
    out = []
    for li, label in enumerate(ds["landscape"].values):
        distance = ds["optimum_data_distance"].values[li]
        known = np.isfinite(distance)
        far = np.flatnonzero(known & (distance > limit))
        if not far.size:
            continue
        text = ds["optimum_text"].values[li] if "optimum_text" in ds else [""] * len(distance)
        out.append(
            FarOptima(
                landscape=str(label),
                far=int(far.size),
                replicates=int(known.sum()),
                indices=tuple(int(r) for r in far),
                distances=tuple(float(distance[r]) for r in far),
                points=tuple(str(text[r] or "") for r in far),
                limit=limit,
            )
        )
    return out
