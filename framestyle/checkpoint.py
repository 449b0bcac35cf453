"""Checkpoints in the output folder: manifest, per-shot state and the folder lock.

Layout of an output folder::

    OUT/
      <frame>.png ...          finished frames (written atomically, never rewritten)
      framestyle.json          manifest: settings + hash, input fingerprints, shots, status
      settings.json            the settings actually used
      render.log               plain log
      .state/shot_NNN/*.npy    full-precision stylised frames the temporal losses still need
      .lock                    who renders here now (pid, host)

Every file is written atomically (:mod:`framestyle.atomic`), and a frame counts as finished
only once the manifest says so, which is written after the frame itself; so a render killed
at any moment resumes from a consistent state.
"""

from __future__ import annotations

import json
import os
import socket
import time
from pathlib import Path

import numpy as np

from . import atomic
from .errors import FramestyleError

MANIFEST = "framestyle.json"
FORMAT = 1  # manifest format version


def read_manifest(out: Path) -> dict | None:
    """The manifest of output folder ``out``, or None if there is none."""
    path = Path(out) / MANIFEST
    if not path.exists():
        return None
    try:
        manifest = json.loads(path.read_text())
    except (OSError, ValueError) as exc:
        raise FramestyleError(f"{path}: unreadable manifest ({exc}); use --restart to start over")
    if manifest.get("format") != FORMAT:
        raise FramestyleError(f"{path}: manifest format {manifest.get('format')} is not {FORMAT}")
    return manifest


def write_manifest(out: Path, manifest: dict) -> None:
    """Atomically replace the manifest of ``out``."""
    atomic.write_json(Path(out) / MANIFEST, {**manifest, "format": FORMAT})


def state_dir(out: Path, shot: int) -> Path:
    """Folder holding the in-progress state of ``shot`` (1-based)."""
    return Path(out) / ".state" / f"shot_{shot:03d}"


def save_state(out: Path, shot: int, frame: int, image: np.ndarray) -> None:
    """Keep the full-precision stylised ``frame`` (H, W, 3 float32) for the temporal losses."""
    with atomic.atomic_path(state_dir(out, shot) / f"{frame:07d}.npy") as tmp:
        np.save(tmp, image.astype(np.float32), allow_pickle=False)


def load_state(out: Path, shot: int, frame: int) -> np.ndarray | None:
    """The saved full-precision stylised ``frame``, or None if it is not kept."""
    path = state_dir(out, shot) / f"{frame:07d}.npy"
    return np.load(path, allow_pickle=False) if path.exists() else None


def prune_state(out: Path, shot: int, keep_from: int | None) -> None:
    """Delete kept frames older than ``keep_from`` (all of the shot's state if None)."""
    folder = state_dir(out, shot)
    if not folder.exists():
        return
    for path in folder.glob("*.npy"):
        if keep_from is None or int(path.stem) < keep_from:
            path.unlink()
    if keep_from is None:
        folder.rmdir()


class FolderLock:
    """An exclusive lock on an output folder, taken over if its owner process is gone.

    The lock file holds the owner's pid and host name. Another live process on this host
    holding it is a user error; a lock whose process no longer exists (killed render) is
    stale and taken over.
    """

    def __init__(self, out: Path):
        self.path = Path(out) / ".lock"

    def __enter__(self) -> "FolderLock":
        self.path.parent.mkdir(parents=True, exist_ok=True)
        me = {"pid": os.getpid(), "host": socket.gethostname(), "started": time.time()}
        for _ in range(2):
            try:
                fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
            except FileExistsError:
                owner = self._owner()
                if owner is not None and _alive(owner):
                    raise FramestyleError(
                        f"{self.path.parent}: another render (pid {owner['pid']} on "
                        f"{owner['host']}) is writing to this folder"
                    )
                self.path.unlink(missing_ok=True)  # stale: its process is gone
                continue
            with os.fdopen(fd, "w") as f:
                json.dump(me, f)
            return self
        raise FramestyleError(f"{self.path}: could not take the folder lock")

    def __exit__(self, *exc) -> None:
        self.path.unlink(missing_ok=True)

    def _owner(self) -> dict | None:
        try:
            return json.loads(self.path.read_text())
        except (OSError, ValueError):
            return None  # torn or vanished lock file: treat as stale


def _alive(owner: dict) -> bool:
    if owner.get("host") != socket.gethostname():
        return True  # cannot check another machine's processes: assume it is running
    try:
        os.kill(int(owner["pid"]), 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True
