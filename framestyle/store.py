"""The output folder of a render: the only module that writes there.

Layout of an output folder::

    OUT/
      <frame>.png ...             finished frames (written atomically, never rewritten)
      <clip>_framestyle.mp4       for video input: the frames with the source's audio
      framestyle.json             manifest: settings, inputs, shot list, library versions
      render.log                  a line per frame, per shot and per event, from every process
      flashes.png                 timeline of the photosensitive flash check (render and source)
      preview/                    preview frames and contact sheets
      report.html                 the render report, refreshed after every shot
      report/                     its pictures: thumbnail strips, plots, style images
      .framestyle/
        locks/folder.lock         held briefly to create, check or restart the render
        locks/shot_NNN.lock       held while a process renders shot NNN
        locks/preview.lock        held while a preview writes preview/
        locks/report.lock         held while a process refreshes the report
        shots/shot_NNN.json       shot NNN's record: its finished frames and their figures, the
                                  setup its chain started under (versions, threads, device) and,
                                  in a multi-pass render, how many passes each other frame has had
        flashes/{render,source}.json   flash check of the whole render's frames and its source
        flashes/shot_NNN/{render,source}.json   the same for shot NNN alone (a farm's progress)
        state/shot_NNN/*.npy      full-precision stylised frames the temporal losses or a later pass
                                  still need, one layer per pass (pass1_0000012.npy ...), and the
                                  working frames of a multi-pass shot (content_0000012.npy ...)
        restarting                marks a restart in progress (finished by the next run)
        trash/                    what a restart is discarding

Every file is written atomically (:mod:`framestyle.atomic`), and a frame counts as finished
only once its shot's record says so, which is written after the frame itself; so a render
killed at any moment resumes from a consistent state. Several processes (or machines
sharing the folder) can render different shots at once: locks are ``fcntl.flock`` locks
on files that are never deleted, released by the kernel when their process ends however
it ends, and each shot's record is its own file, merged when read.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
import os
import socket
import time
import uuid
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterable, Iterator, Mapping, Sequence

import numpy as np

from framestyle import atomic, io
from framestyle.errors import FramestyleError
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.timecode import ClipTimecode

if TYPE_CHECKING:
    from framestyle.qc.flashes import FlashReport

MANIFEST = "framestyle.json"
FORMAT = 2  # manifest format version
HAND_OFF = ("prores",)
"""Settings of the hand-off made from finished frames, not of the frames: a resume may change them."""
_MANIFEST_KEYS = {"settings": dict, "inputs": dict, "shot_list": dict, "shots": list}
"""What every manifest holds (:meth:`Store.create`'s callers write them), by type."""
LOG = "render.log"
PREVIEW = "preview"
REPORT = "report.html"
REPORT_FILES = "report"  # the report's pictures, beside it
VIDEO_SUFFIX = "_framestyle"
FLASH_PLOT = "flashes.png"
FLASH_KINDS = ("render", "source")  # the delivered frames; the footage they were made from
_PRIVATE = ".framestyle"


# --- locks ------------------------------------------------------------------------------------

class Lock:
    """An exclusive ``flock`` on a lock file that names its holder (pid, host, start time).

    The kernel releases the lock when the holding process ends, killed or not, so there is
    no stale lock to take over. On a network file system ``flock`` is emulated with POSIX
    record locks (Linux NFS v4), and the server releases a dead client's lock when its lease
    expires.
    """

    def __init__(self, path: Path, what: str):
        self.path, self.what, self._fd = Path(path), what, None

    def acquire(self, wait: bool) -> bool:
        """Take the lock; with ``wait`` False return False at once if another process holds it."""
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | (0 if wait else fcntl.LOCK_NB))
        except BlockingIOError:
            os.close(fd)
            return False
        try:
            os.ftruncate(fd, 0)
            os.pwrite(fd, json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "since": time.time()}).encode(), 0)
        except OSError as exc:  # a full disk: name the lock file (the error of a write names none)
            os.close(fd)
            raise OSError(exc.errno, exc.strerror, str(self.path)) from None
        self._fd = fd
        return True

    def held(self) -> bool:
        """Whether a process holds the lock now; a look that changes nothing (a shared lock
        tried and let go; no file, no holder)."""
        try:
            fd = os.open(self.path, os.O_RDONLY)
        except FileNotFoundError:
            return False
        try:
            fcntl.flock(fd, fcntl.LOCK_SH | fcntl.LOCK_NB)
        except BlockingIOError:
            return True
        finally:
            os.close(fd)  # closing it lets a shared lock go
        return False

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing the descriptor releases the flock
            self._fd = None

    def holder_record(self) -> dict:
        """What the lock file says of its last holder (pid, host, since); {} if nothing."""
        try:
            who = json.loads(self.path.read_text() or "{}")
        except (OSError, ValueError):
            return {}
        return who if isinstance(who, dict) else {}

    def holder(self) -> str:
        """Who holds the lock, in words, with a way out."""
        who = self.holder_record()
        if not who:
            return f"another process holds {self.what}"
        since = time.strftime("%H:%M:%S", time.localtime(who.get("since", 0)))
        text = f"{self.what} is held by pid {who.get('pid')} on {who.get('host')} since {since}"
        if who.get("host") == socket.gethostname():
            return f"{text}; wait for it to finish or stop that process (its lock goes with it)"
        return (f"{text} (another machine); stop it there, or if that machine is gone its lock "
                f"is released when the shared file system's lease on it expires")


