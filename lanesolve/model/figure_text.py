"""The sensitivity figures as rows of :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`: amounts in words, the
two-sided figures' sentences, and the unused lanes' rows, made only for the lanes someone reads.

:mod:`lanesolve.model.sensitivity` computes the numbers; this module words them. A 100k-lane plan has about 95,000
unused lanes, and their labels and sentences once took most of the figures' time although the sheet, ``--json``
and the summary show only the 500 nearest to paying. :class:`UnusedLanes` keeps every unused lane's figure as a
number and makes rows for the lanes asked for: the nearest ones when the figures are computed, the rest when
``--all-figures`` lists every one (:meth:`lanesolve.model.result.Result.all_figures`).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from lanesolve.model.result import SENSITIVITY_COLUMNS, empty_frame

#: Two sides closer than this (relative to max(1, |value|)) are one figure; a figure nearer 0 than this is 0.
SAME = 1e-9


def money_words(value: float, currency: str = "") -> str:
    """Money for a sentence: four significant digits, at least two decimals, thousands separators.

    >>> money_words(2.0571), money_words(0.153), money_words(43.339, "EUR"), money_words(5), money_words(0.009)
    ('2.057', '0.153', '43.34 EUR', '5.00', '0.009')
    >>> money_words(123456.789)
    '123,456.79'
    """
    return str(_amounts(np.array([value], dtype=float), currency)[0])


def _amounts(values: np.ndarray, currency: str = "") -> np.ndarray:
    """:func:`money_words` for an array, as an object array; values are formatted in groups of equal decimals
    (a 100k-lane plan formats about 100k of them, so each step is one cheap call per value)."""
    values = np.asarray(values, dtype=float) + 0.0
    size = np.abs(values)
    with np.errstate(divide="ignore", invalid="ignore"):
        magnitude = np.floor(np.log10(size))
    decimals = np.where(np.isfinite(magnitude), np.clip(3 - magnitude, 2, 15), 2).astype(int)
    # Rounded once here, so the text shows the same digits whichever way it is formatted (ties go to even).
    with np.errstate(invalid="ignore", over="ignore"):
        size = np.where(np.isfinite(size) & (size < 1e15), np.round(size * 10.0 ** decimals) / 10.0 ** decimals, size)
    out = np.empty(len(values), dtype=object)
    for d in np.unique(decimals).tolist():
        chosen = np.flatnonzero(decimals == d)
        if d == 2:
            out[chosen] = list(map("{:,.2f}".format, size[chosen].tolist()))
            continue
        # Below 10: drop trailing zeros, keep two decimals ("5.000" -> "5.00", "0.1530" -> "0.153").
        trimmed = [t.rstrip("0") for t in map(f"%.{d}f".__mod__, size[chosen].tolist())]
        out[chosen] = [(t + "00")[:max(len(t), t.index(".") + 3)] for t in trimmed]
    out = np.where(values < 0, "-" + out, out)
    return out + f" {currency}" if currency else out


def snapped(values: np.ndarray) -> np.ndarray:
    """``values`` as floats with round-off below :data:`SAME` set to 0 (and -0.0 to 0.0)."""
    values = np.asarray(values, dtype=float) + 0.0
    return np.where(np.abs(values) < SAME, 0.0, values) + 0.0


def amount_words(values: np.ndarray, currency: str = "") -> np.ndarray:
    """:func:`_amounts` of many values at once: Arrow's number formatting where pyarrow is installed (as the unused
    lanes' sentences use it), the same words either way."""
    values = np.asarray(values, dtype=float) + 0.0
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        return _amounts(values, currency)
    finite = np.isfinite(values)
    out = np.empty(len(values), dtype=object)
    words = _arrow_amounts(np.abs(values[finite])).to_numpy(zero_copy_only=False).astype(object)
    out[finite] = np.where(values[finite] < 0, "-" + words, words)
    out[~finite] = _amounts(values[~finite])
    return out + f" {currency}" if currency else out


def _joined(*parts) -> np.ndarray:
    """Texts joined element-wise: each part a string (the same in every row) or an object array of strings (other
    values are written with ``str``, as an f-string would)."""
    size = max((len(p) for p in parts if not isinstance(p, str)), default=0)
    if not size:
        return np.zeros(0, dtype=object)
    try:
        import pyarrow as pa
        import pyarrow.compute as pc

        columns = [p if isinstance(p, str) else pa.array(p, type=pa.string()) for p in parts]
        return pc.binary_join_element_wise(*columns, "").to_numpy(zero_copy_only=False).astype(object)
    except (ImportError, TypeError, ValueError):  # no pyarrow, or values that are not text (Arrow's errors
        pass                                     # derive from TypeError and ValueError)
    columns = [[p] * size if isinstance(p, str) else [str(v) for v in p] for p in parts]
    return np.array(["".join(row) for row in zip(*columns)], dtype=object)


