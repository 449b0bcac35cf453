"""The render loop: the only module that knows frames, shots, flow, solver and checkpoints.

Data flows one way: frames → shots → per frame: flow → starting image and masks → solver →
write → checkpoint. Each shot starts fresh; within a shot each frame starts from the previous
stylised frame warped along the optical flow and is tied to earlier frames by the short- and
long-term temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for
videos"). After every frame the manifest is updated, so re-running the same command on the
same output folder continues exactly where a killed render stopped.
"""

from __future__ import annotations

import hashlib
import logging
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Sequence

import cv2
import numpy as np
import torch

from . import atomic, checkpoint, frames
from .errors import FramestyleError
from .flow import compute_flow, long_term_masks, reliability_mask, warp
from .metrics import pair_warping_error
from .network import FeatureNet, load_network
from .settings import Settings
from .shots import Shot, detect_shots, frame_signature, parse_shot_file
from .solver import Problem, solve, style_targets

Progress = Callable[..., None]  # progress(event: str, **info); events listed in render()
_NOISE = 0.1  # std of the noise added where a frame starts from its content frame


def no_progress(event: str, **info) -> None:
    """The default progress callback: report nothing."""


# --- conversions at the boundary between numpy frames and torch tensors ---------------------

def to_tensor(image: np.ndarray) -> torch.Tensor:
    """(H, W, 3) float32 array → (1, 3, H, W) tensor."""
    return torch.from_numpy(np.ascontiguousarray(image.transpose(2, 0, 1)))[None]


def to_array(image: torch.Tensor) -> np.ndarray:
    """(1, 3, H, W) tensor → (H, W, 3) float32 array."""
    return image[0].permute(1, 2, 0).contiguous().numpy()


def working_size(width: int, height: int, settings_width: int, min_side: int) -> tuple[int, int]:
    """Working (w, h): ``settings_width`` wide (never wider than the source), same aspect."""
    w = min(settings_width, width)
    h = max(1, round(height * w / width))
    if min(w, h) < min_side:
        raise FramestyleError(
            f"width {settings_width}: the working frame would be {w}×{h}, smaller than the "
            f"{min_side}-pixel minimum of the network; use a larger --width"
        )
    return w, h


def resize(image: np.ndarray, size: tuple[int, int]) -> np.ndarray:
    """Resize (H, W, C) to (w, h) = ``size``: area filter down, bicubic up."""
    if image.shape[1] == size[0] and image.shape[0] == size[1]:
        return image
    shrink = size[0] < image.shape[1]
    out = cv2.resize(image, size, interpolation=cv2.INTER_AREA if shrink else cv2.INTER_CUBIC)
    return np.clip(out, 0.0, 1.0)


def start_noise(shape: tuple[int, ...], seed: int, frame: int) -> torch.Tensor:
    """Seeded noise, a function of (seed, frame) only, so resumed frames get the same noise."""
    gen = torch.Generator().manual_seed(seed * 1_000_003 + frame)
    return torch.randn(shape, generator=gen) * _NOISE


# --- the pieces a render needs, built once ---------------------------------------------------

@dataclass
class Look:
    """The network and style targets for one render."""

    net: FeatureNet
    style: dict[str, torch.Tensor]


def prepare_look(settings: Settings, size: tuple[int, int], net: FeatureNet | None = None) -> Look:
    """Load the network and compute the target Gram matrices for frames of ``size`` (w, h).

    The style image is resized so its longer side is ``style_scale`` × the working frame's
    longer side: larger values give larger strokes.
    """
    if not settings.styles:
        raise FramestyleError("no style image given")
    net = net or load_network(settings.network, settings.weights)
    layers = settings.style_layers or net.style_layers
    net.check_layers([*layers, settings.content_layer or net.content_layer])
    images = []
    for path in settings.styles:
        image = frames.read_image(Path(path))
        scale = settings.style_scale * max(size) / max(image.shape[:2])
        target = (max(1, round(image.shape[1] * scale)), max(1, round(image.shape[0] * scale)))
        if min(target) < net.min_side:
            raise FramestyleError(f"{path}: style image too small at style scale {settings.style_scale}")
        images.append(to_tensor(resize(image, target)))
    mix = settings.style_mix or (1.0,) * len(images)
    if len(mix) != len(images):
        raise FramestyleError(f"{len(mix)} style mix weights for {len(images)} style images")
    return Look(net, style_targets(net, images, mix, layers))