@contextlib.contextmanager
def _locked(lock: Lock, out: Path, wait: bool) -> Iterator[None]:
    if not lock.acquire(wait):
        raise FramestyleError(f"{out}: {lock.holder()}")
    try:
        yield
    finally:
        lock.release()


# --- the store ---------------------------------------------------------------------------------

class Store:
    """One output folder.

    Parameters
    ----------
    out : the folder; created when a render starts
    """

    def __init__(self, out: Path):
        self.out = Path(out)
        self._private = self.out / _PRIVATE

    # --- the render as a whole (under the folder lock) -----------------------------------------

    @contextlib.contextmanager
    def folder_lock(self) -> Iterator["Store"]:
        """Hold the folder lock (waiting for it) to create, check, restart or finish a render.

        Also finishes a restart a killed process left half done and removes the store's own
        temporary files from the folder's records.
        """
        if self.out.exists() and not self.out.is_dir():
            raise FramestyleError(f"{self.out}: output path is a file, not a folder")
        try:
            self.out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise FramestyleError(f"{self.out}: cannot create the output folder ({exc.strerror})") from exc
        with _locked(self._lock("folder"), self.out, wait=True):
            if (self._private / "restarting").exists():
                self._discard(self._recorded_names())
            if (self._private / "trash").exists():
                atomic.remove(self._private / "trash")
            _remove_temporary(self._private / "shots")
            _remove_temporary(self._private / "flashes")
            _remove_temporary(self.out, lambda target: target in (MANIFEST, FLASH_PLOT) or f"{VIDEO_SUFFIX}." in target)
            yield self

    def check_claimable(self, source_path: Path) -> None:
        """Refuse an output folder a render would damage: the input's own folder (the frames
        would overwrite the footage), or a folder that holds files but no render of ours
        (a restart would discard them, and frames named as the input's would replace them).
        A folder with a manifest, even an unreadable one, is a render: resume or restart it.
        """
        source = Path(source_path).resolve()
        out = self.out.resolve()
        if out == source:
            raise FramestyleError(f"{self.out}: is the input folder; the stylised frames would overwrite the "
                                  f"footage: choose another --out")
        if not self.out.is_dir() or (self.out / MANIFEST).exists():
            return
        ours = {LOG, PREVIEW, REPORT, REPORT_FILES}  # and hidden names, .framestyle among them
        foreign = sorted(p.name for p in self.out.iterdir() if p.name not in ours and not p.name.startswith("."))
        if foreign:
            raise FramestyleError(f"{self.out}: holds files but no framestyle render ({foreign[0]}"
                                  f"{f' and {len(foreign) - 1} more' if len(foreign) > 1 else ''}, no {MANIFEST}); "
                                  f"choose a new or empty --out")

    def manifest(self) -> dict | None:
        """The manifest, or None if this folder holds no render yet."""
        path = self.out / MANIFEST
        if not path.exists():
            return None
        try:
            manifest = json.loads(path.read_text())
        except (OSError, ValueError) as exc:
            raise FramestyleError(f"{path}: unreadable manifest ({exc}); framestyle stylise with --restart starts "
                                  f"over") from None
        if not isinstance(manifest, dict) or manifest.get("format") != FORMAT:
            raise FramestyleError(f"{path}: not a manifest of this framestyle version; framestyle stylise with "
                                  f"--restart starts over")
        missing = [key for key, kind in _MANIFEST_KEYS.items() if not isinstance(manifest.get(key), kind)]
        if missing:
            raise FramestyleError(f"{path}: damaged manifest (no valid {', '.join(missing)}); framestyle stylise "
                                  f"with --restart starts over")
        return manifest

    def create(self, manifest: dict) -> None:
        """Write the manifest of a new render."""
        atomic.write_json(self.out / MANIFEST, {**manifest, "format": FORMAT})

    def restart(self, names: Sequence[str]) -> None:
        """Discard everything a previous render left: frames, state, video, previews, records.

        Works when the manifest is unreadable. Refused while another process renders a shot
        or writes a preview here. Everything is first moved into a trash folder, then
        deleted; a kill in the middle leaves a marker, and the next run finishes the job.
        """
        locks = [Lock(path, f"shot {path.stem[5:]}") for path in sorted((self._private / "locks").glob("shot_*.lock"))]
        locks += [self._lock("preview"), self._lock("report")]
        held = []
        try:
            for lock in locks:
                if not lock.acquire(wait=False):
                    raise FramestyleError(f"{self.out}: cannot restart: {lock.holder()}")
                held.append(lock)
            atomic.write_bytes(self._private / "restarting", b"")
            self._discard([*names, *self._recorded_names()])
        finally:
            for lock in held:
                lock.release()

    def _discard(self, names: Sequence[str]) -> None:
        trash = self._private / "trash" / uuid.uuid4().hex
        for name in ("shots", "state", "flashes"):
            if (self._private / name).exists():
                atomic.move(self._private / name, trash / name)
        for name in (PREVIEW, REPORT_FILES, REPORT):
            if (self.out / name).exists():
                atomic.move(self.out / name, trash / name)
        products = [p for p in self.out.glob(f"*{VIDEO_SUFFIX}.*") if p.is_file()]
        products += [self.out / FLASH_PLOT] if (self.out / FLASH_PLOT).exists() else []
        products += [self.out / name for name in dict.fromkeys(names) if (self.out / name).exists()]
        for path in products:
            atomic.move(path, trash / "frames" / path.name)
        if (self.out / MANIFEST).exists():
            atomic.move(self.out / MANIFEST, trash / MANIFEST)
        atomic.remove(self._private / "restarting")
        atomic.remove(self._private / "trash")

    def _recorded_names(self) -> list[str]:
        names = []
        for path in (self._private / "shots").glob("shot_*.json"):
            try:
                names += list(json.loads(path.read_text()).get("frames", {}))
            except (OSError, ValueError, AttributeError):
                continue
        return names

    # --- records -----------------------------------------------------------------------------

    def records(self) -> dict[int, dict]:
        """Every shot's record (finished frames and their figures), merged; shot → record."""
        merged = {}
        for path in sorted((self._private / "shots").glob("shot_*.json")):
            record = _read_record(path)
            if record is not None:
                merged[int(path.stem[5:])] = record
        return merged

    def record_modified(self, shot: int) -> int | None:
        """When shot ``shot``'s record last changed (ns since the epoch), or None without one."""
        try:
            return (self._private / "shots" / f"shot_{shot:03d}.json").stat().st_mtime_ns
        except FileNotFoundError:
            return None

    def finished(self) -> dict[str, dict]:
        """Finished frames of every shot: frame name → its entry."""
        return {name: entry for record in self.records().values() for name, entry in record["frames"].items()}

    # --- one shot (under its lock) -----------------------------------------------------------

    @contextlib.contextmanager
    def shot(self, shot: int, wait: bool) -> Iterator["ShotStore | None"]:
        """Hold shot ``shot``'s lock while rendering it; yields None (without ``wait``) if
        another process holds it."""
        lock = self._shot_lock(shot)
        if not lock.acquire(wait):
            yield None
            return
        try:
            yield ShotStore(self, shot)
        finally:
            lock.release()

    def shot_holder(self, shot: int) -> str:
        """Who renders shot ``shot`` now, in words."""
        return self._shot_lock(shot).holder()

    def rendering(self, shots: Sequence[int]) -> list[int]:
        """Which of ``shots`` a process renders now (holds its lock), changing nothing."""
        return [shot for shot in shots if self._shot_lock(shot).held()]

    def neighbours(self) -> list[int]:
        """Process ids of the other processes on this machine that render a shot here now."""
        pids = set()
        for path in (self._private / "locks").glob("shot_*.lock"):
            lock = Lock(path, path.stem)
            who = lock.holder_record()
            if who.get("host") == socket.gethostname() and who.get("pid") != os.getpid() and lock.held():
                pids.add(who["pid"])
        return sorted(pids)

    def _shot_lock(self, shot: int) -> Lock:
        return Lock(self._private / "locks" / f"shot_{shot:03d}.lock", f"shot {shot}")

    # --- products ----------------------------------------------------------------------------

    def frame_paths(self, names: Sequence[str]) -> list[Path]:
        """Paths of frames by name."""
        return [self.out / name for name in names]

    def write_videos(self, source: io.FrameSource, names: Sequence[str], timecode: ClipTimecode,
                     prores: bool) -> list[Path]:
        """Encode the finished frames, unless already there: for a video input an H.264 preview
        with its audio, and with ``prores`` an edit-ready ProRes 422 HQ .mov (folders too), both
        at the clip's rate and start timecode.

        A video named after the footage's old name (the footage was renamed, and the render
        followed it) is renamed, not made again: every video here was made from these frames
        (a restart discards them).

        Call under :meth:`folder_lock`, so that two processes finishing at once encode them once.
        """
        stem = source.path.stem if source.kind == "video" else source.path.name
        audio = source.path if source.kind == "video" else None
        made = []
        for wanted, suffix, encode in ((source.kind == "video", ".mp4", io.write_video),
                                       (prores, ".mov", io.write_prores)):
            if not wanted:
                continue
            video = self.out / f"{stem}{VIDEO_SUFFIX}{suffix}"
            named_before = [name for name in self.videos() if name.endswith(f"{VIDEO_SUFFIX}{suffix}")]
            if not video.exists() and named_before:
                atomic.move(self.out / named_before[0], video)
                self.log(f"renamed {named_before[0]} to {video.name}, after the footage")
            elif not video.exists():
                encode(self.frame_paths(names), timecode.fps, video, audio_from=audio,
                       start_timecode=timecode.label(0), pixel_aspect=source.pixel_aspect)
                self.log(f"wrote {video.name}")
            made.append(video)
        return made

    @contextlib.contextmanager
    def preview(self) -> Iterator["PreviewStore"]:
        """Hold the preview lock while a preview writes ``preview/``; refused if one already does."""
        self.out.mkdir(parents=True, exist_ok=True)
        with _locked(self._lock("preview"), self.out, wait=False):
            _remove_temporary(self.out / PREVIEW)
            yield PreviewStore(self.out / PREVIEW)

    @contextlib.contextmanager
    def report(self) -> Iterator["ReportStore"]:
        """Hold the report lock (waiting for it: a refresh takes seconds) while the report is
        written; first removes what a process killed while writing it left."""
        self.out.mkdir(parents=True, exist_ok=True)
        with _locked(self._lock("report"), self.out, wait=True):
            _remove_temporary(self.out, REPORT.__eq__)
            _remove_temporary(self.out / REPORT_FILES)
            yield ReportStore(self.out)

    def preview_sheets(self) -> list[str]:
        """The preview's contact sheets, as paths relative to the folder."""
        return [f"{PREVIEW}/{p.name}" for p in sorted((self.out / PREVIEW).glob("contact_*.png"))
                if not atomic.is_temporary(p.name)]

    def videos(self) -> list[str]:
        """The file names of the videos made from the frames."""
        return sorted(p.name for p in self.out.glob(f"*{VIDEO_SUFFIX}.*")
                      if p.is_file() and not atomic.is_temporary(p.name))

    # --- the photosensitive flash check ---------------------------------------------------------

    def write_flash_check(self, kind: str, report: dict, shot: int | None = None) -> None:
        """Record a flash check (:meth:`framestyle.qc.flashes.FlashReport.to_dict`).

        ``kind`` is "render" (the delivered frames) or "source" (the footage); ``shot`` None
        for the whole render (written under :meth:`folder_lock`), else shot ``shot``'s frames
        alone (written under the shot's lock).
        """
        atomic.write_json(self._flash_path(kind, shot), report)

    def flash_check(self, kind: str, shot: int | None = None) -> dict | None:
        """A recorded flash check (see :meth:`write_flash_check`), or None if there is none
        (or it does not read back)."""
        try:
            report = json.loads(self._flash_path(kind, shot).read_text())
        except (OSError, ValueError):
            return None
        return report if isinstance(report, dict) else None

    def write_flash_plot(self, reports: Mapping[str, "FlashReport"]) -> Path:
        """Draw the flash timeline of labelled reports into ``OUT/flashes.png``; return its path."""
        from framestyle.qc.flash_plot import plot_flash_timeline  # matplotlib only when needed

        plot_flash_timeline(reports, self.out / FLASH_PLOT)
        return self.out / FLASH_PLOT

    def flash_plot(self) -> Path | None:
        """``OUT/flashes.png`` if the render's flash check drew it, else None."""
        path = self.out / FLASH_PLOT
        return path if path.is_file() else None

    def _flash_path(self, kind: str, shot: int | None) -> Path:
        if kind not in FLASH_KINDS:
            raise ValueError(f"kind must be one of {FLASH_KINDS}, got {kind!r}")
        folder = self._private / "flashes" / ("" if shot is None else f"shot_{shot:03d}")
        return folder / f"{kind}.json"

    def log(self, message: str) -> None:
        """Append a line to ``render.log``."""
        atomic.append_line(self.out / LOG, f"{time.strftime('%Y-%m-%d %H:%M:%S')} {message}")

    def _lock(self, name: str) -> Lock:
        return Lock(self._private / "locks" / f"{name}.lock", f"the {name} lock" if name == "folder" else name)


