"""The render pipeline, top to bottom: the only module that knows every step.

frames → shots → per shot: its look → per frame: working frame → flow to earlier frames →
starting image and temporal targets → solver → delivered frame → output store.

Each shot starts fresh; within a shot each frame starts from the previous stylised frame
warped along the optical flow and is tied to earlier frames by the short- and long-term
temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for videos").
With several passes (the same paper's multi-pass algorithm) the shot is then gone over
backward and forward in turn, and its frames are delivered after the last pass. After every
frame (and every pass of a frame) the store records it, so re-running the same command on
the same output folder continues exactly where a killed render stopped. A preview is the
same pipeline in another mode: a few frames of each shot, each stylised on its own, laid out
on contact sheets; the stroke-detail measure renders its reference frames the same way.
"""

from __future__ import annotations

import dataclasses
import functools
import importlib.metadata
import math
import os
import re
import socket
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator, Sequence

import numpy as np
import torch

from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.area import PictureArea, shot_areas
from framestyle.finish.matte import Mattes
from framestyle.finish.compose import to_display
from framestyle.imaging import from_8bit, to_8bit, to_array
from framestyle.motion import FlowPair
from framestyle.preview import contact_sheet, sample_frames
from framestyle.qc.flash_check import (analyse_source, flash_warning, preview_warning, record_render_check,
                                       record_shot_check)
from framestyle.qc.detail import laplacian_energy
from framestyle.qc.stability import flow_warping_error
from framestyle.report import refresh_report
from framestyle.settings import Settings
from framestyle.shots import Shot, shots_from_boundaries
from framestyle.shots.clip import detect_clip
from framestyle.shots.continuity import ODD_RUN, continuity, matches
from framestyle.shots.cutlists import clip_timecode
from framestyle.shots.fades import shot_fades, thumbnail
from framestyle.shots.lists import frame_range, parse_shot_file, parse_shot_selection, shot_selection
from framestyle.store import (FLASH_KINDS, HAND_OFF, MANIFEST, Store, check_footage, check_resume, environment_changes,
                              input_fingerprints, output_names, recorded_shots, shot_list_fingerprint)
from framestyle.style.look import Look, build_look
from framestyle.style.network import FeatureNet, load_network
from framestyle.style.solver import SolverParams, SolveStats, level_sizes, solve, solve_coarse_to_fine
from framestyle.timecode import ClipTimecode
from framestyle.temporal import fresh_problem, pass_problem, start_noise, steered_tv, temporal_problem
from framestyle.working import Frame, deliver, prepare_frame, side_width, working_size

Progress = Callable[..., None]  # progress(event: str, **info); events listed in render()
PREVIEW_SIDE = 240  # default preview working size's longer side: a quick look, a few seconds a frame


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
    warnings: tuple[str, ...] = ()  # said while rendering it (a farm's client passes them on)

    @classmethod
    def from_record(cls, shot: Shot, frames: dict[str, dict], numbers: Sequence[int],
                    warnings: tuple[str, ...] = ()) -> "ShotSummary":
        errors = [e["warp_error"] for e in frames.values() if e.get("warp_error") is not None]
        return cls(shot, frame_range(shot, numbers), len(frames), sum(e["seconds"] for e in frames.values()),
                   sum(e["iterations"] for e in frames.values()), sum(errors), len(errors), warnings)

    @property
    def warp_error(self) -> float:
        return self.warp_error_sum / self.warp_error_pairs if self.warp_error_pairs else float("nan")


