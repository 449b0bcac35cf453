"""Shot lists a user gives or edits: list files, added and removed cuts, printed tables."""

from __future__ import annotations

import json
import os
import re
from pathlib import Path
from typing import Iterable, Sequence

from framestyle.errors import FramestyleError
from framestyle.shots.shot import Shot, check_contiguous, shots_from_boundaries
from framestyle.timecode import frame_to_timecode

_JSON_SPACE = re.compile(r"[ \t\n\r]*")  # JSON's insignificant whitespace (RFC 8259)


def parse_shot_file(path: str | os.PathLike, n_frames: int) -> list[Shot]:
    """Read a user's shot list, in either of two formats.

    *Text* (ours): one shot start frame (0-based) per line, in increasing order. Blank
    lines and everything after ``#`` are ignored. Frame 0 always starts shot 1 and may
    be left out::

        # shot starts for the harbour clip
        0
        48    # the cut to the close-up
        131

    *JSON*: the list that ``framestyle shots --json`` prints,
    ``[{"shot": 1, "start": 0, "end": 47}, ...]``. The ``start`` values define the shots;
    ``shot`` numbers are ignored (shots are renumbered). An ``end`` must lie between its
    ``start`` and the clip's last frame and before the next ``start``, but may leave a
    gap: deleting an entry merges its shot into the one before.

    Parameters
    ----------
    path : str or os.PathLike
        The shot list file, UTF-8.
    n_frames : int
        Number of frames in the clip the list is for.

    Returns
    -------
    list[Shot]

    Raises
    ------
    FramestyleError
        If the file cannot be read or a line is malformed, out of range or out of order;
        the message names the file and line.
    """
    try:
        text = Path(path).read_text(encoding="utf-8-sig")  # tolerate a byte-order mark
    except (OSError, UnicodeDecodeError) as exc:
        raise FramestyleError(f"{path}: cannot read the shot list ({exc})") from exc
    if text.lstrip().startswith("["):
        starts = _json_shot_starts(text, path, n_frames)
    else:
        starts = _text_shot_starts(text, path, n_frames)
    return shots_from_boundaries(starts, n_frames)


def _check_start(start: int, previous: int | None, where: str, n_frames: int) -> None:
    """Raise FramestyleError if a listed start is out of the clip or out of order."""
    if not 0 <= start < n_frames:
        raise FramestyleError(
            f"{where}: frame {start} is outside the clip (frames 0..{n_frames - 1})"
        )
    if previous is not None and start <= previous:
        raise FramestyleError(
            f"{where}: shot start {start} does not come after the previous start {previous}"
        )


def _text_shot_starts(text: str, path: str | os.PathLike, n_frames: int) -> list[int]:
    """Shot starts from our text format (see :func:`parse_shot_file`)."""
    starts: list[int] = []
    for line_number, line in enumerate(text.splitlines(), start=1):
        field = line.split("#", 1)[0].strip()
        if not field:
            continue
        where = f"{path}:{line_number}"
        if not field.isdecimal():
            raise FramestyleError(f"{where}: expected one frame number (0-based), got {field!r}")
        start = int(field)
        _check_start(start, starts[-1] if starts else None, where, n_frames)
        starts.append(start)
    if not starts:
        raise FramestyleError(f"{path}: the shot list names no shot start (write 0 for one shot)")
    return starts


def _json_shot_starts(text: str, path: str | os.PathLike, n_frames: int) -> list[int]:
    """Shot starts from the JSON list ``framestyle shots --json`` prints."""
    try:
        entries = json.loads(text)
    except json.JSONDecodeError as exc:
        raise FramestyleError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from exc
    if not entries:
        raise FramestyleError(f"{path}: the shot list is empty")
    starts: list[int] = []
    previous_end: int | None = None
    for line_number, entry in zip(_array_entry_lines(text), entries):
        where = f"{path}:{line_number}"
        if not (isinstance(entry, dict) and all(type(entry.get(k)) is int for k in ("start", "end"))):
            raise FramestyleError(
                f'{where}: expected {{"shot": N, "start": FRAME, "end": FRAME}}, got {entry!r}'
            )
        _check_start(entry["start"], starts[-1] if starts else None, where, n_frames)
        if previous_end is not None and entry["start"] <= previous_end:
            raise FramestyleError(
                f"{where}: start {entry['start']} is inside the previous shot"
                f" (which ends at {previous_end})"
            )
        if not entry["start"] <= entry["end"] < n_frames:
            raise FramestyleError(
                f"{where}: end {entry['end']} is not in {entry['start']}..{n_frames - 1}"
            )
        starts.append(entry["start"])
        previous_end = entry["end"]
    return starts


