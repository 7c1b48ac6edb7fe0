"""Safe YAML loading that remembers the line of every key.

PyYAML's safe loader never constructs arbitrary objects.  On top of it this
module records, for each path of keys and list indexes, the line it came from,
so that validation messages can say "line 12, field batch[3].amount".
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import yaml

from labelcalc.errors import InputError, Problem, display_path

try:  # the C loader is much faster on large ranges; fall back to pure Python
    _Loader = yaml.CSafeLoader
except AttributeError:  # pragma: no cover - depends on the PyYAML build
    _Loader = yaml.SafeLoader

Path_ = tuple[str | int, ...]


class LoadedYaml:
    """Parsed YAML data plus a map from key paths to 1-based line numbers."""

    def __init__(self, data: Any, lines: dict[Path_, int], file: str):
        self.data = data
        self.lines = lines
        self.file = file

    def line_of(self, path: Path_) -> int | None:
        """Line of ``path`` or of its nearest ancestor that has one."""
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return self.lines.get((), None)


def _walk(node: yaml.Node, path: Path_, lines: dict[Path_, int]) -> None:
    lines.setdefault(path, node.start_mark.line + 1)
    if isinstance(node, yaml.MappingNode):
        for key_node, value_node in node.value:
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
            sub = path + (key,)
            lines[sub] = key_node.start_mark.line + 1
            _walk(value_node, sub, lines)
    elif isinstance(node, yaml.SequenceNode):
        for i, item in enumerate(node.value):
            sub = path + (i,)
            lines[sub] = item.start_mark.line + 1
            _walk(item, sub, lines)


def parse_yaml_text(text: str, file: str, *, with_lines: bool = True) -> LoadedYaml:
    """Parse YAML text safely; syntax errors become one clear :class:`InputError`."""
    try:
        if not with_lines:
            return LoadedYaml(yaml.load(text, Loader=_Loader), {}, file)
        node = yaml.compose(text, Loader=_Loader)
        data = yaml.load(text, Loader=_Loader) if node is not None else None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark else None
        raise InputError(
            Problem(
                f"YAML syntax error: {exc.problem or exc}",
                file=file,
                line=line,
                fix="check indentation, colons and quotes on that line",
            )
        ) from None
    except yaml.YAMLError as exc:  # pragma: no cover - rare non-marked errors
        raise InputError(Problem(f"YAML error: {exc}", file=file)) from None
    lines: dict[Path_, int] = {}
    if node is not None:
        _walk(node, (), lines)
    return LoadedYaml(data, lines, file)


def load_yaml(path: str | Path, *, with_lines: bool = True) -> LoadedYaml:
    """Read and parse a YAML file safely."""
    p = Path(path)
    shown = display_path(p) or str(p)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(Problem("file not found", file=shown, fix="check the path")) from None
    except UnicodeDecodeError:
        raise InputError(Problem("file is not UTF-8 text", file=shown, fix="save it as UTF-8")) from None
    except OSError as exc:
        raise InputError(Problem(f"cannot read file: {exc.strerror}", file=shown)) from None
    return parse_yaml_text(text, shown, with_lines=with_lines)


def pydantic_problems(exc, loaded: LoadedYaml, prefix: Path_ = ()) -> list[Problem]:
    """Turn a pydantic ``ValidationError`` into problems with file and line."""
    out = []
    for err in exc.errors():
        loc = tuple(x for x in err.get("loc", ()) if not (isinstance(x, str) and x.startswith("function-")))
        # pydantic adds discriminator / union tags to loc; keep only real keys
        loc = tuple(x for x in loc if isinstance(x, int) or not _looks_like_tag(x))
        full = prefix + loc
        msg = err.get("msg", "invalid value")
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, ") :]
        if err.get("type") == "extra_forbidden":
            msg = "unknown key (not part of the format)"
        if err.get("type") == "missing":
            msg = "required key is missing"
        out.append(Problem(msg, file=loaded.file, line=loaded.line_of(full), field=format_path(full) or None))
    return out


def _looks_like_tag(x: str) -> bool:
    return x.startswith(("function-", "tagged-union", "union[")) or "[" in x and x.endswith("]") and not x[0].isalpha()


def format_path(path: Path_) -> str:
    s = ""
    for part in path:
        if isinstance(part, int):
            s += f"[{part}]"
        else:
            s += ("." if s else "") + str(part)
    return s
