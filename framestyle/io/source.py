"""An input clip — a folder of numbered frames or a video file — behind one interface.

Everything inside framestyle sees frames as float32 ``(H, W, 3)`` RGB in [0, 1] (float
sources: as stored); the conversions from what files hold happen in :mod:`.stills` and
:mod:`.video`. Video frames are named ``frame_000000``, ``frame_000001`` ... numbered from 0,
so a video frame's number, index and name agree.

Users and editors speak of frames by the source's own numbers (``numbers``: the files'
numbers for folders, 1001-based plates say; the index for video) and timecode
(:func:`source_timecode`); inside, frames are 0-based positions.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path
from typing import Iterable, Iterator, Literal

import numpy as np

from framestyle.errors import FramestyleError
from framestyle.io.sequence import read_sequence_frame, scan_folder
from framestyle.io.stills import IMAGE_EXTS, check_not_empty, load_image, to_alpha, to_rgb
from framestyle.io.video import VideoInfo, iter_video, probe_video
from framestyle.timecode import ClipTimecode

# The rate a folder of frames is labelled at when none is given: film's 24 frames/s (common practice).
FOLDER_FPS = 24.0


@dataclass(frozen=True)
class FrameSource:
    """An opened input.

    Attributes
    ----------
    path : the folder or video file
    kind : "folder" or "video"
    count, width, height : number of frames and the size every frame has
    fps : the video's frame rate; None for folders
    names : one output stem per frame, in frame order: the input file's stem for folders,
        ``frame_000000`` style (0-based, at least 6 digits) for video
    numbers : frame numbers: parsed from the file names for folders, 0-based for video
    gaps : inclusive ranges of numbers missing from a folder's numbering
    bit_depth : 8 or 16 for integer samples, 32 for float (EXR, float TIFF), from the first frame
    has_alpha : whether the first frame carries an alpha channel
    files : the frame file names in frame order (folders only)
    ignored : numbered image files of the folder's other sequences, not read (folders only)
    video : what the video reader needs (videos only)
    start_timecode : the first frame's SMPTE label from the video's timecode tag; None when
        the file has none, and for folders
    """

    path: Path
    kind: Literal["folder", "video"]
    count: int
    width: int
    height: int
    fps: float | None
    names: tuple[str, ...]
    numbers: tuple[int, ...]
    gaps: tuple[tuple[int, int], ...]
    bit_depth: int
    has_alpha: bool
    files: tuple[str, ...] = ()
    video: VideoInfo | None = field(default=None, repr=False)
    start_timecode: str | None = None
    ignored: tuple[str, ...] = ()

    @property
    def pixel_aspect(self) -> Fraction:
        """Width over height of a stored pixel: a video's SAR (2 for 2× anamorphic); 1 for folders."""
        return self.video.pixel_aspect if self.video else Fraction(1)

    @property
    def linear(self) -> bool:
        """Float samples are linear light (OpenEXR convention; float TIFF treated alike)."""
        return self.bit_depth == 32


def open_source(path: str | Path) -> FrameSource:
    """Open a folder of numbered frames or a video file and check it.

    Raises
    ------
    FramestyleError
        Naming the file: missing path, no frames, frames of different sizes, an empty or
        unreadable frame, or a file that is not a readable video.
    """
    path = Path(path)
    if not path.exists():
        raise FramestyleError(f"{path}: no such file or folder")
    if path.is_dir():
        seq = scan_folder(path)
        return FrameSource(path, "folder", len(seq.files), seq.width, seq.height, None,
                           tuple(Path(name).stem for name in seq.files), seq.numbers, seq.gaps,
                           seq.bit_depth, seq.has_alpha, seq.files, ignored=seq.ignored)
    if path.suffix.lower() in IMAGE_EXTS:
        raise FramestyleError(f"{path}: is a single image; give a folder of numbered frames or a video")
    info = probe_video(path)
    digits = max(6, len(str(info.count - 1)))
    return FrameSource(path, "video", info.count, info.width, info.height, info.fps,
                       tuple(f"frame_{i:0{digits}d}" for i in range(info.count)), tuple(range(info.count)),
                       (), info.bit_depth, info.has_alpha, video=info, start_timecode=info.timecode)


def source_timecode(source: FrameSource, fps: float | None = None, start_timecode: str | None = None) -> ClipTimecode:
    """How ``source``'s frames are labelled: frame k (0-based position) is the start label + k.

    Parameters
    ----------
    source : the opened input
    fps : the rate to label at (default: the video's rate; :data:`FOLDER_FPS` for folders)
    start_timecode : the first frame's label, ``HH:MM:SS:FF`` (``HH:MM:SS;FF`` drop-frame),
        replacing the video's timecode tag (default: the tag; none for folders or a video
        without one, and labels count from 00:00:00:00)

    Raises
    ------
    FramestyleError
        A start label that is no timecode at the rate (naming the video file when it is
        the file's tag).
    """
    rate = fps or source.fps or FOLDER_FPS
    label = start_timecode or source.start_timecode
    try:
        return ClipTimecode(rate, label)
    except ValueError as exc:
        where = "start timecode" if start_timecode else f"{source.path}: timecode tag"
        raise FramestyleError(f"{where}: {exc}") from None