def two_sided_rows(figure: str, items: np.ndarray, up: np.ndarray, down: np.ndarray, basis: str, what: str,
                   units: str, currency: str) -> dict[str, np.ndarray]:
    """Rows of a two-sided figure, with the sentence: one number when both sides agree, else both."""
    up, down = snapped(up), snapped(down)
    with np.errstate(invalid="ignore"):
        same = np.isfinite(up) & np.isfinite(down) & (np.abs(up - down) <= SAME * np.maximum(1.0, np.abs(up)))
    demand = figure == "marginal_cost"
    more, less = ("costs", "saves") if demand else ("saves", "costs")
    items = np.asarray(items, dtype=object)
    texts = np.empty(len(items), dtype=object)
    # Most rows have one figure, so one sentence pattern: joined a column at a time.
    agree = np.flatnonzero(same)
    texts[agree] = _joined(f"One more or one less unit ({units}) {what} ", items[agree], " changes the cost by ",
                           amount_words(up[agree], currency), ".")
    differ = np.flatnonzero(~same)
    up_words, down_words = amount_words(up[differ], currency).tolist(), amount_words(down[differ], currency).tolist()
    for k, item, u, d, u_text, d_text in zip(differ.tolist(), items[differ].tolist(), up[differ].tolist(),
                                             down[differ].tolist(), up_words, down_words):
        subject = f"unit ({units}) {what} {item}"
        if math.isinf(u):
            first = (f"One more {subject} cannot be met: no plan delivers it" if demand
                     else f"One more {subject} saves nothing")
        else:
            first = f"One more {subject} {more} {u_text}"
        if math.isnan(d):
            second = "it cannot fall below 0"
        elif math.isinf(d):
            second = "with one less there is no plan (the hard demand needs it)"
        else:
            second = f"one less {less} {d_text}"
        texts[k] = f"{first}; {second}."
    return _columns(figure, items, np.where(same, up, math.nan), up, down, same, basis, texts)


def _columns(figure: str, items, value, up, down, unique, basis: str, texts) -> dict[str, np.ndarray]:
    """Rows of one figure as arrays per column of :data:`~lanesolve.model.result.SENSITIVITY_COLUMNS`."""
    n = len(items)
    return {"figure": np.full(n, figure, dtype=object), "item": np.asarray(items, dtype=object), "value": value,
            "value_up": up, "value_down": down, "unique": np.asarray(unique, dtype=bool),
            "basis": np.full(n, basis, dtype=object), "text": np.asarray(texts, dtype=object)}


def figure_frame(parts: list[dict[str, np.ndarray]]) -> pd.DataFrame:
    """One frame of the rows of ``parts`` (from :func:`two_sided_rows` and :func:`reduced_rows`), in order: text
    columns as plain object arrays (as :func:`~lanesolve.model.result.empty_frame` makes them), ``unique`` bool,
    the values float. Built once from whole columns: one frame per part and a concat cost more than the rows."""
    if not sum(len(part["figure"]) for part in parts):
        return empty_frame(SENSITIVITY_COLUMNS)
    columns = {name: np.concatenate([part[name] for part in parts]) for name in SENSITIVITY_COLUMNS}
    return pd.DataFrame({name: pd.Series(values, dtype=object if values.dtype == object else
                                         bool if name == "unique" else float, copy=False)
                         for name, values in columns.items()}, columns=SENSITIVITY_COLUMNS)


