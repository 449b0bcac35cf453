"""File-system changes that never leave a torn file: every write framestyle makes goes through here.

A file is written to a hidden temporary file in the same folder, made durable, then renamed
onto its name: a reader (or a render resumed after SIGKILL) sees either the old file or the
complete new one. ``os.replace`` is atomic on POSIX and Windows when source and target are
on the same file system, which a sibling temp file guarantees. Temporary files are named
``.<name>.tmp-<random><suffix>`` so their owner can recognise and remove the leftovers of a
killed process (:func:`is_temporary`).

A problem of the file system (disk full, permission denied, read-only folder) is raised as
:class:`FramestyleError` naming the file, and leaves the old file untouched.

The few primitives here (:func:`atomic_path`, :func:`append_line`, :func:`move`,
:func:`remove`) are all the store uses to change an output folder, so a test can stop or
fail the process at any one of them (the crash tests of ``tests/test_store_crashes.py``).
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import tempfile
from pathlib import Path
from typing import Iterator

from framestyle.errors import FramestyleError

_TMP_MARK = ".tmp-"


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success rename it onto ``path``.

    ``suffix`` defaults to ``path``'s own suffix so that writers choosing a format by file
    extension (OpenImageIO, ffmpeg) see the right one. On error the temporary file is
    removed and ``path`` is left untouched.
    """
    path = Path(path)
    tmp_path = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(
            prefix=f".{path.name}{_TMP_MARK}", suffix=path.suffix if suffix is None else suffix, dir=path.parent
        )
        os.close(fd)
        tmp_path = Path(tmp)
        os.chmod(tmp_path, 0o644)  # mkstemp makes 0600; finished frames should be readable like any file
        yield tmp_path
        with open(tmp_path, "rb+") as f:  # make the bytes durable before the rename
            os.fsync(f.fileno())
        os.replace(tmp_path, path)
    except OSError as exc:
        raise _cannot("write", path, exc) from exc
    finally:
        if tmp_path is not None and tmp_path.exists():
            tmp_path.unlink()


def write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Atomically replace ``path`` with ``data``."""
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)


def write_json(path: str | os.PathLike, obj: object) -> None:
    """Atomically replace ``path`` with ``obj`` as indented JSON."""
    write_bytes(path, (json.dumps(obj, indent=2, sort_keys=True) + "\n").encode())


def append_line(path: str | os.PathLike, line: str) -> None:
    """Append one line to a text file (a log) with a single ``O_APPEND`` write.

    Appends of a short line by several processes do not interleave on a local file system.
    """
    path = Path(path)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
        try:
            os.write(fd, (line.rstrip("\n") + "\n").encode())
        finally:
            os.close(fd)
    except OSError as exc:
        raise _cannot("write", path, exc) from exc


def move(source: str | os.PathLike, target: str | os.PathLike) -> None:
    """Rename ``source`` to ``target`` (same file system): atomic for a file or a whole folder."""
    try:
        Path(target).parent.mkdir(parents=True, exist_ok=True)
        os.replace(source, target)
    except OSError as exc:
        raise _cannot("move", Path(source), exc) from exc


def remove(path: str | os.PathLike) -> None:
    """Delete a file or a folder tree if it exists."""
    path = Path(path)
    try:
        if path.is_dir() and not path.is_symlink():
            shutil.rmtree(path)
        else:
            path.unlink(missing_ok=True)
    except OSError as exc:
        raise _cannot("delete", path, exc) from exc


def is_temporary(name: str) -> bool:
    """Whether a file name is one of :func:`atomic_path`'s temporary files."""
    return name.startswith(".") and _TMP_MARK in name


def temporary_target(name: str) -> str:
    """The name of the file a temporary file of :func:`atomic_path` was to become."""
    return name[1:name.rindex(_TMP_MARK)]


def _cannot(what: str, path: Path, exc: OSError) -> FramestyleError:
    """The one-line error for ``exc``; where a folder on the way is a file (mkdir then says
    "File exists", opening "Not a directory") it names that file."""
    blocking = next((p for p in Path(path).parents if p.exists() and not p.is_dir()), None)
    if blocking is not None and isinstance(exc, (FileExistsError, NotADirectoryError)):
        return FramestyleError(f"{path}: cannot {what} ({blocking} is a file, not a folder)")
    return FramestyleError(f"{path}: cannot {what} ({exc.strerror or exc})")
