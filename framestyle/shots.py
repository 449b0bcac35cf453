"""Shot boundary detection (hard cuts and gradual transitions) and user shot lists.

Each frame is reduced to a small colour signature, a joint RGB histogram of a downscaled
copy, so a caller can stream a clip through :func:`frame_signature` and keep only the
signatures. :func:`detect_shots` compares signatures with the total-variation distance
(:func:`signature_distance`, in [0, 1]):

* **Hard cuts.** The distance between two consecutive frames exceeds an adaptive
  threshold, the larger of ``cut_threshold`` and the local median plus ``adaptive_k``
  robust standard deviations, and is a clear local peak (``peak_ratio`` times its largest
  neighbour, after Yeo & Liu 1995). The peak test keeps the steady large steps inside a
  fade or dissolve and the pair of steps around a one-frame flash from reading as cuts;
  the adaptive part keeps busy passages (strobes, heavy flicker) from producing cuts.
* **Gradual transitions** (fades through black, cross-dissolves) use the twin-comparison
  method of Zhang, Kankanhalli & Smoliar (1993): consecutive frames whose distance
  exceeds the low ``candidate_threshold`` form a candidate run, and the run is a
  transition when its *two ends* differ by more than ``gradual_threshold``. Comparing
  the ends instead of summing the steps is what keeps camera and object motion out: a
  pan over one scene changes every frame a little but leaves the colours of its end
  frames alike. Each end is the mean of three frames, so flicker does not decide it, and
  runs longer than ``max_transition_length`` are judged by their most different stretch
  of that length, so slow drift during a long camera move does not add up to a
  transition. The boundary goes to the frame least like either end: the black frame of
  a fade, the middle of a dissolve.

Colour histograms ignore where colours are, so they are largely invariant to motion
(Swain & Ballard 1991). The price is that a cut between two shots with the same colours
is missed; a user can correct that with a shot list (:func:`parse_shot_file`) or with
:func:`apply_overrides`.

References
----------
Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
full-motion video. Multimedia Systems, 1(1), 10-28.
Yeo, B.-L., & Liu, B. (1995). Rapid scene analysis on compressed video. IEEE Trans.
Circuits and Systems for Video Technology, 5(6), 533-544.
Swain, M. J., & Ballard, D. H. (1991). Color indexing. International Journal of
Computer Vision, 7(1), 11-32.
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Sequence

import cv2
import numpy as np

from framestyle.errors import FramestyleError
from framestyle.timecode import frame_to_timecode

SIGNATURE_WIDTH = 160
"""Frames wider than this are downscaled to it (area averaging) before counting colours."""
HISTOGRAM_BINS = 4
"""Bins per RGB channel: the two most significant bits, 64 joint bins (Zhang et al. 1993)."""
_MAD_TO_SIGMA = 1.4826  # std of a normal distribution / its median absolute deviation
_PEAK_RADIUS = 2  # neighbours on each side a cut must clearly exceed
_TIE_TOLERANCE = 0.01  # distances this close count as equal when placing a boundary
_BLANK_SHARE = 0.95  # a frame with this much of it in one bin is blank (black, a flash)
_END_FRAMES = 3  # a transition's ends are compared as means of this many frames
_JSON_SPACE = re.compile(r"[ \t\n\r]*")  # JSON's insignificant whitespace (RFC 8259)


@dataclass(frozen=True)
class Shot:
    """One shot: 1-based ``index`` and 0-based inclusive frame range ``start .. end``."""

    index: int
    start: int
    end: int

    @property
    def length(self) -> int:
        """Number of frames in the shot."""
        return self.end - self.start + 1

    def to_dict(self) -> dict[str, int]:
        """Return ``{"shot": index, "start": start, "end": end}``, one shot-list JSON entry."""
        return {"shot": self.index, "start": self.start, "end": self.end}


def frame_signature(frame: np.ndarray) -> np.ndarray:
    """Return the colour signature of one frame: its normalised joint RGB histogram.

    The frame is downscaled to :data:`SIGNATURE_WIDTH` pixels wide with area averaging
    (which also averages out grain that would jitter pixels across bin edges), clipped
    to [0, 1] and counted in :data:`HISTOGRAM_BINS` equal bins per channel over [0, 1];
    1.0 falls in the last bin, as ``np.histogramdd`` counts it.

    Parameters
    ----------
    frame : np.ndarray
        ``(H, W, 3)`` float RGB image in [0, 1].

    Returns
    -------
    np.ndarray
        ``(HISTOGRAM_BINS ** 3,)`` float32 summing to 1; bin ``(r * B + g) * B + b``.

    References
    ----------
    Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
    full-motion video. Multimedia Systems, 1(1), 10-28 (64-bin colour code).
    """
    frame = np.asarray(frame)
    if frame.ndim != 3 or frame.shape[2] != 3 or frame.shape[0] == 0 or frame.shape[1] == 0:
        raise ValueError(f"frame must have shape (H, W, 3), got {frame.shape}")
    if not np.issubdtype(frame.dtype, np.floating):
        raise ValueError(f"frame must be float RGB in [0, 1], got dtype {frame.dtype}")
    frame = frame.astype(np.float32, copy=False)
    height, width = frame.shape[:2]
    if width > SIGNATURE_WIDTH:
        small_height = max(1, round(height * SIGNATURE_WIDTH / width))
        frame = cv2.resize(frame, (SIGNATURE_WIDTH, small_height), interpolation=cv2.INTER_AREA)
    levels = np.clip(frame * HISTOGRAM_BINS, 0, HISTOGRAM_BINS - 1).astype(np.intp)
    codes = (levels[..., 0] * HISTOGRAM_BINS + levels[..., 1]) * HISTOGRAM_BINS + levels[..., 2]
    counts = np.bincount(codes.ravel(), minlength=HISTOGRAM_BINS**3)
    return (counts / codes.size).astype(np.float32)


def signature_distance(a: np.ndarray, b: np.ndarray) -> float:
    """Total-variation distance of two signatures: half their L1 difference, in [0, 1].

    0 means the same colour distribution, 1 means no colour bin in common.
    """
    return 0.5 * float(np.abs(np.asarray(a, np.float32) - np.asarray(b, np.float32)).sum())


def detect_shots(
    signatures: Sequence[np.ndarray],
    cut_threshold: float = 0.4,
    gradual_threshold: float = 0.4,
    candidate_threshold: float = 0.05,
    min_shot_length: int = 8,
    max_transition_length: int = 48,
    adaptive_k: float = 3.0,
    adaptive_window: int = 12,
    peak_ratio: float = 2.0,
) -> list[Shot]:
    """Split a clip into shots from its per-frame signatures.

    ``d[i]`` below is :func:`signature_distance` between frames ``i`` and ``i + 1``; a
    boundary at frame ``j`` means a new shot starts at ``j``.

    Parameters
    ----------
    signatures : sequence of np.ndarray
        One :func:`frame_signature` per frame, in order; at least one.
    cut_threshold : float
        Least ``d[i]`` for a hard cut. ``d[i]`` must also exceed the median plus
        ``adaptive_k`` robust standard deviations (from the median absolute deviation)
        of the ``adaptive_window`` distances on each side, and be at least
        ``peak_ratio`` times each distance within two frames of it.
    gradual_threshold : float
        Least distance between the two ends of a candidate run (each the mean signature
        of three frames) for it to be a gradual transition: twin comparison's high
        threshold, which Zhang et al. set equal to the cut threshold, as the default does.
    candidate_threshold : float
        ``d[i]`` above which frames join a candidate run (twin comparison's low
        threshold). Steps between two blank frames (95 % of the frame in one colour bin:
        black, a white flash) also join, so a fade out, a hold on black and a fade in
        form one run. Runs end at hard cuts; runs separated by fewer than
        ``min_shot_length`` quieter frames are joined.
    min_shot_length : int
        Least number of frames between two boundaries; of two closer ones the one with
        the larger distance is kept. Boundaries near the clip's ends are kept.
    max_transition_length : int
        Longest transition looked for, in frames. A longer candidate run (typically
        continuous camera motion) is judged by its most different pair of ends this many
        frames apart, so slow drift over a long move does not add up to a transition.
        One transition at most is found per run.
    adaptive_k : float
        Robust standard deviations above the local median a cut must reach.
    adaptive_window : int
        Distances on each side of a candidate cut that give its local statistics.
    peak_ratio : float
        How many times larger than its close neighbours a cut's distance must be.

    Returns
    -------
    list[Shot]
        Contiguous shots covering frames ``0 .. len(signatures) - 1``, numbered from 1.

    References
    ----------
    Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
    full-motion video. Multimedia Systems, 1(1), 10-28 (twin comparison).
    Yeo, B.-L., & Liu, B. (1995). Rapid scene analysis on compressed video. IEEE TCSVT,
    5(6), 533-544 (a cut as a clear peak among its neighbours).
    """
    sigs = _stack_signatures(signatures)
    if not all(0 < t <= 1 for t in (cut_threshold, gradual_threshold, candidate_threshold)):
        raise ValueError("cut, gradual and candidate thresholds must lie in (0, 1]")
    if min(min_shot_length, max_transition_length, adaptive_window) < 1:
        raise ValueError("min_shot_length, max_transition_length and adaptive_window must be >= 1")
    if adaptive_k < 0 or peak_ratio < 1:
        raise ValueError("adaptive_k must be >= 0 and peak_ratio >= 1")
    n_frames = len(sigs)
    if n_frames == 1:
        return [Shot(1, 0, 0)]
    steps = 0.5 * np.abs(np.diff(sigs, axis=0)).sum(axis=1)
    is_cut = _cut_mask(steps, cut_threshold, adaptive_k, adaptive_window, peak_ratio)
    boundaries = [(int(i) + 1, float(steps[i])) for i in np.flatnonzero(is_cut)]
    blank = sigs.max(axis=1) >= _BLANK_SHARE
    in_run = ((steps > candidate_threshold) | (blank[:-1] & blank[1:])) & ~is_cut
    up_to, from_ = _end_means(sigs)
    for first, last in _candidate_runs(in_run, is_cut, min_shot_length):
        first, last, strength = _most_different_span(
            up_to, from_, first, last, max_transition_length
        )
        if strength > gradual_threshold:
            frame = _transition_frame(sigs, up_to[first], from_[last], first, last)
            boundaries.append((frame, strength))
    return shots_from_boundaries(_space_boundaries(boundaries, min_shot_length), n_frames)


def _stack_signatures(signatures: Sequence[np.ndarray]) -> np.ndarray:
    """Stack signatures into ``(n, bins)`` float32, checking they are alike and finite."""
    if len(signatures) == 0:
        raise ValueError("detect_shots needs at least one signature")
    shapes = {np.shape(s) for s in signatures}
    if len(shapes) != 1 or len(next(iter(shapes))) != 1:
        raise ValueError(f"signatures must be 1-D arrays of one length, got {sorted(shapes)}")
    sigs = np.asarray(signatures, dtype=np.float32)
    if not np.isfinite(sigs).all():
        raise ValueError("signatures contain NaN or infinity")
    return sigs


def _cut_mask(
    steps: np.ndarray, threshold: float, k: float, window: int, peak_ratio: float
) -> np.ndarray:
    """Mark the steps that are hard cuts (see :func:`detect_shots`)."""
    is_cut = np.zeros(len(steps), dtype=bool)
    for i in np.flatnonzero(steps > threshold):
        close = _around(steps, i, _PEAK_RADIUS)
        if close.size and steps[i] < peak_ratio * close.max():
            continue
        neighbours = _around(steps, i, window)
        median = np.median(neighbours)
        sigma = _MAD_TO_SIGMA * np.median(np.abs(neighbours - median))
        is_cut[i] = steps[i] > median + k * sigma
    return is_cut


def _around(values: np.ndarray, i: int, radius: int) -> np.ndarray:
    """Return the values within ``radius`` of index ``i``, without ``values[i]`` itself."""
    return np.concatenate([values[max(0, i - radius) : i], values[i + 1 : i + 1 + radius]])


def _candidate_runs(in_run: np.ndarray, is_cut: np.ndarray, max_gap: int) -> list[tuple[int, int]]:
    """Return ``(first, last)`` frames of the twin-comparison candidate runs.

    A run is a stretch of consecutive steps marked ``in_run``; runs with fewer than
    ``max_gap`` other steps and no cut between them are joined.
    """
    active = np.concatenate([[False], in_run, [False]])
    edges = np.flatnonzero(np.diff(active.astype(np.int8)))
    runs: list[tuple[int, int]] = []
    # Step i joins frames i and i + 1, so steps first .. end - 1 span frames first .. end.
    for first, last in zip(edges[::2].tolist(), edges[1::2].tolist()):
        if runs and first - runs[-1][1] < max_gap and not is_cut[runs[-1][1] : first].any():
            runs[-1] = (runs[-1][0], last)
        else:
            runs.append((first, last))
    return runs


def _end_means(sigs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(up_to, from_)``: for each frame, the mean signature of the
    :data:`_END_FRAMES` frames ending resp. starting there (fewer at the clip's ends)."""
    n_frames = len(sigs)
    totals = np.concatenate([np.zeros_like(sigs[:1]), np.cumsum(sigs, axis=0, dtype=np.float64)])
    frames = np.arange(n_frames)
    lows = np.maximum(frames + 1 - _END_FRAMES, 0)
    highs = np.minimum(frames + _END_FRAMES, n_frames)
    up_to = (totals[frames + 1] - totals[lows]) / (frames + 1 - lows)[:, None]
    from_ = (totals[highs] - totals[frames]) / (highs - frames)[:, None]
    return up_to.astype(np.float32), from_.astype(np.float32)


