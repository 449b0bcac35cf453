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
import functools
import importlib.metadata
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import torch

from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.finish.matte import Mattes
from framestyle.finish.compose import to_display
from framestyle.imaging import to_array
from framestyle.motion import FlowPair
from framestyle.preview import contact_sheet, sample_frames
from framestyle.qc.stability import flow_warping_error
from framestyle.settings import Settings
from framestyle.shots import Shot, shots_from_boundaries
from framestyle.shots.detect import detect_shots, frame_signature
from framestyle.shots.continuity import starts_new_shot
from framestyle.shots.cutlists import cut_list_adapter, cut_list_timecode
from framestyle.shots.lists import frame_range, parse_shot_file, parse_shot_selection
from framestyle.store import (Store, check_resume, environment_changes, input_fingerprints, output_names,
                              shot_list_fingerprint)
from framestyle.style.look import Look, build_look
from framestyle.style.network import FeatureNet, load_network
from framestyle.style.solver import SolverParams, SolveStats, solve_coarse_to_fine
from framestyle.timecode import ClipTimecode
from framestyle.temporal import fresh_problem, start_noise, temporal_problem
from framestyle.working import Frame, deliver, prepare_frame, working_size

Progress = Callable[..., None]  # progress(event: str, **info); events listed in render()
PREVIEW_WIDTH = 240  # default preview working width: a quick look, a few seconds a frame


def no_progress(event: str, **info) -> None:
    """The default progress callback: report nothing."""


@dataclass
class ShotSummary:
    """How a shot's render went, from its record: frames done, seconds, iterations, warping error."""

    shot: Shot
    frames: str  # the shot's first and last frame in the source's numbers, "1001-1047"
    frames_done: int = 0
    seconds: float = 0.0
    iterations: int = 0
    warp_error_sum: float = 0.0
    warp_error_pairs: int = 0

    @classmethod
    def from_record(cls, shot: Shot, frames: dict[str, dict], numbers: Sequence[int]) -> "ShotSummary":
        errors = [e["warp_error"] for e in frames.values() if e.get("warp_error") is not None]
        return cls(shot, frame_range(shot, numbers), len(frames), sum(e["seconds"] for e in frames.values()),
                   sum(e["iterations"] for e in frames.values()), sum(errors), len(errors))

    @property
    def warp_error(self) -> float:
        return self.warp_error_sum / self.warp_error_pairs if self.warp_error_pairs else float("nan")


@dataclass
class RenderResult:
    out: Path
    frames: list[Path]
    shots: list[ShotSummary] = field(default_factory=list)
    videos: list[Path] = field(default_factory=list)  # the H.264 preview (video input) and the ProRes hand-off


@dataclass(frozen=True)
class Plan:
    """What every shot of a render needs, and nothing large: paths, settings, the shot list.

    Made by :func:`plan_render` after the output folder's manifest is created or checked;
    each shot is then rendered by :func:`render_shot`, in this process or another.
    """

    source: io.FrameSource
    out: Path
    settings: Settings
    shots: tuple[Shot, ...]
    wanted: tuple[int, ...]  # the shots to render now
    timecode: ClipTimecode  # how the source's frames are labelled

    @property
    def names(self) -> list[str]:
        return output_names(self.source)


# --- the render -----------------------------------------------------------------------------