@dataclass
class RenderResult:
    out: Path
    frames: list[Path]
    shots: list[ShotSummary] = field(default_factory=list)
    videos: list[Path] = field(default_factory=list)  # the H.264 preview (video input) and the ProRes hand-off
    flashes: dict[str, dict] = field(default_factory=dict)  # the finished render's flash check: render, source


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
    areas: dict[int, PictureArea | None]  # each shot's picture inside black bars (None: the frame)

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
        done, sizes: :func:`working_sizes`), ``"warning"`` (message), ``"shot_start"`` (shot, frames, done),
        ``"frame"`` (index, shot, iterations, seconds: a finished frame), ``"pass"`` (shot,
        pass_, passes, done: a pass of a multi-pass shot begins), ``"pass_frame"`` (index,
        shot, pass_, iterations, seconds: a frame's pass before delivery), ``"waiting"``
        (shot, holder), ``"shot"`` (summary) and ``"video"`` (path); a ``"warning"`` says where a shot or
        the finished render flashes (WCAG 2.1 SC 2.3.1, ITU-R BT.1702)
    """
    plan = plan_render(input_path, out, settings, shots=shots, shot_file=shot_file, restart=restart,
                       keep_shot_list=keep_shot_list, progress=progress)
    taken, crowded = [], False
    for n in plan.wanted:
        crowded = crowded or _crowding(plan, progress)
        if render_shot(plan, n, progress, wait=False) is None:
            taken.append(n)
    for n in taken:  # shots another process was rendering: wait for it, finish what it left
        progress("waiting", shot=n, holder=Store(plan.out).shot_holder(n))
        render_shot(plan, n, progress, wait=True)
    return finish_render(plan, progress)


def _unmatched_looks(settings: Settings, shots: int, progress: Progress) -> None:
    """Say which shots given a look of their own the clip does not have."""
    unmatched = sorted(int(n) for n in settings.shot_looks if int(n) > shots)
    if unmatched:
        progress("warning", message=f"the look's settings for shot(s) {', '.join(map(str, unmatched))} apply to no "
                                    f"shot: the clip has {shots}")


def _crowding(plan: Plan, progress: Progress) -> bool:
    """Say so (and return True) when other processes on this machine render shots of this
    folder and the torch threads of all of them outnumber the cores: each process then runs
    several times slower (measured on 2 cores: 1.1-2.7 s a frame where one process took 0.1)."""
    others = Store(plan.out).neighbours()
    threads, cores = torch.get_num_threads(), os.cpu_count() or 1
    if not others or threads * (len(others) + 1) <= cores:
        return False
    message = (f"{plan.out}: {len(others)} other framestyle process(es) on this machine render shots here (pid "
               f"{', '.join(map(str, others))}); {len(others) + 1} processes of {threads} torch threads on {cores} "
               f"cores slow each other several times over: give each --threads {max(1, cores // (len(others) + 1))}, "
               f"or render with --workers {len(others) + 1}")
    progress("warning", message=message)
    Store(plan.out).log(message)
    return True


def plan_render(
    input_path: Path, out: Path, settings: Settings, *, shots: str | None = None,
    shot_file: Path | None = None, restart: bool = False, keep_shot_list: bool = False,
    progress: Progress = no_progress,
) -> Plan:
    """Check everything, then create (or check and continue) the render's manifest in ``out``."""
    source, net = open_render(input_path, out, settings, progress)
    inputs = input_fingerprints(source, settings)
    shot_list = shot_list_fingerprint(shot_file)
    store = Store(out)
    with store.folder_lock():
        manifest = None if restart else store.manifest()
        if manifest is not None and not keep_shot_list:
            keep_shot_list = _same_cut(manifest, source, settings, shot_list, shot_file, store.out)
        if manifest is not None:
            check_resume(manifest, settings, inputs, None if keep_shot_list else shot_list, store.out)
            shot_list_ = recorded_shots(manifest)
        else:
            shot_list_ = tuple(find_shots(source, settings, shot_file))
        # --shots is checked before a restart discards anything or a new manifest is written
        wanted = parse_shot_selection(shots, len(shot_list_)) if shots else [s.index for s in shot_list_]
        if restart:
            store.restart(output_names(source))
            store.log("restarted: previous frames, state, video, previews and records discarded")
        if manifest is not None:
            store.log(f"resuming render of {source.path}")
            handed_off = [key for key in HAND_OFF if manifest["settings"].get(key) != getattr(settings, key)]
            moved = manifest["inputs"]["input"] != inputs["input"]  # the same content (check_resume), elsewhere
            listed = not keep_shot_list and shot_list != manifest["shot_list"]  # the same list, elsewhere
            restyled = manifest["inputs"]["styles"] != inputs["styles"]  # the same images, elsewhere
            if handed_off or moved or listed or restyled:
                store.create({**manifest, "settings": settings.to_dict(), "inputs": inputs,
                              "shot_list": shot_list if listed else manifest["shot_list"]})
            if listed:
                store.log(f"the shot list moved from {manifest['shot_list']['file']} to {shot_list['file']}")
            if restyled:
                store.log(f"the style image(s) moved from {', '.join(manifest['inputs']['styles'])} to "
                          f"{', '.join(inputs['styles'])}")
            if handed_off:  # the frames stay; the videos are made from them as now asked
                store.log(f"hand-off changed ({', '.join(f'{k} {getattr(settings, k)}' for k in handed_off)}); "
                          f"the frames are kept")
            if moved:  # resume, report and flashes read the footage from its new place
                store.log(f"the footage moved from {manifest['inputs']['input']} to {inputs['input']}")
        else:
            store.log(f"frames numbered {source.numbers[0]}-{source.numbers[-1]}, first frame at timecode "
                      f"{clip_timecode(source, settings, shot_file).label(0)}")
            store.create({"settings": settings.to_dict(), "inputs": inputs, "shot_list": shot_list,
                          "shots": [s.to_dict() for s in shot_list_], "environment": library_versions(),
                          "created": time.strftime("%Y-%m-%dT%H:%M:%S%z")})
            store.log(f"new render of {source.path}, settings {settings.digest()}, "
                      f"shots {', '.join(f'{s.index}:{frame_range(s, source.numbers)}' for s in shot_list_)}")
        finished = store.finished()
    _unmatched_looks(settings, len(shot_list_), progress)
    if keep_shot_list and manifest is not None and manifest["shot_list"]["file"]:
        shot_file = Path(manifest["shot_list"]["file"])  # resumed: the list it was started with
    timecode = clip_timecode(source, settings, shot_file)
    plan = Plan(source, store.out, settings, shot_list_, tuple(wanted), timecode,
                shot_areas(source, shot_list_, settings))
    chosen = [s for s in shot_list_ if s.index in wanted]
    names = plan.names
    done = sum(1 for s in chosen for i in s.frames if names[i] in finished)
    progress("start", frames=sum(s.length for s in chosen), shots=len(chosen), done=done,
             sizes=_sizes_said(source, chosen, plan.areas, settings, net.min_side, progress))
    refresh_report(plan.out, plan.source, plan.settings, plan.timecode)
    return plan


def _same_cut(manifest: dict, source: io.FrameSource, settings: Settings, shot_list: dict, shot_file: Path | None,
              out: Path) -> bool:
    """Whether the shot list given now, another file than the render's, cuts the clip as the
    render does (the same shots, the first frame at the same timecode): an editor's list
    exported again, or detection's cut handed back; the render then goes on under its own.
    A list that cuts otherwise is a one-line error naming the first shot that differs."""
    recorded = manifest["shot_list"]
    if shot_list["sha256"] == recorded["sha256"]:
        return False  # the same list (check_resume compares by content)
    found, cut = tuple(find_shots(source, settings, shot_file)), recorded_shots(manifest)
    if found != cut:  # both cover the clip: they differ in a shot both have
        a, b = next((a, b) for a, b in zip(found, cut) if a != b)
        raise FramestyleError(f"{out}: {shot_file or 'detection'} cuts the clip otherwise than this render (shot "
                              f"{a.index} frames {frame_range(a, source.numbers)}, the render's "
                              f"{frame_range(b, source.numbers)}); give the render's cut, a new --out, or --restart "
                              f"to start over")
    old_file = Path(recorded["file"]) if recorded["file"] else None
    if old_file is not None and not old_file.is_file():
        return False  # the render's list is gone: its timecode cannot be compared (check_resume refuses)
    return clip_timecode(source, settings, shot_file).label(0) == clip_timecode(source, settings, old_file).label(0)


def finish_render(plan: Plan, progress: Progress = no_progress) -> RenderResult:
    """After the shots: the summary of the wanted shots; once every frame is done, the videos
    and the flash check of the render and its source (the authoritative one: a flash can
    straddle a cut), recorded in the output folder."""
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
            result.flashes = record_render_check(store, plan.source, done, plan.timecode)
    warning = result.flashes and flash_warning(result.flashes)
    if warning:
        progress("warning", message=f"{warning} (timeline: {store.flash_plot()})")
    result.shots = [ShotSummary.from_record(shot, records.get(shot.index, {"frames": {}})["frames"],
                                            plan.source.numbers) for shot in plan.shots if shot.index in plan.wanted]
    refresh_report(plan.out, plan.source, plan.settings, plan.timecode)
    return result


def library_versions() -> dict:
    """The versions of the libraries a render's figures come from (the manifest's record)."""
    return {name: _version(name) for name in ("framestyle", "torch", "numpy", "opencv-python-headless", "openimageio")}


def environment(net: FeatureNet) -> dict:
    """Library versions, thread count and the network's device a process renders under: a
    shot's record keeps the setup its chain started under, and a process continuing the
    chain compares (on a render farm each worker has its own)."""
    return {**library_versions(), "torch threads": torch.get_num_threads(), "device": str(net.device)}


def _version(package: str) -> str | None:
    try:
        return importlib.metadata.version(package)
    except importlib.metadata.PackageNotFoundError:
        return None


def open_render(input_path: Path, out: Path, settings: Settings, progress: Progress = no_progress,
                preview: bool = False) -> tuple[io.FrameSource, FeatureNet]:
    """Open the input and check every setting against it before the output folder is touched;
    a warning says where the input's numbering or a setting may not do what is expected."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    source = io.open_source(Path(input_path))
    Store(out).check_claimable(source.path)
    net = check_render(source, settings)
    for message in io.sequence_warnings(source) + setting_warnings(source, settings, net.min_side, preview):
        progress("warning", message=message)
    return source, net


def check_render(source: io.FrameSource, settings: Settings) -> FeatureNet:
    """Check every setting (and every shot's overrides) against ``source``; return the network."""
    net = network(settings)
    if min(source.width, source.height) < net.min_side:  # no --width can help: it never enlarges
        raise FramestyleError(f"{source.path}: frames are {source.width}×{source.height}, under the network's "
                              f"{net.min_side} pixels a side; scale the footage up first")
    if settings.fps and source.kind == "video" and abs(settings.fps - source.fps) > 1e-6 * source.fps:
        raise FramestyleError(f"{source.path}: a video keeps its own frame rate ({source.fps:g} frames/s, its sound "
                              f"and timecode follow it); fps {settings.fps:g} is for a folder of frames")
    clip_timecode(source, settings)
    if settings.prores and source.linear:
        raise FramestyleError(f"{source.path}: the ProRes hand-off is made from display-referred frames; "
                              f"a float (EXR) render is delivered as EXR frames, without --prores")
    first = io.read_frame(source, 0)
    for shot, variant in settings.looks():  # the network and its device are the whole clip's (settings.CLIP_WIDE)
        try:
            size = working_size(source.width, source.height, variant.width, net.min_side, source.pixel_aspect)
            frame = prepare_frame(first, size, variant, source.linear)
            build_look(net, variant, frame.display).targets(size)
            Mattes(source, variant.matte)
        except FramestyleError as exc:  # say which shot's look it is
            raise FramestyleError(f"{'' if shot is None else f'[shots.{shot}] '}{exc}") from None
    return net


TEMPORAL_SETTINGS = ("temporal_weight", "long_term", "flow_preset", "warp_filter", "warm_iterations", "warm_levels",
                     "warm_tv_weight", "detail_probe", "passes", "pass_iterations")
"""Settings that act only on frames started from their predecessor (the temporal chain)."""


STYLE_ENLARGEMENT = 4.0
"""Most times a style image is enlarged (by its stroke size, beside the working frame) before
a warning: past it the image's own brush detail is gone (a judgement from looking at renders)."""


def setting_warnings(source: io.FrameSource, settings: Settings, min_side: int, preview: bool = False) -> list[str]:
    """Where a setting (per shot too) cannot act as asked, one line each: coarse-to-fine levels
    the working size has no room for (those under the network's ``min_side`` are skipped), a
    width past the source's, settings of the temporal chain with the chain off or in a
    preview (whose frames are stylised one by one), later passes' iterations with one pass,
    a style weighted 0 in the mix, a style image enlarged more than :data:`STYLE_ENLARGEMENT`
    times beside the working frame, a style image with transparent areas, a matte softness
    without a matte, and matte frames paired by position with input frames numbered otherwise."""
    defaults = Settings()
    messages = []
    for shot, variant in settings.looks():
        label = "" if shot is None else f" (shot {shot})"
        size = working_size(source.width, source.height, variant.width, min_side, source.pixel_aspect)
        for key, asked in (("levels", variant.levels), ("warm_levels", variant.warm_levels)):
            used = len(level_sizes(size, asked or 1, min_side))
            if used < (asked or 1):
                messages.append(f"{key} {asked}{label}: the working size {size[0]}×{size[1]} has room for {used} "
                                f"(a level under the network's {min_side} pixels a side is skipped)")
        if variant.width and variant.width > source.width:
            messages.append(f"width {variant.width}{label}: the source is {source.width} pixels wide, so it is "
                            f"worked at {source.width}")
        unused = [k for k in TEMPORAL_SETTINGS if getattr(variant, k) != getattr(defaults, k)]
        if unused and (preview or not variant.temporal):
            why = "in a preview, whose frames are stylised one by one" if preview else "with temporal off"
            messages.append(f"{', '.join(unused)}{label}: no effect {why}")
        elif variant.passes == 1 and variant.pass_iterations != defaults.pass_iterations:
            messages.append(f"pass_iterations{label}: no effect with one pass")
        unmixed = [Path(style).name for style, weight in zip(variant.styles, variant.style_mix) if weight == 0]
        if unmixed:
            messages.append(f"style_mix{label}: {', '.join(unmixed)} weighted 0, so no part of the look")
        for style in variant.styles:
            *style_size, has_alpha, _ = io.image_header(Path(style))
            hidden = io.transparent_share(style) if has_alpha else 0.0
            if hidden:
                messages.append(f"{style}{label}: {hidden:.0%} of the style image is not fully opaque, and its "
                                f"colour there counts in the look as if it were; flatten it onto the background you "
                                f"mean first")
            enlarged = variant.stroke_size * max(size) / max(style_size)
            if enlarged > STYLE_ENLARGEMENT:
                messages.append(f"{style}{label}: a {style_size[0]}×{style_size[1]} style image is enlarged "
                                f"{enlarged:.0f}× beside the {size[0]}×{size[1]} working frame, so its strokes come out "
                                f"blurred; one of {math.ceil(enlarged * max(style_size) / STYLE_ENLARGEMENT)} pixels "
                                f"or more on its longer side keeps them")
        if not variant.matte and variant.matte_softness != defaults.matte_softness:
            messages.append(f"matte_softness{label}: no effect without a matte")
        if variant.matte and variant.matte != "alpha" and source.kind == "folder":
            mattes = io.open_source(Path(variant.matte))
            if mattes.kind == "folder" and mattes.numbers != source.numbers:
                messages.append(f"matte {variant.matte}: numbered otherwise than the input, so its frames are paired "
                                f"with the input's in order ({mattes.files[0]} with {source.files[0]})")
    return list(dict.fromkeys(messages))


def network(settings: Settings) -> FeatureNet:
    """The perceptual network of ``settings`` (network, weights, device, feature blur), loaded
    once per process for each combination of them."""
    return _network(settings.network, settings.network_weights, settings.device, settings.feature_blur)


@functools.lru_cache(maxsize=2)
def _network(name: str, weights: str | None, device: str, blur: int) -> FeatureNet:
    return load_network(name, weights, device, blur)


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
        found = detect_clip(source, cut_threshold=settings.cut_threshold, gradual_threshold=settings.gradual_threshold)
    after_gaps = [i for i, (a, b) in enumerate(zip(source.numbers, source.numbers[1:]), 1) if b > a + 1]
    return shots_from_boundaries(sorted({s.start for s in found} | set(after_gaps)), source.count)


def solver_params(settings: Settings) -> SolverParams:
    """The solver's share of the settings."""
    return SolverParams(
        style_weight=settings.style_weight, content_weight=settings.content_weight,
        tv_weight=settings.tv_weight, warm_tv_weight=settings.warm_tv_weight,
        temporal_weight=settings.temporal_weight,
        iterations=settings.iterations, warm_iterations=settings.warm_iterations, tolerance=settings.tolerance, levels=settings.levels,
        warm_levels=settings.warm_levels, image_scales=settings.image_scales, content_layer=settings.content_layer, precision=settings.precision,
    )


def framing(source: io.FrameSource, area: PictureArea | None, settings: Settings,
            min_side: int) -> tuple[PictureArea | None, tuple[int, int]]:
    """What of a shot's frames is stylised and at what working size: the picture inside its
    bars (``area``), or the whole frame where there are none or where the picture would be
    worked under the network's ``min_side`` at this width (the frame was checked to have room).
    A width asked for is the picture's; by default the picture is worked at the scale the
    whole frame would be (a 4:3 picture in a 1920×1080 frame at 960×720, as the frame at 1280×720)."""
    if area is not None:
        try:
            width = settings.width or max(1, round(area.width / source.width * working_size(
                source.width, source.height, None, min_side, source.pixel_aspect)[0]))
            return area, working_size(area.width, area.height, width, min_side, source.pixel_aspect)
        except FramestyleError:
            pass
    return None, working_size(source.width, source.height, settings.width, min_side, source.pixel_aspect)


def working_sizes(source: io.FrameSource, shots: Sequence[Shot], areas: dict[int, PictureArea | None],
                  settings: Settings, min_side: int) -> list[tuple[tuple[int, int], bool, list[int]]]:
    """The sizes ``shots`` are worked at (:func:`framing`, each with its own look's settings),
    as ``((width, height), inside black bars, shot indices)``, the size most shots share first."""
    groups: dict[tuple[tuple[int, int], bool], list[int]] = {}
    for shot in shots:
        area, size = framing(source, areas[shot.index], settings.for_shot(shot.index), min_side)
        groups.setdefault((size, area is not None), []).append(shot.index)
    return [(size, bars, indices) for (size, bars), indices in sorted(groups.items(), key=lambda g: -len(g[1]))]


def _sizes_said(source: io.FrameSource, shots: Sequence[Shot], areas: dict[int, PictureArea | None],
                settings: Settings, min_side: int, progress: Progress) -> list[tuple[tuple[int, int], bool, list[int]]]:
    """:func:`working_sizes`, saying which shots' bars are painted all the same: their picture
    would be worked under the network's ``min_side`` at the width asked for."""
    sizes = working_sizes(source, shots, areas, settings, min_side)
    boxed = {index for _, bars, indices in sizes if bars for index in indices}
    painted = [shot.index for shot in shots if areas[shot.index] is not None and shot.index not in boxed]
    if painted:
        progress("warning", message=f"shot(s) {shot_selection(painted)}: the picture inside the black bars would be "
                                    f"worked under the network's {min_side} pixels a side at this width, so the whole "
                                    f"frame is stylised, bars and all; a larger --width keeps the bars")
    return sizes


def shot_look(net: FeatureNet, source: io.FrameSource, settings: Settings, shot: Shot,
              area: PictureArea | None = None, fades: np.ndarray | None = None) -> Look:
    """A shot's look; with ``colour="match"`` the style is recoloured to the shot's first frame
    out of a fade (``fades``, :func:`fades_of_shot`; the picture inside ``area``, the bars left out)."""
    reference = None
    if settings.colour == "match":
        unfaded = fades is not None and (fades[:, 0] == 1).any()
        first = int(np.argmax(fades[:, 0] == 1)) if unfaded else 0
        reference = to_display(io.read_frame(source, shot.start + first), source.linear)
        reference = reference if area is None else area.crop(reference)
    return build_look(net, settings, reference)


def fades_of_shot(source: io.FrameSource, settings: Settings, shot: Shot, area: PictureArea | None,
                  size: tuple[int, int]) -> np.ndarray:
    """``(shot.length, 2)`` each of ``shot``'s frames' fade gain and the level it fades toward
    (:func:`framestyle.shots.fades.shot_fades`; gains all 1 with ``keep_fades`` off), from
    thumbnails of the picture the solver sees (``area`` at ``size``): one read of the shot's frames."""
    if not settings.keep_fades:
        return np.stack([np.ones(shot.length), np.zeros(shot.length)], axis=1)
    return shot_fades(np.stack([thumbnail(prepare_frame(raw, size, settings, source.linear, area).content)
                                for _, raw in io.iter_frames(source, shot.start, shot.end + 1)]))


# --- one shot -------------------------------------------------------------------------------

def render_shot(plan: Plan, index: int, progress: Progress = no_progress, wait: bool = True,
                check_flashes: bool = False) -> ShotSummary | None:
    """Render shot ``index`` of a planned render, continuing its temporal chain where it stopped.

    Returns None (without ``wait``) if another process is rendering the shot. Frames already
    finished are never rewritten. Where the chain cannot continue from kept state (the state
    of the frames it needs is gone or damaged), the shot is solved again from its first
    frame, writing only the frames that are not finished. With ``check_flashes`` (a farm's
    workers) the shot's frames and source are checked for flashes and recorded, so a long
    farmed render warns early; the whole render's check in :func:`finish_render` is the
    authoritative one.
    """
    shot = plan.shots[index - 1]
    settings = plan.settings.for_shot(index)
    with Store(plan.out).shot(index, wait) as work:
        if work is None:
            return None
        names, warnings = plan.names, []

        def warn(message: str) -> None:
            progress("warning", message=message)
            work.store.log(message)
            warnings.append(message)

        for problem in work.reconcile(names[shot.start:shot.end + 1]):
            warn(problem)
        finished = work.record["frames"]
        todo = [i for i in shot.frames if names[i] not in finished]
        if todo and len(todo) < shot.length:  # a takeover the log should show: who, from where
            work.store.log(f"shot {index}: continued at {names[todo[0]]} by pid {os.getpid()} on "
                           f"{socket.gethostname()}, {shot.length - len(todo)} of its frames done before")
        here = environment(network(settings))
        if not (finished or work.pending()):
            work.record["environment"] = here  # written with the shot's first frame
        elif todo:
            for change in environment_changes(work.record.get("environment"), here):
                warn(f"shot {index} continues at {names[todo[0]]} under {change}: its frames from there keep the "
                     f"look but may place their strokes differently from the frames before")
        if todo:
            _ShotRender(plan, work, settings, shot).run(todo, progress)
        else:  # a process killed as it finished the shot may have left its state and pass counts
            if work.has_state():
                work.prune_state(None)
            work.forget_passes()
        flashes = None
        if check_flashes and (todo or not all(work.store.flash_check(kind, index) for kind in FLASH_KINDS)):
            flashes = record_shot_check(work.store, plan.source, names, plan.timecode, shot)
        summary = ShotSummary.from_record(shot, work.record["frames"], plan.source.numbers, tuple(warnings))
    warning = flashes and flash_warning(flashes, f"shot {index}")
    if warning:
        progress("warning", message=warning)
    refresh_report(plan.out, plan.source, plan.settings, plan.timecode)
    progress("shot", summary=summary)
    return summary


class _ShotRender:
    """The frames of one shot: a forward pass, each frame from its warped predecessors; in a
    multi-pass render then backward and forward passes in turn, each frame started from a
    blend of its own last result and its neighbour in the pass's direction (Ruder,
    Dosovitskiy & Brox 2016, multi-pass algorithm), and the frames delivered in order after
    the last pass. The shot's record counts the passes each unfinished frame has had, so a
    killed render resumes inside the pass it was in. Along every pass the warm-started
    frames' TV weight is steered toward the stroke detail of frames solved on their own
    (:func:`framestyle.temporal.steered_tv`); each frame's record entry keeps its weight, its
    detail and the reference (``steer``), so a resumed chain steers exactly as an unbroken one."""

    def __init__(self, plan: Plan, work, settings: Settings, shot: Shot):
        self.plan, self.work, self.settings, self.shot = plan, work, settings, shot
        self.source, self.names = plan.source, plan.names
        self.net = network(settings)
        source = self.source
        self.area, self.size = framing(source, plan.areas[shot.index], settings, self.net.min_side)
        self.fades = fades_of_shot(source, settings, shot, self.area, self.size)
        self.params = solver_params(settings)
        self.offsets = sorted(settings.long_term) if settings.temporal else []
        # the earlier frames a frame looks back to: its temporal terms', and the chain's last
        # frame before a run of odd frames, which the frame after the run goes on from
        self.looks_back = {*self.offsets, *range(1, ODD_RUN + 2)} if self.offsets else set()
        self.reach = max(self.looks_back, default=0)
        self.passes = settings.passes if settings.temporal else 1
        self.probe = settings.detail_probe if settings.temporal else 0
        self.base_tv = settings.tv_weight if settings.warm_tv_weight is None else settings.warm_tv_weight
        self.chain_start = shot.start  # the shot's first frame, or a missed cut found in it

    def run(self, todo: list[int], progress: Progress) -> None:
        shot, settings, finished = self.shot, self.settings, self.work.record["frames"]
        first_pass, begin = self._resume_point(todo[0])
        look = shot_look(self.net, self.source, settings, shot, self.area, self.fades)
        mattes = Mattes(self.source, settings.matte)
        if self.area is not None:  # the record (written with the next frame) tells the report
            self.work.record["area"] = self.area.label()
            self.work.store.log(f"shot {shot.index}: black bars around the picture; the picture "
                                f"{self.area.label()} is stylised, the bars delivered as they are")
        elif self.plan.areas[shot.index] is not None:
            self.work.store.log(f"shot {shot.index}: black bars around the picture {self.plan.areas[shot.index].label()}, "
                                f"which would be worked under the network's {self.net.min_side} pixels a side at "
                                f"this width: the whole frame is stylised, bars and all")
        faded = self.fades[:, 0] < 1
        if faded.all():
            self.work.store.log(f"shot {shot.index}: black, white or fading throughout; the render fades with it")
        elif faded.any():
            lead, trail = int(np.argmax(~faded)), int(np.argmax(~faded[::-1]))
            for fade, first, last in (("in from", 0, lead - 1), ("out to", shot.length - trail, shot.length - 1)):
                if last >= first:
                    colour = "white" if self.fades[first, 1] else "black"
                    self.work.store.log(f"shot {shot.index}: fades {fade} {colour} over {self.names[shot.start + first]}"
                                        f"-{self.names[shot.start + last]}; the render fades with it")
        progress("shot_start", shot=shot.index, frames=shot.length, done=shot.length - len(todo))
        if first_pass == 1:
            self._first_pass(begin, look, mattes, progress)
        for pass_ in range(max(first_pass, 2), self.passes + 1):
            self._later_pass(pass_, begin if pass_ == first_pass else None, look, progress)
        if self.passes > 1:
            self._deliver_passes(mattes, progress)
        self.work.prune_state(None)
        self.work.forget_passes()
        summary = ShotSummary.from_record(shot, finished, self.source.numbers)
        self.work.store.log(f"shot {shot.index} ({summary.frames}) done: {summary.frames_done} frames, {summary.seconds:.1f} s, "
                            f"{summary.iterations / max(1, summary.frames_done):.1f} iterations/frame, "
                            f"warping error {summary.warp_error:.5f}")

    # --- where to continue ------------------------------------------------------------------

    def _entry(self, index: int) -> dict:
        """Frame ``index``'s record entry: pending in a multi-pass render, or finished."""
        name = self.names[index]
        return self.work.pending().get(name) or self.work.record["frames"].get(name, {})

    def _passes_done(self, index: int) -> int:
        name = self.names[index]
        if name in self.work.pending():
            return self.work.pending()[name]["passes"]
        return self.passes if name in self.work.record["frames"] else 0

    def _resume_point(self, first_todo: int) -> tuple[int, int]:
        """The pass (``passes + 1``: the delivery of a multi-pass render) and the frame to solve
        from: where the render stopped if the state its temporal terms and later passes need is
        kept, else the first pass at the shot's first frame (the chain is then rebuilt,
        finished frames left as they are)."""
        shot = self.shot
        if self.passes == 1:
            fresh = [i for i in range(shot.start, first_todo) if self._entry(i).get("fresh")]
            needed = [(first_todo - j, "pass1") for j in self.looks_back if first_todo - j >= max([shot.start] + fresh)]
            pass_, begin = 1, first_todo
        else:
            done = {i: self._passes_done(i) for i in shot.frames}
            pass_ = min(done.values()) + 1
            order = list(self._order(pass_))
            begin = next(i for i in order if done[i] < pass_)
            if pass_ == 1:  # the later passes need every frame's first result and working frame
                needed = [(i, layer) for i in range(shot.start, begin) for layer in ("pass1", "content")]
            elif pass_ > self.passes:  # only the delivery is left
                needed = [(i, f"pass{self.passes}") for i in order if self.names[i] not in self.work.record["frames"]]
            else:
                needed = [(i, "content") for i in order] + [(i, f"pass{pass_ - 1}") for i in order[order.index(begin):]]
                neighbour = self._neighbour(begin, pass_, self._chain_starts())
                needed += [(neighbour, f"pass{pass_}")] if neighbour is not None else []
        if all(self.work.load_state(i, layer) is not None for i, layer in needed):
            return pass_, begin
        self.work.store.log(f"shot {shot.index}: kept state missing, solving again from its first frame")
        if self.passes > 1:
            self.work.restart_passes([self.names[i] for i in shot.frames])
        return 1, shot.start

    def _order(self, pass_: int) -> range:
        """The shot's frames in pass ``pass_``'s direction: odd passes forward, even backward."""
        if pass_ % 2:
            return self.shot.frames
        return range(self.shot.end, self.shot.start - 1, -1)

    def _chain_starts(self) -> set[int]:
        """The shot's first frame and any frame the first pass started fresh (a missed cut)."""
        return {self.shot.start} | {i for i in self.shot.frames if self._entry(i).get("fresh")}

    def _last(self, index: int) -> int | None:
        """The chain's last frame before ``index`` that is not odd (see
        :mod:`framestyle.shots.continuity`); None where the chain starts at ``index`` or the
        frames are solved apart (no temporal terms)."""
        last = index - 1
        while last >= self.chain_start and self._entry(last).get("odd"):
            last -= 1
        return last if self.offsets and last >= self.chain_start else None

    def _neighbour(self, index: int, pass_: int, starts: set[int]) -> int | None:
        """The frame solved just before ``index`` in pass ``pass_``, if in the same chain."""
        if pass_ % 2:
            return index - 1 if index not in starts else None
        return index + 1 if index < self.shot.end and index + 1 not in starts else None

    # --- the passes ---------------------------------------------------------------------------

    def _first_pass(self, begin: int, look: Look, mattes: Mattes, progress: Progress) -> None:
        shot, settings = self.shot, self.settings
        # a chain starts at a fresh frame, or after a held one (a fade's black or white hold)
        self.chain_start = max([shot.start] + [i + bool(self._entry(i).get("held")) for i in range(shot.start, begin)
                                               if self._entry(i).get("fresh")])
        if self.passes > 1:
            progress("pass", shot=shot.index, pass_=1, passes=self.passes, done=begin - shot.start)
        # (index, working frame in 8 bits): the flows to frames up to ``reach`` back need them, and
        # 41 float frames at 1280×720 were 450 MB (DIS works on 8-bit grey frames anyway)
        history: deque[tuple[int, np.ndarray]] = deque(maxlen=self.reach + 1)
        frames = _Lookahead((index, prepare_frame(raw, self.size, settings, self.source.linear, self.area,
                                                  *self.fades[index - shot.start]))
                            for index, raw in io.iter_frames(self.source, max(shot.start, begin - self.reach), shot.end + 1))
        ahead = lambda count: (frame.content for _, frame in frames.following(count))
        for index, frame in frames:
            if index >= begin:
                sources = {k: from_8bit(kept) for k, kept in history
                           if k >= self.chain_start and index - k in self.looks_back}
                self._frame(index, frame, ahead, look, mattes, sources, progress)
            history.append((index, to_8bit(frame.content)))
        if self.passes > 1:
            self.work.store.log(f"shot {shot.index}: pass 1 of {self.passes} done")

    def _frame(self, index: int, frame: Frame, ahead: Callable[[int], Iterator[np.ndarray]], look: Look,
               mattes: Mattes, sources: dict, progress: Progress) -> None:
        """Solve frame ``index`` of the first pass; ``ahead(n)`` yields the working frames of up
        to ``n`` frames after it, each read only when the continuity check asks for it."""
        t0 = time.perf_counter()
        if frame.held:
            self._hold(index, frame, mattes, progress, t0)
            return
        settings, name, preset = self.settings, self.names[index], self.settings.flow_preset
        last = self._last(index)
        verdict, earlier, linked = "same", [], None  # linked: the frame this one continues
        if last is not None:
            to_last = FlowPair.between(frame.content, sources[last], preset)
            verdict = continuity(frame.content, sources[last], to_last, ahead(ODD_RUN - (index - 1 - last)), preset)
        if verdict == "same" and last is not None:  # its temporal terms: the chain's frames, none odd
            earlier = [(to_last, self.work.load_state(last))] + [
                (FlowPair.between(frame.content, sources[index - j], preset), self.work.load_state(index - j))
                for j in self.offsets if index - j in sources and index - j < last and not self._entry(index - j).get("odd")]
            linked = last
        elif verdict == "cut":  # a cut the detector missed: the chain starts again here
            self.chain_start = index
            self.work.store.log(f"frame {name}: no optical-flow correspondence with the frames before it "
                                f"(a missed cut?); started fresh as a new shot")
        elif verdict == "odd":  # a flash, a cutaway: nothing of it goes on into the shot
            self.work.store.log(f"frame {name}: no optical-flow correspondence with the frame before it, but the "
                                f"picture comes back within {ODD_RUN} frames (a flash, a cutaway?); solved apart, "
                                f"the chain goes on past it")
            if index - 1 != last:  # inside a run of odd frames: it may go on from the run's frame before
                to_odd = FlowPair.between(frame.content, sources[index - 1], preset)
                if matches(frame.content, sources[index - 1], to_odd):
                    earlier, linked = [(to_odd, self.work.load_state(index - 1))], index - 1
        fresh = index == self.chain_start and index != self.shot.start  # after a missed cut or a held frame
        steering = verdict == "same" and bool(earlier) and self.probe > 0
        tv, reference = self._steer(index, frame.content, look) if steering else (self.base_tv, None)
        params = dataclasses.replace(self.params, warm_tv_weight=tv) if steering else self.params
        result, stats = stylise(look, frame.content, index, earlier, params, settings.seed, settings.temporal,
                                settings.warp_filter)
        if self.passes > 1:  # every frame's working frame and result are kept for the next pass
            self.work.save_state(index, frame.content, "content")
        self.work.save_state(index, result)
        # the warping error of this frame and its predecessor, and the source's own along the same
        # flows (the reference the report shows beside it), reuse the flows of the temporal loss
        error = flow_warping_error(earlier[0][1], result, earlier[0][0]) if earlier else None
        source_error = flow_warping_error(sources[linked], frame.content, earlier[0][0]) if earlier else None
        entry = {"iterations": stats.iterations, "style": stats.style, "content": stats.content,
                 "warp_error": error, "source_warp_error": source_error, "fresh": fresh, "odd": verdict == "odd"}
        if self.probe and verdict == "odd":  # the steering passes over odd frames
            entry["steer"] = self._entry(index - 1)["steer"]
        elif self.probe:  # a chain's start is solved on its own: its detail is the first reference
            energy = laplacian_energy(result)
            entry["steer"] = [tv, energy, reference if steering else energy]
        if self.passes > 1:
            self._note(index, 1, entry, time.perf_counter() - t0, progress)
            return
        self._deliver(index, frame, result, entry, mattes, time.perf_counter() - t0, progress, stats.temporal)
        self.work.prune_state(index + 1 - self.reach)  # what the next frames need stays

    def _hold(self, index: int, frame: Frame, mattes: Mattes, progress: Progress, t0: float) -> None:
        """Frame ``index`` of the first pass, held at a fade's black or white
        (:attr:`~framestyle.working.Frame.held`): delivered as that level without solving; no
        chain goes through it (the footage has no picture there), the next frame starts one."""
        self.chain_start = index + 1
        result = frame.held_result()
        self.work.save_state(index, result)
        entry = {"iterations": 0, "style": None, "content": None, "warp_error": None, "source_warp_error": None,
                 "fresh": True, "odd": False, "held": True}
        if self.passes > 1:
            self.work.save_state(index, frame.content, "content")
            self._note(index, 1, entry, time.perf_counter() - t0, progress)
        else:
            self._deliver(index, frame, result, entry, mattes, time.perf_counter() - t0, progress)
            self.work.prune_state(index + 1 - self.reach)

    def _later_pass(self, pass_: int, begin: int | None, look: Look, progress: Progress) -> None:
        """Pass ``pass_`` ≥ 2 over the shot (from ``begin`` when resuming inside it)."""
        shot, settings = self.shot, self.settings
        layer, before = f"pass{pass_}", f"pass{pass_ - 1}"
        params = dataclasses.replace(self.params, iterations=settings.pass_iterations)
        starts = self._chain_starts()
        order = list(self._order(pass_))
        order = order[order.index(begin):] if begin is not None else order
        progress("pass", shot=shot.index, pass_=pass_, passes=self.passes, done=shot.length - len(order))
        solved = None  # (index, working frame, result in this pass) of the frame solved just before
        neighbour = self._neighbour(order[0], pass_, starts)
        if neighbour is not None:
            solved = (neighbour, self.work.load_state(neighbour, "content"), self.work.load_state(neighbour, layer))
        for index in order:
            t0 = time.perf_counter()
            if self._entry(index).get("held"):  # as in the first pass: no chain goes through it
                self.work.save_state(index, self.work.load_state(index, before), layer)
                self._note(index, pass_, {}, time.perf_counter() - t0, progress, 0)
                self.work.drop_state(index, before)
                solved = None
                continue
            content, neighbour = self.work.load_state(index, "content"), self._neighbour(index, pass_, starts)
            pair = FlowPair.between(content, solved[1], settings.flow_preset) if neighbour is not None else None
            problem = pass_problem(content, self.work.load_state(index, before), pair and (pair, solved[2]),
                                   settings.warp_filter)
            steer = self._entry(index).get("steer")
            if steer:  # steered from the frame solved before it in this pass (the pass's first: from its
                # own last pass) toward the reference of its first pass
                tv, energy, _ = self._entry(index if neighbour is None else neighbour)["steer"]
                tv, reference = steered_tv(tv, energy, steer[2], self.base_tv), steer[2]
            frame_params = dataclasses.replace(params, warm_tv_weight=tv) if steer else params
            image, stats = solve(look.net, problem, look.targets(self.size), frame_params)
            result = to_array(image)
            self.work.save_state(index, result, layer)
            # the frame pair's warping error: forward (neighbour, frame), backward (frame, neighbour)
            error = None if pair is None else (
                flow_warping_error(solved[2], result, pair) if pass_ % 2
                else flow_warping_error(result, solved[2], FlowPair(pair.forward, pair.backward)))
            entry = {"style": stats.style, "content": stats.content, "warp_error": error}
            if steer:
                entry["steer"] = [tv, laplacian_energy(result), reference]
            self._note(index, pass_, entry, time.perf_counter() - t0, progress, stats.iterations)
            self.work.drop_state(index, before)
            solved = (index, content, result)
        self.work.store.log(f"shot {shot.index}: pass {pass_} of {self.passes} done")

    def _steer(self, index: int, content: np.ndarray, look: Look) -> tuple[float, float]:
        """The TV weight of warm-started frame ``index`` and the stroke detail it is steered toward.

        From the previous frame's weight, detail and reference in its record entry
        (:func:`framestyle.temporal.steered_tv`); every ``detail_probe`` frames from the
        chain's start the frame is first solved on its own (a shot's first-frame treatment)
        and its Laplacian energy becomes the reference: what the style gives this part of the
        shot, which drifts as the shot's content changes.
        """
        tv, energy, reference = self._entry(index - 1)["steer"]
        if (index - self.chain_start) % self.probe == 0:
            alone, _ = stylise(look, content, index, [], self.params, self.settings.seed, temporal=False)
            reference = laplacian_energy(alone)
            self.work.store.log(f"frame {self.names[index]}: detail probe: solved on its own too; the chain had "
                                f"{energy / reference:.3f} of its stroke detail")
        return steered_tv(tv, energy, reference, self.base_tv), reference

    def _note(self, index: int, pass_: int, entry: dict, seconds: float, progress: Progress,
              iterations: int | None = None) -> None:
        """Record a frame's pass ``pass_`` (not its last): its figures added to its earlier passes'."""
        name = self.names[index]
        so_far = self.work.pending().get(name, {}) if pass_ > 1 else {}
        iterations = entry.get("iterations", 0) if iterations is None else iterations
        self.work.note_pass(name, {**so_far, **entry, "passes": pass_,
                                   "iterations": so_far.get("iterations", 0) + iterations,
                                   "seconds": round(so_far.get("seconds", 0.0) + seconds, 3)})
        progress("pass_frame", index=index, shot=self.shot.index, pass_=pass_, iterations=iterations, seconds=seconds)

    def _deliver_passes(self, mattes: Mattes, progress: Progress) -> None:
        """After the last pass: deliver the unfinished frames, in order, from their last results."""
        shot, last = self.shot, f"pass{self.passes}"
        todo = [i for i in shot.frames if self.names[i] not in self.work.record["frames"]]
        if not todo:
            return
        for index, raw in io.iter_frames(self.source, todo[0], shot.end + 1):
            name = self.names[index]
            if name in self.work.record["frames"]:
                continue
            t0 = time.perf_counter()
            frame = prepare_frame(raw, self.size, self.settings, self.source.linear, self.area,
                                  *self.fades[index - shot.start])
            entry = {k: v for k, v in self.work.pending()[name].items() if k != "passes"}
            seconds = entry.pop("seconds") + time.perf_counter() - t0
            self._deliver(index, frame, self.work.load_state(index, last), entry, mattes, seconds, progress)
            self.work.drop_state(index, last)

    def _deliver(self, index: int, frame: Frame, result: np.ndarray, entry: dict, mattes: Mattes, seconds: float,
                 progress: Progress, temporal: float | None = None) -> None:
        """Write a frame's final result and record it as finished, with its figures (iterations,
        style, content, warp_error, fresh); a frame solved again only to rebuild the chain
        stays as it was finished."""
        settings, name = self.settings, self.names[index]
        if name in self.work.record["frames"]:
            return
        matte = mattes(index, settings.matte_softness)
        # the footage's alpha passes through, as a compositor expects
        alpha = io.read_alpha(self.source, index) if self.source.has_alpha else None
        image = deliver(result, frame, settings, matte, self.source.linear, alpha)
        self.work.write_frame(name, image, _output_depth(self.source))
        self.work.finish_frame(name, {**entry, "seconds": round(seconds, 3), "finished": round(time.time(), 3)})
        if entry.get("held"):
            self.work.store.log(f"frame {name} shot {self.shot.index}: {'white' if frame.toward else 'black'} "
                                f"in a fade, delivered so without solving")
        else:
            self.work.store.log(f"frame {name} shot {self.shot.index}: {entry['iterations']} iterations, "
                                f"{seconds:.1f} s, style {entry['style']:.4f} content {entry['content']:.4f}"
                                + (f" temporal {temporal:.5f}" if temporal is not None else ""))
        progress("frame", index=index, shot=self.shot.index, iterations=entry["iterations"], seconds=seconds)


class _Lookahead:
    """An iterator that can show the items after the one it gave last, reading each only when
    asked for (a frame's look ahead is wanted only where it does not continue its chain)."""

    def __init__(self, items):
        self._items, self._read = iter(items), deque()

    def __iter__(self):
        return self

    def __next__(self):
        return self._read.popleft() if self._read else next(self._items)

    def following(self, count: int) -> Iterator:
        """Yield up to ``count`` items after the one given last."""
        for k in range(count):
            if k == len(self._read):
                item = next(self._items, None)
                if item is None:
                    return
                self._read.append(item)
            yield self._read[k]


def stylise(
    look: Look, content: np.ndarray, index: int, earlier: Sequence[tuple[FlowPair, np.ndarray]],
    params: SolverParams, seed: int, temporal: bool = True, interpolation: str = "linear",
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
    interpolation : the resampling filter warping the earlier frames

    Returns
    -------
    (h, w, 3) float32 result in [0, 1], and the solver's statistics
    """
    noise = start_noise((1, 3, *content.shape[:2]), seed, index)
    if earlier:
        problem = temporal_problem(content, earlier, noise, interpolation)
        image, stats = solve_coarse_to_fine(look.net, problem, look.targets, params)
    else:
        anchor = dataclasses.replace(params, tolerance=params.tolerance / 2) if temporal else params
        image, stats = solve_coarse_to_fine(look.net, fresh_problem(content, noise), look.targets, anchor)
    return to_array(image), stats


# --- frames stylised on their own: previews, the reference of the detail measure ---------------

def _stylised_alone(source: io.FrameSource, net: FeatureNet, settings: Settings, chosen: dict[int, Shot],
                    areas: dict[int, PictureArea | None],
                    linear: bool) -> Iterator[tuple[int, Shot, Frame, np.ndarray, SolveStats, float]]:
    """Each chosen frame (index → its shot) stylised on its own with its shot's look and picture
    area (``areas``, :func:`framestyle.area.shot_areas`) — a shot's first-frame treatment, no
    temporal chain — and delivered (in the source's encoding if
    ``linear``, else display-referred). Yields (index, shot, frame, delivered, stats, seconds)
    in frame order."""
    looks: dict[int, tuple[Settings, PictureArea | None, tuple[int, int], np.ndarray, Look, Mattes]] = {}
    for index, raw in io.pick_frames(source, chosen):
        t0 = time.perf_counter()
        shot = chosen[index]
        if shot.index not in looks:
            shot_settings = settings.for_shot(shot.index)
            area, size = framing(source, areas[shot.index], shot_settings, net.min_side)
            fades = fades_of_shot(source, shot_settings, shot, area, size)
            looks[shot.index] = (shot_settings, area, size, fades,
                                 shot_look(net, source, shot_settings, shot, area, fades), Mattes(source, shot_settings.matte))
        shot_settings, area, size, fades, look, mattes = looks[shot.index]
        frame = prepare_frame(raw, size, shot_settings, source.linear, area, *fades[index - shot.start])
        if frame.held:  # delivered as the fade's level whatever is solved
            result, stats = frame.held_result(), SolveStats(0, 0.0, 0.0, 0.0)
        else:
            result, stats = stylise(look, frame.content, index, [], solver_params(shot_settings), shot_settings.seed,
                                    temporal=False)
        delivered = deliver(result, frame, shot_settings, mattes(index, shot_settings.matte_softness), linear)
        yield index, shot, frame, delivered, stats, time.perf_counter() - t0


def frames_alone(out: Path, source_path: Path, indices: Sequence[int]) -> Iterator[tuple[int, np.ndarray]]:
    """Frames ``indices`` of the render in ``out`` stylised each on its own with the render's
    settings and delivered as its frames are (rounded like its 8- or 16-bit files): what the
    render's stroke detail is measured against (:mod:`framestyle.qc.detail`).

    Yields (index, (H, W, 3) frame) in frame order. ``source_path`` is the footage the
    render was made from.
    """
    manifest = Store(out).manifest()
    if manifest is None:
        raise FramestyleError(f"{out}: no {MANIFEST}; the detail measure needs the render's settings")
    settings = Settings.from_dict(manifest["settings"], str(Path(out) / MANIFEST))
    source = io.open_source(Path(source_path))
    shots = list(recorded_shots(manifest))
    chosen = {i: next(s for s in shots if s.start <= i <= s.end) for i in indices}
    levels = 2 ** _output_depth(source) - 1
    net = network(settings)
    areas = shot_areas(source, list({shot.index: shot for shot in chosen.values()}.values()), settings)
    for index, _, _, delivered, _, _ in _stylised_alone(source, net, settings, chosen, areas, source.linear):
        yield index, delivered if source.linear else np.round(delivered * levels) / levels


def _output_depth(source: io.FrameSource) -> int:
    """Bit depth of a render's PNG frames (float sources are delivered as EXR)."""
    return 16 if source.bit_depth in (16, 32) else 8


# --- previews -------------------------------------------------------------------------------

_SHEET = "contact_shot{:03d}.png"  # a preview's contact sheet of shot N


def _sheet_shot(name: str) -> int:
    """The shot number of a contact sheet's file name (0 for a name not of that form)."""
    match = re.fullmatch(r"contact_shot(\d+)\.png", name)
    return int(match[1]) if match else 0


def preview(input_path: Path, out: Path, settings: Settings, every: int, *, width: int | None = None,
            shots: str | None = None, shot_file: Path | None = None,
            progress: Progress = no_progress) -> list[Path]:
    """Stylise every ``every``-th frame of each shot into ``out/preview`` and write contact sheets.

    Each previewed frame gets a shot's first-frame treatment (no temporal chain) with its
    shot's look, colour, strength and matte.

    Parameters
    ----------
    width : preview working width for every shot (default: the render's width, at most the
        source's and the width that makes the longer side :data:`PREVIEW_SIDE`)

    Returns
    -------
    The contact sheet paths, one per previewed shot.

    The source is checked for flashes (previewed frames, stylised one by one and sampled,
    are not: a warning says when the source already flashes). ``out`` may hold a render of
    the same footage (the preview goes beside it), not of other footage.
    """
    for option, value in (("--every", every), ("--width", width)):
        if value is not None and value < 1:
            raise FramestyleError(f"{option} {value}: must be 1 or more")
    if width is None:  # not asked for: nothing to warn about where the source is narrower
        source = io.open_source(input_path)
        quick = side_width(source.width, source.height, PREVIEW_SIDE, source.pixel_aspect)
        width = min(settings.width or quick, quick, source.width)
    settings = dataclasses.replace(settings, width=width, shot_looks={
        n: {**look, "width": width} for n, look in settings.shot_looks.items()})
    source, net = open_render(input_path, out, settings, progress, preview=True)
    render_of = Store(out).manifest()
    if render_of is not None:  # the preview goes beside a render of the same footage only
        check_footage(render_of, source, out)
    shot_list = find_shots(source, settings, shot_file)
    _unmatched_looks(settings, len(shot_list), progress)
    wanted = parse_shot_selection(shots, len(shot_list)) if shots else [s.index for s in shot_list]
    chosen = {i: shot for shot in shot_list if shot.index in wanted for i in sample_frames(shot.start, shot.end, every)}
    shots_wanted = [shot for shot in shot_list if shot.index in wanted]
    areas = shot_areas(source, shots_wanted, settings)
    progress("start", frames=len(chosen), shots=len(wanted), done=0,
             sizes=_sizes_said(source, shots_wanted, areas, settings, net.min_side, progress))
    tiles: dict[int, list] = {n: [] for n in wanted}
    with Store(out).preview() as folder:
        for index, shot, frame, delivered, stats, seconds in _stylised_alone(source, net, settings, chosen, areas, False):
            folder.write(io.frame_name(source, index), delivered)
            tiles[shot.index].append((source.names[index], frame.display, delivered))
            progress("frame", index=index, shot=shot.index, iterations=stats.iterations, seconds=seconds, skipped=False)
        sheets = [folder.write(_SHEET.format(n), contact_sheet(tiles[n])) for n in wanted]
        # an earlier preview of these shots sampled other frames: theirs would mix with these
        folder.remove({io.frame_name(source, i) for n in wanted for i in range(shot_list[n - 1].start,
                                                                                shot_list[n - 1].end + 1)}
                      - {io.frame_name(source, i) for i in chosen})
        # sheets of shots this preview's shot list does not have (or, previewing every shot,
        # of any shot) are an earlier preview's: the report would show them as this one's
        written = {sheet.name for sheet in sheets}
        stale = [Path(name).name for name in Store(out).preview_sheets()]
        folder.remove(name for name in stale if name not in written and (not shots or _sheet_shot(name) > len(shot_list)))
    warning = preview_warning(analyse_source(source, clip_timecode(source, settings, shot_file)).to_dict())
    if warning:
        progress("warning", message=warning)
    return sheets
