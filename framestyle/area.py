"""The active picture area: the part of a frame inside letterbox or pillarbox bars.

Footage framed for another shape carries black bars (a 2.39:1 film in a 16:9 frame, a 4:3
clip in a 16:9 timeline). Those bars are not picture: an editor expects them to stay black
after the look is applied, and the style's Gram statistics (Gatys et al. 2016) should be
those of the picture, not of the picture and two black bands. A shot's bars are found from
frames spread over it and the solver works on the picture inside them; the bars are
delivered as the footage has them. Shot detection looks inside the bars the whole clip has.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from framestyle import io
from framestyle.finish.compose import to_display
from framestyle.settings import Settings
from framestyle.shots import Shot

BAR_LEVEL = 0.08
"""Brightest a bar's outermost row may be, in display-referred [0, 1] (its 99.5th percentile
in every frame looked at): black, or the 16/255 of limited-range video read without range
expansion (the 8-bit black level of ITU-R BT.709, from memory)."""

RINGING = 0.05
"""How much brighter than the outermost row a bar's rows may be: a video coder's ringing
beside the picture's edge (measured: up to 0.035 in an MPEG-4 Part 2 file written by OpenCV)."""

EDGE_ROWS = 4
"""Rows (or columns) beside a bar in which the picture must show its hard edge (the ringing
softens it over a coding block's few pixels)."""

BAR_MIN = 0.01
"""Least height (or width) of a bar, as a share of the frame's side: thinner dark edges are
an image's own (a lens's vignette, a sensor's dark rows) or too small to matter."""

PICTURE_MIN = 0.4
"""Least share of the frame's side left as picture: past it the dark edges are a dark scene."""

EDGE_STEP = 0.1
"""Least mean brightness, in some frame looked at, of the picture's first rows or columns
beside a bar, above the bar's: a bar ends in a hard edge, a dark scene fades into its dark
edges."""

SAMPLES = 12
"""Frames looked at across a shot to find its bars."""

CLIP_SAMPLES = 48
"""Frames looked at across a whole clip to find the bars all its shots have."""


@dataclass(frozen=True)
class PictureArea:
    """A rectangle of a frame in source pixels: ``x, y`` its top left, ``width × height``."""

    x: int
    y: int
    width: int
    height: int

    def crop(self, image: np.ndarray) -> np.ndarray:
        """The area of an ``(H, W, ...)`` image (a view, not a copy)."""
        return image[self.y:self.y + self.height, self.x:self.x + self.width]

    def mask(self, height: int, width: int) -> np.ndarray:
        """``(height, width)`` float32: 1 inside the area, 0 in the bars."""
        inside = np.zeros((height, width), np.float32)
        self.crop(inside)[...] = 1.0
        return inside

    def label(self) -> str:
        """``WxH+X+Y``, as a log line gives a rectangle."""
        return f"{self.width}x{self.height}+{self.x}+{self.y}"


def _dark_run(bright: np.ndarray) -> int:
    """How many of the leading entries of ``bright`` (one per row or column, from the frame's
    edge inward) are as dark as a bar: the first at most :data:`BAR_LEVEL`, the others at
    most :data:`RINGING` above it."""
    if bright[0] > BAR_LEVEL:
        return 0
    light = np.flatnonzero(bright > max(BAR_LEVEL, bright[0] + RINGING))
    return int(light[0]) if light.size else len(bright)


def _bars(bright: np.ndarray, mean: np.ndarray) -> int:
    """The bar on each end of one axis of the frame, in pixels (0: none).

    ``bright`` : (N,) the brightest of the frames' robust row (or column) maxima, edge to edge
    ``mean`` : (N,) the brightest of the frames' row (or column) means

    Letterbox and pillarbox bars come in pairs of one size (a picture centred in the frame):
    the smaller of the two dark runs is taken for both, so a picture dark at one edge is not
    cut into.
    """
    n = len(bright)
    bar = min(_dark_run(bright), _dark_run(bright[::-1]))
    if bar < max(2, BAR_MIN * n) or n - 2 * bar < PICTURE_MIN * n:
        return 0
    # the picture begins with a hard edge on at least one side in some frame
    inside = max(mean[bar:bar + EDGE_ROWS].max(), mean[n - bar - EDGE_ROWS:n - bar].max())
    return bar if inside - max(mean[0], mean[-1]) >= EDGE_STEP else 0


def _near_max(value: np.ndarray, axis: int) -> np.ndarray:
    """The 99.5th percentile of ``value`` (H, W) along ``axis`` (the nearest sample: a
    partial sort, three times quicker than :func:`numpy.percentile` at 1280×720)."""
    n = value.shape[axis]
    k = n - 1 - int(0.005 * n)
    return np.take(np.partition(value, k, axis=axis), k, axis=axis)