def render(
    input_path: Path, out: Path, settings: Settings, *, shots: str | None = None,
    shot_file: Path | None = None, restart: bool = False, keep_shot_list: bool = False,
    progress: Progress = no_progress,
) -> RenderResult:
    """Stylise a clip into ``out``, resuming a previous run of the same render.

    Several processes may render one folder at once: each shot is rendered by whichever
    process takes its lock first; a process that finds a shot taken renders the others, then
    waits for it (and finishes it if its process died).

    Parameters
    ----------
    input_path : folder of numbered frames or a video file
    out : output folder (created); holds frames, manifest, records, log, state
    settings : the render settings (must equal a resumed render's)
    shots : render only these shots, e.g. ``"2,4-5"``
    shot_file : a user's shot list replacing detection (see :func:`shots.lists.parse_shot_file`)
    restart : discard a previous render in ``out`` instead of resuming it
    keep_shot_list : resume with the shot list the render was started with (``framestyle resume``)
    progress : called as ``progress(event, **info)`` with events ``"start"`` (frames, shots,
        done, size), ``"warning"`` (message), ``"shot_start"`` (shot, frames, done),
        ``"frame"`` (index, shot, iterations, seconds), ``"waiting"`` (shot, holder),
        ``"shot"`` (summary) and ``"video"`` (path)
    """
    plan = plan_render(input_path, out, settings, shots=shots, shot_file=shot_file, restart=restart,
                       keep_shot_list=keep_shot_list, progress=progress)
    taken = [n for n in plan.wanted if render_shot(plan, n, progress, wait=False) is None]
    for n in taken:  # shots another process was rendering: wait for it, finish what it left
        progress("waiting", shot=n, holder=Store(plan.out).shot_holder(n))
        render_shot(plan, n, progress, wait=True)
    return finish_render(plan, progress)


def plan_render(
    input_path: Path, out: Path, settings: Settings, *, shots: str | None = None,
    shot_file: Path | None = None, restart: bool = False, keep_shot_list: bool = False,
    progress: Progress = no_progress,
) -> Plan:
    """Check everything, then create (or check and continue) the render's manifest in ``out``."""
    source, net = open_render(input_path, out, settings)
    inputs = input_fingerprints(source, settings)
    shot_list = shot_list_fingerprint(shot_file)
    store = Store(out)
    with store.folder_lock():
        if restart:
            store.restart(output_names(source))
            store.log("restarted: previous frames, state, video, previews and records discarded")
        manifest = store.manifest()
        if manifest is not None:
            check_resume(manifest, settings, inputs, None if keep_shot_list else shot_list, store.out)
            for change in environment_changes(manifest, environment(net)):
                progress("warning", message=f"resumed under {change}: frames may differ in the last bits "
                                            f"from an uninterrupted render")
            shot_list_ = tuple(Shot(s["shot"], s["start"], s["end"]) for s in manifest["shots"])
            store.log(f"resuming render of {source.path}")
        else:
            shot_list_ = tuple(find_shots(source, settings, shot_file))
            store.log(f"frames numbered {source.numbers[0]}-{source.numbers[-1]}, first frame at timecode "
                      f"{clip_timecode(source, settings, shot_file).label(0)}")
            store.create({"settings": settings.to_dict(), "inputs": inputs, "shot_list": shot_list,
                          "shots": [s.to_dict() for s in shot_list_], "environment": environment(net),
                          "created": time.strftime("%Y-%m-%dT%H:%M:%S%z")})
            store.log(f"new render of {source.path}, settings {settings.digest()}, "
                      f"shots {', '.join(f'{s.index}:{frame_range(s, source.numbers)}' for s in shot_list_)}")
        finished = store.finished()
    if io.gap_warning(source):
        progress("warning", message=io.gap_warning(source))
    wanted = parse_shot_selection(shots, len(shot_list_)) if shots else [s.index for s in shot_list_]
    if keep_shot_list and manifest is not None and manifest["shot_list"]["file"]:
        shot_file = Path(manifest["shot_list"]["file"])  # resumed: the list it was started with
    timecode = clip_timecode(source, settings, shot_file)
    plan = Plan(source, store.out, settings, shot_list_, tuple(wanted), timecode)
    chosen = [s for s in shot_list_ if s.index in wanted]
    names = plan.names
    done = sum(1 for s in chosen for i in range(s.start, s.end + 1) if names[i] in finished)
    size = working_size(source.width, source.height, settings.width, net.min_side)
    progress("start", frames=sum(s.length for s in chosen), shots=len(chosen), done=done, size=size)
    return plan