class ShotStore:
    """One shot's share of the output folder, while its lock is held: its record, frames and
    kept state."""

    def __init__(self, store: Store, shot: int):
        self.store, self.shot = store, shot
        self._record_path = store._private / "shots" / f"shot_{shot:03d}.json"
        self._state = store._private / "state" / f"shot_{shot:03d}"
        self.record = _read_record(self._record_path) or {"shot": shot, "frames": {}}

    def reconcile(self, names: Sequence[str]) -> list[str]:
        """Check the shot's files before rendering it; return what was found wrong, in words.

        Removes the store's temporary files left by a killed process; forgets recorded frames
        that are missing or do not read back (they are rendered again); removes kept state
        that does not read back; names frames on disk that the record does not know (they
        are rendered again and replaced).
        """
        _remove_temporary(self._state)
        _remove_temporary(self.store._flash_path("render", self.shot).parent)
        _remove_temporary(self.store.out, set(names).__contains__)
        problems, forgotten = [], set()
        for name in list(self.record["frames"]):
            path = self.store.out / name
            if not _reads_back(path):
                del self.record["frames"][name]
                forgotten.add(name)
                problems.append(f"{name} is recorded but {'missing' if not path.exists() else 'unreadable'}; "
                                f"rendering it again")
        unknown = [n for n in names if n not in self.record["frames"] and n not in forgotten
                   and (self.store.out / n).exists()]  # an unreadable frame is said once, above
        if unknown:
            problems.append(f"{len(unknown)} frame(s) of shot {self.shot} on disk are not in its record "
                            f"({unknown[0]}{', ...' if len(unknown) > 1 else ''}); rendering them again")
        return problems

    def write_frame(self, name: str, image: np.ndarray, bit_depth: int) -> None:
        """Atomically write a delivered frame (not yet finished: see :meth:`finish_frame`)."""
        io.write_image(self.store.out / name, image, bit_depth)

    def finish_frame(self, name: str, entry: dict) -> None:
        """Record a written frame as finished, with its figures (iterations, seconds ...)."""
        self.record["frames"][name] = entry
        self.record.get("pending", {}).pop(name, None)
        atomic.write_json(self._record_path, self.record)

    def pending(self) -> dict[str, dict]:
        """Frames of a multi-pass render not finished yet: name → how many passes they have had
        (``"passes"``) and what those cost (iterations, seconds ...)."""
        return self.record.get("pending", {})

    def note_pass(self, name: str, entry: dict) -> None:
        """Record that an unfinished frame has had one more pass (``entry["passes"]``, its figures)."""
        self.record.setdefault("pending", {})[name] = entry
        atomic.write_json(self._record_path, self.record)

    def restart_passes(self, names: Sequence[str]) -> None:
        """Count every frame of the shot, finished or not, as having had no pass: the shot is
        solved again from its first pass (finished frames stay as they are)."""
        self.record["pending"] = {name: {"passes": 0} for name in names}
        atomic.write_json(self._record_path, self.record)

    def forget_passes(self) -> None:
        """Drop the pass counts once the shot is done."""
        if self.record.pop("pending", None) is not None:
            atomic.write_json(self._record_path, self.record)

    def save_state(self, frame: int, image: np.ndarray, layer: str = "pass1") -> None:
        """Keep full-precision ``frame`` (H, W, 3 float32) of ``layer``: a pass's stylised frame
        (``"pass1"``, ``"pass2"`` ...) or the working frame (``"content"``)."""
        with atomic.atomic_path(self._state_path(frame, layer)) as tmp:
            np.save(tmp, image.astype(np.float32), allow_pickle=False)

    def load_state(self, frame: int, layer: str = "pass1") -> np.ndarray | None:
        """The kept ``frame`` of ``layer``, or None if it is not kept or does not read back."""
        path = self._state_path(frame, layer)
        try:
            return np.load(path, allow_pickle=False)
        except FileNotFoundError:
            return None
        except (OSError, ValueError, EOFError):
            atomic.remove(path)  # a truncated or damaged file: the frame is solved again
            return None

    def has_state(self) -> bool:
        """Whether any state of the shot is kept."""
        return self._state.exists()

    def drop_state(self, frame: int, layer: str) -> None:
        """Delete the kept ``frame`` of ``layer``, if kept."""
        path = self._state_path(frame, layer)
        if path.exists():
            atomic.remove(path)

    def prune_state(self, keep_from: int | None, layer: str = "pass1") -> None:
        """Delete kept frames of ``layer`` older than ``keep_from`` (all of the shot's state if None)."""
        if keep_from is None:
            atomic.remove(self._state)
            return
        for path in self._state.glob(f"{layer}_*.npy"):
            if int(path.stem.rsplit("_", 1)[1]) < keep_from:
                atomic.remove(path)

    def _state_path(self, frame: int, layer: str) -> Path:
        return self._state / f"{layer}_{frame:07d}.npy"


