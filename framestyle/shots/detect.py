"""Shot boundary detection: hard cuts and gradual transitions.

Each frame is reduced to a small signature (:func:`frame_signature`): a joint RGB histogram,
which says *what colours* are in the frame, and a 16×9 luma layout, which says *where the
light and dark parts are*. A caller streams a clip through :func:`frame_signature` and keeps
only the signatures (208 numbers a frame). :func:`signature_distance` compares two frames:
the total-variation distance of their histograms plus, weighted by :data:`LAYOUT_WEIGHT`, the
mean absolute difference of their layouts, scaled to [0, 1].

A colour histogram changes little when the camera or the things in view move (Swain &
Ballard 1991), which is why it copes with motion, and also why it cannot tell a wide shot
from a closer shot of the same set: both have the same colours. The layout tells them apart,
because a new framing puts the large light and dark shapes in other places; but it also
changes under motion. So no decision rests on the size of one change, only on how it stands
out from the changes around it:

* **Hard cuts.** The distance between two consecutive frames is at least ``cut_threshold``
  and at least ``peak_ratio`` times every other step within ``peak_window`` frames: the
  sliding-window test of Yeo & Liu (1995). Fast pans, camera shake and objects crossing the
  frame give large steps, but many in a row, so none stands out; a one-frame flash gives
  two equal steps (into it and out of it), so neither does. A shot of a few frames between
  two others (an insert) gives the same pair of steps, but the picture does not come back
  after it: two steps that stand out together, around frames unlike each other, are its
  cuts (:func:`_short_runs`). Where the picture does come back (a flash, a cutaway of a
  few frames to another angle and back), the frames stay in the shot: the render solves
  them apart and goes on past them (:mod:`framestyle.shots.continuity`); the steps into
  and out of them are no cut, and a cut beside them need not stand out from them.
* **Gradual transitions** (fades through black, cross-dissolves) follow the twin-comparison
  idea of Zhang, Kankanhalli & Smoliar (1993): a transition is a stretch of frames whose
  *two ends* differ by more than ``gradual_threshold``, though no single step does; here
  the ends must also differ ``peak_ratio`` times more than any step just outside the
  stretch, so flicker and motion around it do not count. Camera motion too makes distant
  frames differ, so the stretch must fit the production model of Hampapur, Jain &
  Weymouth (1995): every frame inside is a mix of the two ends (a dissolve), or of an end
  and the blank frames between (a fade through black), the mix moving steadily from one
  end to the other. A pan's or a zoom's middle frame is no such mix. The boundary goes to
  the middle of a fade's blank frames, or to a dissolve's frame least like either end.
* **The clip's own fades.** A fade in from black at the clip's start or out to it at its
  end has no shot on its far side, and no boundary. Its frames are found as
  :mod:`framestyle.shots.fades` finds a shot's (from the layouts) and left out of the
  search for transitions, where, all changing together, they passed for parts of one (a
  dissolve beside them was lost, a fade through black got its boundary moved off its
  black frames); and a step into a frame under half the fade's level is no cut, as its
  colours cross the histogram's bins all at once.

References
----------
Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
full-motion video. Multimedia Systems, 1(1), 10-28.
Yeo, B.-L., & Liu, B. (1995). Rapid scene analysis on compressed video. IEEE Trans.
Circuits and Systems for Video Technology, 5(6), 533-544.
Hampapur, A., Jain, R., & Weymouth, T. E. (1995). Production model based digital video
segmentation. Multimedia Tools and Applications, 1(1), 9-46.
Swain, M. J., & Ballard, D. H. (1991). Color indexing. International Journal of
Computer Vision, 7(1), 11-32.
"""

from __future__ import annotations

from typing import Sequence

import cv2
import numpy as np

from framestyle.shots.fades import DARK, fade_gains
from framestyle.shots.shot import Shot, shots_from_boundaries

