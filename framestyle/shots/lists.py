"""Shot lists a user gives or edits: list files, added and removed cuts, printed tables.

People name frames by the source's own numbers, ``numbers`` (:attr:`FrameSource.numbers`:
the files' numbers for a folder, often 1001-based for plates; the 0-based index for video),
and by its timecode (:class:`~framestyle.timecode.ClipTimecode`); shots inside framestyle
are 0-based positions (:class:`~framestyle.shots.shot.Shot`). The functions here convert at
that edge, so every table, JSON list, added or removed cut and shot-list file speaks in
source numbers. Editors' cut lists (EDL, OpenTimelineIO) are read and written by
:mod:`framestyle.shots.cutlists`.
"""

from __future__ import annotations

import json
import os
import re
from bisect import bisect_left
from pathlib import Path
from typing import Iterable, Sequence

from framestyle.errors import FramestyleError
from framestyle.shots.cutlists import cut_list_adapter, read_cut_list
from framestyle.shots.shot import Shot, check_contiguous, shots_from_boundaries
from framestyle.timecode import ClipTimecode

_JSON_SPACE = re.compile(r"[ \t\n\r]*")  # JSON's insignificant whitespace (RFC 8259)


def frame_position(number: int, numbers: Sequence[int], where: str) -> int:
    """Return the 0-based position of the frame the source numbers ``number``.

    Parameters
    ----------
    number : int
        A source frame number.
    numbers : sequence of int
        The source's frame numbers in frame order, strictly increasing.
    where : str
        What the error names first: the file and line, or the option.

    Raises
    ------
    FramestyleError
        ``"<where>: frame N is outside the clip (frames A..B)"``, or, for a number in a gap
        of a folder's numbering, ``"<where>: frame N is not in the clip (frames X..Y are
        missing)"``.

    Examples
    --------
    >>> frame_position(1003, (1001, 1002, 1003), "--add-cut")
    2
    """
    index = bisect_left(numbers, number)
    if index < len(numbers) and numbers[index] == number:
        return index
    if not numbers[0] < number < numbers[-1]:
        raise FramestyleError(f"{where}: frame {number} is outside the clip (frames {numbers[0]}..{numbers[-1]})")
    raise FramestyleError(f"{where}: frame {number} is not in the clip"
                          f" (frames {numbers[index - 1] + 1}..{numbers[index] - 1} are missing)")


def frame_range(shot: Shot, numbers: Sequence[int]) -> str:
    """The shot's first and last frames in source numbers, ``"1001-1047"``, for logs and summaries."""
    return f"{numbers[shot.start]}-{numbers[shot.end]}"


def parse_shot_file(path: str | os.PathLike, numbers: Sequence[int], timecode: ClipTimecode) -> list[Shot]:
    """Read a user's shot list or an editor's cut list for a clip.

    Four formats, told apart by the file's extension or content:

    *Text* (ours): one shot start per line, as a source frame number (a folder's file
    number, a video's 0-based index), in increasing order. Blank lines and everything
    after ``#`` are ignored. The clip's first frame always starts shot 1 and may be left
    out::

        # shot starts for the harbour plate (frames 1001-1131)
        1001
        1048    # the cut to the close-up
        1131

    *JSON*: the list that ``framestyle shots --json`` prints,
    ``[{"shot": 1, "start": 1001, "end": 1047, ...}, ...]``, in source frame numbers.
    The ``start`` values define the shots, the first at the clip's first frame; ``shot``
    numbers and other keys are ignored (shots are renumbered). An ``end`` must lie between its ``start`` and the clip's last
    frame and before the next ``start``, but may leave a gap: deleting an entry merges its
    shot into the one before.

    *CMX 3600 EDL* (``.edl``) and *OpenTimelineIO* (``.otio``): an editor's cut, each event
    one shot, placed on the clip by its record timecode (see
    :func:`framestyle.shots.cutlists.read_cut_list`).

    Numbers in the text and JSON formats are source numbers; for a video and for a folder
    numbered from 0 they are the 0-based frame indices, as before.

    Parameters
    ----------
    path : str or os.PathLike
        The shot list file, UTF-8.
    numbers : sequence of int
        The clip's frame numbers in frame order (:attr:`FrameSource.numbers`).
    timecode : ClipTimecode
        How the clip's frames are labelled (rate, start timecode), for cut lists.

    Returns
    -------
    list[Shot]
        Shots in 0-based positions.

    Raises
    ------
    FramestyleError
        If the file cannot be read, a line is malformed, a frame is not in the clip, or
        starts are out of order; the message names the file and line. For cut lists, see
        :func:`~framestyle.shots.cutlists.read_cut_list`.
    """
    if cut_list_adapter(path) is not None:
        return shots_from_boundaries(read_cut_list(path, timecode, len(numbers)), len(numbers))
    try:
        text = Path(path).read_text(encoding="utf-8-sig")  # tolerate a byte-order mark
    except (OSError, UnicodeDecodeError) as exc:
        raise FramestyleError(f"{path}: cannot read the shot list ({exc})") from exc
    if text.lstrip()[:1] in ("[", "{") or Path(path).suffix.lower() == ".json":
        starts = _json_shot_starts(text, path, numbers)
    else:
        starts = _text_shot_starts(text, path, numbers)
    return shots_from_boundaries(starts, len(numbers))


