"""Errors that labelcalc reports to its users.

Every error the tool raises on bad input derives from :class:`LabelError` and
carries where the problem is (file, line, field) and what to do about it.  The
command line prints ``str(error)`` and exits with code 2; it never shows a
traceback for a :class:`LabelError`.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path


@dataclass
class Problem:
    """One thing wrong with an input: where it is and how to fix it."""

    message: str
    file: str | None = None
    line: int | None = None
    field: str | None = None
    fix: str | None = None

    def __str__(self) -> str:
        where = ""
        if self.file:
            where = self.file
            if self.line:
                where += f", line {self.line}"
        if self.field:
            where += (", " if where else "") + f"field '{self.field}'"
        text = f"{where}: {self.message}" if where else self.message
        if self.fix:
            text += f" — {self.fix}"
        return text


class LabelError(Exception):
    """Base class of every error labelcalc reports on bad input or rules."""

    def __init__(self, problems: list[Problem] | Problem | str):
        if isinstance(problems, str):
            problems = [Problem(problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        super().__init__(str(self))

    def __str__(self) -> str:
        if len(self.problems) == 1:
            return str(self.problems[0])
        return f"{len(self.problems)} problems:\n" + "\n".join(f"  - {p}" for p in self.problems)


class InputError(LabelError, ValueError):
    """A formula, ingredient library or lab file that cannot be used as given."""


class RuleError(LabelError, ValueError):
    """A rule pack or energy factor set that is missing a key or malformed."""


class UnknownNameError(LabelError, KeyError):
    """A name (ingredient, market, component, claim) that is not known."""

    def __str__(self) -> str:  # KeyError would add quotes otherwise
        return LabelError.__str__(self)


def display_path(path: str | Path | None) -> str | None:
    """Show a path relative to the working folder when it is inside it."""
    if path is None:
        return None
    return _shown(str(path), os.getcwd())


def real_file_path(path: str) -> str:
    """The absolute path of a file with its folders' links and ``..`` resolved, each folder once per run (a
    range names thousands of files in a few folders); a file that is itself a link is resolved to its target."""
    if os.path.islink(path):
        return os.path.realpath(path)
    head, name = os.path.split(path)
    return os.path.join(_real_folder(head or "."), name)


@lru_cache(maxsize=1024)
def _real_folder(folder: str) -> str:
    return os.path.realpath(folder)


def _shown(path: str, cwd: str) -> str:
    full, base = real_file_path(path), _real_folder(cwd)
    if full.startswith(base.rstrip(os.sep) + os.sep):
        return full[len(base.rstrip(os.sep)) + 1 :]
    return path


@dataclass
class ProblemList:
    """Collects problems while a file is validated, then raises them at once."""

    problems: list[Problem] = field(default_factory=list)

    def add(self, message: str, **where) -> None:
        self.problems.append(Problem(message, **where))

    def raise_if_any(self, kind: type[LabelError] = InputError) -> None:
        if self.problems:
            raise kind(self.problems)