SIGNATURE_WIDTH = 160
"""Frames wider than this are downscaled to it (area averaging) before counting colours."""
HISTOGRAM_BINS = 4
"""Bins per RGB channel: the two most significant bits, 64 joint bins (Zhang et al. 1993)."""
LAYOUT_SIZE = (16, 9)
"""``(width, height)`` of the luma layout: coarse enough that grain and small motion do not
change it, fine enough that a reframing moves its large shapes by whole cells."""
LAYOUT_WEIGHT = 2.0
"""Weight of the layout difference against the histogram distance in
:func:`signature_distance`."""
PEAK_WINDOW = 4
"""Steps on each side of a candidate cut it must stand out from (``detect_shots``'s default
``peak_window``)."""
_COLOURS = HISTOGRAM_BINS**3  # a signature is the histogram, then the layout
_BLANK_SHARE = 0.95  # a frame with this much of it in one colour bin is blank (black, a flash)
_END_FRAMES = 3  # a transition's ends are medians of this many frames
_TIE_TOLERANCE = 0.01  # distances this close count as equal when placing a boundary
_MAX_MIX_STEP = 0.5  # no frame of a transition moves over half the way between its ends at once


def frame_signature(frame: np.ndarray) -> np.ndarray:
    """Return the signature of one frame: its colour histogram and its luma layout.

    The frame is downscaled to :data:`SIGNATURE_WIDTH` pixels wide with area averaging
    (which also averages out grain that would jitter pixels across bin edges) and clipped to
    [0, 1]. The histogram counts it in :data:`HISTOGRAM_BINS` equal bins per channel over
    [0, 1] (1.0 falls in the last bin, as ``np.histogramdd`` counts it); the layout is its
    luma (ITU-R BT.601 weights, as OpenCV's ``COLOR_RGB2GRAY``) area-averaged to
    :data:`LAYOUT_SIZE`, whatever the frame's aspect ratio.

    Parameters
    ----------
    frame : np.ndarray
        ``(H, W, 3)`` float RGB image in [0, 1].

    Returns
    -------
    np.ndarray
        ``(HISTOGRAM_BINS ** 3 + 16 * 9,)`` float32: the histogram, summing to 1, bin
        ``(r * B + g) * B + b``; then the layout in [0, 1], row by row.

    References
    ----------
    Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
    full-motion video. Multimedia Systems, 1(1), 10-28 (64-bin colour code).
    ITU-R Recommendation BT.601 (luma from R'G'B').
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
    frame = np.clip(frame, 0.0, 1.0)
    levels = np.minimum(frame * HISTOGRAM_BINS, HISTOGRAM_BINS - 1).astype(np.intp)
    codes = (levels[..., 0] * HISTOGRAM_BINS + levels[..., 1]) * HISTOGRAM_BINS + levels[..., 2]
    counts = np.bincount(codes.ravel(), minlength=_COLOURS)
    luma = cv2.cvtColor(frame, cv2.COLOR_RGB2GRAY)
    layout = cv2.resize(luma, LAYOUT_SIZE, interpolation=cv2.INTER_AREA)
    return np.concatenate([counts / codes.size, layout.ravel()]).astype(np.float32)


def signature_distance(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Distance of signatures in [0, 1]: the histograms' total-variation distance (half
    their L1 difference) plus :data:`LAYOUT_WEIGHT` times the layouts' mean absolute
    difference, over ``1 + LAYOUT_WEIGHT``.

    0 means the same colours in the same places; 1 means no colour in common and every
    layout cell from black to white. ``a`` and ``b`` are ``(..., n)`` arrays that
    broadcast; the distance is taken over the last axis.
    """
    a, b = np.asarray(a, np.float32), np.asarray(b, np.float32)
    colour = 0.5 * np.abs(a[..., :_COLOURS] - b[..., :_COLOURS]).sum(axis=-1)
    layout = np.abs(a[..., _COLOURS:] - b[..., _COLOURS:]).mean(axis=-1)
    return (colour + LAYOUT_WEIGHT * layout) / (1 + LAYOUT_WEIGHT)


