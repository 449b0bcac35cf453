"""Stability report: the warping error of a finished render, per shot and overall.

Uses the warping error of Lai et al. 2018 ("Learning Blind Video Temporal Consistency"),
computed between consecutive frames of the same shot only (a cut is meant to change), and
the same figure for the source footage as a reference: a render cannot be steadier than its
footage's own change along the motion.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from . import checkpoint, frames
from .errors import FramestyleError
from .metrics import sequence_warping_error
from .shots import Shot, detect_shots, frame_signature


@dataclass
class ShotStability:
    shot: Shot
    render: float  # mean warping error of the stylised frames
    source: float  # the same for the source footage


def _shots(out: Path, source: frames.FrameSource) -> list[Shot]:
    manifest = checkpoint.read_manifest(out)
    if manifest is not None:
        return [Shot(s["shot"], s["start"], s["end"]) for s in manifest["shots"]]
    return detect_shots([frame_signature(f) for _, f in frames.iter_frames(source)])


def stability(out: Path, source_path: Path, preset: str = "medium") -> list[ShotStability]:
    """Warping error per shot of the frames in ``out`` against the source at ``source_path``.

    The shot list comes from the render's manifest, or is detected on the source.
    """
    out = Path(out)
    source = frames.open_source(Path(source_path))
    rendered = frames.open_source(out)
    if rendered.count != source.count:
        raise FramestyleError(f"{out}: holds {rendered.count} frames but the source has {source.count}")
    result = []
    for shot in _shots(out, source):
        def stream(clip):  # frames of this shot, read as needed: memory does not grow
            return (f for _, f in frames.iter_frames(clip, shot.start, shot.end + 1))

        result.append(ShotStability(
            shot,
            sequence_warping_error(stream(rendered), stream(source), preset),
            sequence_warping_error(stream(source), stream(source), preset),
        ))
    return result


def overall(rows: list[ShotStability], attr: str) -> float:
    """Mean over shots, weighted by frame pairs; one-frame shots (NaN) are left out."""
    pairs = [(getattr(r, attr), r.shot.end - r.shot.start) for r in rows if not math.isnan(getattr(r, attr))]
    n = sum(p for _, p in pairs)
    return sum(v * p for v, p in pairs) / n if n else float("nan")