def finish_render(plan: Plan, progress: Progress = no_progress) -> RenderResult:
    """After the shots: the summary of the wanted shots, and the video once every frame is done."""
    store = Store(plan.out)
    names = plan.names
    with store.folder_lock():
        records = store.records()
        finished = {name for record in records.values() for name in record["frames"]}
        done = [name for name in names if name in finished]
        result = RenderResult(store.out, store.frame_paths(done))
        if len(done) == plan.source.count:
            for video in store.write_videos(plan.source, done, plan.timecode, plan.settings.prores):
                result.videos.append(video)
                progress("video", path=video)
    result.shots = [ShotSummary.from_record(shot, records.get(shot.index, {"frames": {}})["frames"],
                                            plan.source.numbers) for shot in plan.shots if shot.index in plan.wanted]
    return result


def environment(net: FeatureNet) -> dict:
    """Library versions, thread count and the network's device a render runs under (recorded;
    a resume compares)."""
    versions = {name: _version(name) for name in ("framestyle", "torch", "numpy", "opencv-python-headless",
                                                   "openimageio")}
    return {**versions, "torch threads": torch.get_num_threads(), "device": str(net.device)}


def _version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def open_render(input_path: Path, out: Path, settings: Settings) -> tuple[io.FrameSource, FeatureNet]:
    """Open the input and check every setting against it before the output folder is touched."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    source = io.open_source(Path(input_path))
    return source, check_render(source, settings)


def check_render(source: io.FrameSource, settings: Settings) -> FeatureNet:
    """Check every setting (and every shot's overrides) against ``source``; return the network."""
    net = network(settings.network, settings.network_weights, settings.device)
    clip_timecode(source, settings)
    if settings.prores and source.linear:
        raise FramestyleError(f"{source.path}: the ProRes hand-off is made from display-referred frames; "
                              f"a float (EXR) render is delivered as EXR frames, without --prores")
    first = io.read_frame(source, 0)
    variants = [settings] + [settings.for_shot(int(n)) for n in settings.shot_looks]
    for variant in variants:
        if (variant.network, variant.network_weights, variant.device) != (settings.network, settings.network_weights,
                                                                          settings.device):
            raise FramestyleError("the network and its device cannot change from shot to shot")
        size = working_size(source.width, source.height, variant.width, net.min_side)
        frame = prepare_frame(first, size, variant, source.linear)
        build_look(net, variant, frame.display).targets(size)
        Mattes(source, variant.matte)
    return net


@functools.lru_cache(maxsize=2)
def network(name: str, weights: str | None, device: str) -> FeatureNet:
    """The perceptual network on its device, loaded once per process."""
    return load_network(name, weights, device)


def find_shots(source: io.FrameSource, settings: Settings, shot_file: Path | None) -> list[Shot]:
    """The shot list: from ``shot_file`` if given, else detected (or one shot if disabled).

    Gaps in a folder's numbering start a new shot in a detected list: the frames on either
    side may be far apart in time.
    """
    if shot_file is not None:
        return parse_shot_file(shot_file, source.numbers, clip_timecode(source, settings, shot_file))
    if not settings.shot_detection:
        found = [Shot(1, 0, source.count - 1)]
    else:
        sigs = [frame_signature(f) for _, f in io.iter_frames(source)]
        found = detect_shots(sigs, cut_threshold=settings.cut_threshold, gradual_threshold=settings.gradual_threshold)
    after_gaps = [i for i, (a, b) in enumerate(zip(source.numbers, source.numbers[1:]), 1) if b > a + 1]
    return shots_from_boundaries(sorted({s.start for s in found} | set(after_gaps)), source.count)


def clip_timecode(source: io.FrameSource, settings: Settings, shot_file: Path | None = None) -> ClipTimecode:
    """How the source's frames are labelled: the settings' rate and start timecode, else the
    video's; an editor's cut list places a clip without timecode of its own."""
    timecode = io.source_timecode(source, settings.fps, settings.start_timecode)
    if shot_file is not None and cut_list_adapter(shot_file):
        timecode = cut_list_timecode(shot_file, timecode)
    return timecode


def solver_params(settings: Settings) -> SolverParams:
    """The solver's share of the settings."""
    return SolverParams(
        style_weight=settings.style_weight, content_weight=settings.content_weight,
        tv_weight=settings.tv_weight, temporal_weight=settings.temporal_weight,
        iterations=settings.iterations, tolerance=settings.tolerance, levels=settings.levels,
        warm_levels=settings.warm_levels, content_layer=settings.content_layer, precision=settings.precision,
    )


def shot_look(net: FeatureNet, source: io.FrameSource, settings: Settings, shot: Shot) -> Look:
    """A shot's look; with ``colour="match"`` the style is recoloured to the shot's first frame."""
    reference = None
    if settings.colour == "match":
        reference = to_display(io.read_frame(source, shot.start), source.linear)
    return build_look(net, settings, reference)


# --- one shot -------------------------------------------------------------------------------

def render_shot(plan: Plan, index: int, progress: Progress = no_progress, wait: bool = True) -> ShotSummary | None:
    """Render shot ``index`` of a planned render, continuing its temporal chain where it stopped.

    Returns None (without ``wait``) if another process is rendering the shot. Frames already
    finished are never rewritten. Where the chain cannot continue from kept state (the state
    of the frames it needs is gone or damaged), the shot is solved again from its first
    frame, writing only the frames that are not finished.
    """
    shot = plan.shots[index - 1]
    settings = plan.settings.for_shot(index)
    with Store(plan.out).shot(index, wait) as work:
        if work is None:
            return None
        names = plan.names
        for problem in work.reconcile(names[shot.start:shot.end + 1]):
            progress("warning", message=problem)
            work.store.log(problem)
        finished = work.record["frames"]
        todo = [i for i in range(shot.start, shot.end + 1) if names[i] not in finished]
        if todo:
            _ShotRender(plan, work, settings, shot).run(todo, progress)
        elif work.has_state():  # a process killed as it finished the shot left its state
            work.prune_state(None)
        summary = ShotSummary.from_record(shot, work.record["frames"], plan.source.numbers)
    progress("shot", summary=summary)
    return summary


class _ShotRender:
    """The frames of one shot, in order, each from its warped predecessors."""

    def __init__(self, plan: Plan, work, settings: Settings, shot: Shot):
        self.plan, self.work, self.settings, self.shot = plan, work, settings, shot
        self.source, self.names = plan.source, plan.names
        self.net = network(settings.network, settings.network_weights, settings.device)
        self.size = working_size(self.source.width, self.source.height, settings.width, self.net.min_side)
        self.params = solver_params(settings)
        self.offsets = sorted(settings.long_term) if settings.temporal else []
        self.chain_start = shot.start  # the shot's first frame, or a missed cut found in it

    def run(self, todo: list[int], progress: Progress) -> None:
        shot, settings, finished = self.shot, self.settings, self.work.record["frames"]
        begin = self._resume_point(todo[0])
        self.chain_start = max([shot.start] + [i for i in range(shot.start, begin)
                                               if finished.get(self.names[i], {}).get("fresh")])
        look = shot_look(self.net, self.source, settings, shot)
        mattes = Mattes(self.source, settings.matte)
        progress("shot_start", shot=shot.index, frames=shot.length, done=shot.length - len(todo))
        reach = max(self.offsets, default=0)
        history: deque[tuple[int, np.ndarray]] = deque(maxlen=reach + 1)  # (index, working content)
        frames = ((index, prepare_frame(raw, self.size, settings, self.source.linear))
                  for index, raw in io.iter_frames(self.source, max(shot.start, begin - reach), shot.end + 1))
        for (index, frame), following in _with_next(frames):
            if index >= begin:
                sources = {k: content for k, content in history if k >= self.chain_start}
                self._frame(index, frame, following and following[1], look, mattes, sources, progress,
                            rebuild=self.names[index] in finished)
            history.append((index, frame.content))
        self.work.prune_state(None)
        summary = ShotSummary.from_record(shot, finished, self.source.numbers)
        self.work.store.log(f"shot {shot.index} ({summary.frames}) done: {summary.frames_done} frames, {summary.seconds:.1f} s, "
                            f"{summary.iterations / max(1, summary.frames_done):.1f} iterations/frame, "
                            f"warping error {summary.warp_error:.5f}")

    def _resume_point(self, first_todo: int) -> int:
        """The frame to solve from: the first unfinished one if the state its temporal terms
        need is kept, else the shot's first frame (the chain is then rebuilt)."""
        fresh = [i for i in range(self.shot.start, first_todo)
                 if self.work.record["frames"].get(self.names[i], {}).get("fresh")]
        needed = [first_todo - j for j in self.offsets if first_todo - j >= max([self.shot.start] + fresh)]
        if all(self.work.load_state(k) is not None for k in needed):
            return first_todo
        self.work.store.log(f"shot {self.shot.index}: kept state missing, solving again from its first frame")
        return self.shot.start

    def _frame(self, index: int, frame: Frame, following: Frame | None, look: Look, mattes: Mattes, sources: dict,
               progress: Progress, rebuild: bool) -> None:
        t0 = time.perf_counter()
        settings, name = self.settings, self.names[index]
        earlier = [(FlowPair.between(frame.content, sources[index - j], settings.flow_preset),
                    self.work.load_state(index - j)) for j in self.offsets if index - j in sources]
        fresh = bool(earlier) and starts_new_shot(earlier[0][0], frame.content, sources.get(index - 2),
                                                  following and following.content, sources[index - 1],
                                                  settings.flow_preset)
        if fresh:  # a cut the detector missed: the chain starts again here
            earlier, self.chain_start = [], index
            self.work.store.log(f"frame {name}: no optical-flow correspondence with the frames before it "
                                f"(a missed cut?); started fresh as a new shot")
        result, stats = stylise(look, frame.content, index, earlier, self.params, settings.seed, settings.temporal)
        self.work.save_state(index, result)
        if not rebuild:  # a frame solved only to rebuild the chain stays as it was finished
            matte = mattes(index, settings.matte_softness)
            self.work.write_frame(name, deliver(result, frame, settings, matte, self.source.linear),
                                  16 if self.source.bit_depth in (16, 32) else 8)
            # the warping error of this frame and its predecessor reuses the flows of the temporal loss
            error = flow_warping_error(earlier[0][1], result, earlier[0][0]) if earlier else None
            seconds = time.perf_counter() - t0
            self.work.finish_frame(name, {"iterations": stats.iterations, "seconds": round(seconds, 3),
                                          "style": stats.style, "content": stats.content, "warp_error": error,
                                          "fresh": fresh})
            self.work.store.log(f"frame {name} shot {self.shot.index}: {stats.iterations} iterations, "
                                f"{seconds:.1f} s, style {stats.style:.4f} content {stats.content:.4f} "
                                f"temporal {stats.temporal:.5f}")
            progress("frame", index=index, shot=self.shot.index, iterations=stats.iterations, seconds=seconds)
        self.work.prune_state(index + 1 - max(self.offsets, default=0))  # what the next frame needs stays


def _with_next(items):
    """Yield (item, the item after it or None)."""
    items = iter(items)
    current = next(items, None)
    while current is not None:
        following = next(items, None)
        yield current, following
        current = following


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
    if earlier:
        image, stats = solve_coarse_to_fine(look.net, temporal_problem(content, earlier, noise), look.targets, params)
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
    with Store(out).preview() as folder:
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
            folder.write(io.frame_name(source, index), delivered)
            tiles[shot.index].append((source.names[index], frame.display, delivered))
            progress("frame", index=index, shot=shot.index, iterations=stats.iterations,
                     seconds=time.perf_counter() - t0, skipped=False)
        return [folder.write(f"contact_shot{n:03d}.png", contact_sheet(tiles[n])) for n in wanted]
