"""Output files in one place: safe names from product ids (no separators, no traversal, no
collisions), paths kept inside their folder, and atomic writes."""

from __future__ import annotations

import hashlib
import os
import re
from pathlib import Path

_BAD = re.compile(r"[^A-Za-z0-9._-]+")


def safe_name(ident: str, *, max_len: int = 80) -> str:
    """A file-name stem for ``ident``.

    Characters other than letters, digits, '.', '_' and '-' become '_'; leading
    dots are removed.  When anything had to change, a short hash of the original
    id is appended, so two ids that sanitise alike never share a file.

    >>> safe_name("hl_kettle_sea_salt")
    'hl_kettle_sea_salt'
    >>> safe_name("../etc/passwd")
    'etc_passwd-7fef78f5'
    """
    s = _BAD.sub("_", ident).lstrip("._") or "product"
    s = s[:max_len]
    if s != ident:
        s = f"{s.rstrip('_')}-{hashlib.sha256(ident.encode()).hexdigest()[:8]}"
    return s


def inside(folder: Path, name: str) -> Path:
    """Path of ``name`` inside ``folder``; refuses anything that would land outside it."""
    folder = folder.resolve()
    p = (folder / name).resolve()
    if p.parent != folder:
        raise ValueError(f"unsafe output name: {name!r}")
    return p


def atomic_write(path: Path, write) -> None:
    """Write through a temporary file in the same folder, then rename (no truncated files)."""
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        write(tmp)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