class UnusedLanes:
    """The figures of a plan's unused lanes (``reduced_cost``) as numbers; rows are made for the lanes asked for.

    Parameters
    ----------
    values : numpy.ndarray
        Per unused lane, how much its cost per unit must fall before a plan as cheap uses it (``inf``: no plan
        can use it), in lane order, before round-off is set to 0 (the order is that of these values).
    lanes : numpy.ndarray
        Position of each unused lane in ``ends``.
    ends : tuple of pandas.Series
        The origin, destination and mode columns of the network's lanes.
    basis, units, currency : str
        The words of every row.
    decisions : bool
        The plan has yes/no or trip decisions, or closed nodes (the sentence of a lane no plan can use says why).
    exact : numpy.ndarray of bool, optional
        Where ``values`` is the figure; elsewhere it is a lower bound, and ``resolve`` finds the figure. Default:
        every figure is exact.
    resolve : callable, optional
        ``resolve(positions, cap)``: ``(figures, known)`` of the lanes at ``positions``, with ``known`` False where
        the figure lies above ``cap`` (then it is not found).
    upper : numpy.ndarray, optional
        An upper bound of each figure (``inf`` where none is known; the figure where it is exact): a search for the
        lanes nearest to paying needs to go no further than the ``count``-th smallest of them.

    Notes
    -----
    The order of the rows is nearest to paying first, lane order among equal figures: the order of a stable sort
    of ``values``. :meth:`show` makes the rows of the nearest few; after it, ``len()``, :meth:`rows` and
    :meth:`nearest_above` speak of the lanes *beyond* those, and :meth:`continues` tells the frame they follow.
    """

    def __init__(self, values: np.ndarray, lanes: np.ndarray, ends: tuple, basis: str, units: str, currency: str,
                 decisions: bool, exact: np.ndarray | None = None, resolve=None, upper: np.ndarray | None = None):
        self.values, self.lanes, self.ends = np.asarray(values, dtype=float), np.asarray(lanes), ends
        self.basis, self.units, self.currency, self.decisions = basis, units, currency, decisions
        self.shown = np.zeros(len(self.values), dtype=bool)
        self.frame: pd.DataFrame | None = None
        # Where a figure is not yet known exactly, values holds a lower bound and resolve(positions, cap) finds it:
        # (figures, known) with known False where the figure is above cap (then the figure is a new lower bound).
        self.exact = np.ones(len(self.values), dtype=bool) if exact is None else np.asarray(exact, dtype=bool)
        self.resolve = resolve if not self.exact.all() else None
        self.upper = (np.where(self.exact, self.values, math.inf) if upper is None
                      else np.where(self.exact, self.values, np.asarray(upper, dtype=float)))

    def _settle(self, positions: np.ndarray, cap: float | None = None) -> None:
        """Find the exact figures of the lanes at ``positions`` not known yet, or (with ``cap``) learn that they lie
        above ``cap``; values only rise, from a lower bound to the figure."""
        positions = positions[~self.exact[positions]]
        if not len(positions):
            return
        found, known = self.resolve(positions, cap)
        # Above the cap: the smallest float above it is a lower bound.
        beyond = np.nextafter(np.float64(cap if cap is not None else np.inf), np.inf)
        self.values[positions] = np.where(known, found, np.maximum(self.values[positions], beyond))
        self.upper[positions] = np.where(known, found, self.upper[positions])
        self.exact[positions] = known
        if self.exact.all():
            self.resolve = None  # nothing left to find: the plan's graph is released

    def _settle_below(self, among: np.ndarray, count: int, threshold: float | None = None) -> None:
        """Settle lanes of ``among`` until the ``count`` smallest figures there (only finite ones above
        ``threshold`` when given) are exact and no other lane there could be smaller or tied.

        Each round searches the open lanes whose lower bound lies within a radius, each search stopped at it. The
        first radius is the count-th smallest *upper* bound of the candidates' figures, where it is finite: at least
        count figures lie at or below it, so one round settles every lane that could be among the count nearest.
        Without such a bound the radius is at least the count-th smallest value and a thousandth of the largest
        figure, and grows fourfold from round to round, so a lane is searched a few times at most however its lower
        bound creeps up (a search costs about the same whatever it finds: most of it is per search, not per node
        reached)."""
        radius = None
        finite = np.abs(self.values[np.isfinite(self.values)])
        step = 1e-3 * max(1.0, float(finite.max()) if len(finite) else 1.0)  # the least radius worth a round
        while self.resolve is not None:
            values = snapped(self.values[among])
            candidate = (np.ones(len(values), dtype=bool) if threshold is None
                         else (values > threshold) & np.isfinite(values))
            bound = (np.inf if candidate.sum() <= count
                     else float(np.partition(values[candidate], count - 1)[count - 1]))
            if not ((values <= bound) & ~self.exact[among]).any():
                return
            if not np.isfinite(bound):
                self._settle(among)
                continue
            # Every open lane whose lower bound lies within the radius is searched: a search costs about the same
            # whatever it finds, and fewer rounds mean fewer searches of the same lane.
            if radius is None:
                # A candidate's figure lies above its lower bound (above the threshold), so the count-th smallest
                # upper bound among them has count figures at or below it: enough for one round. The slack of
                # SAME covers round-off between the bound's path sums and the search's.
                enough = float(np.partition(self.upper[among][candidate], count - 1)[count - 1])
                radius = (max(bound, enough + SAME * max(1.0, abs(enough))) if math.isfinite(enough)
                          else max(bound, step))
            else:
                radius = max(bound, 4.0 * radius)
            self._settle(among[values <= radius], radius)

    def __len__(self) -> int:
        """How many unused lanes are beyond those shown."""
        return int(len(self.values) - self.shown.sum())

    def __repr__(self) -> str:
        return f"UnusedLanes({len(self.values):,} lanes, {len(self):,} beyond those shown)"

    def show(self, count: int | None) -> dict[str, np.ndarray]:
        """Rows (as :func:`figure_frame` parts) of the ``count`` lanes nearest to paying (every lane when None),
        nearest first; later calls of ``len()``, :meth:`rows` and :meth:`nearest_above` leave them out."""
        order = self._nearest(count)
        self.shown[order] = True
        return self._columns(order)

    def continues(self, frame: pd.DataFrame) -> bool:
        """True when these lanes follow ``frame``: the figures frame made with the shown rows, not one set since."""
        return self.frame is frame

    def rows(self) -> pd.DataFrame:
        """Rows of every lane beyond those shown, nearest to paying first (they follow the shown rows)."""
        rest = np.flatnonzero(~self.shown)
        self._settle(rest)
        return figure_frame([self._columns(rest[np.argsort(self.values[rest], kind="stable")])])

    def nearest_above(self, threshold: float, count: int) -> pd.DataFrame:
        """Rows of the lanes beyond those shown whose figure, above ``threshold`` and finite, is among the
        ``count`` smallest such figures (every lane tied with the last included), in no particular order."""
        rest = np.flatnonzero(~self.shown)
        self._settle_below(rest, count, threshold)
        values = snapped(self.values[rest])
        candidate = (values > threshold) & np.isfinite(values)
        if candidate.sum() > count:
            bound = np.partition(values[candidate], count - 1)[count - 1]
            candidate &= values <= bound
        return figure_frame([self._columns(rest[candidate])])

    def _nearest(self, count: int | None) -> np.ndarray:
        """Indices of the ``count`` nearest lanes in row order; the others are not sorted."""
        values = self.values
        if count is None or count >= len(values):
            self._settle(np.arange(len(values)))
            return np.argsort(values, kind="stable")
        if count > 0:
            self._settle_below(np.arange(len(values)), count)
        if count <= 0:
            return np.zeros(0, dtype=np.int64)
        kth = np.partition(values, count - 1)[count - 1]
        if np.isnan(kth):  # NaN sorts last: fewer than count figures
            return np.argsort(values, kind="stable")[:count]
        below = np.flatnonzero(values < kth)
        ties = np.flatnonzero(values == kth)[:count - len(below)]
        chosen = np.sort(np.concatenate([below, ties]))  # lane order, so the sort below is the stable sort's
        return chosen[np.argsort(values[chosen], kind="stable")]

    def _columns(self, which: np.ndarray) -> dict[str, np.ndarray]:
        return reduced_rows(self.ends, self.lanes[which], self.values[which], self.basis, self.units,
                            self.currency, self.decisions)


