"""JSON written as it is produced: the same text as ``json.dump(doc, indent=1, ensure_ascii=False, default=str)``.

The standard library's encoder falls back to its pure-Python path whenever an indent is asked for, which
made the summary document of a large range the slowest file of the run, and it needs the whole document in
memory.  Here a top-level mapping is written key by key; a value given as :class:`Lazy` (an iterable, such
as summary rows read back from part files) is written item by item as it comes; each scalar is encoded by
the standard library's C string encoder and ``repr``, as ``json`` itself does.  Anything that is not a plain
dict, list, tuple, str, int, float, bool or None is encoded by ``json`` itself (``default=str``), so the
output never differs from the standard library's.  ``tests/test_jsonstream.py`` compares both.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from typing import IO, Any

_STR = json.encoder.encode_basestring  # the C encoder where available (ensure_ascii=False)
_INF = float("inf")


class Lazy:
    """A JSON array whose items come from an iterable, written one by one."""

    def __init__(self, items: Iterable[Any]):
        self.items = items


def _float(o: float) -> str:
    if o != o:
        return "NaN"
    if o == _INF:
        return "Infinity"
    if o == -_INF:
        return "-Infinity"
    return float.__repr__(o)


def _fallback(o: Any, level: int) -> str:
    text = json.dumps(o, indent=1, ensure_ascii=False, default=str)
    return text.replace("\n", "\n" + " " * level) if level else text


def encode(o: Any, level: int = 0) -> str:
    """``o`` as ``json.dumps(o, indent=1, ensure_ascii=False, default=str)`` writes it, nested ``level`` deep."""
    if isinstance(o, str):
        return _STR(o)
    if o is None:
        return "null"
    if o is True:
        return "true"
    if o is False:
        return "false"
    if isinstance(o, int):
        return int.__repr__(o)
    if isinstance(o, float):
        return _float(o)
    if isinstance(o, (list, tuple)):
        if not o:
            return "[]"
        inner = "\n" + " " * (level + 1)
        return "[" + inner + ("," + inner).join(encode(x, level + 1) for x in o) + "\n" + " " * level + "]"
    if isinstance(o, dict):
        if not o:
            return "{}"
        if not all(type(k) is str for k in o):
            return _fallback(o, level)
        inner = "\n" + " " * (level + 1)
        body = ("," + inner).join(_STR(k) + ": " + encode(v, level + 1) for k, v in o.items())
        return "{" + inner + body + "\n" + " " * level + "}"
    return _fallback(o, level)


def write_document(fh: IO[str], items: list[tuple[str, Any]]) -> None:
    """Write a top-level mapping of ``items`` (key, value); a :class:`Lazy` value is streamed."""
    if not items:
        fh.write("{}")
        return
    fh.write("{")
    for n, (key, value) in enumerate(items):
        fh.write(("," if n else "") + "\n " + _STR(key) + ": ")
        if isinstance(value, Lazy):
            first = True
            for x in value.items:
                fh.write(("[" if first else ",") + "\n  " + encode(x, 2))
                first = False
            fh.write("[]" if first else "\n ]")
        else:
            fh.write(encode(value, 1))
    fh.write("\n}")