def prepare_frame_look(source: frames.FrameSource, settings: Settings) -> tuple[Look, tuple[int, int]]:
    """The look and working size (w, h) for ``source``; checks network, width and styles."""
    net = load_network(settings.network, settings.weights)
    size = working_size(source.width, source.height, settings.width, net.min_side)
    return prepare_look(settings, size, net), size


# --- one frame -------------------------------------------------------------------------------

def temporal_problem(
    content: np.ndarray, earlier: Sequence[tuple[np.ndarray, np.ndarray]], noise: torch.Tensor,
    preset: str,
) -> Problem:
    """Starting image and temporal targets of a frame from earlier stylised frames.

    Parameters
    ----------
    content : (H, W, 3) source frame at working size
    earlier : (source (H, W, 3), stylised (H, W, 3)) of earlier frames, most recent first;
        the first is the previous frame
    noise : (1, 3, H, W) noise for pixels that start from the content frame

    The previous stylised frame is warped into this frame along the backward flow; pixels the
    forward-backward check marks unreliable (disocclusions, motion boundaries) start from the
    content frame plus noise instead of from smeared pixels. Each earlier frame j gives a
    temporal target with the long-term weights of Ruder et al. 2016 (Sec. 3.2), so a pixel is
    tied only to the most recent frame in which it was visible.
    """
    warped, masks = [], []
    for source, stylised in earlier:
        back = compute_flow(content, source, preset)  # this frame → earlier frame
        fwd = compute_flow(source, content, preset)
        warped.append(warp(stylised, back))
        masks.append(reliability_mask(back, fwd))
    weights = long_term_masks(masks)
    fresh = to_tensor(content) + noise
    first = torch.from_numpy(masks[0])[None, None]
    init = first * to_tensor(warped[0]) + (1 - first) * fresh
    pairs = [(to_tensor(w), torch.from_numpy(c)[None, None]) for w, c in zip(warped, weights)]
    return Problem(to_tensor(content), init, pairs)


def fresh_problem(content: np.ndarray, noise: torch.Tensor) -> Problem:
    """A frame optimised on its own, starting from its content frame plus noise."""
    return Problem(to_tensor(content), to_tensor(content) + noise)


# --- shots -------------------------------------------------------------------------------------

def find_shots(source: frames.FrameSource, settings: Settings, shot_file: Path | None) -> list[Shot]:
    """The shot list: from ``shot_file`` if given, else detected (or one shot if disabled)."""
    if shot_file is not None:
        return parse_shot_file(shot_file, source.count)
    if not settings.shot_detection:
        return [Shot(1, 0, source.count - 1)]
    sigs = [frame_signature(f) for _, f in frames.iter_frames(source)]
    return detect_shots(sigs, cut_threshold=settings.cut_threshold,
                        gradual_threshold=settings.gradual_threshold)


def parse_shot_selection(text: str, shots: Sequence[Shot]) -> list[int]:
    """Parse a selection like ``2,4-5`` into shot numbers, checking they exist."""
    chosen: list[int] = []
    try:
        for part in filter(None, (p.strip() for p in text.split(","))):
            lo, _, hi = part.partition("-")
            chosen += range(int(lo), int(hi or lo) + 1)
    except ValueError:
        raise FramestyleError(f"--shots {text!r}: expected shot numbers like 2,4-5")
    bad = [n for n in chosen if not 1 <= n <= len(shots)]
    if bad:
        raise FramestyleError(f"--shots {text!r}: no shot {bad[0]} (the input has {len(shots)})")
    return sorted(set(chosen))


# --- the render ---------------------------------------------------------------------------------

@dataclass
class ShotSummary:
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