class PreviewStore:
    """The ``preview/`` folder while the preview lock is held."""

    def __init__(self, folder: Path):
        self.folder = folder

    def write(self, name: str, image: np.ndarray) -> Path:
        """Atomically write an 8-bit preview image (frame or contact sheet)."""
        path = self.folder / name
        io.write_image(path, image)
        return path

    def remove(self, names: Iterable[str]) -> None:
        """Delete these preview images where they exist."""
        for name in names:
            atomic.remove(self.folder / name)


class ReportStore:
    """``report.html`` and its pictures in ``report/``, while the report lock is held."""

    def __init__(self, out: Path):
        self.out = out

    def write_page(self, html: str) -> Path:
        """Atomically replace ``report.html``."""
        atomic.write_bytes(self.out / REPORT, html.encode())
        return self.out / REPORT

    def write_image(self, name: str, image: np.ndarray) -> None:
        """Atomically write an 8-bit picture (H, W, 3 float in [0, 1]) as ``report/<name>``."""
        io.write_image(self.out / REPORT_FILES / name, image)

    def write_file(self, name: str, data: bytes) -> None:
        """Atomically write ``report/<name>`` (an encoded plot, say)."""
        atomic.write_bytes(self.out / REPORT_FILES / name, data)

    def read(self, name: str) -> bytes:
        """The content of ``report/<name>``; raises FileNotFoundError if it is not there."""
        return (self.out / REPORT_FILES / name).read_bytes()

    def modified(self, name: str) -> int | None:
        """When ``report/<name>`` was last written (ns since the epoch), or None if it is not there."""
        try:
            return (self.out / REPORT_FILES / name).stat().st_mtime_ns
        except FileNotFoundError:
            return None