def _array_entry_lines(text: str) -> list[int]:
    """Return the 1-based line on which each element of a valid top-level JSON array starts."""
    decoder = json.JSONDecoder()
    lines: list[int] = []
    position = _JSON_SPACE.match(text, text.index("[") + 1).end()
    while text[position] != "]":
        lines.append(text.count("\n", 0, position) + 1)
        _, position = decoder.raw_decode(text, position)
        position = _JSON_SPACE.match(text, position).end()
        if text[position] == ",":
            position = _JSON_SPACE.match(text, position + 1).end()
    return lines


def apply_overrides(
    shots: Sequence[Shot], add_cuts: Iterable[int] = (), remove_cuts: Iterable[int] = ()
) -> list[Shot]:
    """Add or remove cuts, given as the start frame of the shot they begin, and renumber.

    Adding a cut where a shot already starts changes nothing.

    Parameters
    ----------
    shots : sequence of Shot
        Contiguous shots starting at frame 0 (as :func:`detect_shots` returns them).
    add_cuts : iterable of int
        Frames in ``1 .. last frame`` that should start a new shot.
    remove_cuts : iterable of int
        Current shot starts (not 0) whose shot should join the one before.

    Returns
    -------
    list[Shot]

    Raises
    ------
    FramestyleError
        If a frame is out of the clip, a removed frame starts no shot, frame 0 is
        removed, or one frame is both added and removed.
    """
    check_contiguous(shots)
    n_frames = shots[-1].end + 1
    starts = {shot.start for shot in shots}
    add, remove = {int(f) for f in add_cuts}, {int(f) for f in remove_cuts}
    both = sorted(add & remove)
    if both:
        raise FramestyleError(f"frame {both[0]} is given both as a cut to add and as one to remove")
    for frame in sorted(add):
        if not 0 <= frame < n_frames:
            raise FramestyleError(
                f"cannot add a cut at frame {frame}: the clip has frames 0..{n_frames - 1}"
            )
    for frame in sorted(remove):
        if frame == 0:
            raise FramestyleError("cannot remove the cut at frame 0: it starts the clip")
        if frame not in starts:
            listed = ", ".join(str(s) for s in sorted(starts))
            raise FramestyleError(
                f"cannot remove a cut at frame {frame}: no shot starts there"
                f" (shot starts: {listed})"
            )
    return shots_from_boundaries(sorted((starts - remove) | add), n_frames)


def format_shot_table(shots: Sequence[Shot], fps: float) -> str:
    """Return a plain-text table of shots with frame ranges and SMPTE timecodes.

    Columns: shot number, first and last frame (0-based), frame count, and the SMPTE
    ST 12-1 timecodes of the first and of the last frame (:func:`frame_to_timecode`).
    """
    check_contiguous(shots)
    header = ("shot", "first", "last", "frames", "start", "end")
    rows = [
        (
            str(shot.index),
            str(shot.start),
            str(shot.end),
            str(shot.length),
            frame_to_timecode(shot.start, fps),
            frame_to_timecode(shot.end, fps),
        )
        for shot in shots
    ]
    widths = [max(len(row[col]) for row in [header, *rows]) for col in range(len(header))]
    return "\n".join(
        "  ".join(cell.rjust(width) for cell, width in zip(row, widths)) for row in [header, *rows]
    )


def parse_shot_selection(text: str, n_shots: int) -> list[int]:
    """Parse a selection like ``2,4-5`` into sorted shot numbers, checking they exist."""
    chosen: list[int] = []
    try:
        for part in filter(None, (p.strip() for p in text.split(","))):
            lo, _, hi = part.partition("-")
            chosen += range(int(lo), int(hi or lo) + 1)
    except ValueError:
        raise FramestyleError(f"--shots {text!r}: expected shot numbers like 2,4-5") from None
    bad = [n for n in chosen if not 1 <= n <= n_shots]
    if bad:
        raise FramestyleError(f"--shots {text!r}: no shot {bad[0]} (the input has {n_shots})")
    return sorted(set(chosen))
