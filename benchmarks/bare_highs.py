"""The bare-solver baseline: lanesolve's own model arrays handed straight to HiGHS, with nothing around the solve.

The arrays are :func:`lanesolve.model.formulation.build_sparse_model`'s (the same bounds, costs and sparse matrix
lanesolve's solvers read), so the baseline and lanesolve solve exactly the same LP; the matrix build is timed apart.
Two bare solves are offered:

- ``linprog``: ``scipy.optimize.linprog(method="highs")`` with SciPy's defaults (rows split into ``A_ub`` / ``A_eq``
  as linprog wants them). This is the baseline ``run.py`` reports.
- ``highspy``: ``Highs.passModel`` with the arrays and ``Highs.run``, no options set: HiGHS itself, as lanesolve's
  in-memory path calls it, minus lanesolve's reading of the answer (bench_model.py compares the two).

Usage (on a cached network pickle written by generate.py)::

    python benchmarks/bare_highs.py benchmarks/cache/lanes-100k-s7.network.pkl [--engine linprog|highspy]
"""

from __future__ import annotations

import argparse
import math
import pickle
import sys
import time
from pathlib import Path

import numpy as np
import scipy
from scipy.optimize import linprog

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from lanesolve.model.formulation import build_sparse_model  # noqa: E402


def build_lp(network):
    """The :class:`~lanesolve.model.arrays.SparseModel` of a network without yes/no decisions.

    Raises
    ------
    ValueError
        The network has fixed charges or design decisions (the bare baseline is an LP).
    """
    model = build_sparse_model(network)
    if model.is_mip:
        raise ValueError("the bare HiGHS baseline is an LP; this network has yes/no decisions (generate it without "
                         "--fixed-charges)")
    return model


def solve_linprog(model) -> tuple[int, float, str]:
    """``scipy.optimize.linprog(method="highs")`` on the model's arrays: (status, objective, message)."""
    equal = model.row_lower == model.row_upper
    at_most = np.isinf(model.row_lower) & ~equal
    at_least = ~equal & ~at_most
    one_sided = at_most | at_least
    a_ub = model.matrix[one_sided]
    sign = np.where(at_least[one_sided], -1.0, 1.0)  # an at-least row is an at-most row negated
    b_ub = np.where(at_least, -model.row_lower, model.row_upper)[one_sided]
    res = linprog(model.cost, A_ub=a_ub.multiply(sign[:, None]).tocsr(), b_ub=b_ub, A_eq=model.matrix[equal],
                  b_eq=model.row_lower[equal], bounds=np.column_stack([model.lower, model.upper]), method="highs")
    return int(res.status), float(res.fun) if res.status == 0 else math.nan, str(res.message)


def solve_highspy(model) -> tuple[int, float, str]:
    """``Highs.passModel`` + ``Highs.run`` on the model's arrays, output off: (0 when optimal, objective, status)."""
    import highspy

    matrix = model.matrix.tocsc()
    highs = highspy.Highs()
    highs.setOptionValue("output_flag", False)
    highs.passModel(model.n_columns, model.n_rows, int(matrix.nnz), int(highspy.MatrixFormat.kColwise),
                    int(highspy.ObjSense.kMinimize), 0.0, model.cost, model.lower, model.upper, model.row_lower,
                    model.row_upper, matrix.indptr.astype(np.int32), matrix.indices.astype(np.int32), matrix.data,
                    np.zeros(model.n_columns, dtype=np.int32))
    highs.run()
    status = highs.getModelStatus()
    optimal = status == highspy.HighsModelStatus.kOptimal
    return (0 if optimal else 1), (highs.getInfo().objective_function_value if optimal else math.nan), str(status)


def measure(network_pickle: str, engine: str = "linprog") -> dict:
    """Load a cached network, build its arrays and solve them bare; return timings, objective and status."""
    tick = time.perf_counter()
    with open(network_pickle, "rb") as fh:
        network = pickle.load(fh)
    load_s = time.perf_counter() - tick
    tick = time.perf_counter()
    model = build_lp(network)
    build_s = time.perf_counter() - tick
    tick = time.perf_counter()
    status, objective, message = (solve_linprog if engine == "linprog" else solve_highspy)(model)
    solve_s = time.perf_counter() - tick
    solver = f"HiGHS via SciPy {scipy.__version__} linprog" if engine == "linprog" else "HiGHS via highspy passModel"
    return {"load": load_s, "build": build_s, "solve": solve_s, "objective": objective, "status": status,
            "message": message, "rows": model.n_rows, "columns": model.n_columns, "solver": solver}


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("pickles", nargs="+")
    parser.add_argument("--engine", choices=["linprog", "highspy"], default="linprog")
    args = parser.parse_args()
    for path in args.pickles:
        print(path, measure(path, args.engine))