@dataclass(frozen=True)
class _Profile:
    """The brightness of each row and column of some frames, the brightest frame's each:
    ``rows`` (H,) and ``columns`` (W,) the 99.5th percentile of the channels' maximum along
    them (a few pixels of coding noise do not count), ``row_mean`` and ``column_mean`` their means."""

    rows: np.ndarray
    columns: np.ndarray
    row_mean: np.ndarray
    column_mean: np.ndarray

    @classmethod
    def of(cls, frame: np.ndarray) -> "_Profile":
        """The profile of one display-referred RGB frame ``(H, W, 3)``."""
        value = np.maximum(np.maximum(frame[..., 0], frame[..., 1]), frame[..., 2])  # (H, W) the brightest channel
        return cls(_near_max(value, 1), _near_max(value, 0), value.mean(axis=1), value.mean(axis=0))

    def merge(self, other: "_Profile | None") -> "_Profile":
        """The profile of both sets of frames."""
        if other is None:
            return self
        return _Profile(np.maximum(self.rows, other.rows), np.maximum(self.columns, other.columns),
                        np.maximum(self.row_mean, other.row_mean), np.maximum(self.column_mean, other.column_mean))

    def area(self) -> PictureArea | None:
        """The picture inside this profile's bars, or None (no side has one)."""
        top, left = _bars(self.rows, self.row_mean), _bars(self.columns, self.column_mean)
        if not (top or left):
            return None
        height, width = len(self.rows), len(self.columns)
        return PictureArea(left, top, width - 2 * left, height - 2 * top)

    def dark_outside(self, area: PictureArea) -> bool:
        """Whether ``area``'s bars are as dark as bars in these frames (its edge need not show)."""
        return all(_dark_run(profile) >= bar and _dark_run(profile[::-1]) >= bar
                   for profile, bar in ((self.rows, area.y), (self.columns, area.x)))


def find_area(frames: Iterable[np.ndarray]) -> PictureArea | None:
    """The picture area inside black bars common to all ``frames``, or None where there are none.

    Parameters
    ----------
    frames : display-referred RGB ``(H, W, 3)`` float in [0, 1], all one size (a shot's, spread
        over it: a bar must be dark in every one)

    Returns
    -------
    PictureArea, or None if no side has a bar (see :data:`BAR_LEVEL`, :data:`RINGING`,
    :data:`BAR_MIN`, :data:`PICTURE_MIN`, :data:`EDGE_STEP`)
    """
    profile = None
    for frame in frames:
        profile = _Profile.of(frame).merge(profile)
    return None if profile is None else profile.area()


_CLIP = 0  # the whole clip's key among the spans of _profiles (shots count from 1)


def _profiles(source: io.FrameSource, spans: dict[int, tuple[tuple[int, int], int]]) -> dict[int, _Profile]:
    """The profile of frames spread evenly over spans, by key: ``spans[key]`` is
    ``((first, last), count)``, 0-based and inclusive, up to ``count`` frames. One pass over
    the frames, each frame's profile taken once and no frame kept."""
    picked: dict[int, list[int]] = {}  # frame index -> the spans it is a sample of
    for key, ((first, last), count) in spans.items():
        for i in np.unique(np.linspace(first, last, count).round().astype(int)):
            picked.setdefault(int(i), []).append(key)
    profiles: dict[int, _Profile] = {}
    for index, frame in io.pick_frames(source, picked):
        profile = _Profile.of(to_display(frame, source.linear))
        for key in picked[index]:
            profiles[key] = profile.merge(profiles.get(key))
    return profiles


def shot_areas(source: io.FrameSource, shots: Sequence[Shot], settings: Settings) -> dict[int, PictureArea | None]:
    """Each shot's picture area (by shot index) where its ``picture_area`` setting is "auto",
    None (the whole frame) where it is "full" or no bars are found. A shot's bars are found
    from :data:`SAMPLES` frames spread over it; where that finds none, the bars the whole
    clip has (:func:`clip_area`) are taken if they are dark in the shot's frames too: a dark
    scene of a letterboxed film shows no hard edge of its own. One pass over the frames."""
    spans = {shot.index: (shot.start, shot.end) for shot in shots
             if settings.for_shot(shot.index).picture_area == "auto"}
    if not spans:
        return {shot.index: None for shot in shots}
    profiles = _profiles(source, {**{key: (span, SAMPLES) for key, span in spans.items()},
                                  _CLIP: ((0, source.count - 1), CLIP_SAMPLES)})
    clip = profiles.pop(_CLIP).area()
    areas = {}
    for key, profile in profiles.items():
        own = profile.area()
        areas[key] = own if own is not None or clip is None or not profile.dark_outside(clip) else clip
    return {shot.index: areas.get(shot.index) for shot in shots}


def clip_area(source: io.FrameSource) -> PictureArea | None:
    """The picture inside bars the whole clip has (:data:`CLIP_SAMPLES` frames spread over it),
    or None: shot detection compares the pictures, not their bars."""
    return _profiles(source, {_CLIP: ((0, source.count - 1), CLIP_SAMPLES)})[_CLIP].area()
