"""Atomic file writes: write to a temporary file in the same folder, then rename.

A reader (or a render resumed after SIGKILL) therefore sees either the old file or the
complete new one, never a torn write. ``os.replace`` is atomic on POSIX and Windows when
source and target are on the same file system, which a sibling temp file guarantees.
"""

from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path
from typing import Iterator


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it onto ``path``.

    ``suffix`` defaults to ``path``'s own suffix so that writers choosing a format by file
    extension (OpenCV, imageio) see the right one. On error the temporary file is removed
    and ``path`` is left untouched.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(
        prefix=f".{path.name}.", suffix=path.suffix if suffix is None else suffix, dir=path.parent
    )
    os.close(fd)
    os.chmod(tmp, 0o644)  # mkstemp makes 0600; finished frames should be readable like any file
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        with open(tmp_path, "rb+") as f:  # make the bytes durable before the rename
            os.fsync(f.fileno())
        os.replace(tmp_path, path)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Atomically replace ``path`` with ``data``."""
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)


def write_json(path: str | os.PathLike, obj: object) -> None:
    """Atomically replace ``path`` with ``obj`` as indented JSON."""
    write_bytes(path, (json.dumps(obj, indent=2, sort_keys=True) + "\n").encode())