# --- what a render is checked against ----------------------------------------------------------

def input_fingerprints(source: io.FrameSource, settings: Settings) -> dict:
    """Fingerprints of everything a render reads: input frames, style images, mattes."""
    variants = [variant for _, variant in settings.looks()]
    styles = {p for v in variants for p in v.styles}
    mattes = {v.matte for v in variants if v.matte and v.matte != "alpha"}
    files = io.file_digests(source)
    return {
        "input": str(Path(source.path).resolve()),
        "input_fingerprint": io.fingerprint(source, files),
        # each frame file's, short: a resume refused for changed frames names them
        "input_files": {name: digest[:16] for name, digest in files.items()} if source.kind == "folder" else {},
        "styles": {p: file_hash(Path(p)) for p in sorted(styles)},
        "mattes": {m: io.fingerprint(io.open_source(Path(m))) for m in sorted(mattes)},
    }


def check_footage(manifest: dict, source: io.FrameSource, out: Path) -> None:
    """Refuse ``source`` as the footage of the render in ``out`` (its ``manifest``) unless its
    frames are the ones the render was made from (:func:`framestyle.io.fingerprint`): a
    report, flash check or warping error of other footage would describe neither."""
    if io.fingerprint(source) != manifest["inputs"]["input_fingerprint"]:
        raise FramestyleError(f"{source.path}: not the footage the render in {out} was made from (its frames "
                              f"differ from those of {manifest['inputs']['input']} when the render started)")


