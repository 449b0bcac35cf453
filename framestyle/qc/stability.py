"""Temporal stability of a render: the flow warping error of Lai et al. (2018), per shot.

The flow and the occlusion mask come from the *source* frames, so the measure asks how much the
stylised frames change where the source scene itself only moved. It is computed between
consecutive frames of the same shot only (a cut is meant to change), and the same figure for
the source footage is the reference: a render cannot be steadier than its footage's own
change along the motion. Beside it, each shot's stroke-detail ratio at a few frames
(:mod:`framestyle.qc.detail`) shows what the steadiness costs in fine detail.

References
----------
Lai, Huang, Wang, Shechtman, Yumer & Yang (2018), "Learning Blind Video Temporal Consistency",
ECCV (the warping error of its evaluation section; section number not checked).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from framestyle import io, store
from framestyle.errors import FramestyleError
from framestyle.shots import Shot
from framestyle.shots.clip import detect_clip
from framestyle.shots.lists import frame_range

from framestyle.imaging import resize
from framestyle.motion import FlowPair, check_rgb, warp
from framestyle.qc.detail import detail_frames, detail_ratio
from framestyle.settings import Settings
from framestyle.working import working_size

_END = object()  # end-of-sequence marker for next()


def pair_warping_error(
    out_t: np.ndarray,
    out_next: np.ndarray,
    src_t: np.ndarray,
    src_next: np.ndarray,
    preset: str = "medium",
) -> float:
    """Warping error between two consecutive stylised frames (Lai et al., 2018).

        E_pair = Σ_p M(p) ‖V_t(p) − warp(V_{t+1}, F)(p)‖² / Σ_p M(p)

    with F = ``compute_flow(src_t, src_next)`` (flow t → t+1 on the source frames),
    M = ``reliability_mask(F, compute_flow(src_next, src_t))`` (the non-occlusion mask of the
    forward-backward check, Ruder et al. 2016) and ‖·‖² summed over the three RGB channels.

    Source frames of another size than the stylised frames are first resized to the stylised
    size (area interpolation). If no pixel is reliable (Σ M = 0) there is nothing to compare and
    the error is 0.0.

    Parameters
    ----------
    out_t, out_next : np.ndarray
        Stylised frames V_t, V_{t+1}, float RGB ``(H, W, 3)`` in [0, 1], same shape.
    src_t, src_next : np.ndarray
        Source frames, float RGB ``(h, w, 3)`` in [0, 1], same shape.
    preset : str
        DIS preset for the flow, one of ``framestyle.motion.FLOW_PRESETS``.

    Returns
    -------
    float
        The masked mean squared difference (per pixel, summed over channels).

    References
    ----------
    Lai et al. (2018), "Learning Blind Video Temporal Consistency", ECCV.
    Ruder, Dosovitskiy & Brox (2016), "Artistic style transfer for videos", GCPR, Sec. 3.
    """
    for name, image in (("out_t", out_t), ("out_next", out_next), ("src_t", src_t), ("src_next", src_next)):
        check_rgb(name, image)
    if out_t.shape != out_next.shape:
        raise ValueError(f"out_t and out_next differ in shape: {out_t.shape} vs {out_next.shape}")
    if src_t.shape != src_next.shape:
        raise ValueError(f"src_t and src_next differ in shape: {src_t.shape} vs {src_next.shape}")
    size = (out_t.shape[1], out_t.shape[0])
    src_t = resize(src_t.astype(np.float32, copy=False), size)
    src_next = resize(src_next.astype(np.float32, copy=False), size)
    return flow_warping_error(out_t, out_next, FlowPair.between(src_next, src_t, preset))


def flow_warping_error(out_t: np.ndarray, out_next: np.ndarray, flows: FlowPair) -> float:
    """The warping error of stylised frames V_t, V_{t+1} given the source frames' flows.

    ``flows`` is the :class:`FlowPair` between source frame t+1 (current) and t (earlier):
    F = ``flows.forward`` and M = ``flows.earlier_mask()`` in the formula of
    :func:`pair_warping_error`. Lets a render reuse the flows its temporal loss computed.
    """
    mask = flows.earlier_mask().astype(np.float64)
    total = mask.sum()
    if total == 0.0:
        return 0.0
    diff = out_t.astype(np.float64) - warp(out_next, flows.forward)
    return float(np.sum(mask * np.sum(diff * diff, axis=-1)) / total)


def sequence_warping_error(
    outputs: Iterable[np.ndarray],
    sources: Iterable[np.ndarray],
    preset: str = "medium",
) -> float:
    """Mean ``pair_warping_error`` over the consecutive frame pairs of one shot (Lai et al., 2018).

    Streams: only the current and the previous frame of each sequence are held. The caller splits
    a clip at shot boundaries, since flow across a cut is meaningless.

    Parameters
    ----------
    outputs : Iterable[np.ndarray]
        Stylised frames of the shot, float RGB ``(H, W, 3)`` in [0, 1].
    sources : Iterable[np.ndarray]
        The matching source frames, float RGB ``(h, w, 3)`` in [0, 1], as many as ``outputs``.
    preset : str
        DIS preset for the flow, one of ``framestyle.motion.FLOW_PRESETS``.

    Returns
    -------
    float
        Mean pair error; ``nan`` for a shot of fewer than two frames, which has no pair and so no
        defined error (test with ``math.isnan`` before averaging over shots).

    Raises
    ------
    ValueError
        If ``outputs`` and ``sources`` differ in length, or on invalid frames.

    References
    ----------
    Lai et al. (2018), "Learning Blind Video Temporal Consistency", ECCV.
    """
    out_iter, src_iter = iter(outputs), iter(sources)
    total, pairs = 0.0, 0
    previous = None
    while True:
        out, src = next(out_iter, _END), next(src_iter, _END)
        if out is _END or src is _END:
            if out is not src:
                raise ValueError("outputs and sources differ in number of frames")
            break
        if previous is not None:
            total += pair_warping_error(previous[0], out, previous[1], src, preset)
            pairs += 1
        previous = (out, src)
    return total / pairs if pairs else float("nan")


@dataclass
class ShotStability:
    shot: Shot
    frames: str  # first and last frame in the source's numbers
    render: float  # mean warping error of the stylised frames (NaN: no pair, or not rendered yet)
    source: float  # the same for the source footage
    detail: list[tuple[int, float]] = field(default_factory=list)  # (frame number, stroke-detail ratio)
    rendered: bool = True  # False: a shot of a render still going, not all its frames written yet


Alone = Callable[[Sequence[int]], Iterator[tuple[int, np.ndarray]]]
"""Renders frames of a render each on its own, as :func:`framestyle.pipeline.frames_alone`."""


def _shots(manifest: dict | None, source: io.FrameSource) -> list[Shot]:
    """The render's shots (its manifest's), or detected on the source where it has none."""
    if manifest is not None:
        return list(store.recorded_shots(manifest))
    return detect_clip(source)


def stability(out: Path, source_path: Path, preset: str = "medium", alone: Alone | None = None,
              detail_count: int = 3) -> list[ShotStability]:
    """Warping error per shot of the frames in ``out`` against the source at ``source_path``,
    and with ``alone`` the stroke-detail ratio of ``detail_count`` frames of each shot.

    The shot list comes from the render's manifest, or is detected on the source. The detail
    ratios compare the render's frames with the same frames rendered on their own by
    ``alone``, both brought to the render's working size; they need the manifest. Of a render
    still going (the manifest's, fewer frames written than the source has) the shots whose
    frames are all written are measured, the others come back with ``rendered`` False.
    Frames the render solved apart (a flash, a short cutaway: the record's ``odd``) are left
    out of both measures, and the pair across them is measured: a white frame's pairs, whose
    flow is still, were a hundred times a shot's own error in render and source alike.
    """
    out = Path(out)
    source = io.open_source(Path(source_path))
    manifest = store.read_manifest(out)
    if manifest is not None:
        store.check_footage(manifest, source, out)
    rendered = io.open_source(out)
    if rendered.count != source.count and manifest is None:
        raise FramestyleError(f"{out}: holds {rendered.count} frames but the source has {source.count}")
    if alone is not None and manifest is None:
        raise FramestyleError(f"{out}: no {store.MANIFEST}; the detail measure needs the render's settings")
    # a frame of the render by the source's index: by position in a whole render, else by name
    written = dict(zip(rendered.names, range(rendered.count)))
    position = (list(range(source.count)) if rendered.count == source.count
                else [written.get(name) for name in source.names])
    entries = store.Store(out).finished()
    odd = {i for i, name in enumerate(store.output_names(source)) if entries.get(name, {}).get("odd")}
    result = []
    for shot in _shots(manifest, source):
        if any(position[i] is None for i in shot.frames):
            result.append(ShotStability(shot, frame_range(shot, source.numbers), math.nan, math.nan, rendered=False))
            continue

        def footage():  # frames of this shot, read as needed: memory does not grow
            return (f for i, f in io.iter_frames(source, shot.start, shot.end + 1) if i not in odd)

        render = (io.read_frame(rendered, position[i]) for i in shot.frames if i not in odd)  # read by position
        row = ShotStability(
            shot, frame_range(shot, source.numbers),
            sequence_warping_error(render, footage(), preset),
            sequence_warping_error(footage(), footage(), preset),
        )
        if alone is not None:
            width = Settings.from_dict(manifest["settings"]).for_shot(shot.index).width
            size = working_size(source.width, source.height, width, 1, source.pixel_aspect)
            row.detail = [(source.numbers[i], detail_ratio(io.read_frame(rendered, position[i]), image, size))
                          for i, image in alone(detail_frames(shot, detail_count))]
        result.append(row)
    if not any(row.rendered for row in result):
        raise FramestyleError(f"{out}: no shot is rendered whole yet; `framestyle resume {out}` goes on with it")
    return result


def overall(rows: list[ShotStability], attr: str) -> float:
    """Mean over shots, weighted by frame pairs; one-frame shots (NaN) are left out."""
    pairs = [(getattr(r, attr), r.shot.end - r.shot.start) for r in rows if not math.isnan(getattr(r, attr))]
    n = sum(p for _, p in pairs)
    return sum(v * p for v, p in pairs) / n if n else float("nan")
