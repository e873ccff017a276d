"""Ids as positions (lanesolve.model.ids) with and without pyarrow, against a plain dict of id -> position.

Reference: Python's own dict lookup over the same ids, computed here independently of pandas and Arrow."""

from __future__ import annotations

import builtins

import numpy as np
import pandas as pd
import pytest

from lanesolve.model.ids import positions


def _reference(values: list[str], wanted: list[str]) -> list[int]:
    where = {value: k for k, value in enumerate(values)}
    return [where.get(item, -1) for item in wanted]


def _cases():
    rng = np.random.default_rng(7)
    pool = [f"N{k:03d}" for k in range(60)] + ["é", "e\u0301", "", " D1", "D1 "]
    for size in (0, 1, 5, 40):
        values = list(rng.choice(pool, size=size, replace=False))
        wanted = list(rng.choice(pool, size=3 * size + 2))
        yield values, wanted


@pytest.fixture(params=["pyarrow", "without pyarrow"])
def arrow(request, monkeypatch):
    if request.param == "pyarrow":
        pytest.importorskip("pyarrow")
    else:
        real_import = builtins.__import__

        def no_arrow(name, *args, **kwargs):
            if name == "pyarrow" or name.startswith("pyarrow."):
                raise ImportError(name)
            return real_import(name, *args, **kwargs)

        monkeypatch.setattr(builtins, "__import__", no_arrow)
    return request.param


@pytest.mark.parametrize("dtype", [object, "str"])
def test_positions_are_the_dict_lookup_with_and_without_pyarrow(arrow, dtype):
    for values, wanted in _cases():
        got = positions(pd.Series(values, dtype=dtype), pd.Series(wanted, dtype=dtype))
        assert got.dtype == np.int64
        assert got.tolist() == _reference(values, wanted)
