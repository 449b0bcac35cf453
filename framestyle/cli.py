"""Command line: thin typer commands that build settings and call one library function each."""

import dataclasses
import functools
import inspect
import json
import math
import os
import re
import select
import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

from framestyle.errors import FramestyleError
from framestyle.motion import FLOW_PRESETS
from framestyle.settings import Settings
from framestyle.shots.lists import shot_selection

app = typer.Typer(
    add_completion=False, no_args_is_help=True, rich_markup_mode="markdown",
    help="Repaint a shot or clip in the look of a style image, without flicker, on a CPU.",
)

_CAUTION = (
    "Caution: stylised footage can flash or strobe. Check renders against WCAG 2.3.1 / "
    "ITU-R BT.1702 before showing them to viewers who may have photosensitive epilepsy."
)


def _fail(message: str) -> None:
    typer.echo(f"framestyle: error: {message}", err=True)
    raise typer.Exit(2)


def _run(fn, *args, **kwargs):
    """Call library code, turning user-facing problems into one line on stderr and exit 2."""
    try:
        return fn(*args, **kwargs)
    except FramestyleError as exc:
        _fail(str(exc))
    except OSError as exc:  # e.g. disk full or permission denied while writing
        _fail(f"{exc.filename or ''}: {exc.strerror or exc}".lstrip(": "))


def _footage(source: Path | None, manifest: dict | None) -> Path:
    """The footage of the render ``manifest`` describes: ``--source`` where given, else where
    the render read it; a one-line error where it is not there."""
    return _check_path(source or Path(manifest["inputs"]["input"]), "source footage (give --source if it moved)")


def _check_path(path: Path, what: str) -> Path:
    """``path``, or a one-line error where it is missing or this user may not read it (the Path
    options leave that to here: click's own check is a box of several lines)."""
    if not path.exists():
        _fail(f"{path}: {what} not found")
    if not os.access(path, os.R_OK):
        _fail(f"{path}: {what} not readable (permission denied)")
    return path


# --- the render settings' options, shared by `stylise` and `preview` --------------------------

