"""Shot boundary detection: hard cuts and gradual transitions.

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
is missed; a user can correct that with a shot list (:func:`framestyle.shots.lists.parse_shot_file`)
or with :func:`framestyle.shots.lists.apply_overrides`.

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

from typing import Sequence

import cv2
import numpy as np

from framestyle.shots.shot import Shot, shots_from_boundaries

SIGNATURE_WIDTH = 160
"""Frames wider than this are downscaled to it (area averaging) before counting colours."""
HISTOGRAM_BINS = 4
"""Bins per RGB channel: the two most significant bits, 64 joint bins (Zhang et al. 1993)."""
_MAD_TO_SIGMA = 1.4826  # std of a normal distribution / its median absolute deviation
_PEAK_RADIUS = 2  # neighbours on each side a cut must clearly exceed
_TIE_TOLERANCE = 0.01  # distances this close count as equal when placing a boundary
_BLANK_SHARE = 0.95  # a frame with this much of it in one bin is blank (black, a flash)
_END_FRAMES = 3  # a transition's ends are compared as means of this many frames


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


def signature_distance(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Total-variation distance of signatures: half their L1 difference, in [0, 1].

    0 means the same colour distribution, 1 means no colour bin in common. ``a`` and ``b``
    are ``(..., bins)`` arrays that broadcast; the distance is taken over the last axis.
    """
    return 0.5 * np.abs(np.asarray(a, np.float32) - np.asarray(b, np.float32)).sum(axis=-1)


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
    steps = signature_distance(sigs[1:], sigs[:-1])
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
    distances = signature_distance(from_[starts + span], up_to[starts])
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
        signature_distance(inner, before), signature_distance(inner, after)
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


