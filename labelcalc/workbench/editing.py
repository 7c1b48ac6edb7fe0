"""Form fields of a formula file and edits written back into its YAML text, comments kept.

The text is read with ruamel.yaml in round-trip mode (which keeps comments, key order and flow style) only to
edit it; every formula is validated by the same safe loader and models as the command line
(:mod:`labelcalc.yamlsafe`, :mod:`labelcalc.intake.formula`).  A field's name is the key path the
validation messages use (``batch[2].amount``), so a message lands beside its field.
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from typing import Any

from ruamel.yaml import YAML
from ruamel.yaml.comments import CommentedMap, CommentedSeq
from ruamel.yaml.error import YAMLError

from labelcalc.errors import InputError, Problem
from labelcalc.yamlsafe import format_path, parse_yaml_text

_PART = re.compile(r"([^.\[\]]+)|\[(\d+)\]")
HEADER_FIELDS = [("serving", "size"), ("serving", "household"), ("servings_per_container",), ("net_quantity",)]


def _yaml() -> YAML:
    y = YAML(typ="rt")
    y.preserve_quotes = True
    y.width = 4096
    y.indent(mapping=2, sequence=4, offset=2)
    return y


@dataclass
class Field:
    name: str  # key path, as validation messages name it
    label: str
    value: str
    group: str  # "product", "batch[0]", "processing[1]"
    listed: bool = False  # the value is a [low, high] range


def load_rt(text: str, file: str) -> Any:
    """Round-trip data of ``text``; a syntax error is the same message the command line gives."""
    parse_yaml_text(text, file, with_lines=False)  # safe loader first: its message names the line
    try:
        return _yaml().load(text)
    except YAMLError as exc:  # pragma: no cover - the safe loader refuses the same text first
        raise InputError(Problem(f"YAML error: {exc}", file=file)) from None


def dump_rt(data: Any) -> str:
    buf = io.StringIO()
    _yaml().dump(data, buf)
    return buf.getvalue()


def _show(v: Any) -> str:
    if isinstance(v, list):
        return ", ".join(_show(x) for x in v)
    return "" if v is None else str(v)


def _leaves(node: Any, path: tuple) -> list[tuple[tuple, Any]]:
    if isinstance(node, dict):
        out = []
        for k, v in node.items():
            out += _leaves(v, path + (str(k),))
        return out
    return [(path, node)]


def form_fields(data: Any) -> list[Field]:
    """The fields the form shows: serving and container of a product, each batch line, each processing step."""
    out: list[Field] = []
    if not isinstance(data, dict):
        return out
    head = data.get("product")
    if isinstance(head, dict):
        for keys in HEADER_FIELDS:
            node: Any = head
            for k in keys:
                node = node.get(k) if isinstance(node, dict) else None
            out.append(Field(format_path(("product", *keys)), " ".join(keys).replace("_", " "), _show(node), "product"))
    for i, ln in enumerate(data.get("batch") or []):
        if not isinstance(ln, dict):
            continue
        ref = "subformula" if "subformula" in ln else "ingredient"
        out.append(Field(format_path(("batch", i, ref)), ref, _show(ln.get(ref)), f"batch[{i}]"))
        out.append(Field(format_path(("batch", i, "amount")), "amount", _show(ln.get("amount")), f"batch[{i}]"))
    for i, st in enumerate(data.get("processing") or []):
        if not isinstance(st, dict):
            continue
        for path, v in _leaves(st, ()):
            name = format_path(("processing", i, *path))
            out.append(Field(name, " ".join(path).replace("_", " "), _show(v), f"processing[{i}]", isinstance(v, list)))
    return out


def parse_name(name: str) -> tuple:
    """``batch[2].amount`` -> ('batch', 2, 'amount')."""
    parts = tuple(m.group(1) if m.group(1) is not None else int(m.group(2)) for m in _PART.finditer(name))
    if not parts or format_path(parts) != name:
        raise InputError(Problem("not a field of the form", field=name))
    return parts


def _value(text: str, old: Any) -> Any:
    """Form text as a YAML value: a range stays a list, numbers become numbers, anything else stays text."""
    text = text.strip()
    if isinstance(old, list) or ("," in text and all(_number(x) is not None for x in text.split(","))):
        items = [x.strip() for x in text.split(",") if x.strip()]
        vals = [_number(x) if _number(x) is not None else x for x in items]
        seq = CommentedSeq(vals)
        seq.fa.set_flow_style()
        return seq
    n = _number(text)
    return n if n is not None else text


def _number(text: str) -> int | float | None:
    try:
        return int(text)
    except ValueError:
        pass
    try:
        return float(text)
    except ValueError:
        return None


def apply_fields(text: str, file: str, values: dict[str, str], *, add: dict | None = None, remove=()) -> str:
    """``text`` with the form's values written in (an empty value removes an optional key), batch lines removed
    by index and one line added (``{"ref": kind, "id": ..., "amount": ...}``); comments and layout kept."""
    data = load_rt(text, file)
    if not isinstance(data, dict):
        raise InputError(Problem("not a formula file: expected 'product:' or 'subformula:' and 'batch:'", file=file))
    allowed = {f.name for f in form_fields(data)}
    for name, raw in values.items():
        if name not in allowed:
            raise InputError(Problem("not a field of this formula", file=file, field=name))
        path = parse_name(name)
        parent: Any = data
        for k in path[:-1]:
            if isinstance(parent, dict) and k not in parent:
                parent[k] = CommentedMap()
            parent = parent[k]
        last = path[-1]
        old = parent.get(last) if isinstance(parent, dict) else parent[last]
        if raw.strip() == "":
            if isinstance(parent, dict) and last in parent and old is not None:
                del parent[last]
            continue
        new = _value(raw, old)
        if _show(new) != _show(old):
            parent[last] = new
    batch = data.get("batch")
    if remove and isinstance(batch, list):
        for i in sorted({int(i) for i in remove}, reverse=True):
            if 0 <= i < len(batch):
                del batch[i]
    if add and add.get("id") and add.get("amount"):
        kind = "subformula" if add.get("ref") == "subformula" else "ingredient"
        line = CommentedMap([(kind, add["id"].strip()), ("amount", _value(add["amount"], None))])
        line.fa.set_flow_style()
        if not isinstance(batch, list):
            data["batch"] = batch = CommentedSeq()
        batch.append(line)
    return dump_rt(data)


def comment_count(text: str) -> int:
    """Comments in YAML text (a ``#`` that starts a line or follows a blank outside quotes)."""
    n = 0
    for line in text.splitlines():
        quote = None
        for i, ch in enumerate(line):
            if quote:
                quote = None if ch == quote else quote
            elif ch in "'\"":
                quote = ch
            elif ch == "#" and (i == 0 or line[i - 1] in " \t"):
                n += 1
                break
    return n
