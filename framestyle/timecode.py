"""SMPTE timecode labels for frames (SMPTE ST 12-1), and a clip's timecode.

A timecode is a *label* counted at an integer nominal rate, not a clock reading. For the
NTSC rates (24000/1001, 30000/1001, 60000/1001 frames/s) the label counts at 24, 30 or
60 frames per "second", so it runs slow against the wall clock by 1000/1001. Drop-frame
timecode corrects that for 29.97 and 59.94 by skipping frame *numbers* (never frames).

Here a label stands for a *frame count* from 00:00:00:00 (the frame that label names, counted
in real frames); a clip's frame at position k (0-based) is labelled ``start + k``, where
``start`` is the count of the clip's first label (:class:`ClipTimecode`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from fractions import Fraction

# NTSC rates are n * 1000/1001 for these nominal rates; a file's rate is often stored
# rounded (29.97, 23.976, 59.94), hence the tolerance when recognising them.
MAX_FPS = 1000.0
"""The highest frame rate a user may give: high-speed footage is shot faster but delivered and
checked at its playback rate; above this a rate is a typo (common practice, no standard)."""
_NTSC_NOMINAL = (24, 30, 48, 60, 120)
_NTSC_TOLERANCE = 0.01
# Frame numbers dropped at the start of each minute, for the drop-frame nominal rates.
_DROP_FRAMES = {30: 2, 60: 4}
_HOURS_PER_DAY = 24
# HH:MM:SS:FF, or HH:MM:SS;FF for drop-frame (the semicolon is the usual drop-frame mark,
# common practice; ffmpeg writes it so in its timecode tag).
_LABEL = re.compile(r"^(\d{2}):(\d{2}):(\d{2})([:;])(\d{2,3})$")


def ntsc_nominal(fps: float) -> int | None:
    """The nominal integer rate n if ``fps`` is an NTSC rate n·1000/1001 (within 0.01), else None."""
    for nominal in _NTSC_NOMINAL:
        if abs(fps - nominal * 1000.0 / 1001.0) <= _NTSC_TOLERANCE:
            return nominal
    return None


def exact_rate(fps: float) -> Fraction:
    """The frame rate as a fraction; rates stored rounded (23.976, 29.97) snap to n·1000/1001."""
    nominal = ntsc_nominal(fps)
    if nominal is not None:
        return Fraction(nominal * 1000, 1001)
    return Fraction(fps).limit_denominator(1001)


def _check_rate(fps: float) -> float:
    if isinstance(fps, bool) or not fps > 0 or fps == float("inf"):  # also rejects NaN
        raise ValueError(f"fps must be a finite number > 0, got {fps!r}")
    return float(fps)


def _timebase(fps: float, drop_frame: bool | None) -> tuple[int, int]:
    """Return ``(nominal integer rate, frame numbers dropped per minute)`` for ``fps``.

    ``drop_frame`` None counts drop-frame wherever the rate has it (29.97, 59.94).
    """
    nominal = ntsc_nominal(fps)
    drop = 0 if nominal is None else _DROP_FRAMES.get(nominal, 0)
    nominal = nominal or max(1, round(fps))
    if drop_frame and not drop:
        raise ValueError(f"drop-frame timecode exists only at 29.97 and 59.94 frames/s, not at {fps:g}")
    return nominal, drop if drop_frame is not False else 0


def frame_to_timecode(frame: int, fps: float, drop_frame: bool | None = None) -> str:
    """Return the SMPTE ST 12-1 timecode label of a frame count (0 = 00:00:00:00).

    Rules (SMPTE ST 12-1):

    * Integer rates (24, 25, 30, 50, 60, ...) and other non-NTSC rates count non-drop at
      the nearest integer rate: ``HH:MM:SS:FF``.
    * 23.976 (24000/1001) counts non-drop at nominal 24 (there is no drop-frame mode for
      it), so its label runs 0.1 % slow against the clock.
    * 29.97 (30000/1001) and 59.94 (60000/1001) use drop-frame ``HH:MM:SS;FF`` unless
      ``drop_frame=False``: frame numbers 00 and 01 (00-03 at 59.94) are skipped at the
      start of every minute except minutes 00, 10, 20, 30, 40 and 50. That drops 18 (36)
      numbers per ten minutes, which matches the 1000/1001 slow-down to within about 86 ms
      a day. Non-drop at these rates counts at nominal 30 (60).

    NTSC rates are recognised within 0.01 frames/s (so 29.97 and 30000/1001 both count
    as drop-frame). The hours field wraps at 24, as the ST 12-1 time-of-day counter does.

    Parameters
    ----------
    frame : int
        Frame count from 00:00:00:00, ``>= 0`` (a clip's 0-based frame index when its
        timecode starts at zero).
    fps : float
        Frame rate in frames per second, ``> 0``.
    drop_frame : bool or None
        None: drop-frame at 29.97 and 59.94, non-drop elsewhere; True: drop-frame (an error
        at other rates); False: non-drop.

    Returns
    -------
    str
        ``"HH:MM:SS:FF"`` (non-drop) or ``"HH:MM:SS;FF"`` (drop-frame).

    References
    ----------
    SMPTE ST 12-1:2014, Time and Control Code.

    Examples
    --------
    >>> frame_to_timecode(1800, 29.97)
    '00:01:00;02'
    >>> frame_to_timecode(1800, 29.97, drop_frame=False)
    '00:01:00:00'
    """
    if isinstance(frame, bool) or int(frame) != frame:
        raise ValueError(f"frame must be an integer, got {frame!r}")
    frame = int(frame)
    if frame < 0:
        raise ValueError(f"frame must be >= 0, got {frame}")
    nominal, drop = _timebase(_check_rate(fps), drop_frame)
    if drop:
        # Convert the real frame count to the label count by adding back the skipped
        # numbers: 9 * drop per full ten-minute block, then drop per started minute
        # after the first minute of the current block.
        frames_per_minute = 60 * nominal - drop
        frames_per_ten_minutes = 10 * 60 * nominal - 9 * drop
        blocks, rest = divmod(frame, frames_per_ten_minutes)
        frame += 9 * drop * blocks
        if rest >= drop:
            frame += drop * ((rest - drop) // frames_per_minute)
    ff = frame % nominal
    total_seconds = frame // nominal
    ss = total_seconds % 60
    mm = (total_seconds // 60) % 60
    hh = (total_seconds // 3600) % _HOURS_PER_DAY
    separator = ";" if drop else ":"
    return f"{hh:02d}:{mm:02d}:{ss:02d}{separator}{ff:02d}"


def is_drop_frame(label: str) -> bool:
    """Whether ``label`` is written as drop-frame (``HH:MM:SS;FF``)."""
    match = _LABEL.match(label.strip())
    if match is None:
        raise ValueError(f"{label!r} is not a timecode like 01:00:00:00 (or 01:00:00;00 for drop-frame)")
    return match[4] == ";"


def timecode_to_frame(label: str, fps: float) -> int:
    """Return the frame count (0 = 00:00:00:00) that a SMPTE ST 12-1 label names at ``fps``.

    The inverse of :func:`frame_to_timecode`. ``HH:MM:SS;FF`` reads as drop-frame (29.97
    and 59.94 only); ``HH:MM:SS:FF`` as non-drop at the nominal integer rate, also at
    29.97 and 59.94 (non-drop NTSC timecode). With drop-frame, the numbers skipped at each
    minute start (00-01 at 29.97, 00-03 at 59.94, not in minutes 00, 10, 20 ...) are no
    label and are refused.

    Parameters
    ----------
    label : str
        ``"HH:MM:SS:FF"`` or ``"HH:MM:SS;FF"``; hours 00-23, minutes and seconds 00-59,
        frames below the nominal rate.
    fps : float
        Frame rate in frames per second, ``> 0``.

    Returns
    -------
    int
        The frame count, ``>= 0``.

    Raises
    ------
    ValueError
        A malformed label, a field out of range for the rate (frames 25 at 25 fps, say), a
        drop-frame label at a rate without drop-frame, or a skipped drop-frame number.

    References
    ----------
    SMPTE ST 12-1:2014, Time and Control Code.

    Examples
    --------
    >>> timecode_to_frame("00:01:00;02", 29.97)
    1800
    >>> timecode_to_frame("01:00:00:00", 25)
    90000
    """
    drop_frame = is_drop_frame(label)
    hh, mm, ss, _, ff = _LABEL.match(label.strip()).groups()
    hh, mm, ss, ff = int(hh), int(mm), int(ss), int(ff)
    try:
        nominal, drop = _timebase(_check_rate(fps), drop_frame)
    except ValueError as exc:
        raise ValueError(f"{label!r} is drop-frame: {exc}") from None
    wrong = [f"{name} run 00-{limit - 1:02d}" for name, value, limit in
             (("hours", hh, _HOURS_PER_DAY), ("minutes", mm, 60), ("seconds", ss, 60), ("frames", ff, nominal))
             if value >= limit]
    if wrong:  # SMPTE ST 12-1's ranges (from memory): a day of hours, and frames under the nominal rate
        raise ValueError(f"{label!r} is not a timecode at {fps:g} frames/s ({', '.join(wrong)})")
    if drop and ss == 0 and mm % 10 != 0 and ff < drop:
        raise ValueError(f"{label!r} does not exist in drop-frame timecode: frames 00-{drop - 1:02d} are skipped"
                         " at the start of each minute not divisible by ten")
    minutes = 60 * hh + mm
    return (3600 * hh + 60 * mm + ss) * nominal + ff - drop * (minutes - minutes // 10)


def _frames_per_day(fps: float, drop_frame: bool | None) -> int:
    nominal, drop = _timebase(fps, drop_frame)
    return _HOURS_PER_DAY * 6 * (10 * 60 * nominal - 9 * drop)


@dataclass(frozen=True)
class ClipTimecode:
    """How a clip's frames are labelled: the frame at position k (0-based) is ``start + k``.

    Attributes
    ----------
    fps : the clip's frame rate, ``> 0``
    start : the first frame's label (a video's timecode tag, or the user's); None when the
        clip has none, and then labels count from 00:00:00:00 (drop-frame at 29.97 and 59.94)

    Examples
    --------
    >>> clock = ClipTimecode(25, "10:00:00:00")
    >>> clock.label(26), clock.position("10:00:01:01")
    ('10:00:01:01', 26)
    """

    fps: float
    start: str | None = None

    def __post_init__(self) -> None:
        _check_rate(self.fps)
        if self.start is not None:
            timecode_to_frame(self.start, self.fps)  # raises ValueError for a bad label

    @property
    def drop_frame(self) -> bool:
        """Whether the clip's labels are drop-frame: as its start label, else as the rate has it."""
        if self.start is not None:
            return is_drop_frame(self.start)
        return _timebase(self.fps, None)[1] > 0

    @property
    def first(self) -> int:
        """The frame count of the first frame's label (0 without a start label)."""
        return 0 if self.start is None else timecode_to_frame(self.start, self.fps)

    def label(self, position: int) -> str:
        """The label of the frame at ``position``; past 23:59:59 it wraps as the clock does."""
        if position < 0:
            raise ValueError(f"position must be >= 0, got {position}")
        count = (self.first + position) % _frames_per_day(self.fps, self.drop_frame)
        return frame_to_timecode(count, self.fps, self.drop_frame)

    def position(self, label: str) -> int:
        """The position a label names, counting on from the start across midnight (>= 0)."""
        count = timecode_to_frame(label, self.fps)
        return (count - self.first) % _frames_per_day(self.fps, self.drop_frame)
