"""Folders of numbered frames: find the sequence, check it, read its frames.

A frame's number is the digit run that ends the file stem (``shot_0001.png``, ``shot_9.png``
... ``shot_10.png``); frames sort by that number, never lexically. Hidden files (names
starting with "."), such as macOS ``._shot_0001.png`` companions or our own temporary files,
are not frames; an extension's case does not matter. When several numbered sequences share
the folder the longest one is used (the others' files are listed, so a warning can name
them); sequences of equal length are refused as ambiguous. Numbers missing from the run are
reported as gaps (the frames are not renumbered).
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from framestyle.errors import FramestyleError
from framestyle.io.stills import DTYPE_DEPTH, IMAGE_EXTS, check_not_empty, image_header, load_image

_DEPTH_WORDS = {8: "8-bit", 16: "16-bit", 32: "float"}
_NUMBERED = re.compile(r"^(.*?)(\d+)$")  # non-greedy prefix: the digit run is as long as possible


@dataclass(frozen=True)
class Sequence:
    """A checked numbered sequence: file names and frame numbers in order, size, samples."""

    files: tuple[str, ...]
    numbers: tuple[int, ...]
    width: int
    height: int
    bit_depth: int
    has_alpha: bool
    ignored: tuple[str, ...] = ()  # numbered image files of the folder's other sequences

    @property
    def gaps(self) -> tuple[tuple[int, int], ...]:
        """Inclusive ranges of numbers missing between the first and the last frame."""
        return tuple((a + 1, b - 1) for a, b in zip(self.numbers, self.numbers[1:]) if b > a + 1)


def scan_folder(path: Path) -> Sequence:
    """Find and check the numbered sequence in ``path``.

    Every frame must be non-empty and have the first frame's size (read from the headers);
    a frame whose pixels are damaged is reported when it is read.
    """
    groups: dict[tuple[str, str], list[tuple[int, str]]] = {}
    for entry in sorted(path.iterdir()):
        if entry.name.startswith(".") or entry.suffix.lower() not in IMAGE_EXTS:
            continue
        if entry.is_symlink() and not entry.exists():  # else a frame would vanish into a gap
            raise FramestyleError(f"{entry}: a broken link (to {os.readlink(entry)})")
        if not entry.is_file():
            continue
        match = _NUMBERED.match(entry.stem)
        if match is not None:
            groups.setdefault((match[1], entry.suffix.lower()), []).append((int(match[2]), entry.name))
    if not groups:
        raise FramestyleError(f"{path}: no numbered image frames (like name_0001.png) in this folder")
    ranked = sorted(groups.items(), key=lambda item: -len(item[1]))
    if len(ranked) > 1 and len(ranked[0][1]) == len(ranked[1][1]):
        tied = ", ".join(f"{prefix}#{ext}" for (prefix, ext), frames in ranked if len(frames) == len(ranked[0][1]))
        raise FramestyleError(f"{path}: several frame sequences of equal length ({tied}); keep one per folder")
    frames = sorted(ranked[0][1])
    for (number, first), (other, second) in zip(frames, frames[1:]):
        if number == other:
            raise FramestyleError(f"{path / second}: has the same frame number {number} as {first}")
    files = tuple(name for _, name in frames)
    (prefix, ext), numbers = ranked[0][0], {number for number, _ in frames}
    for (other_prefix, _), others in ranked[1:]:
        strays = [name for number, name in sorted(others) if other_prefix == prefix and frames[0][0] < number
                  < frames[-1][0] and number not in numbers]
        if strays:  # a frame of the run saved in another format: it would silently become a gap
            raise FramestyleError(f"{path / strays[0]}: a frame of the {prefix}#{ext} sequence in another format; "
                                  f"keep one format per sequence")
    for name in files:
        check_not_empty(path / name)
    first_frame = load_image(path / files[0])
    height, width = first_frame.shape[:2]
    has_alpha, depth = first_frame.shape[2] in (2, 4), DTYPE_DEPTH[first_frame.dtype]
    for name in files[1:]:
        frame_width, frame_height, frame_alpha, frame_depth = image_header(path / name)
        if (frame_width, frame_height) != (width, height):
            raise FramestyleError(
                f"{path / name}: frame is {frame_width}x{frame_height} but {files[0]} is {width}x{height}"
            )
        if frame_alpha != has_alpha:  # the alpha passes through to the output: every frame or none
            raise FramestyleError(f"{path / name}: {'has' if frame_alpha else 'has no'} alpha channel but {files[0]} "
                                  f"{'has' if has_alpha else 'has none'}; give every frame of the sequence the same "
                                  f"channels")
        if frame_depth != depth:  # the output follows the first frame's: deeper frames would lose levels
            raise FramestyleError(f"{path / name}: {_DEPTH_WORDS[frame_depth]} samples but {files[0]} has "
                                  f"{_DEPTH_WORDS[depth]}; give every frame of the sequence the same depth")
    ignored = tuple(sorted(name for _, others in ranked[1:] for _, name in others))
    return Sequence(files, tuple(number for number, _ in frames), width, height, depth, has_alpha, ignored)


def read_sequence_frame(file: Path, width: int, height: int) -> np.ndarray:
    """Decoded samples ``(H, W, C)`` of one frame file, checked against the sequence's size."""
    image = load_image(file)
    if image.shape[:2] != (height, width):
        raise FramestyleError(
            f"{file}: frame is {image.shape[1]}x{image.shape[0]} but the sequence is {width}x{height}"
        )
    return image
