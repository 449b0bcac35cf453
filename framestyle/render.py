"""The render loop: the only module that knows frames, shots, flow, solver and checkpoints.

Data flows one way: frames → shots → per frame: flow → starting image and masks → solver →
write → checkpoint. Each shot starts fresh; within a shot each frame starts from the previous
stylised frame warped along the optical flow and is tied to earlier frames by the short- and
long-term temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for
videos"). After every frame the manifest is updated, so re-running the same command on the
same output folder continues exactly where a killed render stopped.
"""

from __future__ import annotations

import dataclasses
import hashlib
import logging
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import torch

from . import atomic, checkpoint, frames
from .compose import finish, from_display, luma_image, soft_matte, to_display
from .errors import FramestyleError
from .flow import compute_flow, long_term_masks, reliability_mask, warp
from .imaging import resize, to_array, to_tensor
from .look import Look, build_look
from .metrics import pair_warping_error
from .network import FeatureNet, load_network
from .settings import Settings
from .shots import Shot, detect_shots, frame_signature, parse_shot_file
from .solver import Problem, SolveStats, solve, solve_coarse_to_fine

Progress = Callable[..., None]  # progress(event: str, **info); events listed in render()
_NOISE = 0.1  # std of the noise added where a frame starts from its content frame


def no_progress(event: str, **info) -> None:
    """The default progress callback: report nothing."""


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


def start_noise(shape: tuple[int, ...], seed: int, frame: int) -> torch.Tensor:
    """Seeded noise, a function of (seed, frame) only, so resumed frames get the same noise."""
    gen = torch.Generator().manual_seed(seed * 1_000_003 + frame)
    return torch.randn(shape, generator=gen) * _NOISE


# --- one frame -------------------------------------------------------------------------------

def temporal_problem(
    content: np.ndarray, earlier: Sequence[tuple[np.ndarray, np.ndarray]], noise: torch.Tensor,
    preset: str,
) -> Problem:
    """Starting image and temporal targets of a frame from earlier stylised frames.

    Parameters
    ----------
    content : (H, W, 3) source frame at working size, as the solver sees it
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


@dataclass
class Frame:
    """One source frame at both sizes.

    display : (H, W, 3) display-referred source frame at source size (sRGB-encoded if the
        source is linear light)
    content : (h, w, 3) what the solver sees at working size (luma only in "luma" mode)
    """

    display: np.ndarray
    content: np.ndarray


def prepare_frame(frame: np.ndarray, size: tuple[int, int], settings: Settings, linear: bool) -> Frame:
    """Source frame → display-referred frame and the solver's working-size content."""
    display = to_display(frame, linear)
    content = resize(display, size)
    if settings.colour == "luma":
        content = luma_image(content, settings.luma_standard)
    return Frame(display, content)


def stylise_alone(look: Look, content: np.ndarray, index: int, settings: Settings) -> tuple[np.ndarray, SolveStats]:
    """A frame stylised on its own (a shot's first frame, --no-temporal, previews)."""
    noise = start_noise((1, 3, *content.shape[:2]), settings.seed, index)
    image, stats = solve_coarse_to_fine(look.net, fresh_problem(content, noise), look.targets, settings)
    return to_array(image), stats


class Mattes:
    """Per-frame mattes: a folder of matte frames, the input's alpha, or none."""

    def __init__(self, source: frames.FrameSource, spec: str | None):
        self.source, self.spec, self.folder = source, spec, None
        if spec and spec != "alpha":
            self.folder = frames.open_source(Path(spec))
            if self.folder.count != source.count or (self.folder.width, self.folder.height) != (
                    source.width, source.height):
                raise FramestyleError(
                    f"{spec}: mattes must match the input, one {source.width}×{source.height} "
                    f"frame per input frame ({source.count}), found {self.folder.count} of "
                    f"{self.folder.width}×{self.folder.height}"
                )
        elif spec == "alpha" and not source.has_alpha:
            raise FramestyleError(f"{source.path}: --matte alpha, but the input has no alpha channel")

    def __call__(self, index: int, softness: float) -> np.ndarray | None:
        """The softened (H, W) matte of frame ``index``, or None without mattes."""
        if self.spec is None:
            return None
        if self.folder is None:
            raw = frames.read_alpha(self.source, index)
        else:
            raw = frames.read_frame(self.folder, index).mean(axis=2)
        return soft_matte(raw, softness)


