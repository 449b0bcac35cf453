"""What the render report says in numbers: how far the render is, and each shot's per-frame figures.

Pure functions over the manifest (``framestyle.json``) and the shots' records (see
:mod:`framestyle.store`): nothing here reads frames or writes files. A frame's record entry
holds ``iterations``, ``seconds``, ``warp_error`` (the warping error of Lai et al. 2018
between the frame and the one before it, measured while rendering), ``source_warp_error``
(the same of the source frames, along the same flows), ``fresh`` (the chain started again
at it) and ``finished`` (when, in seconds since the epoch). Records of older renders lack
the last two and the source's error; a render without temporal consistency measures no
warping error (the report then measures what is missing itself).
"""

from __future__ import annotations

import datetime
import math
from dataclasses import dataclass
from typing import Sequence

from framestyle.shots import Shot
from framestyle.store import recorded_shots

PACE_FRAMES = 20  # the ETA follows the pace of the last this-many finished frames


@dataclass(frozen=True)
class RenderStatus:
    """How far a render is, over every shot of its shot list."""

    frames_total: int
    frames_done: int
    shots_total: int
    shots_done: int  # shots with every frame finished
    render_seconds: float  # the finished frames' own seconds, summed over every process
    started: float | None  # when the render was created (seconds since the epoch)
    last_finished: float | None  # when its newest frame was finished, if the records say
    seconds_per_frame: float | None  # the recent pace: wall-clock seconds per finished frame
    eta_seconds: float | None  # time left at that pace; 0 when done, None before any frame

    @property
    def complete(self) -> bool:
        return self.frames_done == self.frames_total

    @property
    def elapsed(self) -> float | None:
        """Wall-clock seconds from the render's creation to its last finished frame (so an
        interrupted render's pause is not counted as time spent after its last frame)."""
        if self.started is None or self.last_finished is None:
            return None
        return max(0.0, self.last_finished - self.started)


@dataclass(frozen=True)
class ShotSeries:
    """One shot's figures, frame by frame: what the report's plot of the shot shows.

    Every tuple has one item per frame of the shot, in order; ``None`` where there is no
    figure (a frame not finished yet; the warping error of a shot's first frame, which has no
    predecessor in the shot, or of a frame where the chain started again).
    """

    shot: Shot
    numbers: tuple[int, ...]  # the source's frame numbers
    finished: tuple[bool, ...]
    render_error: tuple[float | None, ...]  # warping error frame k-1 → k of the render (Lai et al. 2018)
    source_error: tuple[float | None, ...]  # the same of the source footage, the reference
    iterations: tuple[int | None, ...]
    seconds: tuple[float | None, ...]
    fresh: tuple[bool, ...]  # frames where the temporal chain started again (a missed cut)

    @property
    def frames_done(self) -> int:
        return sum(self.finished)

    @property
    def render_seconds(self) -> float:
        return sum(s for s in self.seconds if s is not None)

    @property
    def iterations_per_frame(self) -> float:
        done = [i for i in self.iterations if i is not None]
        return sum(done) / len(done) if done else math.nan

    def mean_error(self, which: str) -> float:
        """Mean warping error of ``"render"`` or ``"source"`` over the pairs measured; NaN if none."""
        values = [v for v in getattr(self, f"{which}_error") if v is not None]
        return sum(values) / len(values) if values else math.nan


def created_time(manifest: dict) -> float | None:
    """The manifest's creation time in seconds since the epoch, or None if it has none."""
    try:
        return datetime.datetime.strptime(manifest["created"], "%Y-%m-%dT%H:%M:%S%z").timestamp()
    except (KeyError, TypeError, ValueError):
        return None


def render_status(manifest: dict, records: dict[int, dict]) -> RenderStatus:
    """How far the render of ``manifest`` is, from its shots' records (shot → record).

    The pace is the wall-clock time between the last :data:`PACE_FRAMES` finished frames
    divided by their number less one, so frames several processes finish side by side (a
    render farm) count together; records without finishing times fall back to the mean of
    the frames' own seconds, one process's pace.
    """
    shots = list(recorded_shots(manifest))
    entries = {n: list(records.get(n, {"frames": {}})["frames"].values()) for n in (s.index for s in shots)}
    total = sum(s.length for s in shots)
    done = sum(len(e) for e in entries.values())
    seconds = sum(entry["seconds"] for e in entries.values() for entry in e)
    stamps = sorted(entry["finished"] for e in entries.values() for entry in e if entry.get("finished"))
    recent = stamps[-PACE_FRAMES:]
    if len(recent) >= 2 and recent[-1] > recent[0]:
        pace = (recent[-1] - recent[0]) / (len(recent) - 1)
    else:
        pace = seconds / done if done else None
    return RenderStatus(
        frames_total=total, frames_done=done, shots_total=len(shots),
        shots_done=sum(1 for s in shots if len(entries[s.index]) == s.length),
        render_seconds=seconds, started=created_time(manifest), last_finished=stamps[-1] if stamps else None,
        seconds_per_frame=pace, eta_seconds=None if pace is None else (total - done) * pace,
    )


def shot_series(shot: Shot, names: Sequence[str], numbers: Sequence[int], frames: dict[str, dict],
                measured: dict[str, Sequence[float | None] | None] | None = None) -> ShotSeries:
    """A shot's per-frame figures from its record's ``frames`` (frame name → entry).

    Parameters
    ----------
    names, numbers : every output frame name and source frame number of the clip, by position
    measured : warping errors measured after the render where its record has none:
        ``{"render_error": ..., "source_error": ...}``, each None or one value (or None) per
        frame of the shot
    """
    positions = shot.frames
    entries = [frames.get(names[i]) for i in positions]

    def errors(key: str, recorded: str) -> tuple[float | None, ...]:
        values = [e.get(recorded) if e else None for e in entries]
        extra = (measured or {}).get(key)
        if extra is not None:
            if len(extra) != shot.length:
                raise ValueError(f"shot {shot.index}: need one {key} per frame ({shot.length}), got {len(extra)}")
            values = [v if v is not None else m for v, m in zip(values, extra)]
        return tuple(values)

    return ShotSeries(
        shot=shot, numbers=tuple(numbers[i] for i in positions),
        finished=tuple(e is not None for e in entries),
        render_error=errors("render_error", "warp_error"),
        source_error=errors("source_error", "source_warp_error"),
        iterations=tuple(e["iterations"] if e else None for e in entries),
        seconds=tuple(e["seconds"] if e else None for e in entries),
        fresh=tuple(bool(e and e.get("fresh")) for e in entries),
    )