def recorded_shots(manifest: dict) -> tuple[Shot, ...]:
    """The shots a render's manifest records."""
    return tuple(Shot(s["shot"], s["start"], s["end"]) for s in manifest["shots"])


def shot_list_fingerprint(shot_file: Path | None) -> dict:
    """Which shot list a render follows: a file (absolute path and content hash) or detection."""
    if shot_file is None:
        return {"file": None, "sha256": None}
    return {"file": str(Path(shot_file).resolve()), "sha256": file_hash(Path(shot_file))}


def check_resume(manifest: dict, settings: Settings, inputs: dict, shot_list: dict | None, out: Path) -> None:
    """Refuse to continue a render whose settings, inputs or shot list changed, naming what.

    ``shot_list`` None means "whatever the render was started with" (``framestyle resume``);
    a list, like the style images (:func:`_styles_moved`), is the same by its content, wherever
    the file is now.
    """
    old = Settings.from_dict(manifest["settings"], str(out / MANIFEST))
    changed = [key for key in old.differences(settings) if key not in HAND_OFF]
    restyled = _styles_moved(old, manifest["inputs"]["styles"], settings, inputs["styles"])
    if restyled:  # the same images in the same places of the look, elsewhere
        changed = [key for key in changed if not key.endswith("styles")]
    if changed:  # resume (no shot list given) has neither the options nor --restart
        advice = ("use the same options, a new --out, or --restart to start over" if shot_list is not None
                  else "`framestyle stylise` with a new --out or --restart starts over")
        raise FramestyleError(f"{out}: was rendered with different settings ({', '.join(changed)}); {advice}")
    for key, files, what in (("input_fingerprint", "input_files", "input frames"),
                             ("styles", "styles", "style image(s)"), ("mattes", "mattes", "mattes")):
        if manifest["inputs"][key] != inputs[key] and not (key == "styles" and restyled):
            if key == "input_fingerprint" and manifest["inputs"]["input"] != inputs["input"]:  # other footage
                raise FramestyleError(f"{inputs['input']}: not the footage the render in {out} was made from (its "
                                      f"frames differ from those of {manifest['inputs']['input']})")
            which = _changed_files(manifest["inputs"].get(files), inputs[files])
            raise FramestyleError(f"{out}: the {what} changed since this render started{which}; framestyle "
                                  f"stylise with --restart starts over")
    if shot_list is not None and shot_list["sha256"] != manifest["shot_list"]["sha256"]:
        was = manifest["shot_list"]["file"] or "detected shots"
        raise FramestyleError(f"{out}: was rendered with another shot list ({was}); give the same --shot-list, "
                              f"a new --out, or --restart to start over")


