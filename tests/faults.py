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

Renders run in children forked from the test process, which has already run one render
itself (:func:`prepare_parent`), so each run costs the render only; a fault loop runs a few
of them side by side (:func:`run_all`), one per core. Torch and OpenCV run on one thread
here: their thread pools do not survive a fork.
"""

from __future__ import annotations

import contextlib
import errno
import os
import sys
import tempfile
import threading
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


def prepare_parent(warm_up: list) -> None:
    """Make this process safe and quick to fork renders from: one thread for torch and OpenCV,
    then ``framestyle WARM_UP`` run once here, so every child starts with the network loaded,
    the modules imported and the kernels, fonts and codecs it needs already set up (measured:
    a forked 6-frame render 2.6 s -> 1.6 s)."""
    torch.set_num_threads(1)
    cv2.setNumThreads(1)
    from framestyle.cli import main

    argv, sys.argv = sys.argv, ["framestyle", *map(str, warm_up)]
    with open(os.devnull, "w") as null, contextlib.redirect_stdout(null), contextlib.suppress(SystemExit):
        main()
    sys.argv = argv
    assert threading.active_count() == 1, "a thread outlived the warm-up render: forking would be unsafe"


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


AT_ONCE = max(1, min(4, os.cpu_count() or 1))
"""Forked renders run side by side by :func:`run_all`: one per core (each runs on one thread)."""


def run_all(jobs: list[tuple[list, Hook | None]]) -> list[tuple[int, str, int]]:
    """Run several ``framestyle`` commands (args, hook) at once, each in a forked child writing
    its own folder; their (status, stderr, writes) in the jobs' order."""
    children = [start_cli(args, hook) for args, hook in jobs]
    return [child.wait() for child in children]


def in_groups(items: list, size: int = AT_ONCE) -> list[list]:
    """``items`` in consecutive groups of ``size`` (the last may be shorter): the cases a
    fault loop runs at once."""
    return [items[k:k + size] for k in range(0, len(items), size)]


def frames_of(folder: Path) -> dict[str, bytes]:
    """The decoded-independent bytes of every frame PNG in a folder (names → file bytes)."""
    return {p.name: p.read_bytes() for p in sorted(Path(folder).glob("frame_*.png"))}


ENOSPC, EACCES = errno.ENOSPC, errno.EACCES