def _settings_options(
    style: Annotated[Optional[list[Path]], typer.Option("--style", "-s", readable=False, help="Style image; repeat to mix several.")] = None,
    look: Annotated[Optional[Path], typer.Option(readable=False, help="TOML look file with settings (and per-shot looks); options given here override it.")] = None,
    width: Annotated[Optional[int], typer.Option(help="Working width in pixels, never above the source's (default: the longer side 480; 1280 for sources longer than 1280, landscape or portrait).")] = None,
    iterations: Annotated[Optional[int], typer.Option(help=f"Most solver iterations per frame (default {Settings.iterations}).")] = None,
    style_weight: Annotated[Optional[float], typer.Option(help=f"Weight of the Gram style loss: higher, more paint (default {Settings.style_weight}).")] = None,
    content_weight: Annotated[Optional[float], typer.Option(help=f"Weight of the content loss: higher, more footage (default {Settings.content_weight}).")] = None,
    style_mix: Annotated[Optional[str], typer.Option(help="Comma-separated weights, one per --style (default equal).")] = None,
    stroke_size: Annotated[Optional[float], typer.Option(help=f"Stroke size: the style image's scale relative to the frame (default {Settings.stroke_size}).")] = None,
    colour: Annotated[Optional[str], typer.Option(help="Palette: style (the painting's), luma (keep the footage's colours) or match (painting recoloured to the footage) (default style).")] = None,
    strength: Annotated[Optional[float], typer.Option(help="0 = the footage, 1 = full style (default 1).")] = None,
    matte: Annotated[Optional[str], typer.Option(help="Folder of matte frames (white = stylise), or 'alpha' for the input's alpha.")] = None,
    matte_softness: Annotated[Optional[float], typer.Option(help=f"Soft matte edge, Gaussian sigma in pixels (default {Settings.matte_softness}).")] = None,
    picture_area: Annotated[Optional[str], typer.Option(help="auto: black letterbox or pillarbox bars found in a shot stay as the footage has them and the picture inside is stylised; full: the whole frame (default auto).")] = None,
    levels: Annotated[Optional[int], typer.Option(help="Coarse-to-fine levels for a shot's first frame: solve at 1/2, 1/4 ... of the size first (default: 1 up to 640 pixels on the longer side, above that enough for the first level's to be at most 480).")] = None,
    warm_levels: Annotated[Optional[int], typer.Option(help=f"Coarse-to-fine levels for frames that start from the previous stylised frame (default {Settings.warm_levels}).")] = None,
    image_scales: Annotated[Optional[int], typer.Option(help=f"Scales a frame solved on its own (a shot's first) is optimised over at each level, from its pixels to 1/2, 1/4 ... of the size: broad areas settle in fewer iterations; 1: its pixels alone (default {Settings.image_scales}).")] = None,
    network: Annotated[Optional[str], typer.Option(help=f"Perceptual network: efficientnet-lite0 or vgg19 (default {Settings.network}).")] = None,
    network_weights: Annotated[Optional[Path], typer.Option(readable=False, help="Weights file for the network (needed for vgg19 offline).")] = None,
    feature_blur: Annotated[Optional[int], typer.Option(help=f"EfficientNet-Lite0's low-pass filter before each subsampling, 3 or 5 taps: 5 is steadier along a shot and paints a little more over the footage, with slightly softer fine texture (default {Settings.feature_blur}).")] = None,
    seed: Annotated[Optional[int], typer.Option(help="Random seed; the same seed gives the same frames (default 0).")] = None,
    device: Annotated[Optional[str], typer.Option(help="Where the network runs: auto (a GPU torch sees, else the CPU), cpu, cuda or mps (default auto).")] = None,
    precision: Annotated[Optional[str], typer.Option(help=f"The network's arithmetic: float32, or bfloat16 with Gram matrices and losses kept in float32 (default {Settings.precision}).")] = None,
    no_temporal: Annotated[bool, typer.Option("--no-temporal", help="Stylise each frame on its own (flickers; for comparison).")] = False,
    temporal_weight: Annotated[Optional[float], typer.Option(help=f"Weight of the temporal consistency loss (default {Settings.temporal_weight}).")] = None,
    flow_preset: Annotated[Optional[str], typer.Option(help=f"Optical flow quality: ultrafast, fast or medium (default {Settings.flow_preset}).")] = None,
    warp_filter: Annotated[Optional[str], typer.Option(help=f"Resampling of the frames carried along the optical flow: linear, cubic or lanczos (default {Settings.warp_filter}).")] = None,
    passes: Annotated[Optional[int], typer.Option(help=f"Passes over each shot: after the first (forward), backward and forward in turn, each refining every frame from its neighbour; crisper and steadier, each pass costs time (default {Settings.passes}).")] = None,
    warm_iterations: Annotated[Optional[int], typer.Option(help="Most solver iterations for a frame started from its warped predecessor (default: as --iterations).")] = None,
    pass_iterations: Annotated[Optional[int], typer.Option(help=f"Most solver iterations per frame in each pass after the first (default {Settings.pass_iterations}).")] = None,
    tolerance: Annotated[Optional[float], typer.Option(help=f"Stop a frame when the loss falls by less than this fraction per 10 iterations (default {Settings.tolerance}).")] = None,
    fps: Annotated[Optional[float], typer.Option(help="Frame rate of a folder of frames, for timecode and videos (default 24; a video has its own).")] = None,
    start_timecode: Annotated[Optional[str], typer.Option(help="Timecode of the first frame, HH:MM:SS:FF or HH:MM:SS;FF drop-frame (default: the video's own, else 00:00:00:00).")] = None,
    prores: Annotated[bool, typer.Option("--prores", help="Also write an edit-ready Apple ProRes 422 HQ .mov with the source's audio and timecode.")] = False,
) -> dict:
    """The settings given on the command line (None where not given), paths checked."""
    given = dict(locals())
    for path in [*(style or []), *([look] if look else []), *([network_weights] if network_weights else [])]:
        _check_path(path, "file")
    if matte and matte != "alpha":
        _check_path(Path(matte), "matte folder")
    given.update(
        styles=[str(p.resolve()) for p in style] if style else None,
        style_mix=_numbers(style_mix, "--style-mix") if style_mix is not None else None,
        matte=str(Path(matte).resolve()) if matte and matte != "alpha" else matte,
        network_weights=str(network_weights.resolve()) if network_weights else None,
        temporal=False if no_temporal else None,
        prores=True if prores else None,
    )
    for name in ("style", "look", "no_temporal"):
        del given[name]
    return {"look": look, "values": {k: v for k, v in given.items() if v is not None}}


def _with_settings_options(command):
    """Give ``command`` the render settings' options; it receives them as ``options``."""
    shared = list(inspect.signature(_settings_options).parameters.values())
    own = [p for p in inspect.signature(command).parameters.values() if p.name != "options"]

    @functools.wraps(command)
    def wrapper(**kwargs):
        given = {p.name: kwargs.pop(p.name) for p in shared}
        return command(options=_settings_options(**given), **kwargs)

    wrapper.__signature__ = inspect.Signature(own + shared)
    wrapper.__annotations__ = {p.name: p.annotation for p in own + shared}
    return wrapper