def _styles_moved(old: Settings, was: dict[str, str], settings: Settings, now: dict[str, str]) -> bool:
    """Whether ``settings`` name the style images of a render made with ``old`` by other paths
    only: every look (the clip's and each shot's) lists images of the same content, in the same
    order, as the render's did (a job moved to another disk or machine). ``was`` and ``now``
    are the images' content hashes by path, then and now."""
    before, after = old.looks(), settings.looks()
    if was == now or len(before) != len(after):
        return False
    for (shot, then), (same_shot, later) in zip(before, after):
        hashes = [was.get(p) for p in then.styles]
        if shot != same_shot or None in hashes or hashes != [now.get(p) for p in later.styles]:
            return False
    return True


def _changed_files(old: dict | None, new: dict) -> str:
    """`` (NAME and N more)``: the files whose content differs, or that came or went, between
    two records of digests by name (frame files, style images, matte folders); "" where either
    has none (a video's frames, an older render)."""
    if not old or not new:
        return ""
    changed = [name for name in new if old.get(name) != new[name]] + [name for name in old if name not in new]
    return f" ({changed[0]}{f' and {len(changed) - 1} more' if len(changed) > 1 else ''})" if changed else ""


def environment_changes(old: dict | None, new: dict) -> list[str]:
    """What differs between the environment a shot's chain started under and this one
    (library versions, thread count, device): the solver's sums then round differently and
    the frames it settles on may differ visibly, in the same look. Nothing where ``old`` is
    unknown (a record written before shots kept theirs)."""
    return [f"{key} {new[key]} (was {old.get(key)})" for key in new if old.get(key) != new[key]] if old else []