def _check_start(start: int, previous: int | None, where: str, numbers: Sequence[int]) -> int:
    """The position of a listed start; FramestyleError if it is not in the clip or out of order."""
    position = frame_position(start, numbers, where)
    if previous is not None and position <= previous:
        raise FramestyleError(
            f"{where}: shot start {start} does not come after the previous start {numbers[previous]}"
        )
    return position


def _text_shot_starts(text: str, path: str | os.PathLike, numbers: Sequence[int]) -> list[int]:
    """Shot starts (positions) from our text format (see :func:`parse_shot_file`)."""
    starts: list[int] = []
    for line_number, line in enumerate(text.splitlines(), start=1):
        field = line.split("#", 1)[0].strip()
        if not field:
            continue
        where = f"{path}:{line_number}"
        if not field.isdecimal():
            raise FramestyleError(f"{where}: expected one frame number, got {field!r}")
        starts.append(_check_start(int(field), starts[-1] if starts else None, where, numbers))
    if not starts:
        raise FramestyleError(
            f"{path}: the shot list names no shot start (write {numbers[0]}, the first frame, for one shot)"
        )
    return starts


def _json_shot_starts(text: str, path: str | os.PathLike, numbers: Sequence[int]) -> list[int]:
    """Shot starts (positions) from the JSON list ``framestyle shots --json`` prints."""
    try:
        entries = json.loads(text)
    except json.JSONDecodeError as exc:
        raise FramestyleError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from exc
    if not isinstance(entries, list):
        raise FramestyleError(f"{path}: expected a JSON list of shots, as `framestyle shots --json` prints")
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
        start = _check_start(entry["start"], starts[-1] if starts else None, where, numbers)
        if not starts and start != 0:  # frames before it would make a shot the list never names
            raise FramestyleError(f"{where}: the first shot starts at {entry['start']}, not at the clip's first "
                                  f"frame {numbers[0]}; list the frames before it as a shot of their own")
        if previous_end is not None and start <= previous_end:
            raise FramestyleError(
                f"{where}: start {entry['start']} is inside the previous shot"
                f" (which ends at {numbers[previous_end]})"
            )
        if not entry["start"] <= entry["end"] <= numbers[-1]:
            raise FramestyleError(
                f"{where}: end {entry['end']} is not in {entry['start']}..{numbers[-1]}"
            )
        starts.append(start)
        previous_end = frame_position(entry["end"], numbers, where)
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
    shots: Sequence[Shot], numbers: Sequence[int], add_cuts: Iterable[int] = (), remove_cuts: Iterable[int] = ()
) -> list[Shot]:
    """Add or remove cuts, given as the source number of the frame that starts a shot, and renumber.

    Adding a cut where a shot already starts changes nothing.

    Parameters
    ----------
    shots : sequence of Shot
        Contiguous shots in 0-based positions (as :func:`detect_shots` returns them).
    numbers : sequence of int
        The clip's frame numbers in frame order (:attr:`FrameSource.numbers`).
    add_cuts : iterable of int
        Source frame numbers, after the first frame, that should start a new shot.
    remove_cuts : iterable of int
        Current shot starts (source numbers, not the first frame) whose shot should join
        the one before.

    Returns
    -------
    list[Shot]

    Raises
    ------
    FramestyleError
        If a frame is not in the clip, a removed frame starts no shot, the first frame is
        removed, or one frame is both added and removed.
    """
    check_contiguous(shots)
    if len(numbers) != shots[-1].end + 1:
        raise ValueError(f"{len(numbers)} frame numbers for shots over {shots[-1].end + 1} frames")
    starts = {shot.start for shot in shots}
    add, remove = {int(f) for f in add_cuts}, {int(f) for f in remove_cuts}
    both = sorted(add & remove)
    if both:
        raise FramestyleError(f"frame {both[0]} is given both as a cut to add and as one to remove")
    added = {frame_position(frame, numbers, "cannot add a cut") for frame in sorted(add)}
    removed = set()
    for frame in sorted(remove):
        position = frame_position(frame, numbers, "cannot remove a cut")
        if position == 0:
            raise FramestyleError(f"cannot remove the cut at frame {frame}: it starts the clip")
        if position not in starts:
            listed = ", ".join(str(numbers[s]) for s in sorted(starts))
            raise FramestyleError(
                f"cannot remove a cut at frame {frame}: no shot starts there (shot starts: {listed})"
            )
        removed.add(position)
    return shots_from_boundaries(sorted((starts - removed) | added), len(numbers))


