"""lanesolve: plan freight lane volumes from a workbook by min-cost network flow.

The library API mirrors the pipeline (see :mod:`lanesolve.pipeline`)::

    from lanesolve import run
    outcome = run("network.xlsx", output="network-solved.xlsx")
    outcome.result.total_cost
"""

__version__ = "0.1.0"

from lanesolve.errors import LanesolveError, NoPlanError, Problem, SolverError, WorkbookError, WriteError  # noqa: E402
from lanesolve.model.network import Network, Settings, make_network  # noqa: E402
from lanesolve.model.result import Result, SolveStatus  # noqa: E402


def run(*args, **kwargs):
    """Solve a workbook end to end; see :func:`lanesolve.pipeline.run`."""
    from lanesolve.pipeline import run as _run

    return _run(*args, **kwargs)


__all__ = [
    "LanesolveError", "NoPlanError", "Problem", "SolverError", "WorkbookError", "WriteError",
    "Network", "Settings", "make_network", "Result", "SolveStatus", "run", "__version__",
]
