"""A shot: a contiguous run of frames the temporal chain never crosses."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Sequence


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

    @property
    def frames(self) -> range:
        """The shot's 0-based frame indices, ``start .. end``."""
        return range(self.start, self.end + 1)

    def to_dict(self) -> dict[str, int]:
        """Return ``{"shot": index, "start": start, "end": end}``, one shot-list JSON entry."""
        return {"shot": self.index, "start": self.start, "end": self.end}


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


def check_contiguous(shots: Sequence[Shot]) -> None:
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