def _settings(options: dict) -> Settings:
    """Settings from a look file (if any) overridden by the options given."""
    from framestyle.settings import load_look, overlay

    base = _run(load_look, options["look"]) if options["look"] else {}
    given = options["values"]
    for shot, look in base.get("shot_looks", {}).items():  # a shot's own table stays the most specific
        kept = sorted(set(look) & set(given))
        if kept:
            typer.echo(f"framestyle: warning: the look's [shots.{shot}] sets {', '.join(kept)} for shot {shot}; "
                       f"the option(s) given apply to the other shots", err=True)
    values = overlay(base, given)
    if not values.get("styles"):
        _fail("no style image: give --style or a look file with styles")
    return _checked_settings(values, given)


def _checked_settings(values: dict, given: dict) -> Settings:
    """``Settings`` of ``values``, or a one-line error that names the options ``given`` as
    they are spelled on the command line (``--cut-threshold``, not ``cut_threshold``)."""
    try:
        return Settings.from_dict(values, "options")
    except FramestyleError as exc:
        message = str(exc)
        for key in given:
            option = _OPTION_NAMES.get(key, "--" + key.replace("_", "-"))
            message = re.sub(rf"(^options: |; ){key}(?:\.(\d+))?:",
                             lambda m: f"{m[1]}{option}{f' (value {int(m[2]) + 1})' if m[2] else ''}:", message)
        _fail(message.removeprefix("options: ") if message.startswith("options: --") else message)


_OPTION_NAMES = {"styles": "--style", "temporal": "--no-temporal"}  # settings named otherwise on the command line


def _numbers(text: str, option: str) -> tuple[float, ...]:
    try:
        return tuple(float(v) for v in text.split(","))
    except ValueError:
        _fail(f"{option} {text!r}: expected numbers like 0.7,0.3")


# --- progress ---------------------------------------------------------------------------------

class _Bars:
    """Progress display: an overall bar (crediting frames already finished) and a per-shot bar
    with ETA, a line per shot, and warnings."""

    def __init__(self, quiet: bool):
        self.quiet = quiet
        self.progress = None
        self.shot_task = None
        self.in_passes = False

    def __call__(self, event: str, **info) -> None:
        try:
            self._show(event, **info)
        except BrokenPipeError:  # e.g. `framestyle resume OUT | head -1`: the render goes on unseen
            _drop_closed_outputs()

    def _show(self, event: str, **info) -> None:
        if event == "warning":  # shown even with --quiet: it says something is off
            typer.echo(f"framestyle: warning: {info['message']}", err=True)
            return
        if event == "waiting" and (self.quiet or self.progress is None):  # else a quiet wait looks like a hang
            typer.echo(f"framestyle: waiting: {info['holder']}", err=True)
            return
        if self.quiet:
            return
        from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn,
                                   TimeElapsedColumn, TimeRemainingColumn)

        if event == "start":
            self.progress = Progress(
                TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                TimeElapsedColumn(), TextColumn("ETA"), TimeRemainingColumn(), transient=False,
                console=_display_console(),
            )
            self.progress.start()
            self.frames = info["frames"]
            self.total = self.progress.add_task("all frames", total=self.frames, completed=info["done"])
            whole = [(size, shots) for size, bars, shots in info["sizes"] if not bars]
            boxed = [(size, shots) for size, bars, shots in info["sizes"] if bars]
            self.progress.console.print(
                f"{info['frames']} frames in {info['shots']} shot(s)"
                + "".join(f", working size {w}×{h}" if k == 0 else f" (shot(s) {shot_selection(shots)}: {w}×{h})"
                          for k, ((w, h), shots) in enumerate(whole))
                + (f", {info['done']} already finished" if info["done"] else "")
                + "".join(f"; shot(s) {shot_selection(shots)}: black bars kept, the picture worked at {w}×{h}"
                          for (w, h), shots in boxed)
            )
        elif self.progress is None:
            return
        elif event == "shot_start":
            if self.shot_task is not None:
                self.progress.remove_task(self.shot_task)
            self.in_passes = False
            self.shot_task = self.progress.add_task(f"shot {info['shot']}", total=info["frames"],
                                                    completed=info["done"])
        elif event == "pass":  # a multi-pass shot: the shot's bar follows each pass
            self.in_passes = True
            self.progress.update(self.shot_task, description=f"shot {info['shot']} pass {info['pass_']}/{info['passes']}",
                                 completed=info["done"])
        elif event == "pass_frame":
            self.progress.advance(self.shot_task)
        elif event == "frame":
            self.progress.advance(self.total)
            if self.shot_task is not None and not self.in_passes:  # a pass's bar is full by delivery
                self.progress.advance(self.shot_task)
        elif event == "farm":  # frames done across workers, and the shots being rendered
            busy = ", ".join(f"shot {n}" for n in info["shots"])
            state = f" ({busy})" if busy else " (waiting for a worker)" if info["done"] < self.frames else ""
            self.progress.update(self.total, completed=info["done"], description=f"all frames{state}")
        elif event == "waiting":
            self.progress.console.print(f"waiting: {info['holder']}")
        elif event == "shot":
            s = info["summary"]
            self.progress.console.print(
                f"shot {s.shot.index}: frames {s.frames} ({s.shot.length}), "
                f"{s.seconds:.0f} s, {s.iterations / max(1, s.frames_done):.0f} iterations/frame, "
                f"warping error {_measured(s.warp_error, '.5f')}"
            )

    def stop(self) -> None:
        if self.progress is not None:
            progress, self.progress = self.progress, None
            try:
                progress.stop()
            except BrokenPipeError:
                _drop_closed_outputs()