def _file_hash(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()[:16]


def _inputs(source: frames.FrameSource, settings: Settings) -> dict:
    return {
        "input": str(source.path),
        "input_fingerprint": frames.fingerprint(source),
        "styles": {p: _file_hash(Path(p)) for p in settings.styles},
    }


def _check_resume(manifest: dict, settings: Settings, inputs: dict, out: Path) -> None:
    """Refuse to continue a render whose settings or inputs changed, naming what changed."""
    old = Settings.from_dict(manifest["settings"], str(out / checkpoint.MANIFEST))
    changed = old.differences(settings)
    if changed:
        raise FramestyleError(
            f"{out}: was rendered with different settings ({', '.join(changed)}); "
            f"use the same options, a new --out, or --restart to start over"
        )
    for key, what in (("input_fingerprint", "input frames"), ("styles", "style image(s)")):
        if manifest["inputs"][key] != inputs[key]:
            raise FramestyleError(
                f"{out}: the {what} changed since this render started; use --restart to start over"
            )


def _start_over(out: Path, manifest: dict | None) -> None:
    """Delete a previous render's frames, state and manifest (explicit --restart only)."""
    if manifest:
        for name in manifest.get("frames", {}):
            (out / name).unlink(missing_ok=True)
        for shot in manifest.get("shots", []):
            checkpoint.prune_state(out, shot["shot"], None)
    (out / checkpoint.MANIFEST).unlink(missing_ok=True)


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
    shot_file : a user's shot list replacing detection (see :func:`shots.parse_shot_file`)
    restart : discard a previous render in ``out`` instead of resuming it
    progress : called as ``progress(event, **info)`` with events ``"start"`` (frames, shots,
        done), ``"frame"`` (index, shot, iterations, seconds, skipped), ``"shot"``
        (summary) and ``"video"`` (path)

    Returns
    -------
    RenderResult
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    source = frames.open_source(Path(input_path))
    look, size = prepare_frame_look(source, settings)  # bad settings fail before OUT is touched
    out.mkdir(parents=True, exist_ok=True)
    with checkpoint.FolderLock(out):
        log = _open_log(out)
        try:
            return _render_locked(source, out, settings, look, size, shots, shot_file, restart, progress, log)
        finally:
            for handler in list(log.handlers):
                handler.close()
                log.removeHandler(handler)


def _open_log(out: Path) -> logging.Logger:
    log = logging.getLogger(f"framestyle.render.{out.resolve()}")
    log.setLevel(logging.INFO)
    log.propagate = False
    handler = logging.FileHandler(out / "render.log")
    handler.setFormatter(logging.Formatter("%(asctime)s %(message)s"))
    log.addHandler(handler)
    return log


def _render_locked(source, out, settings, look, size, shot_sel, shot_file, restart, progress, log) -> RenderResult:
    inputs = _inputs(source, settings)
    manifest = checkpoint.read_manifest(out)
    if restart:
        _start_over(out, manifest)
        manifest = None
    if manifest is not None:
        _check_resume(manifest, settings, inputs, out)
        shot_list = [Shot(s["shot"], s["start"], s["end"]) for s in manifest["shots"]]
        log.info("resuming render in %s", out)
    else:
        shot_list = find_shots(source, settings, shot_file)
        manifest = {
            "settings": settings.to_dict(), "settings_hash": settings.digest(), "inputs": inputs,
            "shots": [s.to_dict() for s in shot_list], "frames": {}, "shot_status": {},
        }
        checkpoint.write_manifest(out, manifest)
        atomic.write_json(out / "settings.json", settings.to_dict())
        log.info("new render of %s into %s, settings %s", source.path, out, settings.digest())
    log.info("shots: %s", ", ".join(f"{s.index}:{s.start}-{s.end}" for s in shot_list))
    wanted = parse_shot_selection(shot_sel, shot_list) if shot_sel else [s.index for s in shot_list]

    names = [frames.frame_name(source, i) for i in range(source.count)]
    total = sum(s.end - s.start + 1 for s in shot_list if s.index in wanted)
    done = sum(1 for s in shot_list if s.index in wanted for i in range(s.start, s.end + 1)
               if names[i] in manifest["frames"])
    progress("start", frames=total, shots=len(wanted), done=done, size=size)
    summaries = []
    for shot in shot_list:
        if shot.index not in wanted:
            continue
        summary = _render_shot(source, out, settings, look, shot, size, names, manifest, progress, log)
        summaries.append(summary)
        progress("shot", summary=summary)
    written = [out / names[i] for i in range(source.count) if names[i] in manifest["frames"]]
    result = RenderResult(out, written, summaries)
    if source.kind == "video" and len(written) == source.count:
        result.video = out / f"{source.path.stem}_framestyle.mp4"
        if not result.video.exists():
            frames.write_video(written, source.fps, result.video, audio_from=source.path)
            log.info("wrote %s", result.video)
        progress("video", path=result.video)
    return result


def _render_shot(source, out, settings, look, shot, size, names, manifest, progress, log) -> ShotSummary:
    """Render one shot, skipping its finished frames and continuing its temporal chain."""
    summary = ShotSummary(shot)
    status = manifest["shot_status"].setdefault(str(shot.index), {"warp_error_sum": 0.0, "pairs": 0})
    reach = max(settings.long_term) if settings.temporal else 0
    first_todo = next((i for i in range(shot.start, shot.end + 1) if names[i] not in manifest["frames"]), None)
    if first_todo is None:
        summary.frames_done = shot.end - shot.start + 1
        return _fill_summary(summary, manifest, names, status)
    history: deque[tuple[int, np.ndarray]] = deque(maxlen=reach + 1)  # (index, working source)
    read_from = max(shot.start, first_todo - reach)
    bit_depth = 16 if source.bit_depth == 16 else 8
    for index, frame in frames.iter_frames(source, read_from, shot.end + 1):
        content = resize(frame, size)
        if index < first_todo or names[index] in manifest["frames"]:
            history.append((index, content))
            progress("frame", index=index, shot=shot.index, skipped=True)
            continue
        t0 = time.perf_counter()
        noise = start_noise((1, 3, size[1], size[0]), settings.seed, index)
        earlier = []
        if settings.temporal:
            sources = dict(history)
            for j in settings.long_term:
                if index - j in sources:
                    stylised = checkpoint.load_state(out, shot.index, index - j)
                    earlier.append((sources[index - j], stylised))
        problem = temporal_problem(content, earlier, noise, settings.flow_preset) if earlier \
            else fresh_problem(content, noise)
        image, stats = solve(look.net, problem, look.style, settings)
        result = to_array(image)
        if settings.temporal and index > shot.start:
            prev = checkpoint.load_state(out, shot.index, index - 1)
            status["warp_error_sum"] += pair_warping_error(prev, result, sources[index - 1], content,
                                                           settings.flow_preset)
            status["pairs"] += 1
        checkpoint.save_state(out, shot.index, index, result)
        target = out / names[index]
        if not target.exists():  # a frame whose manifest entry was lost is not rewritten
            frames.write_frame(target, resize(result, (source.width, source.height)), bit_depth)
        seconds = time.perf_counter() - t0
        manifest["frames"][names[index]] = {"shot": shot.index, "iterations": stats.iterations,
                                            "seconds": round(seconds, 3)}
        checkpoint.write_manifest(out, manifest)
        checkpoint.prune_state(out, shot.index, index - reach)
        history.append((index, content))
        log.info("frame %s shot %d: %d iterations, %.1f s, style %.4f content %.4f temporal %.5f",
                 names[index], shot.index, stats.iterations, seconds, stats.style, stats.content,
                 stats.temporal)
        progress("frame", index=index, shot=shot.index, iterations=stats.iterations,
                 seconds=seconds, skipped=False)
    checkpoint.prune_state(out, shot.index, None)
    summary = _fill_summary(summary, manifest, names, status)
    log.info("shot %d done: %d frames, %.1f s, %.1f iterations/frame, warping error %.5f",
             shot.index, summary.frames_done, summary.seconds,
             summary.iterations / max(1, summary.frames_done), summary.warp_error)
    return summary


def _fill_summary(summary: ShotSummary, manifest: dict, names: list[str], status: dict) -> ShotSummary:
    entries = [manifest["frames"][names[i]] for i in range(summary.shot.start, summary.shot.end + 1)
               if names[i] in manifest["frames"]]
    summary.frames_done = len(entries)
    summary.seconds = sum(e["seconds"] for e in entries)
    summary.iterations = sum(e["iterations"] for e in entries)
    summary.warp_error_sum, summary.warp_error_pairs = status["warp_error_sum"], status["pairs"]
    return summary