def detect_shots(
    signatures: Sequence[np.ndarray],
    cut_threshold: float = 0.015,
    gradual_threshold: float = 0.2,
    min_shot_length: int = 4,
    max_transition_length: int = 48,
    peak_ratio: float = 1.75,
    peak_window: int = PEAK_WINDOW,
    blend_tolerance: float = 0.3,
) -> list[Shot]:
    """Split a clip into shots from its per-frame signatures.

    ``d[i]`` below is :func:`signature_distance` between frames ``i`` and ``i + 1``; a
    boundary at frame ``j`` means a new shot starts at ``j``.

    Parameters
    ----------
    signatures : sequence of np.ndarray
        One :func:`frame_signature` per frame, in order; at least one.
    cut_threshold : float
        Least ``d[i]`` for a hard cut. ``d[i]`` must also be at least ``peak_ratio`` times
        every other step within ``peak_window`` frames of it.
    gradual_threshold : float
        Least distance between the two ends of a gradual transition (twin comparison's
        high threshold). Each end is the element-wise median signature of three frames
        on its side (within the same cut-free stretch), so one odd frame does not decide it.
    min_shot_length : int
        Least number of frames between two boundaries; of two closer ones the one with
        the larger distance is kept, except the two cuts of an insert (a shot under
        ``peak_window`` frames, which the cut test cannot see), which stand together.
        Boundaries near the clip's ends are kept. 4, the cut test's window: at 8 a shot
        of 5-7 frames between two others (rapid cutting) lost a cut and joined a
        neighbour (real footage, tests/test_shot_detection_real.py); the 50 evaluation
        edits (benchmarks/shot_detection.py) come out the same at 4 and 8.
    max_transition_length : int
        Longest transition looked for, in frames between its two ends.
    peak_ratio : float
        How many times larger than every other step in its window a cut's step must be.
    peak_window : int
        Steps on each side of a candidate cut it must stand out from.
    blend_tolerance : float
        Largest misfit of a frame inside a transition to the closest mix of its ends (or
        of an end and the blank frames inside), as a fraction of the difference of the
        two; besides, no frame may move more than half the way from one end to the other
        at once (see :func:`_blend_fit`).

    Returns
    -------
    list[Shot]
        Contiguous shots covering frames ``0 .. len(signatures) - 1``, numbered from 1.

    References
    ----------
    Zhang, H. J., Kankanhalli, A., & Smoliar, S. W. (1993). Automatic partitioning of
    full-motion video. Multimedia Systems, 1(1), 10-28 (twin comparison).
    Yeo, B.-L., & Liu, B. (1995). Rapid scene analysis on compressed video. IEEE TCSVT,
    5(6), 533-544 (a cut as the clear maximum of a sliding window).
    Hampapur, A., Jain, R., & Weymouth, T. E. (1995). Production model based digital
    video segmentation. Multimedia Tools and Applications, 1(1), 9-46 (fades and
    dissolves as mixes of their ends).
    """
    sigs = _stack_signatures(signatures)
    if not all(0 < t <= 1 for t in (cut_threshold, gradual_threshold)):
        raise ValueError("cut and gradual thresholds must lie in (0, 1]")
    if min(min_shot_length, max_transition_length, peak_window) < 1:
        raise ValueError("min_shot_length, max_transition_length and peak_window must be >= 1")
    if peak_ratio < 1 or blend_tolerance <= 0:
        raise ValueError("peak_ratio must be >= 1 and blend_tolerance > 0")
    n_frames = len(sigs)
    if n_frames == 1:
        return [Shot(1, 0, 0)]
    steps = signature_distance(sigs[1:], sigs[:-1])
    inserts, returns = _short_runs(sigs, steps, cut_threshold, peak_ratio, peak_window)
    cuts = np.flatnonzero(_cut_mask(steps, returns, cut_threshold, peak_ratio, peak_window)) + 1
    # the clip's own fade in from black and out to it (fades.py) have no shot on their far side;
    # their frames, all changing together, would pass for parts of transitions, and their dark
    # frames' colours, crossing the histogram's bins at once, for cuts
    gains = fade_gains(sigs[:, _COLOURS:].reshape(n_frames, LAYOUT_SIZE[1], LAYOUT_SIZE[0]))
    unfaded = np.flatnonzero(gains == 1)
    opening, closing = (unfaded[0], unfaded[-1]) if unfaded.size else (n_frames, -1)
    cuts = np.union1d(cuts, inserts).astype(np.intp)
    cuts = cuts[gains[cuts] >= DARK]
    boundaries = [(int(c), float(steps[c - 1])) for c in cuts]
    blank = sigs[:, :_COLOURS].max(axis=1) >= _BLANK_SHARE
    up_to, from_ = _ends(sigs, cuts)
    for first, last in zip([0, *cuts.tolist()], [*(cuts - 1).tolist(), n_frames - 1]):
        first, last = max(first, opening), min(last, closing)
        for start, end, strength in _transitions(
            sigs, steps, up_to, from_, blank, first, last,
            gradual_threshold, peak_ratio, max_transition_length, blend_tolerance,
        ):
            boundaries.append((_transition_frame(sigs, up_to[start], from_[end], start, end, blank), strength))
    pairs = {frozenset(pair) for pair in inserts.reshape(-1, 2).tolist()}
    return shots_from_boundaries(_space_boundaries(boundaries, min_shot_length, pairs), n_frames)


