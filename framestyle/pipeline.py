"""The render pipeline, top to bottom: the only module that knows every step.

frames → shots → per shot: its look → per frame: working frame → flow to earlier frames →
starting image and temporal targets → solver → delivered frame → output store.

Each shot starts fresh; within a shot each frame starts from the previous stylised frame
warped along the optical flow and is tied to earlier frames by the short- and long-term
temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for videos").
After every frame the store records it, so re-running the same command on the same output
folder continues exactly where a killed render stopped. A preview is the same pipeline in
another mode: a few frames of each shot, each stylised on its own, laid out on contact sheets.
"""

from __future__ import annotations

import dataclasses
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.finish.matte import Mattes
from framestyle.finish.compose import to_display
from framestyle.imaging import to_array
from framestyle.motion import FlowPair
from framestyle.preview import contact_sheet, sample_frames
from framestyle.qc.stability import flow_warping_error
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.shots.detect import detect_shots, frame_signature
from framestyle.shots.lists import parse_shot_file, parse_shot_selection
from framestyle.store import Store, check_resume, input_fingerprints, output_names
from framestyle.style.look import Look, build_look
from framestyle.style.network import FeatureNet, load_network
from framestyle.style.solver import SolverParams, SolveStats, solve, solve_coarse_to_fine
from framestyle.temporal import fresh_problem, start_noise, temporal_problem
from framestyle.working import Frame, deliver, prepare_frame, working_size

Progress = Callable[..., None]  # progress(event: str, **info); events listed in render()
PREVIEW_WIDTH = 240  # default preview working width: a quick look, a few seconds a frame


def no_progress(event: str, **info) -> None:
    """The default progress callback: report nothing."""


@dataclass
class ShotSummary:
    """How a shot's render went: frames done, seconds, iterations, mean warping error."""

    shot: Shot
    frames_done: int = 0
    seconds: float = 0.0
    iterations: int = 0
    warp_error_sum: float = 0.0
    warp_error_pairs: int = 0

    @property
    def warp_error(self) -> float:
        return self.warp_error_sum / self.warp_error_pairs if self.warp_error_pairs else float("nan")


@dataclass
class RenderResult:
    out: Path
    frames: list[Path]
    shots: list[ShotSummary] = field(default_factory=list)
    video: Path | None = None


# --- the render -----------------------------------------------------------------------------

def render(
    input_path: Path, out: Path, settings: Settings, *, shots: str | None = None,
    shot_file: Path | None = None, restart: bool = False, progress: Progress = no_progress,
) -> RenderResult:
    """Stylise a clip into ``out``, resuming a previous run of the same render.

    Parameters
    ----------
    input_path : folder of numbered frames or a video file
    out : output folder (created); holds frames, manifest, log, state
    settings : the render settings (must equal a resumed render's)
    shots : render only these shots, e.g. ``"2,4-5"``
    shot_file : a user's shot list replacing detection (see :func:`shots.lists.parse_shot_file`)
    restart : discard a previous render in ``out`` instead of resuming it
    progress : called as ``progress(event, **info)`` with events ``"start"`` (frames, shots,
        done, size), ``"shot_start"`` (shot, frames), ``"frame"`` (index, shot, iterations,
        seconds, skipped), ``"shot"`` (summary) and ``"video"`` (path)
    """
    source, net = open_render(input_path, out, settings)
    with Store(out) as store:
        inputs = input_fingerprints(source, settings)
        manifest = store.read_manifest()
        if restart:
            store.restart(manifest)
            manifest = None
        if manifest is not None:
            check_resume(manifest, settings, inputs, store.out)
            shot_list = [Shot(s["shot"], s["start"], s["end"]) for s in manifest["shots"]]
            store.log.info("resuming render in %s", store.out)
        else:
            shot_list = find_shots(source, settings, shot_file)
            manifest = {"settings": settings.to_dict(), "inputs": inputs,
                        "shots": [s.to_dict() for s in shot_list], "frames": {}, "shot_status": {}}
            store.write_manifest(manifest)
            store.log.info("new render of %s into %s, settings %s", source.path, store.out, settings.digest())
        store.log.info("shots: %s", ", ".join(f"{s.index}:{s.start}-{s.end}" for s in shot_list))
        wanted = parse_shot_selection(shots, len(shot_list)) if shots else [s.index for s in shot_list]

        names = output_names(source)
        chosen = [s for s in shot_list if s.index in wanted]
        done = sum(1 for s in chosen for i in range(s.start, s.end + 1) if names[i] in manifest["frames"])
        size = working_size(source.width, source.height, settings.width, net.min_side)
        progress("start", frames=sum(s.length for s in chosen), shots=len(chosen), done=done, size=size)
        summaries = []
        for shot in chosen:
            summary = _ShotRender(source, store, settings.for_shot(shot.index), net, shot, names, manifest).run(progress)
            summaries.append(summary)
            progress("shot", summary=summary)
        finished = [name for name in names if name in manifest["frames"]]
        result = RenderResult(store.out, store.frame_paths(finished), summaries)
        if source.kind == "video" and len(finished) == source.count:
            result.video = store.write_video(source, finished)
            progress("video", path=result.video)
        return result