def reduced_rows(ends: tuple, chosen: np.ndarray, reduced: np.ndarray, basis: str, units: str, currency: str,
                 decisions: bool) -> dict[str, np.ndarray]:
    """Rows of unused lanes: built column-wise by Arrow's string kernels where pyarrow is installed (pandas uses it
    for its text columns), else row by row; both give the same text. Text columns are plain object arrays, as
    :func:`~lanesolve.model.result.empty_frame` makes them.

    ``ends``: the lanes' origin, destination and mode columns; ``chosen``: the lanes' positions in them, in row
    order; ``reduced``: their figures."""
    reduced = snapped(reduced)
    finite = np.isfinite(reduced)
    never = (" is unused and no plan can use it while the plan's yes/no and trip decisions stand." if decisions
             else " is unused and no plan can use it (nothing can flow over it to where it is needed).")
    middle = f" is unused; its cost per unit ({units}) would have to fall by "
    end = f" {currency} before a plan as cheap used it." if currency else " before a plan as cheap used it."
    free = " is unused, but a plan using it would cost no more (an equally cheap alternative)."
    try:
        import pyarrow as pa

        columns = [_arrow_taken(pa, column, chosen) for column in ends]
        items, texts = _reduced_words_arrow(*columns, reduced, middle, end, free, never)
    except ImportError:
        columns = [column.to_numpy(dtype=object)[chosen] for column in ends]
        items, texts = _reduced_words_rows(*columns, reduced, middle, end, free, never)
    return _columns("reduced_cost", items, np.where(finite, reduced, math.nan), reduced,
                    np.full(len(items), math.nan), finite, basis, texts)