def _stack_signatures(signatures: Sequence[np.ndarray]) -> np.ndarray:
    """Stack signatures into ``(n, bins)`` float32, checking they are alike and finite."""
    if len(signatures) == 0:
        raise ValueError("detect_shots needs at least one signature")
    shapes = {np.shape(s) for s in signatures}
    expected = (_COLOURS + LAYOUT_SIZE[0] * LAYOUT_SIZE[1],)
    if shapes != {expected}:
        raise ValueError(f"signatures must be frame_signature arrays of shape {expected}, got {sorted(shapes)}")
    sigs = np.asarray(signatures, dtype=np.float32)
    if not np.isfinite(sigs).all():
        raise ValueError("signatures contain NaN or infinity")
    return sigs


def _cut_mask(steps: np.ndarray, returns: np.ndarray, threshold: float, ratio: float, window: int) -> np.ndarray:
    """Mark the steps that are hard cuts (see :func:`detect_shots`). The steps in ``returns``
    (into and out of a picture that comes back: a flash, a short cutaway) are none, and no
    cut needs to stand out from them: white frames four frames before a cut between angles
    of a street hid it (a music-video edit of ``bikes.mp4``, tests/test_shot_detection_real.py)."""
    apart = steps.copy()
    apart[returns] = 0.0
    before, after = _running_max(apart, window)
    mask = (steps >= threshold) & (steps >= ratio * np.maximum(before[:-1], after[1:]))
    mask[returns] = False
    return mask


def _short_runs(sigs: np.ndarray, steps: np.ndarray, threshold: float, ratio: float,
                window: int) -> tuple[np.ndarray, np.ndarray]:
    """Cuts around a shot shorter than ``window`` frames between two others (a flash-frame
    insert, a music video's rapid cutting), which the sliding-window test misses: its two
    steps stand out together, neither from the other. They are told from a flash by what
    is on either side: after a flash the picture comes back, after an insert it does not.
    For steps ``i < j`` under ``window`` apart that are both at least ``threshold`` and
    ``ratio`` times every other step within ``window`` of them (those between them too),
    and whose outer frames ``i`` and ``j + 1`` differ by ``ratio`` times as much as frames
    as far apart do by motion alone (the mean of that distance measured just before ``i``
    and just after ``j + 1``), returns the first frames after both (``i + 1``, ``j + 1``).
    Second, it returns the steps ``i .. j`` of the other runs the picture comes back from:
    outer frames ``ratio`` times nearer than either jump, the jumps standing out from every
    step around but one (a cut may stand beside a flash, larger than its jumps); where the
    footage moves fast its outer frames may differ ``ratio`` times as much as the motion
    (1.96 times around a 2-frame cutaway 4 frames after a cut between angles of the street).
    :func:`_cut_mask` makes no cut of them and does not measure a cut against them.
    On real footage the outer frames of 3-frame inserts between angles of a moving scene
    differed 2.1-19 times as much as the motion, around white frames and camera flashes
    0.7-1.2 times (``tests/footage_edits.py``)."""
    found, back = [], []
    for i in np.flatnonzero(steps >= threshold):
        for j in range(i + 1, min(i + window, len(steps))):
            if steps[j] < threshold:
                continue
            around = np.delete(steps[max(0, i - window):j + window + 1], [i - max(0, i - window), j - max(0, i - window)])
            others = around.max(initial=0.0)
            # a picture that comes back may stand beside a cut, which is larger than its own steps
            ranked = np.sort(around)
            others_but_one = ranked[-2] if len(ranked) > 1 else 0.0
            span = j + 1 - i  # frames i and j + 1 are this far apart
            motion = [float(signature_distance(sigs[a], sigs[a + span])) for a in (i - span, j + 1) if
                      0 <= a and a + span < len(sigs)]
            moved = float(np.mean(motion)) if motion else others * span
            change = float(signature_distance(sigs[i], sigs[j + 1]))
            jumps = min(steps[i], steps[j])
            if change >= max(threshold, ratio * moved) and jumps >= max(threshold, ratio * others):
                found += [i + 1, j + 1]  # another picture after, both steps standing out: an insert
            elif ratio * change <= jumps and jumps >= max(threshold, ratio * others_but_one):
                back += range(i, j + 1)  # the picture comes back, nearer to the one before than either jump
    return np.asarray(found, np.intp), np.asarray(back, np.intp)