def open_render(input_path: Path, out: Path, settings: Settings) -> tuple[io.FrameSource, FeatureNet]:
    """Open the input and check every setting against it before the output folder is touched."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    source = io.open_source(Path(input_path))
    return source, check_render(source, settings)


def check_render(source: io.FrameSource, settings: Settings) -> FeatureNet:
    """Check every setting (and every shot's overrides) against ``source``; return the network."""
    net = load_network(settings.network, settings.network_weights)
    first = io.read_frame(source, 0)
    variants = [settings] + [settings.for_shot(int(n)) for n in settings.shot_looks]
    for variant in variants:
        if (variant.network, variant.network_weights) != (settings.network, settings.network_weights):
            raise FramestyleError("the network cannot change from shot to shot")
        size = working_size(source.width, source.height, variant.width, net.min_side)
        frame = prepare_frame(first, size, variant, source.linear)
        build_look(net, variant, frame.display).targets(size)
        Mattes(source, variant.matte)
    return net


def find_shots(source: io.FrameSource, settings: Settings, shot_file: Path | None) -> list[Shot]:
    """The shot list: from ``shot_file`` if given, else detected (or one shot if disabled)."""
    if shot_file is not None:
        return parse_shot_file(shot_file, source.count)
    if not settings.shot_detection:
        return [Shot(1, 0, source.count - 1)]
    sigs = [frame_signature(f) for _, f in io.iter_frames(source)]
    return detect_shots(sigs, cut_threshold=settings.cut_threshold, gradual_threshold=settings.gradual_threshold)


def solver_params(settings: Settings) -> SolverParams:
    """The solver's share of the settings."""
    return SolverParams(
        style_weight=settings.style_weight, content_weight=settings.content_weight,
        tv_weight=settings.tv_weight, temporal_weight=settings.temporal_weight,
        iterations=settings.iterations, tolerance=settings.tolerance, levels=settings.levels,
        content_layer=settings.content_layer,
    )


def shot_look(net: FeatureNet, source: io.FrameSource, settings: Settings, shot: Shot) -> Look:
    """A shot's look; with ``colour="match"`` the style is recoloured to the shot's first frame."""
    reference = None
    if settings.colour == "match":
        reference = to_display(io.read_frame(source, shot.start), source.linear)
    return build_look(net, settings, reference)


# --- one shot -------------------------------------------------------------------------------

class _ShotRender:
    """Render one shot, skipping its finished frames and continuing its temporal chain."""

    def __init__(self, source, store, settings, net, shot, names, manifest):
        self.source, self.store, self.settings, self.net, self.shot = source, store, settings, net, shot
        self.names, self.manifest = names, manifest
        self.size = working_size(source.width, source.height, settings.width, net.min_side)
        self.params = solver_params(settings)
        self.status = manifest["shot_status"].setdefault(str(shot.index), {"warp_error_sum": 0.0, "pairs": 0})

    def run(self, progress: Progress) -> ShotSummary:
        shot, settings, names, recorded = self.shot, self.settings, self.names, self.manifest["frames"]
        todo = [i for i in range(shot.start, shot.end + 1) if names[i] not in recorded]
        if not todo:
            return self._summary()
        look = shot_look(self.net, self.source, settings, shot)
        mattes = Mattes(self.source, settings.matte)
        progress("shot_start", shot=shot.index, frames=shot.length)
        reach = max(settings.long_term) if settings.temporal else 0
        history: deque[tuple[int, np.ndarray]] = deque(maxlen=reach + 1)  # (index, working content)
        for index, raw in io.iter_frames(self.source, max(shot.start, todo[0] - reach), shot.end + 1):
            frame = prepare_frame(raw, self.size, settings, self.source.linear)
            if index >= todo[0] and names[index] not in recorded:
                self._frame(index, frame, look, mattes, dict(history), progress)
            else:
                progress("frame", index=index, shot=shot.index, skipped=True)
            history.append((index, frame.content))
        self.store.prune_state(shot.index, None)
        self.store.write_manifest(self.manifest)
        summary = self._summary()
        self.store.log.info("shot %d done: %d frames, %.1f s, %.1f iterations/frame, warping error %.5f",
                            shot.index, summary.frames_done, summary.seconds,
                            summary.iterations / max(1, summary.frames_done), summary.warp_error)
        return summary

    def _frame(self, index: int, frame: Frame, look: Look, mattes: Mattes, sources: dict, progress: Progress) -> None:
        t0 = time.perf_counter()
        settings, shot = self.settings, self.shot.index
        offsets = [j for j in sorted(settings.long_term) if settings.temporal and index - j in sources]
        earlier = [(FlowPair.between(frame.content, sources[index - j], settings.flow_preset),
                    self.store.load_state(shot, index - j)) for j in offsets]
        result, stats = stylise(look, frame.content, index, earlier, self.params, settings.seed, settings.temporal)
        if earlier:  # the warping error of this pair reuses the flows of the temporal loss
            self.status["warp_error_sum"] += flow_warping_error(earlier[0][1], result, earlier[0][0])
            self.status["pairs"] += 1
        self.store.save_state(shot, index, result)
        name = self.names[index]
        if not self.store.has_frame(name):  # a frame whose record was lost is not rewritten
            matte = mattes(index, settings.matte_softness)
            self.store.write_frame(name, deliver(result, frame, settings, matte, self.source.linear),
                                   16 if self.source.bit_depth in (16, 32) else 8)
        seconds = time.perf_counter() - t0
        self.manifest["frames"][name] = {"shot": shot, "iterations": stats.iterations, "seconds": round(seconds, 3)}
        self.store.write_manifest(self.manifest)
        self.store.prune_state(shot, index - max(settings.long_term))
        self.store.log.info("frame %s shot %d: %d iterations, %.1f s, style %.4f content %.4f temporal %.5f",
                            name, shot, stats.iterations, seconds, stats.style, stats.content, stats.temporal)
        progress("frame", index=index, shot=shot, iterations=stats.iterations, seconds=seconds, skipped=False)

    def _summary(self) -> ShotSummary:
        shot, recorded = self.shot, self.manifest["frames"]
        entries = [recorded[self.names[i]] for i in range(shot.start, shot.end + 1) if self.names[i] in recorded]
        return ShotSummary(shot, len(entries), sum(e["seconds"] for e in entries),
                           sum(e["iterations"] for e in entries), self.status["warp_error_sum"], self.status["pairs"])


def stylise(
    look: Look, content: np.ndarray, index: int, earlier: Sequence[tuple[FlowPair, np.ndarray]],
    params: SolverParams, seed: int, temporal: bool = True,
) -> tuple[np.ndarray, SolveStats]:
    """Stylise one working frame: from its warped predecessor if it has one, else on its own.

    Parameters
    ----------
    content : (h, w, 3) the working frame
    index : the frame's index in the clip (seeds its noise)
    earlier : (flows to an earlier frame, that frame stylised (h, w, 3)), most recent first;
        empty for a shot's first frame or without temporal consistency
    temporal : whether the render is temporal; a temporal shot's first frame anchors every
        later frame through the warp, so it is converged twice as tightly

    Returns
    -------
    (h, w, 3) float32 result in [0, 1], and the solver's statistics
    """
    noise = start_noise((1, 3, *content.shape[:2]), seed, index)
    size = (content.shape[1], content.shape[0])
    if earlier:
        image, stats = solve(look.net, temporal_problem(content, earlier, noise), look.targets(size), params)
    else:
        anchor = dataclasses.replace(params, tolerance=params.tolerance / 2) if temporal else params
        image, stats = solve_coarse_to_fine(look.net, fresh_problem(content, noise), look.targets, anchor)
    return to_array(image), stats


# --- previews -------------------------------------------------------------------------------

def preview(input_path: Path, out: Path, settings: Settings, every: int, *, width: int | None = None,
            shots: str | None = None, shot_file: Path | None = None,
            progress: Progress = no_progress) -> list[Path]:
    """Stylise every ``every``-th frame of each shot into ``out/preview`` and write contact sheets.

    Each previewed frame gets a shot's first-frame treatment (no temporal chain) with its
    shot's look, colour, strength and matte.

    Parameters
    ----------
    width : preview working width for every shot (default: the render's width, at most
        :data:`PREVIEW_WIDTH`)

    Returns
    -------
    The contact sheet paths, one per previewed shot.
    """
    if every < 1:
        raise FramestyleError(f"--every {every}: must be 1 or more")
    width = width or min(settings.width, PREVIEW_WIDTH)
    settings = dataclasses.replace(settings, width=width, shot_looks={
        n: {**look, "width": width} for n, look in settings.shot_looks.items()})
    source, net = open_render(input_path, out, settings)
    shot_list = find_shots(source, settings, shot_file)
    wanted = parse_shot_selection(shots, len(shot_list)) if shots else [s.index for s in shot_list]
    chosen = {i: shot for shot in shot_list if shot.index in wanted for i in sample_frames(shot.start, shot.end, every)}
    size = working_size(source.width, source.height, settings.width, net.min_side)
    progress("start", frames=len(chosen), shots=len(wanted), done=0, size=size)
    tiles: dict[int, list] = {n: [] for n in wanted}
    looks: dict[int, tuple[Settings, Look, Mattes]] = {}
    with Store(out) as store:
        for index, raw in io.iter_frames(source):
            if index not in chosen:
                continue
            t0 = time.perf_counter()
            shot = chosen[index]
            if shot.index not in looks:
                shot_settings = settings.for_shot(shot.index)
                looks[shot.index] = (shot_settings, shot_look(net, source, shot_settings, shot),
                                     Mattes(source, shot_settings.matte))
            shot_settings, look, mattes = looks[shot.index]
            size = working_size(source.width, source.height, shot_settings.width, net.min_side)
            frame = prepare_frame(raw, size, shot_settings, source.linear)
            result, stats = stylise(look, frame.content, index, [], solver_params(shot_settings),
                                    shot_settings.seed, temporal=False)
            delivered = deliver(result, frame, shot_settings, mattes(index, shot_settings.matte_softness), False)
            store.write_preview(io.frame_name(source, index), delivered)
            tiles[shot.index].append((source.names[index], frame.display, delivered))
            progress("frame", index=index, shot=shot.index, iterations=stats.iterations,
                     seconds=time.perf_counter() - t0, skipped=False)
        return [store.write_preview(f"contact_shot{n:03d}.png", contact_sheet(tiles[n])) for n in wanted]