def _display_console():
    """A rich console for the progress display that falls silent when its reader goes and lets
    the render go on (rich's own ends the process with exit code 1 at its next line)."""
    from rich.console import Console

    class GoesOn(Console):
        def on_broken_pipe(self) -> None:  # rich's documented hook for this
            self.quiet = True
            _drop_closed_outputs()

    return GoesOn()


def _drop_closed_outputs() -> None:
    """Point stdout and stderr, whichever has lost its reader (a pipe into ``head`` that has
    ended), at os.devnull, so that a render goes on without its display instead of ending at
    its next line, and the process exits without a word about the pipe (the pattern of
    Python's documentation, signal module, "Note on SIGPIPE"). A pipe's write end whose
    reader has closed polls as POLLERR on Linux (POLLHUP on some other systems; from memory)."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    for stream in (sys.stdout, sys.stderr):
        poller = select.poll()
        poller.register(stream.fileno(), select.POLLOUT)
        if any(events & (select.POLLERR | select.POLLHUP) for _, events in poller.poll(0)):
            os.dup2(devnull, stream.fileno())
    os.close(devnull)


# --- commands ---------------------------------------------------------------------------------

@app.command()
@_with_settings_options
def stylise(
    input: Annotated[Path, typer.Argument(metavar="INPUT", readable=False, help="Folder of numbered frames, or a video file.")],
    out: Annotated[Path, typer.Option("--out", "-o", readable=False, help="Output folder for the stylised frames.")],
    options: dict,
    shots: Annotated[Optional[str], typer.Option(help="Render only these shots, e.g. 2,4-5 (7-: shot 7 to the last).")] = None,
    shot_list: Annotated[Optional[Path], typer.Option(readable=False, help="Shots from this file instead of detection: shot starts in the source's frame numbers, the JSON of `framestyle shots --json`, an EDL or an .otio file.")] = None,
    restart: Annotated[bool, typer.Option("--restart", help="Discard a previous render in --out and start over.")] = False,
    workers: Annotated[int, typer.Option(help="Render shots in this many local worker processes (Dask); 1 = this process only.")] = 1,
    scheduler: Annotated[Optional[str], typer.Option(help="Send the shots to a running Dask scheduler, e.g. tcp://farm:8786, whose workers see the same paths.")] = None,
    threads: Annotated[Optional[int], typer.Option(help="Torch threads per process (default: all cores, shared among --workers).")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress display.")] = False,
) -> None:
    """Stylise INPUT in the look of --style into the --out folder (resumes an interrupted render)."""
    _check_path(input, "input")
    if shot_list:
        _check_path(shot_list, "file")
    settings = _settings(options)
    _render(input, out, settings, workers=workers, scheduler=scheduler, threads=threads, quiet=quiet, shots=shots,
            shot_file=shot_list, restart=restart)


def _render(input: Path, out: Path, settings: Settings, *, workers: int, scheduler: str | None, threads: int | None,
            quiet: bool, **options) -> None:
    """Run a render in this process or on a Dask cluster, with progress and the closing report."""
    if threads is not None and threads < 1:
        _fail(f"--threads {threads}: must be 1 or more")
    bars = _Bars(quiet)
    try:
        if workers == 1 and scheduler is None:
            from framestyle.pipeline import render

            if threads:
                import torch

                torch.set_num_threads(threads)
            result = _run(render, input, out, settings, progress=bars, **options)
        else:
            from framestyle.farm import farm_render

            result = _run(farm_render, input, out, settings, workers=workers, scheduler=scheduler, threads=threads,
                          progress=bars, **options)
    except KeyboardInterrupt:  # Ctrl-C: said here, as typer would end the process without a word
        bars.stop()  # the bars first, or the line lands inside them
        typer.echo(f"framestyle: interrupted; finished frames are kept: `framestyle resume {out}` continues", err=True)
        raise typer.Exit(130) from None
    finally:
        bars.stop()
    try:
        _report(result, quiet)
    except BrokenPipeError:  # the render is finished; only its summary has nowhere to go
        _drop_closed_outputs()


@app.command()
@_with_settings_options
def preview(
    input: Annotated[Path, typer.Argument(metavar="INPUT", readable=False, help="Folder of numbered frames, or a video file.")],
    out: Annotated[Path, typer.Option("--out", "-o", readable=False, help="Output folder; previews go to its preview/ folder.")],
    options: dict,
    every: Annotated[int, typer.Option(help="Stylise every Nth frame of each shot, from its first.")] = 10,
    shots: Annotated[Optional[str], typer.Option(help="Preview only these shots, e.g. 2,4-5 (7-: shot 7 to the last).")] = None,
    shot_list: Annotated[Optional[Path], typer.Option(readable=False, help="Shots from this file instead of detection: shot starts in the source's frame numbers, the JSON of `framestyle shots --json`, an EDL or an .otio file.")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress display.")] = False,
) -> None:
    """Quick look: stylise every Nth frame of each shot on its own and lay out contact sheets.

    The working width defaults to the render's, at most the width that makes the longer side 240 pixels.
    """
    from framestyle.pipeline import preview as run_preview

    _check_path(input, "input")
    if shot_list:
        _check_path(shot_list, "file")
    width = options["values"].pop("width", None)
    settings = _settings(options)
    bars = _Bars(quiet)
    try:
        sheets = _run(run_preview, input, out, settings, every, width=width, shots=shots, shot_file=shot_list,
                      progress=bars)
    finally:
        bars.stop()
    typer.echo(f"preview frames and contact sheets in {out / 'preview'}:")
    for sheet in sheets:
        typer.echo(f"  {sheet}")


@app.command()
def resume(
    out: Annotated[Path, typer.Argument(metavar="OUT", readable=False, help="Output folder of a render started with `stylise`.")],
    shots: Annotated[Optional[str], typer.Option(help="Render only these shots, e.g. 2,4-5 (7-: shot 7 to the last).")] = None,
    workers: Annotated[int, typer.Option(help="Render shots in this many local worker processes (Dask); 1 = this process only.")] = 1,
    scheduler: Annotated[Optional[str], typer.Option(help="Send the shots to a running Dask scheduler whose workers see the same paths.")] = None,
    threads: Annotated[Optional[int], typer.Option(help="Torch threads per process (default: all cores, shared among --workers).")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress display.")] = False,
    prores: Annotated[bool, typer.Option("--prores", help="Also write the ProRes 422 HQ hand-off, to a render started without it (its frames are kept).")] = False,
    source: Annotated[Optional[Path], typer.Option("--source", readable=False, help="The footage, if it moved since the render started (checked by content; the render then follows it).")] = None,
    style: Annotated[Optional[list[Path]], typer.Option("--style", "-s", readable=False, help="The style image(s), if they moved since the render started, in the render's order (checked by content; the render then follows them).")] = None,
) -> None:
    """Continue a render from its manifest alone (input, settings and shot list are in it).

    Lets another process, or another machine with the same files, take over shots.
    """
    from framestyle import store

    _check_path(out, "render folder")
    if not out.is_dir():
        _fail(f"{out}: a file, not a render's output folder; give the --out folder of `framestyle stylise`")
    manifest = _run(store.read_manifest, out)
    if manifest is None:
        _fail(f"{out}: no {store.MANIFEST}; start the render with `framestyle stylise`")
    settings = _run(Settings.from_dict, manifest["settings"], str(out / store.MANIFEST))
    if prores:
        settings = dataclasses.replace(settings, prores=True)
    if style:
        for path in style:
            _check_path(path, "style image")
        settings = _run(Settings.from_dict, {**settings.to_dict(), "styles": [str(p) for p in style]}, "--style")
    gone = next((p for _, look in settings.looks() for p in look.styles if not Path(p).exists()), None)
    if gone:
        _fail(f"{gone}: style image not found (give --style with its new place if it moved)")
    _render(_footage(source, manifest), out, settings, workers=workers, scheduler=scheduler, threads=threads,
            quiet=quiet, shots=shots, keep_shot_list=True)


def _report(result, quiet: bool) -> None:
    """What a finished (or partial) render prints: summary table, where the frames went."""
    if not quiet and result.shots:
        typer.echo(_summary_table(result.shots))
    typer.echo(f"{len(result.frames)} stylised frames in {result.out}")
    from_video = any(video.suffix == ".mp4" for video in result.videos)  # a folder of frames has no sound
    for video in result.videos:
        typer.echo(f"{'edit-ready ProRes' if video.suffix == '.mov' else 'preview video'} with the source's "
                   f"{'audio and ' if from_video else ''}timecode: {video}")
    if result.flashes and not quiet:
        from framestyle.qc.flash_check import CAUTION, report_lines
        from framestyle.store import FLASH_PLOT

        typer.echo(f"flash check (`framestyle flashes {result.out}` repeats it), timeline {result.out / FLASH_PLOT}:")
        for label, report in result.flashes.items():
            typer.echo("\n".join(report_lines(label, report)))
        typer.echo(CAUTION)
    if not quiet:
        typer.echo(_CAUTION, err=True)


def _measured(value: float, spec: str) -> str:
    """A figure as ``spec`` formats it, or "-" where none was measured (NaN: a one-frame shot
    has no frame pairs, a render with temporal off no warping error)."""
    return "-" if math.isnan(value) else format(value, spec)


def _number(value: float) -> float | None:
    """A figure for JSON: null where none was measured (JSON has no NaN)."""
    return None if math.isnan(value) else value


def _summary_table(shots) -> str:
    """The end-of-render table: one row per shot rendered now, and a total."""
    rows = [f"{'shot':>4}  {'frames':>9}  {'done':>4}  {'time':>8}  {'it/frame':>8}  {'warp error':>10}"]
    for s in shots:
        rows.append(f"{s.shot.index:>4}  {s.frames:>9}  {s.frames_done:>4}  "
                    f"{s.seconds:>7.0f}s  {s.iterations / max(1, s.frames_done):>8.1f}  {_measured(s.warp_error, '.5f'):>10}")
    done = sum(s.frames_done for s in shots)
    rows.append(f"{'all':>4}  {'':>9}  {done:>4}  {sum(s.seconds for s in shots):>7.0f}s  "
                f"{sum(s.iterations for s in shots) / max(1, done):>8.1f}")
    return "\n".join(rows)


@app.command("shots")
def shots_command(
    input: Annotated[Path, typer.Argument(metavar="INPUT", readable=False, help="Folder of numbered frames, or a video file.")],
    json_out: Annotated[bool, typer.Option("--json", help="Print the shot list as JSON.")] = False,
    fps: Annotated[Optional[float], typer.Option(help="Frame rate for timecode (default: the video's; 24 for folders).")] = None,
    start_timecode: Annotated[Optional[str], typer.Option(help="Timecode of the first frame, HH:MM:SS:FF or HH:MM:SS;FF for drop-frame (default: the video's timecode, else 00:00:00:00).")] = None,
    shot_list: Annotated[Optional[Path], typer.Option(readable=False, help="Take the shots from this file instead of detecting them: a list of shot starts, the JSON --json prints, an EDL or an .otio file.")] = None,
    cut_threshold: Annotated[float, typer.Option(help="Least frame-to-frame distance (0..1) of a cut; a cut must also stand out from the frames around it.")] = Settings.cut_threshold,
    gradual_threshold: Annotated[float, typer.Option(help="Least distance (0..1) between the two ends of a fade or dissolve.")] = Settings.gradual_threshold,
    add_cut: Annotated[Optional[list[int]], typer.Option(help="Frame number (the source's) that starts a shot; repeatable.")] = None,
    remove_cut: Annotated[Optional[list[int]], typer.Option(help="Shot start (the source's frame number) to join to the shot before; repeatable.")] = None,
    edl: Annotated[Optional[Path], typer.Option(readable=False, help="Also write the shots as a CMX 3600 EDL for editing software.")] = None,
    otio_file: Annotated[Optional[Path], typer.Option("--otio", readable=False, help="Also write the shots as an OpenTimelineIO (.otio) file.")] = None,
) -> None:
    """List the shots of INPUT by the source's frame numbers and timecode.

    Frame numbers are the files' numbers for a folder (1001... for plates) and the 0-based
    index for a video. With --add-cut/--remove-cut and --json the corrected list can be
    saved and given to `framestyle stylise --shot-list`; --edl and --otio hand the shots to
    editing software, which can hand its own cut back through --shot-list.
    """
    from framestyle import io
    from framestyle.pipeline import clip_timecode, find_shots
    from framestyle.shots.cutlists import write_cut_list
    from framestyle.shots.lists import apply_overrides, format_shot_table, shot_entries

    _check_path(input, "input")
    if shot_list:
        _check_path(shot_list, "file")
    source = _run(io.open_source, input)
    given = {"cut_threshold": cut_threshold, "gradual_threshold": gradual_threshold, "fps": fps,
             "start_timecode": start_timecode}
    given = {k: v for k, v in given.items() if v is not None}
    settings = _checked_settings(given, given)
    timecode = _run(clip_timecode, source, settings, shot_list)
    found = _run(find_shots, source, settings, shot_list)
    for message in io.sequence_warnings(source):
        typer.echo(f"framestyle: warning: {message}", err=True)
    found = _run(apply_overrides, found, source.numbers, add_cut or (), remove_cut or ())
    name = source.path.resolve().stem if source.kind == "video" else source.path.resolve().name
    for path in filter(None, (edl, otio_file)):
        _run(write_cut_list, path, found, timecode, name, str(source.path.resolve()), source)
        typer.echo(f"wrote {path}", err=True)
    if json_out:
        typer.echo(json.dumps(shot_entries(found, source.numbers, timecode)))
    else:
        typer.echo(format_shot_table(found, source.numbers, timecode))


@app.command("report")
def report_command(
    out: Annotated[Path, typer.Argument(metavar="OUT", readable=False, help="A render's output folder (finished, running or interrupted), or a preview's.")],
    source: Annotated[Optional[Path], typer.Option("--source", readable=False, help="The footage, if it moved since the render started (default: where the render read it).")] = None,
    every: Annotated[Optional[int], typer.Option(help="Thumbnails of every Nth frame of a shot (default: at most 6 a shot).")] = None,
) -> None:
    """Write OUT/report.html: status, settings and look, thumbnails and per-frame figures of each shot.

    A render writes it too, when it starts and after every shot; this command draws it anew
    for any output folder. Open it in a browser; it needs no network and no script.
    """
    from framestyle import io, store
    from framestyle.report import refresh_report
    from framestyle.shots.cutlists import clip_timecode

    _check_path(out, "output folder")
    if every is not None and every < 1:
        _fail(f"--every {every}: must be 1 or more")
    manifest = _run(store.read_manifest, out)
    if manifest is None:
        typer.echo(_run(refresh_report, out, redraw=True))
        return
    settings = _run(Settings.from_dict, manifest["settings"], str(out / store.MANIFEST))
    clip = _run(io.open_source, _footage(source, manifest))
    _run(store.check_footage, manifest, clip, out)
    shot_file = manifest["shot_list"]["file"]
    shot_file = Path(shot_file) if shot_file and Path(shot_file).exists() else None
    timecode = _run(clip_timecode, clip, settings, shot_file)
    typer.echo(_run(refresh_report, out, clip, settings, timecode, redraw=True, every=every, look_for_renders=True))


@app.command("stability")
def stability_command(
    out: Annotated[Path, typer.Argument(metavar="OUT", readable=False, help="Folder of stylised frames (a render's --out).")],
    source: Annotated[Optional[Path], typer.Option("--source", readable=False, help="The footage the render was made from (default: where the render read it).")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print the figures as JSON.")] = False,
    flow_preset: Annotated[str, typer.Option(help="Optical flow preset for the measurement.")] = "medium",
    detail_frames: Annotated[int, typer.Option(help="Frames per shot rendered again on their own to measure the stroke detail the render keeps; 0 = none.")] = 3,
) -> None:
    """Print a render's warping error (Lai et al. 2018) and the stroke detail it keeps, per shot.

    The warping error is lower for a steadier render; the stroke detail is 1 where the frames are
    as crisp as frames rendered on their own."""
    from framestyle import store
    from framestyle.qc.stability import overall, stability

    _check_path(out, "render folder")
    manifest = _run(store.read_manifest, out) if out.is_dir() else None
    if manifest is None and source is None:
        _fail(f"{out}: no {store.MANIFEST}; give --source with the footage these frames were made from")
    source = _footage(source, manifest)
    if detail_frames < 0:
        _fail(f"--detail-frames {detail_frames}: must be 0 or more")
    if flow_preset not in FLOW_PRESETS:
        _fail(f"--flow-preset {flow_preset}: choose one of {', '.join(FLOW_PRESETS)}")
    alone = None
    if detail_frames:
        from framestyle.pipeline import frames_alone

        alone = functools.partial(frames_alone, out, source)
    rows = _run(stability, out, source, flow_preset, alone, max(1, detail_frames))
    if json_out:
        typer.echo(json.dumps({
            "shots": [{"shot": r.shot.index, "frames": r.frames, "rendered": r.rendered, "render": _number(r.render),
                       "source": _number(r.source), "detail": [{"frame": n, "ratio": v} for n, v in r.detail]}
                      for r in rows],
            "overall": {"render": _number(overall(rows, "render")), "source": _number(overall(rows, "source"))},
        }, allow_nan=False))
        return
    typer.echo(f"{'shot':>4}  {'frames':>11}  {'render':>10}  {'source':>10}" + ("  stroke detail (frame: ratio)" if alone else ""))
    for r in rows:
        typer.echo(f"{r.shot.index:>4}  {r.frames:>11}  " + (
            f"{_measured(r.render, '.5f'):>10}  {_measured(r.source, '.5f'):>10}" + "".join(f"  {n}: {v:.2f}" for n, v in r.detail)
            if r.rendered else "not rendered yet"))
    typer.echo(f"{'all':>4}  {'':>11}  {_measured(overall(rows, 'render'), '.5f'):>10}  "
               f"{_measured(overall(rows, 'source'), '.5f'):>10}")
    if not all(r.rendered for r in rows):
        typer.echo(f"(the render is still going: `framestyle resume {out}` goes on with it; \"all\" is of the shots rendered)")
    typer.echo("warping error: mean squared RGB change along the optical flow (Lai et al. 2018), of the delivered "
               "frames at the source's size (the render report's are at the working size); frames solved apart "
               "(flashes, short cutaways) are left out, the pair across them measured")
    if alone:
        typer.echo("stroke detail: Laplacian energy of the render's frame over that of the frame rendered on its own")


@app.command("flashes")
def flashes_command(
    path: Annotated[Path, typer.Argument(metavar="PATH", readable=False, help="Folder of numbered frames, a video file, or a render's output folder (its frames and their source).")],
    fps: Annotated[Optional[float], typer.Option(help="Frame rate of the 1-second windows and timecode (default: the video's or the render's; 24 for a folder).")] = None,
    json_out: Annotated[bool, typer.Option("--json", help="Print the check as JSON.")] = False,
    plot: Annotated[Optional[Path], typer.Option(readable=False, help="Write the timeline plot PNG here (default for an output folder: OUT/flashes.png).")] = None,
    source: Annotated[Optional[Path], typer.Option("--source", readable=False, help="For an output folder: the footage, if it moved since the render (default: where the render read it).")] = None,
) -> None:
    """Check PATH for photosensitive flashes: general and red flashes per WCAG 2.1 SC 2.3.1 and ITU-R BT.1702.

    Exit code 0 when it passes, 1 when it fails (for an output folder: the render's verdict),
    2 for bad input. An aid, not a certification: broadcasters' rules and local regulators prevail.
    """
    from framestyle.qc.flash_check import CAUTION, check_path, report_lines, verdict_line, write_plot

    _check_path(path, "input")
    check = _run(check_path, path, fps, source)
    try:
        plotted = _run(write_plot, check, plot) if plot is not None else write_plot(check)
    except OSError as exc:  # a render's own timeline, in a folder this user cannot write (an archive)
        typer.echo(f"framestyle: warning: {exc.filename or path}: {exc.strerror or exc}; the timeline is not drawn "
                   f"there (give --plot PATH to draw it elsewhere)", err=True)
        plotted = None
    if json_out:
        typer.echo(json.dumps({**check.to_dict(), "plot": str(plotted) if plotted else None}))
    else:
        for label, report in check.reports.items():
            typer.echo("\n".join(report_lines(label, report.to_dict())))
        typer.echo(f"verdict ({check.judged}): {verdict_line(check.reports[check.judged].to_dict())}")
        if plotted:
            typer.echo(f"timeline: {plotted}")
        typer.echo(CAUTION)
    raise typer.Exit(0 if check.passed else 1)


def main() -> None:
    """Entry point (typer ends an interrupted command with exit code 130, without a traceback)."""
    app()