def sequence_warnings(source: FrameSource) -> list[str]:
    """Lines saying which frame numbers are missing from a folder's numbering and which
    numbered files of other sequences in the folder are not read; for a video, how far its
    frames stand from their own times when its frame rate varies."""
    lines = []
    if source.video and source.video.drift:
        lines.append(f"{source.path}: variable frame rate; its frames are delivered one for one at a constant "
                     f"{source.fps:.6g} fps, its commonest, so the videos' picture runs up to "
                     f"{source.video.drift * 1000:.0f} ms off its audio; for sync, conform the clip to a constant "
                     f"rate first (e.g. in the editing software)")
    if source.gaps:
        shown = ", ".join(f"{a}-{b}" if b > a else f"{a}" for a, b in source.gaps[:5])
        more = ", ..." if len(source.gaps) > 5 else ""
        lines.append(f"{source.path}: frame numbers missing ({shown}{more}); each gap starts a new shot in "
                     f"detected shot lists (a shot list you give may run across it), and timecode and the videos "
                     f"count the frames present, as if the gap were closed")
    if source.ignored:
        more = f" and {len(source.ignored) - 1} more" if len(source.ignored) > 1 else ""
        lines.append(f"{source.path}: reads the {source.count} frames {source.files[0]}..{source.files[-1]}, not "
                     f"the folder's other numbered files ({source.ignored[0]}{more}); keep one sequence per folder")
    return lines


def read_frame(source: FrameSource, index: int) -> np.ndarray:
    """Frame ``index`` (0-based position) as float32 ``(H, W, 3)`` RGB in [0, 1].

    8-bit samples are divided by 255, 16-bit by 65535; float samples are returned as stored.
    Gray is replicated to RGB; alpha is dropped (see :func:`read_alpha`). For video this
    decodes from the start of the clip: use :func:`iter_frames` to go through many frames.
    """
    _check_index(source, index)
    return to_rgb(_read_raw(source, index))


def read_alpha(source: FrameSource, index: int) -> np.ndarray | None:
    """Frame ``index``'s alpha as float32 ``(H, W)`` in [0, 1], or None without alpha."""
    _check_index(source, index)
    return to_alpha(_read_raw(source, index)) if source.has_alpha else None


def iter_frames(source: FrameSource, start: int = 0, stop: int | None = None) -> Iterator[tuple[int, np.ndarray]]:
    """Yield ``(index, frame)`` for ``start <= index < stop`` in order, as :func:`read_frame` gives.

    A video is decoded in one sequential pass; frames before ``start`` are decoded and
    discarded (exact for variable frame rates).
    """
    stop = source.count if stop is None else stop
    if not 0 <= start <= stop <= source.count:
        raise IndexError(f"frame range {start}..{stop} is outside 0..{source.count} for {source.path}")
    if source.kind == "video":
        return ((i, to_rgb(raw)) for i, raw in iter_video(source.path, source.video, start, stop))
    return ((i, to_rgb(_read_raw(source, i))) for i in range(start, stop))


def pick_frames(source: FrameSource, indices: Iterable[int]) -> Iterator[tuple[int, np.ndarray]]:
    """Yield ``(index, frame)`` for each of ``indices``, in increasing order, as
    :func:`read_frame` gives: of a folder only those files are read; a video is decoded in
    one sequential pass from the first to the last of them, and only they are converted."""
    wanted = sorted(set(indices))
    for index in wanted[:1] + wanted[-1:]:
        _check_index(source, index)
    if source.kind == "video" and wanted:
        keep = set(wanted)
        return ((i, to_rgb(raw)) for i, raw in iter_video(source.path, source.video, wanted[0], wanted[-1] + 1)
                if i in keep)
    return ((i, to_rgb(_read_raw(source, i))) for i in wanted)


def read_image(path: str | Path) -> np.ndarray:
    """One image file (a style image, say) as float32 ``(H, W, 3)`` RGB in [0, 1]."""
    path = Path(path)
    if not path.is_file():
        raise FramestyleError(f"{path}: {'a folder, not an image file' if path.is_dir() else 'no such image file'}")
    check_not_empty(path)
    return to_rgb(load_image(path))


def transparent_share(path: str | Path) -> float:
    """The share of an image file's pixels that are not fully opaque; 0 without an alpha channel."""
    alpha = to_alpha(load_image(Path(path)))
    return 0.0 if alpha is None else float((alpha < 1).mean())


def frame_name(source: FrameSource, index: int, ext: str = ".png") -> str:
    """The output file name for frame ``index``: its name stem plus ``ext``."""
    _check_index(source, index)
    if not ext.startswith("."):
        raise ValueError(f"extension must start with '.', got {ext!r}")
    return source.names[index] + ext


def file_digests(source: FrameSource) -> dict[str, str]:
    """SHA-256 (hex) of every byte of each frame file, by file name in frame order, or of the
    video file (under the name ""). Hashing runs at about 1 GB/s on one core, small next to
    the time stylising takes."""
    items = [(name, source.path / name) for name in source.files] if source.kind == "folder" else [("", source.path)]
    digests = {}
    for label, file in items:
        content = hashlib.sha256()
        with open(file, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                content.update(block)
        digests[label] = content.hexdigest()
    return digests


def fingerprint(source: FrameSource, digests: dict[str, str] | None = None) -> str:
    """A stable fingerprint of the input's content, for checking a resume: SHA-256 over the
    :func:`file_digests` (given, or taken here) with the files' names, so any change of
    content is seen, while copying or moving the input (new paths, new modification times)
    is not."""
    digest = hashlib.sha256(f"{source.kind}\n".encode())
    for label, content in (digests if digests is not None else file_digests(source)).items():
        digest.update(f"{label}\t{content}\n".encode())
    return digest.hexdigest()


def _read_raw(source: FrameSource, index: int) -> np.ndarray:
    if source.kind == "video":
        return next(iter_video(source.path, source.video, index, index + 1))[1]
    return read_sequence_frame(source.path / source.files[index], source.width, source.height)


def _check_index(source: FrameSource, index: int) -> None:
    if not 0 <= index < source.count:
        raise IndexError(f"frame index {index} is outside 0..{source.count - 1} for {source.path}")
