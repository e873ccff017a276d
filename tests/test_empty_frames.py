"""Empty result frames: built once per column list and handed out as copies, so one result's frame is never
another's. Dtypes are judged by pandas' own type predicates (``pandas.api.types``), not by our constructor."""

from __future__ import annotations

import pandas as pd
from pandas.api import types

from lanesolve.model.result import (FLOW_COLUMNS, NODE_COLUMNS, OPEN_NODE_COLUMNS, Result, SolveStatus,
                                    empty_frame)


def test_each_call_gives_a_frame_of_its_own():
    first = empty_frame(FLOW_COLUMNS)
    first.loc[0] = ["A", "B", "road", 1.0, 2.0, 2.0, 0.0, 5.0, 0.2]
    first["extra"] = 1
    second = empty_frame(FLOW_COLUMNS)
    assert second is not first and len(second) == 0 and list(second.columns) == FLOW_COLUMNS
    # pandas' frame comparison: a fresh frame equals one taken before any other was changed
    pd.testing.assert_frame_equal(second, empty_frame(FLOW_COLUMNS))
    a, b = Result(SolveStatus.NOT_SOLVED), Result(SolveStatus.NOT_SOLVED)
    a.nodes["node"] = pd.Series(dtype=object)
    assert a.nodes is not b.nodes and a.flows is not b.flows


def test_columns_keep_their_kinds():
    flows, nodes, opened = empty_frame(FLOW_COLUMNS), empty_frame(NODE_COLUMNS), empty_frame(OPEN_NODE_COLUMNS)
    assert types.is_object_dtype(flows["origin"]) and types.is_float_dtype(flows["flow"])
    assert types.is_object_dtype(nodes["kind"]) and types.is_float_dtype(nodes["supply"])
    assert types.is_bool_dtype(opened["open"])
