"""The market code of a rule pack file, read from its YAML events up to ``pack: market:``.

A command for one market loads only that market's pack (``rulepack.get_packs``); to find its file, each pack
file's YAML is parsed by PyYAML's (C) parser event by event until the market code, instead of building every
pack.  Anything unusual (no market there, a YAML error) gives None, and the caller loads the whole folder.
"""

from __future__ import annotations

from pathlib import Path

import yaml


def market_of(path: Path) -> str | None:
    """The market code a pack file gives under ``pack: market:``, read from the file's YAML events up to that
    value (the rest of the file is not built); None when it cannot be told this way (the file is then loaded
    in full, which reports any problem)."""
    stack: list[list] = []  # per open collection: [is mapping, expecting a key, current key]
    path_keys: list[str | None] = []
    try:
        with path.open(encoding="utf-8") as fh:
            for ev in yaml.parse(fh, Loader=getattr(yaml, "CSafeLoader", yaml.SafeLoader)):
                if isinstance(ev, (yaml.MappingStartEvent, yaml.SequenceStartEvent)):
                    if stack and stack[-1][0]:
                        stack[-1][1] = True  # this collection is the value of the open key
                    path_keys.append(stack[-1][2] if stack and stack[-1][0] else None)
                    stack.append([isinstance(ev, yaml.MappingStartEvent), True, None])
                elif isinstance(ev, (yaml.MappingEndEvent, yaml.SequenceEndEvent)):
                    stack.pop()
                    path_keys.pop()
                    if not stack:
                        return None
                elif isinstance(ev, yaml.ScalarEvent):
                    top = stack[-1] if stack else None
                    if top is None or not top[0]:
                        continue
                    if top[1]:
                        top[2], top[1] = ev.value, False
                        continue
                    top[1] = True
                    if path_keys[1:] == ["pack"] and top[2] == "market":
                        return ev.value
                elif isinstance(ev, yaml.AliasEvent) and stack and stack[-1][0]:
                    stack[-1][1] = True
    except (yaml.YAMLError, OSError, UnicodeDecodeError):
        return None
    return None
