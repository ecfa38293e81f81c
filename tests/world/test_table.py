"""The table kind: measured configurations looked up exactly, missing ones failing, the nearest
measured row on request, and malformed tables refused."""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from workbench.world.space import Categorical, Continuous, Integer, Space
from workbench.world.table import MeasuredTable

SPACE = Space(
    (
        Integer("depth", 1, 4),
        Categorical("loss", ("squared", "absolute", "huber")),
        Continuous("rate", 1e-3, 1e-1, log=True),
    )
)
RATES = np.array([1e-3, 1e-2, 1e-1])


def _grid_rows():
    """Every configuration of depth × loss × rate (a measured grid), with a known response."""
    depth, loss, rate = np.meshgrid([1, 2, 3, 4], [0, 1, 2], RATES, indexing="ij")
    columns = [depth.ravel(), loss.ravel(), rate.ravel()]
    response = (depth.ravel() - 3.0) ** 2 + loss.ravel() + np.log10(rate.ravel()) ** 2
    return columns, response


def _table(columns, response, lookup="exact"):
    U = SPACE.to_unit(columns)
    return MeasuredTable(
        X=tuple(map(tuple, U.tolist())),
        y=tuple(response.tolist()),
        levels=tuple(SPACE.levels.tolist()),
        source="a hand-made grid",
        lookup=lookup,
    )


def test_exact_lookup_returns_the_measured_response_of_every_row():
    columns, response = _grid_rows()
    table = _table(columns, response)
    f = table.function()
    # Points anywhere inside each configuration's bins read that configuration's row.
    U = SPACE.to_unit(columns)
    rng = np.random.default_rng(0)
    jitter = (rng.random(U.shape) - 0.5) * np.array([0.2, 0.2, 0.0]) / np.array([4, 3, 1])
    np.testing.assert_array_equal(f(U + jitter), response)
    np.testing.assert_array_equal(f(SPACE.snap(U)), response)


def test_a_configuration_the_table_lacks_is_a_failed_evaluation():
    columns, response = _grid_rows()
    keep = np.ones(len(response), bool)
    keep[5] = False
    table = _table([c[keep] for c in columns], response[keep])
    values = table.function()(SPACE.to_unit(columns))
    assert np.isnan(values[5])
    np.testing.assert_array_equal(values[keep], response[keep])


def test_nearest_lookup_reads_the_row_nearest_in_cube_units():
    columns, response = _grid_rows()
    table = _table(columns, response, lookup="nearest")
    U = SPACE.to_unit(columns)
    rng = np.random.default_rng(2)
    points = rng.random((200, 3))
    brute = np.argmin(((points[:, None, :] - U[None, :, :]) ** 2).sum(axis=2), axis=1)
    np.testing.assert_array_equal(table.function()(points), response[brute])


def test_the_minimum_is_the_tables_smallest_response_at_its_row():
    columns, response = _grid_rows()
    placed = _table(columns, response).landscape("t", 3).placed()
    assert placed.minimum == response.min()
    best = int(np.argmin(response))
    np.testing.assert_allclose(placed.minimisers[0], SPACE.to_unit(columns)[best])
    # Normalized regret 0 at the best row (the regret yardstick works as for any landscape).
    assert placed.normalized_regret(response.min()) == 0.0


def test_duplicate_configurations_and_constant_responses_are_refused():
    columns, response = _grid_rows()
    doubled = [np.r_[c, c[:1]] for c in columns]
    with pytest.raises(ValueError, match="data rows 1 and 37 measure the same configuration"):
        _table(doubled, np.r_[response, 9.0])
    with pytest.raises(ValueError, match="same value"):
        _table(columns, np.ones_like(response))


def test_a_table_landscape_pickles_for_worker_processes():
    columns, response = _grid_rows()
    for lookup in ("exact", "nearest"):
        land = _table(columns, response, lookup).landscape("t", 3)
        copy = pickle.loads(pickle.dumps(land))
        U = np.random.default_rng(3).random((50, 3))
        np.testing.assert_array_equal(copy.function(U), land.function(U))
