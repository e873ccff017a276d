"""lanesolve: plan freight lane volumes from a workbook by min-cost network flow.

The library API mirrors the pipeline (see :mod:`lanesolve.pipeline`)::

    from lanesolve import run
    outcome = run("network.xlsx", output="network-solved.xlsx")
    outcome.result.total_cost

The data classes (``Network``, ``Result``, …) load on first use, so ``lanesolve --help`` and the errors module do
not pay for pandas and numpy.
"""

__version__ = "0.1.0"

from lanesolve.errors import LanesolveError, NoPlanError, Problem, SolverError, WorkbookError, WriteError  # noqa: E402

#: Names this package offers, by the module that defines them (imported when first asked for).
_LAZY = {
    "Network": "lanesolve.model.network", "Settings": "lanesolve.model.network",
    "make_network": "lanesolve.model.network",
    "Result": "lanesolve.model.result", "SolveStatus": "lanesolve.model.result",
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'lanesolve' has no attribute {name!r}")


def run(*args, **kwargs):
    """Solve a workbook end to end; see :func:`lanesolve.pipeline.run`."""
    from lanesolve.pipeline import run as _run

    return _run(*args, **kwargs)


__all__ = [
    "LanesolveError", "NoPlanError", "Problem", "SolverError", "WorkbookError", "WriteError",
    "Network", "Settings", "make_network", "Result", "SolveStatus", "run", "__version__",
]