def _running_max(values: np.ndarray, width: int) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(before, after)``: for each ``k`` in ``0 .. len(values)``, the largest of
    ``values[k - width : k]`` resp. of ``values[k : k + width]`` (0 where there is none)."""
    padded = np.concatenate([np.zeros(width), values, np.zeros(width)])
    windows = np.lib.stride_tricks.sliding_window_view(padded, width).max(axis=1)
    return windows[: len(values) + 1], windows[width:]


def _ends(sigs: np.ndarray, cuts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Return ``(up_to, from_)``: for each frame, the element-wise median signature of the
    :data:`_END_FRAMES` frames ending resp. starting there, never reaching across a cut
    (``cuts`` are the first frames of shots) nor the clip's ends, where fewer are used.
    A median, so one odd frame (a flash) does not move an end."""
    n_frames = len(sigs)
    shot_first = np.zeros(n_frames, dtype=np.intp)
    shot_first[cuts] = cuts
    shot_first = np.maximum.accumulate(shot_first)
    shot_last = np.full(n_frames, n_frames - 1, dtype=np.intp)
    shot_last[cuts - 1] = cuts - 1
    shot_last = np.minimum.accumulate(shot_last[::-1])[::-1]
    frames = np.arange(n_frames)
    offsets = np.arange(_END_FRAMES)
    # Indices of each window, clamped into the shot: repeating the frame nearest the cut
    # keeps the median among the shot's own frames.
    before = np.maximum(frames[:, None] - offsets, shot_first[:, None])
    after = np.minimum(frames[:, None] + offsets, shot_last[:, None])
    return np.median(sigs[before], axis=1), np.median(sigs[after], axis=1)


def _transitions(
    sigs: np.ndarray, steps: np.ndarray, up_to: np.ndarray, from_: np.ndarray,
    blank: np.ndarray, first: int, last: int, threshold: float, ratio: float,
    max_length: int, tolerance: float,
) -> list[tuple[int, int, float]]:
    """Return ``(start, end, strength)`` of the gradual transitions in frames ``first .. last``.

    Every span of ``2 .. max_length`` frames whose ends differ by more than ``threshold``,
    and by ``ratio`` times more than any step within :data:`_END_FRAMES` frames outside
    it (so that it stands out against the flicker and motion around it, as twin
    comparison asks of its runs), is a candidate; from the most different down, a
    candidate that fits the production model (:func:`_blend_fit`) and overlaps no span
    taken before is taken. Taken spans less than :data:`_END_FRAMES` apart are joined
    into one transition.
    """
    # The largest step among the _END_FRAMES before resp. after each frame of the stretch.
    before_max, after_max = _running_max(steps[first:last], _END_FRAMES)
    candidates = []
    for length in range(2, min(max_length, last - first) + 1):
        starts = np.arange(first, last - length + 1)
        ends = starts + length
        strengths = signature_distance(up_to[starts], from_[ends])
        around = np.maximum(before_max[starts - first], after_max[ends - first])
        keep = (strengths > threshold) & (strengths >= ratio * around)
        candidates += zip(strengths[keep].tolist(), starts[keep].tolist(), [length] * int(keep.sum()))
    taken: list[tuple[int, int, float]] = []
    for strength, start, length in sorted(candidates, reverse=True):
        end = start + length
        if any(start < other_end and other_start < end for other_start, other_end, _ in taken):
            continue
        misfit, jump = _blend_fit(sigs, up_to[start], from_[end], start, end, blank)
        if misfit <= tolerance and jump <= _MAX_MIX_STEP:
            taken.append((start, end, strength))
    # Spans closer than an end's reach see into each other: parts of one transition.
    merged: list[tuple[int, int, float]] = []
    for start, end, strength in sorted(taken):
        if merged and start - merged[-1][1] < _END_FRAMES:
            merged[-1] = (merged[-1][0], max(end, merged[-1][1]), max(strength, merged[-1][2]))
        else:
            merged.append((start, end, strength))
    return merged