def deliver(result: np.ndarray, frame: Frame, settings: Settings, matte: np.ndarray | None,
            linear: bool) -> np.ndarray:
    """The delivered frame at source size in the source's encoding."""
    h, w = frame.display.shape[:2]
    final = finish(resize(result, (w, h)), frame.display, colour=settings.colour,
                   standard=settings.luma_standard, strength=settings.strength, matte=matte)
    return from_display(final, linear)


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
    """Fingerprints of everything a render reads: input frames, style images, mattes."""
    variants = [settings] + [settings.for_shot(int(n)) for n in settings.shot_looks]
    styles = {p for v in variants for p in v.styles}
    mattes = {v.matte for v in variants if v.matte and v.matte != "alpha"}
    return {
        "input": str(source.path),
        "input_fingerprint": frames.fingerprint(source),
        "styles": {p: _file_hash(Path(p)) for p in sorted(styles)},
        "mattes": {m: frames.fingerprint(frames.open_source(Path(m))) for m in sorted(mattes)},
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
    for key, what in (("input_fingerprint", "input frames"), ("styles", "style image(s)"), ("mattes", "mattes")):
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
        done, size), ``"shot_start"`` (shot, frames), ``"frame"`` (index, shot, iterations,
        seconds, skipped), ``"shot"`` (summary) and ``"video"`` (path)

    Returns
    -------
    RenderResult
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    source = frames.open_source(Path(input_path))
    net = check_render(source, settings)  # bad settings fail before OUT is touched
    out.mkdir(parents=True, exist_ok=True)
    with checkpoint.FolderLock(out):
        log = _open_log(out)
        try:
            return _render_locked(source, out, settings, net, shots, shot_file, restart, progress, log)
        finally:
            for handler in list(log.handlers):
                handler.close()
                log.removeHandler(handler)


def check_render(source: frames.FrameSource, settings: Settings) -> FeatureNet:
    """Check every setting (and every shot's overrides) against ``source``; return the network."""
    settings.check()
    net = load_network(settings.network, settings.weights)
    first = frames.read_frame(source, 0)
    variants = [settings] + [settings.for_shot(int(n)) for n in settings.shot_looks]
    for variant in variants:
        if (variant.network, variant.weights) != (settings.network, settings.weights):
            raise FramestyleError("the network cannot change from shot to shot")
        size = working_size(source.width, source.height, variant.width, net.min_side)
        frame = prepare_frame(first, size, variant, source.bit_depth == 32)
        build_look(net, variant, frame.display).targets(size)
        Mattes(source, variant.matte)
    return net


def _open_log(out: Path) -> logging.Logger:
    log = logging.getLogger(f"framestyle.render.{out.resolve()}")
    log.setLevel(logging.INFO)
    log.propagate = False
    handler = logging.FileHandler(out / "render.log")
    handler.setFormatter(logging.Formatter("%(asctime)s %(message)s"))
    log.addHandler(handler)
    return log


def output_names(source: frames.FrameSource) -> list[str]:
    """Output file names: EXR for float (linear-light) sources, PNG otherwise."""
    ext = ".exr" if source.bit_depth == 32 else ".png"
    return [frames.frame_name(source, i, ext) for i in range(source.count)]


def _render_locked(source, out, settings, net, shot_sel, shot_file, restart, progress, log) -> RenderResult:
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

    names = output_names(source)
    total = sum(s.length for s in shot_list if s.index in wanted)
    done = sum(1 for s in shot_list if s.index in wanted for i in range(s.start, s.end + 1)
               if names[i] in manifest["frames"])
    size = working_size(source.width, source.height, settings.width, net.min_side)
    progress("start", frames=total, shots=len(wanted), done=done, size=size)
    summaries = []
    for shot in shot_list:
        if shot.index not in wanted:
            continue
        job = _ShotJob(source, out, settings.for_shot(shot.index), net, shot, names, manifest, log)
        summary = job.run(progress)
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


