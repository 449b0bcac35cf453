"""SMPTE timecode labels for frame indices (SMPTE ST 12-1).

A timecode is a *label* counted at an integer nominal rate, not a clock reading. For the
NTSC rates (24000/1001, 30000/1001, 60000/1001 frames/s) the label counts at 24, 30 or
60 frames per "second", so it runs slow against the wall clock by 1000/1001. Drop-frame
timecode corrects that for 29.97 and 59.94 by skipping frame *numbers* (never frames).
"""

from __future__ import annotations

# NTSC rates are n * 1000/1001 for these nominal rates; a file's rate is often stored
# rounded (29.97, 23.976, 59.94), hence the tolerance when recognising them.
_NTSC_NOMINAL = (24, 30, 48, 60, 120)
_NTSC_TOLERANCE = 0.01
# Frame numbers dropped at the start of each minute, for the drop-frame nominal rates.
_DROP_FRAMES = {30: 2, 60: 4}
_HOURS_PER_DAY = 24


def ntsc_nominal(fps: float) -> int | None:
    """The nominal integer rate n if ``fps`` is an NTSC rate n·1000/1001 (within 0.01), else None."""
    for nominal in _NTSC_NOMINAL:
        if abs(fps - nominal * 1000.0 / 1001.0) <= _NTSC_TOLERANCE:
            return nominal
    return None


def _timebase(fps: float) -> tuple[int, int]:
    """Return ``(nominal integer rate, frame numbers dropped per minute)`` for ``fps``."""
    nominal = ntsc_nominal(fps)
    if nominal is not None:
        return nominal, _DROP_FRAMES.get(nominal, 0)
    return max(1, round(fps)), 0


def frame_to_timecode(frame: int, fps: float) -> str:
    """Return the SMPTE ST 12-1 timecode label of a 0-based frame index.

    Rules (SMPTE ST 12-1):

    * Integer rates (24, 25, 30, 50, 60, ...) and other non-NTSC rates count non-drop at
      the nearest integer rate: ``HH:MM:SS:FF``.
    * 23.976 (24000/1001) counts non-drop at nominal 24 (there is no drop-frame mode for
      it), so its label runs 0.1 % slow against the clock.
    * 29.97 (30000/1001) and 59.94 (60000/1001) use drop-frame ``HH:MM:SS;FF``: frame
      numbers 00 and 01 (00-03 at 59.94) are skipped at the start of every minute except
      minutes 00, 10, 20, 30, 40 and 50. That drops 18 (36) numbers per ten minutes,
      which matches the 1000/1001 slow-down to within about 86 ms a day.

    NTSC rates are recognised within 0.01 frames/s (so 29.97 and 30000/1001 both count
    as drop-frame). The hours field wraps at 24, as the ST 12-1 time-of-day counter does.

    Parameters
    ----------
    frame : int
        0-based frame index, ``>= 0``.
    fps : float
        Frame rate in frames per second, ``> 0``.

    Returns
    -------
    str
        ``"HH:MM:SS:FF"`` (non-drop) or ``"HH:MM:SS;FF"`` (drop-frame).

    References
    ----------
    SMPTE ST 12-1:2014, Time and Control Code.
    """
    if isinstance(frame, bool) or int(frame) != frame:
        raise ValueError(f"frame must be an integer, got {frame!r}")
    frame = int(frame)
    if frame < 0:
        raise ValueError(f"frame must be >= 0, got {frame}")
    if not fps > 0:  # also rejects NaN
        raise ValueError(f"fps must be > 0, got {fps!r}")
    nominal, drop = _timebase(float(fps))
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