def _most_different_span(
    up_to: np.ndarray, from_: np.ndarray, first: int, last: int, max_length: int
) -> tuple[int, int, float]:
    """Return ``(start, end, distance)`` of the most different ends at most ``max_length``
    frames apart within ``first .. last`` (the run's own ends if it is that short)."""
    span = min(max_length, last - first)
    starts = np.arange(first, last - span + 1)
    distances = 0.5 * np.abs(from_[starts + span] - up_to[starts]).sum(axis=1)
    best = int(np.argmax(distances))
    return int(starts[best]), int(starts[best]) + span, float(distances[best])


def _transition_frame(
    sigs: np.ndarray, before: np.ndarray, after: np.ndarray, first: int, last: int
) -> int:
    """Return the frame in ``first + 1 .. last`` least like either end of a transition.

    ``before`` and ``after`` are the ends' signatures. The frame maximises
    ``min(distance to before, distance to after)``: the middle of a dissolve, the black
    of a fade (the middle one of a held black stretch, where several frames tie).
    """
    inner = sigs[first + 1 : last + 1]
    unlikeness = np.minimum(
        0.5 * np.abs(inner - before).sum(axis=1), 0.5 * np.abs(inner - after).sum(axis=1)
    )
    ties = np.flatnonzero(unlikeness >= unlikeness.max() - _TIE_TOLERANCE)
    return first + 1 + int(ties[len(ties) // 2])


def _space_boundaries(boundaries: list[tuple[int, float]], min_gap: int) -> list[int]:
    """Keep boundaries at least ``min_gap`` frames apart, preferring larger distances."""
    kept: list[int] = []
    for frame, _ in sorted(boundaries, key=lambda b: (-b[1], b[0])):
        if all(abs(frame - other) >= min_gap for other in kept):
            kept.append(frame)
    return sorted(kept)


def shots_from_boundaries(starts: Iterable[int], n_frames: int) -> list[Shot]:
    """Build contiguous shots from their start frames.

    Parameters
    ----------
    starts : iterable of int
        0-based first frames of the shots, strictly increasing, each in
        ``0 .. n_frames - 1``; frame 0 is added if missing.
    n_frames : int
        Number of frames in the clip, ``>= 1``.

    Returns
    -------
    list[Shot]
        Shots numbered from 1, the last one ending at ``n_frames - 1``.
    """
    if n_frames < 1:
        raise ValueError(f"n_frames must be >= 1, got {n_frames}")
    starts = [int(s) for s in starts]
    if any(b <= a for a, b in zip(starts, starts[1:])):
        raise ValueError(f"shot starts must be strictly increasing, got {starts}")
    if starts and not (0 <= starts[0] and starts[-1] < n_frames):
        raise ValueError(f"shot starts must lie in 0..{n_frames - 1}, got {starts}")
    if not starts or starts[0] != 0:
        starts.insert(0, 0)
    ends = [s - 1 for s in starts[1:]] + [n_frames - 1]
    return [Shot(i, s, e) for i, (s, e) in enumerate(zip(starts, ends), start=1)]


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
    _check_contiguous(shots)
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


def _check_contiguous(shots: Sequence[Shot]) -> None:
    """Raise ValueError unless ``shots`` cover frames 0.. without gaps or overlaps."""
    if not shots:
        raise ValueError("need at least one shot")
    expected_start = 0
    for shot in shots:
        if shot.start != expected_start or shot.end < shot.start:
            raise ValueError(
                f"shots must be contiguous from frame 0, got {shot} after frame {expected_start - 1}"
            )
        expected_start = shot.end + 1


def format_shot_table(shots: Sequence[Shot], fps: float) -> str:
    """Return a plain-text table of shots with frame ranges and SMPTE timecodes.

    Columns: shot number, first and last frame (0-based), frame count, and the SMPTE
    ST 12-1 timecodes of the first and of the last frame (:func:`frame_to_timecode`).
    """
    _check_contiguous(shots)
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
