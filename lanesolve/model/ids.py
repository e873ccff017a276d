"""Ids as positions: where each of many ids (lane ends, customers) stands among a list of distinct ids (the nodes),
looked up once as whole columns.

The sensitivity figures, the pre-solve checks and the diagnosis compare lane ends with node ids; pandas compares
Arrow text cell by cell in ``isin`` and ``factorize`` costs a Python string per cell, so a million lanes took
a second where one hash join over the text buffers takes milliseconds.

Examples
--------
>>> import pandas as pd
>>> positions(pd.Series(["D1", "H1", "C1"]), pd.Series(["C1", "D1", "X9", "C1"])).tolist()
[2, 0, -1, 2]
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from lanesolve.model.figure_text import arrow_column


def positions(values: pd.Series, wanted: pd.Series) -> np.ndarray:
    """Position of each of ``wanted`` in ``values`` (distinct ids), -1 where absent: Arrow's ``index_in`` when
    pyarrow is installed (a hash join over the text buffers, about 20 times faster here), else pandas'
    ``get_indexer``."""
    if len(wanted) == 0:
        return np.zeros(0, dtype=np.int64)
    try:
        import pyarrow as pa
        import pyarrow.compute as pc
    except ImportError:
        return pd.Index(values.to_numpy(dtype=object)).get_indexer(wanted.to_numpy(dtype=object)).astype(np.int64)
    found = pc.index_in(arrow_column(pa, wanted), value_set=arrow_column(pa, values))
    return pc.fill_null(found, -1).to_numpy(zero_copy_only=False).astype(np.int64)
