"""Safe YAML loading that remembers the line of every key.

PyYAML's safe loader never constructs arbitrary objects.  On top of it this
module records, for each path of keys and list indexes, the line it came from,
so that validation messages can say "line 12, field batch[3].amount".

It also refuses what the safe loader lets through but no input of ours needs:
files larger than :data:`MAX_FILE_BYTES`, more than :data:`MAX_ALIASES` aliases or
a document that expands (through aliases) to more than :data:`MAX_NODES` nodes
(an "alias bomb"), a key given twice in one mapping (PyYAML keeps the last one
silently), and numbers that are not finite (``.inf``, ``.nan``, ``1e400``).
PyYAML has no option for any of these, so they are checked here on the composed
node graph, which is linear in the size of the text.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import yaml

from labelcalc.errors import InputError, Problem, display_path

try:  # the C loader is much faster on large ranges; fall back to pure Python
    _Loader = yaml.CSafeLoader
except AttributeError:  # pragma: no cover - depends on the PyYAML build
    _Loader = yaml.SafeLoader

Path_ = tuple[str | int, ...]

MAX_FILE_BYTES = 5_000_000  # a formula, library or pack file; the largest real library is far smaller
MAX_ALIASES = 1_000
MAX_NODES = 1_000_000


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


def _check_nodes(root: yaml.Node, file: str) -> None:
    """Refuse alias bombs (and, before anything is constructed, duplicate keys and non-finite numbers);
    every message names a line."""
    sizes: dict[int, int] = {}
    aliases = 0
    seen: set[int] = set()
    stack: list[tuple[yaml.Node, bool]] = [(root, False)]
    while stack:  # iterative post-order: expanded size of every node, each node visited once
        node, done = stack.pop()
        key = id(node)
        if done:
            if isinstance(node, yaml.MappingNode):
                children = [n for kv in node.value for n in kv]
            elif isinstance(node, yaml.SequenceNode):
                children = list(node.value)
            else:
                children = []
            sizes[key] = 1 + sum(sizes.get(id(c), 1) for c in children)
            if sizes[key] > MAX_NODES:
                raise InputError(
                    Problem(
                        f"document expands to more than {MAX_NODES:,} values (through aliases)",
                        file=file,
                        line=node.start_mark.line + 1,
                        fix="write the values out; anchors and aliases may not multiply the document",
                    )
                )
            continue
        if key in seen:
            aliases += 1
            if aliases > MAX_ALIASES:
                raise InputError(
                    Problem(
                        f"more than {MAX_ALIASES:,} aliases (*name)",
                        file=file,
                        line=node.start_mark.line + 1,
                        fix="write the values out instead of repeating anchors",
                    )
                )
            continue
        seen.add(key)
        stack.append((node, True))
        if isinstance(node, yaml.MappingNode):
            first: dict[str, int] = {}
            for k, v in node.value:
                if isinstance(k, yaml.ScalarNode) and k.value != "<<":
                    line = k.start_mark.line + 1
                    if k.value in first:
                        raise InputError(
                            Problem(
                                f"key '{k.value}' is given twice (lines {first[k.value]} and {line})",
                                file=file,
                                line=line,
                                field=str(k.value),
                                fix="keep one of them; YAML would silently use only the last",
                            )
                        )
                    first[k.value] = line
                stack.append((k, False))
                stack.append((v, False))
        elif isinstance(node, yaml.SequenceNode):
            stack.extend((c, False) for c in node.value)
        elif (
            isinstance(node, yaml.ScalarNode)
            and node.tag == "tag:yaml.org,2002:float"
            and not _finite_float(node.value)
        ):
            raise InputError(
                Problem(
                    f"'{node.value}' is not a finite number",
                    file=file,
                    line=node.start_mark.line + 1,
                    fix="give a finite number (.inf, .nan and numbers beyond 1e308 are refused)",
                )
            )


class _CheckedLoader(_Loader):  # type: ignore[misc,valid-type]
    """The safe loader, refusing a key given twice and a non-finite float as it constructs them (one pass)."""

    file = ""

    def construct_mapping(self, node, deep=False):
        if isinstance(node, yaml.MappingNode):
            first: dict[str, int] = {}
            for k, _ in node.value:
                if isinstance(k, yaml.ScalarNode) and k.value != "<<":
                    line = k.start_mark.line + 1
                    if k.value in first:
                        raise InputError(
                            Problem(
                                f"key '{k.value}' is given twice (lines {first[k.value]} and {line})",
                                file=self.file,
                                line=line,
                                field=str(k.value),
                                fix="keep one of them; YAML would silently use only the last",
                            )
                        )
                    first[k.value] = line
        return super().construct_mapping(node, deep=deep)

    def construct_finite_float(self, node):
        value = self.construct_yaml_float(node)
        if not math.isfinite(value):
            raise InputError(
                Problem(
                    f"'{node.value}' is not a finite number",
                    file=self.file,
                    line=node.start_mark.line + 1,
                    fix="give a finite number (.inf, .nan and numbers beyond 1e308 are refused)",
                )
            )
        return value


_CheckedLoader.add_constructor("tag:yaml.org,2002:float", _CheckedLoader.construct_finite_float)


def _finite_float(value: str) -> bool:
    """Whether a scalar that YAML resolves as a float is finite (as PyYAML's constructor reads it)."""
    v = value.replace("_", "").lower()
    if v.lstrip("+-") in (".inf", ".nan"):
        return False
    try:
        return math.isfinite(float(v))
    except ValueError:  # sexagesimal (1:30.5) and the like: finite by construction
        return True


def parse_yaml_text(text: str, file: str, *, with_lines: bool = True) -> LoadedYaml:
    """Parse YAML text safely; syntax errors and refused content become one clear :class:`InputError`.

    ``with_lines=False`` skips recording the line map (faster); the checks of the node graph always run."""
    if len(text) > MAX_FILE_BYTES:
        raise InputError(
            Problem(
                f"file is larger than {MAX_FILE_BYTES // 1_000_000} MB",
                file=file,
                fix="split it (one product per file) or check that it is the file you meant",
            )
        )
    try:
        loader = _CheckedLoader(text)  # composed once, then constructed (with its checks) from the same nodes
        loader.file = file
        try:
            node = loader.get_single_node()
            if node is not None and "*" in text:  # an alias needs '*': only then can the document multiply
                _check_nodes(node, file)
            data = loader.construct_document(node) if node is not None else None
        finally:
            loader.dispose()
        lines: dict[Path_, int] = {}
        if node is not None and with_lines:
            _walk(node, (), lines)
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
    except RecursionError:
        raise InputError(Problem("YAML is nested too deeply", file=file, fix="flatten the structure")) from None
    return LoadedYaml(data, lines, file)


def load_yaml(path: str | Path, *, with_lines: bool = True) -> LoadedYaml:
    """Read and parse a YAML file safely."""
    p = Path(path)
    shown = display_path(p) or str(p)
    try:
        if p.stat().st_size > MAX_FILE_BYTES:
            raise InputError(
                Problem(
                    f"file is larger than {MAX_FILE_BYTES // 1_000_000} MB",
                    file=shown,
                    fix="split it (one product per file) or check that it is the file you meant",
                )
            )
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
