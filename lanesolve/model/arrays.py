"""The one representation of the optimisation model: columns, rows and one sparse matrix, read by every solver.

:func:`lanesolve.model.formulation.build_sparse_model` fills a :class:`SparseModel` from a network;
:mod:`lanesolve.model.highs` passes its arrays to HiGHS in memory, :mod:`lanesolve.model.cbc` writes them as one MPS
file for the CBC program in PuLP's wheel, and :func:`to_pulp` turns them into a :class:`pulp.LpProblem` for a planner
who wants to export or inspect the model with PuLP. What a solver says back is an :class:`Answer`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from lanesolve.model.result import SolveStatus

if TYPE_CHECKING:  # scipy.sparse is imported where the matrix is built: a run that stops at the workbook's errors
    import scipy.sparse as sp  # (or `lanesolve check`) does not load SciPy


@dataclass
class Block:
    """A run of columns or rows of one family: ``prefix`` + id names them (``flow_12``, ``open_link_hub_3_40``)."""

    prefix: str
    start: int
    ids: np.ndarray

    @property
    def stop(self) -> int:
        return self.start + len(self.ids)

    def names(self) -> list[str]:
        prefix = self.prefix
        return [prefix + str(i) for i in self.ids.tolist()]


@dataclass
class SparseModel:
    """``minimise cost @ x + constant  s.t.  row_lower <= matrix @ x <= row_upper,  lower <= x <= upper``, some
    ``x`` integer.

    Attributes
    ----------
    lower, upper : numpy.ndarray
        Bounds per column (``inf`` for no upper limit).
    integer : numpy.ndarray of bool
        Whether each column must take a whole value (yes/no decisions are integer columns with bounds 0 and 1).
    costs : dict of str to numpy.ndarray
        Cost per unit per column of each cost component (:data:`lanesolve.model.result.COST_COMPONENTS`, and for
        a design network :data:`~lanesolve.model.result.DESIGN_COST_COMPONENTS`). The objective is their sum
        (:attr:`cost`); the plan's cost breakdown is each of them times the plan's values. One array per component
        rather than one label per column, because a flow column carries two components (the lane's rate and the
        handling at its ends).
    constant : dict of str to float
        Cost that no column carries, per component: the fixed charges of nodes marked ``open``.
    row_lower, row_upper : numpy.ndarray
        Bounds per row; every row is one-sided or an equation (``-inf`` below, ``inf`` above, or equal bounds).
    matrix : scipy.sparse.csr_matrix
        Rows by columns.
    column_blocks, row_blocks : dict of str to Block
        The families, keyed by name prefix (``flow_``, ``balance_``, ...), in column / row order.
    lane_index : numpy.ndarray
        Lane index (in ``network.lanes``) per flow column; flow columns come first, in active-lane order.
    unmet_index : numpy.ndarray
        Customer index per ``unmet_`` column.
    big_m : dict of int to float
        :math:`M_l` of each ``link_<n>`` row, keyed by lane index.
    penalty : numpy.ndarray
        Per-unit unmet penalty per customer row (NaN for a hard demand).
    design : bool
        The network has design decisions (the breakdown then lists the design components too).
    lane_cost_terms : object or None
        Columns other than the flow columns that carry part of a lane's transport cost (rate-break segments,
        minimum-charge top-ups): a :class:`lanesolve.model.tariffs.LaneCostTerms`, None without carrier terms.
    product_columns : ProductColumns or None
        For a multi-product model (:mod:`lanesolve.model.product_model`): the lane and product of each
        ``product_flow_`` column.
    emission : numpy.ndarray or None
        Tonnes CO2e per unit of each column (:mod:`lanesolve.model.emissions`), None when no emissions are asked for.
    """

    lower: np.ndarray
    upper: np.ndarray
    integer: np.ndarray
    costs: dict[str, np.ndarray]
    constant: dict[str, float]
    row_lower: np.ndarray
    row_upper: np.ndarray
    matrix: sp.csr_matrix
    column_blocks: dict[str, Block]
    row_blocks: dict[str, Block]
    lane_index: np.ndarray
    unmet_index: np.ndarray
    big_m: dict[int, float]
    penalty: np.ndarray
    design: bool = False
    lane_cost_terms: object = None
    product_columns: object = None
    emission: np.ndarray | None = None

    @property
    def n_columns(self) -> int:
        return len(self.lower)

    @property
    def n_rows(self) -> int:
        return len(self.row_lower)

    @property
    def cost(self) -> np.ndarray:
        """Objective coefficient per column: the sum of :attr:`costs`."""
        return np.sum(list(self.costs.values()), axis=0) if self.costs else np.zeros(self.n_columns)

    @property
    def objective_constant(self) -> float:
        return float(sum(self.constant.values()))

    @property
    def is_mip(self) -> bool:
        """True when some column is integer (yes/no or whole-trip decisions); a pure LP otherwise."""
        return bool(self.integer.any())

    @property
    def column_names(self) -> list[str]:
        """Names in column order; made on demand (a solver needs only positions)."""
        return [name for block in self.column_blocks.values() for name in block.names()]

    @property
    def row_names(self) -> list[str]:
        return [name for block in self.row_blocks.values() for name in block.names()]

    def columns(self, prefix: str) -> slice:
        """Positions of the columns of family ``prefix`` (an empty slice when the model has none)."""
        block = self.column_blocks.get(prefix)
        return slice(0, 0) if block is None else slice(block.start, block.stop)

    def ids(self, prefix: str) -> np.ndarray:
        """Ids of the columns of family ``prefix`` (lane index, customer index, ...)."""
        block = self.column_blocks.get(prefix)
        return np.zeros(0, dtype=np.int64) if block is None else block.ids

    def breakdown(self, values: np.ndarray) -> dict[str, float]:
        """Cost per component of the column ``values`` (constants included)."""
        return {name: float(costs @ values) + self.constant.get(name, 0.0) for name, costs in self.costs.items()}


@dataclass
class Answer:
    """What a solver says about a :class:`SparseModel`.

    Attributes
    ----------
    status : SolveStatus
    value : numpy.ndarray
        Per column (zeros without a plan).
    row_dual, reduced_cost : numpy.ndarray
        For an optimal LP: the shadow price of each row (change of the objective per unit more on the row's bound)
        and the reduced cost of each column. Zeros for a MIP and without a plan.
    bound : float or None
        The solver's best lower bound on the objective (without the model's constant), None when it does not say.
    gap : float or None
        The solver's own relative MIP gap between its incumbent and its bound (``Result.mip_gap`` is recomputed
        against the plan as charged, which can only be smaller or equal).
    column_basis, row_basis : numpy.ndarray or None
        For an LP solved by HiGHS: the basis status of each column and row (``highspy.HighsBasisStatus`` values:
        0 at lower, 1 basic, 2 at upper, 3 zero, 4 non-basic). CBC's solution file does not state the basis.
    solver : str
        Solver name and version.
    seconds : float
        Wall time of the solver run.
    log : str
        The solver's log, when it wrote one.
    """

    status: SolveStatus
    value: np.ndarray
    row_dual: np.ndarray
    reduced_cost: np.ndarray
    bound: float | None = None
    gap: float | None = None
    column_basis: np.ndarray | None = field(default=None, repr=False)
    row_basis: np.ndarray | None = field(default=None, repr=False)
    solver: str = ""
    seconds: float = 0.0
    log: str = field(default="", repr=False)


class Assembly:
    """Collects column and row families, then makes the :class:`SparseModel` in one step.

    Each family adds its columns or rows with :meth:`add_columns` / :meth:`add_rows` (which return their
    positions) and its nonzeros with :meth:`add_entries`; duplicate entries add up.
    """

    def __init__(self, components: tuple[str, ...]):
        self.components = components
        self.column_blocks: dict[str, Block] = {}
        self.row_blocks: dict[str, Block] = {}
        self._columns: list[tuple] = []
        self._rows: list[tuple] = []
        self._entries: list[tuple] = []
        self.n_columns = 0
        self.n_rows = 0

    def _add(self, blocks: dict, parts: list, start: int, prefix: str, ids, lower, upper, extra=()) -> np.ndarray:
        """Record one family (bounds broadcast to its length, plus ``extra`` per-item data); its positions."""
        ids = np.asarray(ids)
        count = len(ids)
        if count == 0:
            return np.zeros(0, dtype=np.int64)
        blocks[prefix] = Block(prefix, start, ids)
        parts.append((np.broadcast_to(np.asarray(lower, dtype=float), count),
                      np.broadcast_to(np.asarray(upper, dtype=float), count)) + tuple(extra))
        return start + np.arange(count)

    def add_columns(self, prefix: str, ids, lower, upper, integer: bool = False,
                    costs: dict[str, np.ndarray] | None = None) -> np.ndarray:
        extra = (np.full(len(ids), integer), {k: np.asarray(v, dtype=float) for k, v in (costs or {}).items()})
        positions = self._add(self.column_blocks, self._columns, self.n_columns, prefix, ids, lower, upper, extra)
        self.n_columns += len(positions)
        return positions

    def add_rows(self, prefix: str, ids, lower, upper) -> np.ndarray:
        positions = self._add(self.row_blocks, self._rows, self.n_rows, prefix, ids, lower, upper)
        self.n_rows += len(positions)
        return positions

    def add_entries(self, rows, columns, values) -> None:
        rows = np.asarray(rows, dtype=np.int64)
        self._entries.append((rows, np.asarray(columns, dtype=np.int64),
                              np.broadcast_to(np.asarray(values, dtype=float), len(rows))))

    def finish(self, **handles) -> SparseModel:
        def join(parts, empty=0.0):
            return np.concatenate(parts) if parts else np.full(0, empty)

        lower = join([c[0] for c in self._columns])
        upper = join([c[1] for c in self._columns])
        integer = join([c[2] for c in self._columns], False).astype(bool)
        costs = {name: join([c[3].get(name, np.zeros(len(c[0]))) for c in self._columns])
                 for name in self.components}
        rows = join([e[0] for e in self._entries], 0).astype(np.int64)
        columns = join([e[1] for e in self._entries], 0).astype(np.int64)
        values = join([e[2] for e in self._entries])
        import scipy.sparse as sp

        # COO -> CSR sums duplicate entries; a zero (the bound of a lane at a closed node) is no entry at all.
        matrix = sp.coo_matrix((values, (rows, columns)), shape=(self.n_rows, self.n_columns)).tocsr()
        matrix.sum_duplicates()
        matrix.eliminate_zeros()
        return SparseModel(lower=lower, upper=upper, integer=integer, costs=costs,
                           row_lower=join([r[0] for r in self._rows]), row_upper=join([r[1] for r in self._rows]),
                           matrix=matrix, column_blocks=self.column_blocks, row_blocks=self.row_blocks, **handles)


def to_pulp(model: SparseModel, name: str = "lanesolve"):
    """The model as a :class:`pulp.LpProblem`, with the same column and row names, for export or inspection.

    Parameters
    ----------
    model : SparseModel
    name : str
        Problem name (shows in files PuLP writes).

    Returns
    -------
    pulp.LpProblem
        Minimisation problem; its optimum equals the one lanesolve's own solve finds (tests/test_model_speedpath.py
        checks it). Built with one PuLP object per column and row, so it is much slower than lanesolve's own path
        on large networks.

    Examples
    --------
    >>> from lanesolve.model.formulation import build_sparse_model
    >>> from lanesolve.model.network import make_network
    >>> net = make_network([{"id": "D", "supply": 8}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}])
    >>> problem = to_pulp(build_sparse_model(net))
    >>> [constraint.name for constraint in problem.constraints()]
    ['supply_0', 'balance_0']
    """
    import pulp  # late import: only the export needs PuLP's objects

    problem = pulp.LpProblem(name, pulp.LpMinimize)
    new_variable = getattr(problem, "add_variable", pulp.LpVariable)  # PuLP 3 deprecates LpVariable(...) directly
    variables = [
        new_variable(column, lowBound=None if np.isinf(lo) else float(lo), upBound=None if np.isinf(up) else float(up),
                     cat=pulp.LpInteger if whole else pulp.LpContinuous)
        for column, lo, up, whole in zip(model.column_names, model.lower.tolist(), model.upper.tolist(),
                                         model.integer.tolist())]
    cost = model.cost
    problem.setObjective(pulp.LpAffineExpression([(variables[j], c) for j, c in enumerate(cost.tolist()) if c != 0],
                                                 constant=model.objective_constant))
    matrix = model.matrix
    for i, row in enumerate(model.row_names):
        span = slice(matrix.indptr[i], matrix.indptr[i + 1])
        expression = pulp.LpAffineExpression([(variables[j], v) for j, v in zip(matrix.indices[span].tolist(),
                                                                                  matrix.data[span].tolist())])
        lo, up = float(model.row_lower[i]), float(model.row_upper[i])
        if lo == up:
            sense, rhs = pulp.LpConstraintEQ, lo
        elif np.isinf(lo):
            sense, rhs = pulp.LpConstraintLE, up
        else:
            sense, rhs = pulp.LpConstraintGE, lo
        problem.addConstraint(pulp.LpConstraint(expression, sense, row, rhs))
    return problem