def shot_entries(shots: Sequence[Shot], numbers: Sequence[int], timecode: ClipTimecode) -> list[dict]:
    """The shot list as ``framestyle shots --json`` prints it, in source numbers and timecode.

    One entry per shot: ``{"shot": 1, "start": 1001, "end": 1047, "frames": 47,
    "start_timecode": "01:00:00:00", "end_timecode": "01:00:01:22"}``; ``start`` and ``end``
    are the first and last frame's source numbers, the timecodes their labels.
    :func:`parse_shot_file` reads the list back.
    """
    check_contiguous(shots)
    return [
        {"shot": shot.index, "start": numbers[shot.start], "end": numbers[shot.end], "frames": shot.length,
         "start_timecode": timecode.label(shot.start), "end_timecode": timecode.label(shot.end)}
        for shot in shots
    ]


def format_shot_table(shots: Sequence[Shot], numbers: Sequence[int], timecode: ClipTimecode) -> str:
    """Return a plain-text table of shots with source frame numbers and SMPTE timecodes.

    Columns: shot number, first and last frame (source numbers), frame count, and the
    SMPTE ST 12-1 timecodes of the first and of the last frame (``timecode``'s labels).
    """
    header = ("shot", "first", "last", "frames", "start", "end")
    rows = [tuple(str(entry[key]) for key in ("shot", "start", "end", "frames", "start_timecode", "end_timecode"))
            for entry in shot_entries(shots, numbers, timecode)]
    widths = [max(len(row[col]) for row in [header, *rows]) for col in range(len(header))]
    return "\n".join(
        "  ".join(cell.rjust(width) for cell, width in zip(row, widths)) for row in [header, *rows]
    )


def shot_selection(numbers: Sequence[int]) -> str:
    """Shot numbers as ``--shots`` takes them, runs joined: [2, 4, 5, 6] → ``2,4-6``."""
    runs: list[list[int]] = []
    for n in sorted(set(numbers)):
        if runs and n == runs[-1][1] + 1:
            runs[-1][1] = n
        else:
            runs.append([n, n])
    return ",".join(f"{a}" if a == b else f"{a}-{b}" for a, b in runs)


def parse_shot_selection(text: str, n_shots: int) -> list[int]:
    """Parse a selection like ``2,4-5`` (``7-``: shot 7 to the last) into sorted shot
    numbers, checking they exist and that a range runs upward."""
    chosen: list[int] = []
    try:
        for part in filter(None, (p.strip() for p in text.split(","))):
            lo, dash, hi = part.partition("-")
            first, last = int(lo), int(hi) if hi else n_shots if dash else int(lo)
            if hi and last < first:
                raise FramestyleError(f"--shots {text!r}: the range {part} runs downward; write {last}-{first}")
            chosen += range(first, max(first, last) + 1)  # "7-" past the last shot: 7, refused below
    except ValueError:
        raise FramestyleError(f"--shots {text!r}: expected shot numbers like 2,4-5 or 7-") from None
    if not chosen:
        raise FramestyleError(f"--shots {text!r}: no shot chosen; expected shot numbers like 2,4-5 or 7-")
    bad = [n for n in chosen if not 1 <= n <= n_shots]
    if bad:
        raise FramestyleError(f"--shots {text!r}: no shot {bad[0]} (the input has {n_shots})")
    return sorted(set(chosen))