def output_names(source: io.FrameSource) -> list[str]:
    """Output file names: EXR for float (linear-light) sources, PNG otherwise."""
    ext = ".exr" if source.linear else ".png"
    return [io.frame_name(source, i, ext) for i in range(source.count)]


def file_hash(path: Path) -> str:
    """Short SHA-256 of a file's content."""
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()[:16]


def read_manifest(out: Path) -> dict | None:
    """The manifest of output folder ``out``, or None if there is none."""
    return Store(out).manifest()


# --- helpers ------------------------------------------------------------------------------------

def _read_record(path: Path) -> dict | None:
    """A shot record, or None if missing; a damaged record is treated as missing (its shot is
    checked frame by frame again when it is next rendered)."""
    try:
        record = json.loads(path.read_text())
    except FileNotFoundError:
        return None
    except (OSError, ValueError):
        return None
    return record if isinstance(record, dict) and isinstance(record.get("frames"), dict) else None


def _reads_back(path: Path) -> bool:
    """Whether a finished frame exists and decodes."""
    try:
        io.read_image(path)
    except (FramestyleError, OSError):
        return False
    return True


def _remove_temporary(folder: Path, owned: Callable[[str], bool] = lambda target: True) -> None:
    """Remove :mod:`framestyle.atomic`'s temporary files in ``folder`` whose target file name
    satisfies ``owned`` (all of them by default)."""
    if not folder.is_dir():
        return
    with os.scandir(folder) as entries:
        for entry in entries:
            if atomic.is_temporary(entry.name) and owned(atomic.temporary_target(entry.name)):
                atomic.remove(entry.path)