def _blend_fit(
    sigs: np.ndarray, before: np.ndarray, after: np.ndarray, first: int, last: int,
    blank: np.ndarray,
) -> tuple[float, float]:
    """How well frames ``first + 1 .. last - 1`` fit a dissolve or a fade between the ends.

    The production model of Hampapur et al. (1995): a dissolve's frames are mixes
    ``(1 - a) * before + a * after`` with ``a`` rising from 0 to 1; a fade's frames before
    its blank frames are mixes of ``before`` and the blank (their mean), those after are
    mixes of the blank and ``after``. Each frame gets the closest mix of its pair (least
    squares on the layouts, ``a`` in [0, 1]).

    Returns
    -------
    misfit : float
        The largest mean absolute layout difference of a frame from its mix, over that of
        the pair (0 for an exact dissolve or fade, or with no frame inside).
    jump : float
        The largest rise or fall of ``a`` from one frame to the next, counting ``a = 0`` at
        the first end and ``a = 1`` at the second (or at the blank): near 1 where a frame
        jumps from one end to the other, as across a flash or a missed cut.
    """
    inner = np.arange(first + 1, last)
    layouts = sigs[:, _COLOURS:]
    start, end = before[_COLOURS:], after[_COLOURS:]
    blanks = inner[blank[inner]]
    if blanks.size:
        black = layouts[blanks].mean(axis=0)
        pieces = [(inner[inner < blanks[0]], start, black), (inner[inner > blanks[-1]], black, end)]
    else:
        pieces = [(inner, start, end)]
    misfit, jump = 0.0, 0.0
    for frames, low, high in pieces:
        span = high - low
        mix = np.clip((layouts[frames] - low) @ span / max(float(span @ span), 1e-9), 0.0, 1.0)
        residual = np.abs(layouts[frames] - low - mix[:, None] * span).mean(axis=1)
        if frames.size:
            misfit = max(misfit, float(residual.max()) / max(float(np.abs(span).mean()), 1e-3))
        jump = max(jump, float(np.abs(np.diff(np.concatenate([[0.0], mix, [1.0]]))).max()))
    return misfit, jump


def _transition_frame(
    sigs: np.ndarray, before: np.ndarray, after: np.ndarray, first: int, last: int,
    blank: np.ndarray,
) -> int:
    """Return the frame where a transition spanning ``first .. last`` puts its boundary.

    A fade's boundary goes to the middle of its blank frames: the whole blank stretch the
    span reaches, which may go on past its ends (a fade out and a fade in found as two
    spans then agree on one boundary). Otherwise it goes to the frame in
    ``first + 1 .. last`` least like either end (``before`` and ``after`` are the ends'
    signatures), the one maximising ``min(distance to before, distance to after)``: the
    middle of a dissolve.
    """
    blanks = np.flatnonzero(blank[first : last + 1]) + first
    if blanks.size:
        low, high = int(blanks[0]), int(blanks[-1])
        while low > 0 and blank[low - 1]:
            low -= 1
        while high + 1 < len(blank) and blank[high + 1]:
            high += 1
        return max(1, (low + high + 1) // 2)
    inner = sigs[first + 1 : last + 1]
    unlikeness = np.minimum(
        signature_distance(inner, before), signature_distance(inner, after)
    )
    ties = np.flatnonzero(unlikeness >= unlikeness.max() - _TIE_TOLERANCE)
    return first + 1 + int(ties[len(ties) // 2])


def _space_boundaries(boundaries: list[tuple[int, float]], min_gap: int,
                      inserts: set[frozenset[int]] = frozenset()) -> list[int]:
    """Keep boundaries at least ``min_gap`` frames apart, preferring larger distances; the two
    cuts of an insert (a pair in ``inserts``) need not be that far from each other."""
    kept: list[int] = []
    for frame, _ in sorted(boundaries, key=lambda b: (-b[1], b[0])):
        if all(abs(frame - other) >= min_gap or frozenset((frame, other)) in inserts for other in kept):
            kept.append(frame)
    return sorted(kept)
