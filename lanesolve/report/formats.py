"""Numbers as a planner reads them in the summary, the mail and the terminal: money, rates, quantities and shares
with thousands separators and the unit or currency label after them."""

from __future__ import annotations

import math


def _finite(value: object) -> float | None:
    """``value`` as a float, or None when it is missing, NaN or infinite."""
    if value is None:
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def format_money(value: object, currency: str = "") -> str:
    """Money with thousands separators and 2 decimals, the currency label after it.

    >>> format_money(1234567.891, "EUR")
    '1,234,567.89 EUR'
    >>> format_money(float("nan"))
    '–'
    """
    number = _finite(value)
    if number is None:
        return "–"
    text = f"{number + 0.0:,.2f}"  # + 0.0 turns -0.0 into 0.0 so "-0.00" never shows
    if text == "-0.00":
        text = "0.00"
    return f"{text} {currency}".strip()


def format_rate(value: object, currency: str = "") -> str:
    """A rate (money per unit) with 2 to 4 decimals, so that rate x flow matches the cost shown beside it.

    A rate rounded to 2 decimals (1.19) next to a cost computed from the full rate (1.19034 x 140 = 166.65) reads
    as an arithmetic slip; four decimals keep the product within a cent for flows up to a few hundred units.

    >>> format_rate(1.190342857, "EUR")
    '1.1903 EUR'
    >>> format_rate(2.5)
    '2.50'
    """
    number = _finite(value)
    if number is None:
        return "–"
    text = f"{number + 0.0:,.4f}"
    whole, _, decimals = text.partition(".")
    decimals = decimals.rstrip("0").ljust(2, "0")
    text = f"{whole}.{decimals}"
    if text == "-0.00":
        text = "0.00"
    return f"{text} {currency}".strip()


def format_quantity(value: object, units: str = "") -> str:
    """A quantity with thousands separators: whole numbers without decimals, others with 2.

    Solver output is off integers by round-off (1e-9 and so on); that is not worth showing to a planner.

    >>> format_quantity(1500.0000000002, "pallets")
    '1,500 pallets'
    >>> format_quantity(12.5)
    '12.50'
    """
    number = _finite(value)
    if number is None:
        return "–"
    if abs(number - round(number)) < 1e-6:
        text = f"{round(number):,d}"
    else:
        text = f"{number:,.2f}"
    if text in ("-0", "-0.00"):
        text = text[1:]
    return f"{text} {units}".strip()


def format_share(value: object) -> str:
    """A fraction as a percentage with one decimal; "no limit" when there is no capacity to compare with.

    >>> format_share(0.8766)
    '87.7 %'
    """
    number = _finite(value)
    return "no limit" if number is None else f"{number * 100:,.1f} %"
