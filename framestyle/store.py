"""The output folder of a render: the only module that writes there.

Layout of an output folder::

    OUT/
      <frame>.png ...          finished frames (written atomically, never rewritten)
      <clip>_framestyle.mp4    for video input: the frames with the source's audio
      framestyle.json          manifest: settings, input fingerprints, shots, per-frame status
      render.log               a line per frame and per shot
      .state/shot_NNN/*.npy    full-precision stylised frames the temporal losses still need
      .lock                    who renders here now (pid, host)
      preview/                 preview frames and contact sheets

Every file is written atomically (:mod:`framestyle.atomic`), and a frame counts as finished
only once the manifest says so, which is written after the frame itself; so a render killed
at any moment resumes from a consistent state.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import socket
import time
from pathlib import Path
from typing import Sequence

import numpy as np

from framestyle import atomic, io
from framestyle.errors import FramestyleError
from framestyle.settings import Settings

MANIFEST = "framestyle.json"
FORMAT = 2  # manifest format version
PREVIEW = "preview"


class Store:
    """One output folder. Create with :func:`open_store`; use as a context manager to hold
    its lock while rendering.

    Attributes
    ----------
    out : the folder
    log : the render log (a :class:`logging.Logger` writing ``render.log``) while locked
    """

    def __init__(self, out: Path):
        self.out = Path(out)
        self.log: logging.Logger | None = None
        self._lock = FolderLock(self.out)

    def __enter__(self) -> "Store":
        self.out.mkdir(parents=True, exist_ok=True)
        self._lock.__enter__()
        self.log = _open_log(self.out)
        return self

    def __exit__(self, *exc) -> None:
        for handler in list(self.log.handlers):
            handler.close()
            self.log.removeHandler(handler)
        self._lock.__exit__(*exc)

    # --- manifest -----------------------------------------------------------------------------

    def read_manifest(self) -> dict | None:
        """The manifest, or None if this folder holds no render yet."""
        return read_manifest(self.out)

    def write_manifest(self, manifest: dict) -> None:
        """Atomically replace the manifest."""
        atomic.write_json(self.out / MANIFEST, {**manifest, "format": FORMAT})

    def restart(self, manifest: dict | None) -> None:
        """Delete a previous render's frames, state and manifest (explicit --restart only)."""
        if manifest:
            for name in manifest.get("frames", {}):
                (self.out / name).unlink(missing_ok=True)
            for shot in manifest.get("shots", []):
                self.prune_state(shot["shot"], None)
        (self.out / MANIFEST).unlink(missing_ok=True)

    # --- frames, state, video -----------------------------------------------------------------

    def has_frame(self, name: str) -> bool:
        """Whether the frame file exists (recorded or not)."""
        return (self.out / name).exists()

    def write_frame(self, name: str, image: np.ndarray, bit_depth: int) -> None:
        """Atomically write a delivered frame."""
        io.write_image(self.out / name, image, bit_depth)

    def frame_paths(self, names: Sequence[str]) -> list[Path]:
        """Paths of frames by name."""
        return [self.out / name for name in names]

    def save_state(self, shot: int, frame: int, image: np.ndarray) -> None:
        """Keep the full-precision stylised ``frame`` (H, W, 3 float32) for the temporal losses."""
        with atomic.atomic_path(_state_dir(self.out, shot) / f"{frame:07d}.npy") as tmp:
            np.save(tmp, image.astype(np.float32), allow_pickle=False)

    def load_state(self, shot: int, frame: int) -> np.ndarray | None:
        """The kept full-precision stylised ``frame``, or None if it is not kept."""
        path = _state_dir(self.out, shot) / f"{frame:07d}.npy"
        return np.load(path, allow_pickle=False) if path.exists() else None

    def prune_state(self, shot: int, keep_from: int | None) -> None:
        """Delete kept frames older than ``keep_from`` (all of the shot's state if None)."""
        folder = _state_dir(self.out, shot)
        if not folder.exists():
            return
        for path in folder.glob("*.npy"):
            if keep_from is None or int(path.stem) < keep_from:
                path.unlink()
        if keep_from is None:
            folder.rmdir()

    def write_video(self, source: io.FrameSource, names: Sequence[str]) -> Path:
        """Encode the finished frames of a video input, with its audio, unless already there."""
        video = self.out / f"{source.path.stem}_framestyle.mp4"
        if not video.exists():
            io.write_video(self.frame_paths(names), source.fps, video, audio_from=source.path)
            self.log.info("wrote %s", video)
        return video

    # --- previews -----------------------------------------------------------------------------

    def preview_path(self, name: str) -> Path:
        """Where a preview file goes."""
        return self.out / PREVIEW / name

    def write_preview(self, name: str, image: np.ndarray) -> Path:
        """Atomically write an 8-bit preview image (frame or contact sheet)."""
        path = self.preview_path(name)
        io.write_image(path, image)
        return path


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


def input_fingerprints(source: io.FrameSource, settings: Settings) -> dict:
    """Fingerprints of everything a render reads: input frames, style images, mattes."""
    variants = [settings] + [settings.for_shot(int(n)) for n in settings.shot_looks]
    styles = {p for v in variants for p in v.styles}
    mattes = {v.matte for v in variants if v.matte and v.matte != "alpha"}
    return {
        "input": str(source.path),
        "input_fingerprint": io.fingerprint(source),
        "styles": {p: _file_hash(Path(p)) for p in sorted(styles)},
        "mattes": {m: io.fingerprint(io.open_source(Path(m))) for m in sorted(mattes)},
    }


def check_resume(manifest: dict, settings: Settings, inputs: dict, out: Path) -> None:
    """Refuse to continue a render whose settings or inputs changed, naming what changed."""
    old = Settings.from_dict(manifest["settings"], str(out / MANIFEST))
    changed = old.differences(settings)
    if changed:
        raise FramestyleError(
            f"{out}: was rendered with different settings ({', '.join(changed)}); "
            f"use the same options, a new --out, or --restart to start over"
        )
    for key, what in (("input_fingerprint", "input frames"), ("styles", "style image(s)"), ("mattes", "mattes")):
        if manifest["inputs"][key] != inputs[key]:
            raise FramestyleError(
                f"{out}: the {what} changed since this render started; use --restart to start over"
            )


def output_names(source: io.FrameSource) -> list[str]:
    """Output file names: EXR for float (linear-light) sources, PNG otherwise."""
    ext = ".exr" if source.linear else ".png"
    return [io.frame_name(source, i, ext) for i in range(source.count)]


def _state_dir(out: Path, shot: int) -> Path:
    return Path(out) / ".state" / f"shot_{shot:03d}"


def _file_hash(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()[:16]


def _open_log(out: Path) -> logging.Logger:
    log = logging.getLogger(f"framestyle.render.{out.resolve()}")
    log.setLevel(logging.INFO)
    log.propagate = False
    handler = logging.FileHandler(out / "render.log")
    handler.setFormatter(logging.Formatter("%(asctime)s %(message)s"))
    log.addHandler(handler)
    return log


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
