"""The ``--json`` document as text: exactly what ``json.dumps(document, indent=2)`` writes, made faster.

With ``indent`` the standard library encodes in Python, one generator step per value; a million-lane plan has a few
hundred thousand values in its ``flows`` and ``sensitivity`` lists (about a second). Those lists are lists of flat
records with the same keys, so each record is one text template filled with values encoded by the C functions the
encoder itself uses. Everything else -- and any list that is not of that shape -- goes through ``json.dumps``.
"""

from __future__ import annotations

import json
from json.encoder import encode_basestring_ascii

_INDENT = "  "
_FLOAT_REPR = float.__repr__
_INT_REPR = int.__repr__


def dumps_indented(document) -> str:
    """``json.dumps(document, indent=2)``, the same text.

    Examples
    --------
    >>> doc = {"flows": [{"origin": "D", "flow": 2.5}, {"origin": "E", "flow": None}], "status": "optimal"}
    >>> dumps_indented(doc) == json.dumps(doc, indent=2)
    True
    """
    if not isinstance(document, dict) or not document or not all(isinstance(key, str) for key in document):
        return json.dumps(document, indent=2)
    items = [f"{_INDENT}{encode_basestring_ascii(key)}: {_value_text(value, 1)}" for key, value in document.items()]
    return "{\n" + ",\n".join(items) + "\n}"


def _value_text(value, level: int) -> str:
    """One value as ``json.dumps(value, indent=2)`` writes it ``level`` indents deep (its first line unindented)."""
    records = _records_text(value, level) if isinstance(value, list) and len(value) > 1 else None
    if records is not None:
        return records
    return json.dumps(value, indent=2).replace("\n", "\n" + _INDENT * level)


def _records_text(records: list, level: int) -> str | None:
    """A list of flat dicts sharing their keys, or None when the list is not of that shape."""
    first = records[0]
    if type(first) is not dict or not first or not all(isinstance(key, str) for key in first):
        return None
    keys = tuple(first)
    if not all(type(record) is dict and tuple(record) == keys for record in records):
        return None
    outer, inner = _INDENT * (level + 1), _INDENT * (level + 2)
    columns = []
    for number, key in enumerate(keys):
        texts = _column_text([record[key] for record in records])
        if texts is None:
            return None
        head = (outer + "{\n" if number == 0 else "") + inner + encode_basestring_ascii(key) + ": "
        tail = "\n" + outer + "}" if number == len(keys) - 1 else ""
        columns.append([head + text + tail for text in texts])
    return "[\n" + ",\n".join(map(",\n".join, zip(*columns))) + "\n" + _INDENT * level + "]"


#: Types whose values the C encoder writes as one token without quotes (numbers, true/false, null).
_BARE = frozenset({float, int, bool, type(None)})


def _column_text(values: list) -> list[str] | None:
    """The encoder's text of each value (all scalars), or None when one is a list, a dict or unknown."""
    kinds = set(map(type, values))
    if kinds == {str}:
        return list(map(encode_basestring_ascii, values))
    if kinds <= _BARE:  # no quotes, so no ", " inside a token: the C encoder's list text splits safely
        return json.dumps(values)[1:-1].split(", ")
    texts = [_scalar_text(value) for value in values]
    return None if None in texts else texts


def _scalar_text(value) -> str | None:
    """A value as the encoder writes it (``str``, ``float``, ``int``, ``bool``, ``None``), else None."""
    if isinstance(value, str):
        return encode_basestring_ascii(value)
    if value is None:
        return "null"
    if value is True:
        return "true"
    if value is False:
        return "false"
    if isinstance(value, float):
        if value != value:
            return "NaN"
        if value in (float("inf"), float("-inf")):
            return "Infinity" if value > 0 else "-Infinity"
        return _FLOAT_REPR(value)
    if isinstance(value, int):
        return _INT_REPR(value)
    return None