def arrow_column(pa, column: pd.Series):
    """A text column as an Arrow array: zero-copy when pandas already keeps it in Arrow, else converted."""
    try:
        return pa.array(column.array, type=pa.string())
    except (TypeError, ValueError, pa.ArrowException):
        return pa.array(column.to_numpy(dtype=object), type=pa.string())


def _arrow_taken(pa, column: pd.Series, positions: np.ndarray):
    """The text at ``positions`` of ``column`` as an Arrow array: taken from pandas' own Arrow data where it keeps
    the column in Arrow (in its own string type: the words are cast once taken), else converted value by value for
    those positions only."""
    if hasattr(column.array, "__arrow_array__"):
        try:
            return pa.array(column.array).take(pa.array(positions))
        except (TypeError, ValueError, pa.ArrowException):
            pass
    return pa.array(column.to_numpy(dtype=object)[positions], type=pa.string())


def _reduced_words_rows(origins, destinations, modes, reduced, middle, end, free, never):
    """Labels and sentences of unused lanes, row by row (no pyarrow)."""
    amounts = _amounts(reduced).tolist()
    items, texts = [], []
    for o, d, m, value, amount in zip(origins.tolist(), destinations.tolist(), modes.tolist(), reduced.tolist(),
                                      amounts):
        item = f"{o} -> {d} ({m})" if m else f"{o} -> {d}"
        items.append(item)
        texts.append(f"Lane {item}{free}" if value == 0 else f"Lane {item}{never}" if value == math.inf
                     else f"Lane {item}{middle}{amount}{end}")
    return np.array(items, dtype=object), np.array(texts, dtype=object)


def _reduced_words_arrow(origins, destinations, modes, reduced, middle, end, free, never):
    """Labels and sentences of unused lanes with Arrow's string kernels; amounts as :func:`money_words` writes them
    (four significant digits, at least two decimals). Raises ImportError without pyarrow."""
    import pyarrow as pa
    import pyarrow.compute as pc

    join = pc.binary_join_element_wise
    origin, destination, mode = (pa.array(a, type=pa.string()) if not isinstance(a, (pa.Array, pa.ChunkedArray))
                                 else a.cast(pa.string()) for a in (origins, destinations, modes))
    item = join(origin, destination, " -> ")
    item = pc.if_else(pc.equal(mode, ""), item, join(item, " (", mode, ")", ""))
    amount = _arrow_amounts(np.where(np.isfinite(reduced), reduced, 0.0))
    text = join("Lane ", item, middle, amount, end, "")
    text = pc.if_else(pa.array(reduced == 0), join("Lane ", item, free, ""), text)
    text = pc.if_else(pa.array(np.isinf(reduced)), join("Lane ", item, never, ""), text)
    return item.to_numpy(zero_copy_only=False), text.to_numpy(zero_copy_only=False)


def _arrow_amounts(size: np.ndarray):
    """Finite non-negative amounts as :func:`money_words` writes them (four significant digits, at least two
    decimals), as an Arrow string array: Arrow writes the shortest text of each rounded value; thousands and tiny
    values go through :func:`_amounts`. Raises ImportError without pyarrow."""
    import pyarrow as pa
    import pyarrow.compute as pc

    with np.errstate(divide="ignore", invalid="ignore"):
        magnitude = np.floor(np.log10(size))
    decimals = np.where(np.isfinite(magnitude), np.clip(3 - magnitude, 2, 15), 2)
    rounded = np.round(size * 10.0 ** decimals) / 10.0 ** decimals
    amount = pc.cast(pa.array(rounded), pa.string())  # shortest text of the rounded value
    amount = pc.replace_substring_regex(amount, r"^(\d+)$", r"\1.00")
    amount = pc.replace_substring_regex(amount, r"^(\d+\.\d)$", r"\1" + "0")
    odd = np.flatnonzero((size >= 1000) | ((size > 0) & (size < 1e-4)))  # thousands separators, tiny values
    if len(odd):
        fixed = amount.to_numpy(zero_copy_only=False).astype(object)
        fixed[odd] = _amounts(size[odd])
        amount = pa.array(fixed, type=pa.string())
    return amount