class _ShotJob:
    """Render one shot, skipping its finished frames and continuing its temporal chain."""

    def __init__(self, source, out, settings, net, shot, names, manifest, log):
        self.source, self.out, self.settings, self.shot = source, out, settings, shot
        self.names, self.manifest, self.log = names, manifest, log
        self.linear = source.bit_depth == 32
        self.bit_depth = 16 if source.bit_depth in (16, 32) else 8
        self.size = working_size(source.width, source.height, settings.width, net.min_side)
        self.net = net
        self.status = manifest["shot_status"].setdefault(str(shot.index), {"warp_error_sum": 0.0, "pairs": 0})

    def run(self, progress: Progress) -> ShotSummary:
        shot, settings, names = self.shot, self.settings, self.names
        first_todo = next((i for i in range(shot.start, shot.end + 1) if names[i] not in self.manifest["frames"]), None)
        if first_todo is None:
            return _fill_summary(ShotSummary(shot), self.manifest, names, self.status)
        reference = None
        if settings.colour == "match":  # the style recoloured to the shot's first frame
            reference = to_display(frames.read_frame(self.source, shot.start), self.linear)
        look = build_look(self.net, settings, reference)
        mattes = Mattes(self.source, settings.matte)
        progress("shot_start", shot=shot.index, frames=shot.length)
        reach = max(settings.long_term) if settings.temporal else 0
        history: deque[tuple[int, np.ndarray]] = deque(maxlen=reach + 1)  # (index, working content)
        for index, raw in frames.iter_frames(self.source, max(shot.start, first_todo - reach), shot.end + 1):
            frame = prepare_frame(raw, self.size, settings, self.linear)
            if index >= first_todo and names[index] not in self.manifest["frames"]:
                self._frame(index, frame, look, mattes, dict(history), progress)
            else:
                progress("frame", index=index, shot=shot.index, skipped=True)
            history.append((index, frame.content))
        checkpoint.prune_state(self.out, shot.index, None)
        self.status["done"] = True
        checkpoint.write_manifest(self.out, self.manifest)
        summary = _fill_summary(ShotSummary(shot), self.manifest, names, self.status)
        self.log.info("shot %d done: %d frames, %.1f s, %.1f iterations/frame, warping error %.5f",
                      shot.index, summary.frames_done, summary.seconds,
                      summary.iterations / max(1, summary.frames_done), summary.warp_error)
        return summary

    def _frame(self, index, frame, look, mattes, sources, progress) -> None:
        t0 = time.perf_counter()
        settings, out, shot = self.settings, self.out, self.shot.index
        earlier = [(sources[index - j], checkpoint.load_state(out, shot, index - j))
                   for j in sorted(settings.long_term) if settings.temporal and index - j in sources]
        if earlier:
            noise = start_noise((1, 3, self.size[1], self.size[0]), settings.seed, index)
            problem = temporal_problem(frame.content, earlier, noise, settings.flow_preset)
            image, stats = solve(look.net, problem, look.targets(self.size), settings)
            result = to_array(image)
            self.status["warp_error_sum"] += pair_warping_error(
                earlier[0][1], result, earlier[0][0], frame.content, settings.flow_preset)
            self.status["pairs"] += 1
        else:
            anchor = settings  # a shot's first frame anchors every later frame through the warp,
            if settings.temporal:  # so it is converged twice as tightly
                anchor = dataclasses.replace(settings, tolerance=settings.tolerance / 2)
            result, stats = stylise_alone(look, frame.content, index, anchor)
        checkpoint.save_state(out, shot, index, result)
        target = out / self.names[index]
        if not target.exists():  # a frame whose manifest entry was lost is not rewritten
            delivered = deliver(result, frame, settings, mattes(index, settings.matte_softness), self.linear)
            frames.write_frame(target, delivered, self.bit_depth)
        seconds = time.perf_counter() - t0
        self.manifest["frames"][self.names[index]] = {
            "shot": shot, "iterations": stats.iterations, "seconds": round(seconds, 3)}
        checkpoint.write_manifest(out, self.manifest)
        checkpoint.prune_state(out, shot, index - max(settings.long_term))
        self.log.info("frame %s shot %d: %d iterations, %.1f s, style %.4f content %.4f temporal %.5f",
                      self.names[index], shot, stats.iterations, seconds, stats.style, stats.content,
                      stats.temporal)
        progress("frame", index=index, shot=shot, iterations=stats.iterations, seconds=seconds, skipped=False)


def _fill_summary(summary: ShotSummary, manifest: dict, names: list[str], status: dict) -> ShotSummary:
    entries = [manifest["frames"][names[i]] for i in range(summary.shot.start, summary.shot.end + 1)
               if names[i] in manifest["frames"]]
    summary.frames_done = len(entries)
    summary.seconds = sum(e["seconds"] for e in entries)
    summary.iterations = sum(e["iterations"] for e in entries)
    summary.warp_error_sum, summary.warp_error_pairs = status["warp_error_sum"], status["pairs"]
    return summary
