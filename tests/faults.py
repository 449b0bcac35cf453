"""Fault injection for the output store: stop or fail a render at its Nth file-system write.

The method of SQLite's crash and I/O-error tests (sqlite.org, "How SQLite Is Tested",
sections on crash testing and I/O error testing): run an operation once to count its writes,
then once per write with that write made to end the process at once (``os._exit``, no
cleanup, like a kill or a power cut) or to fail with an errno (disk full, permission
denied), and check what the next run makes of the folder.

Every change framestyle makes to an output folder goes through the primitives of
:mod:`framestyle.atomic`; the hook wraps them. A write of :func:`~framestyle.atomic.atomic_path`
counts twice: before the temporary file is created, and after it is written but before it is
renamed (a crash there leaves a half-written hidden temporary file behind, as a real kill does).

Renders run in children forked from the test process, which has already imported torch and
loaded the network, so each run costs the render only. Torch and OpenCV run on one thread
here: their thread pools do not survive a fork.
"""

from __future__ import annotations

import contextlib
import errno
import os
import sys
import tempfile
from pathlib import Path

import cv2
import torch

from framestyle import atomic

CRASH = "crash"


class Hook:
    """Counts writes; at write number ``at`` ends the process (``fault=CRASH``) or raises
    ``OSError(fault)``."""

    def __init__(self, at: int | None = None, fault: str | int = CRASH):
        self.at, self.fault, self.count = at, fault, 0

    def event(self, path) -> None:
        self.count += 1
        if self.count == self.at:
            if self.fault == CRASH:
                os._exit(99)
            raise OSError(self.fault, os.strerror(self.fault), str(path))

    def install(self) -> None:
        real = {name: getattr(atomic, name) for name in ("atomic_path", "append_line", "move", "remove")}

        @contextlib.contextmanager
        def atomic_path(path, suffix=None):
            self.event(path)
            with real["atomic_path"](path, suffix) as tmp:
                yield tmp
                self.event(path)  # written, not yet renamed

        def wrap(name):
            def call(path, *args, **kwargs):
                self.event(path)
                return real[name](path, *args, **kwargs)
            return call

        atomic.atomic_path = atomic_path
        for name in ("append_line", "move", "remove"):
            setattr(atomic, name, wrap(name))


def prepare_parent() -> None:
    """Make this process safe to fork renders from: one thread for torch and OpenCV; and
    import the flash check's plotting here once rather than in every child."""
    import framestyle.qc.flash_plot  # noqa: F401  (matplotlib)

    torch.set_num_threads(1)
    cv2.setNumThreads(1)


class Child:
    """A ``framestyle`` command running in a forked child (see :func:`start_cli`)."""

    def __init__(self, pid: int, err, counted):
        self.pid, self._err, self._counted = pid, err, counted

    def wait(self) -> tuple[int, str, int]:
        """(exit status, stderr, writes counted); a crash made by the hook gives status 99."""
        _, status = os.waitpid(self.pid, 0)
        self._err.seek(0)
        self._counted.seek(0)
        text, errors = self._counted.read().decode(), self._err.read().decode()
        self._err.close()
        self._counted.close()
        return os.waitstatus_to_exitcode(status), errors, int(text) if text else -1


def start_cli(args: list, hook: Hook | None = None) -> Child:
    """Start ``framestyle ARGS`` in a child forked from this process, with ``hook`` installed."""
    err, counted = tempfile.TemporaryFile(), tempfile.TemporaryFile()
    pid = os.fork()
    if pid:
        return Child(pid, err, counted)
    code = 1  # the child: never returns
    try:
        os.dup2(err.fileno(), 2)
        os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
        sys.stdout, sys.stderr = open(1, "w", closefd=False), open(2, "w", buffering=1, closefd=False)  # not pytest's capture
        hook = hook or Hook()
        hook.install()
        sys.argv = ["framestyle", *map(str, args)]
        from framestyle.cli import main

        try:
            main()
            code = 0
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else 1
        os.write(counted.fileno(), str(hook.count).encode())
    except BaseException:
        import traceback

        traceback.print_exc()
    finally:
        sys.stderr.flush()
        os._exit(code)


def run_cli(args: list, hook: Hook | None = None) -> tuple[int, str, int]:
    """Run ``framestyle ARGS`` in a forked child and wait for it: (status, stderr, writes)."""
    return start_cli(args, hook).wait()


def frames_of(folder: Path) -> dict[str, bytes]:
    """The decoded-independent bytes of every frame PNG in a folder (names → file bytes)."""
    return {p.name: p.read_bytes() for p in sorted(Path(folder).glob("frame_*.png"))}


ENOSPC, EACCES = errno.ENOSPC, errno.EACCES
