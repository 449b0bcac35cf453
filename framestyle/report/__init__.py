"""The render report: ``OUT/report.html``, a render at a glance for the person who signs it off.

Written when a render starts, refreshed after every shot by the process (or farm worker)
that finished it and when the render finishes; ``framestyle report OUT`` writes it for any
output folder, an old or an interrupted one too. It shows how far the render is, its
settings and look, each shot's thumbnails (source above render) and per-frame figures —
the warping error of Lai et al. (2018) of the render and of its source, the solver's
iterations, seconds — the flash check and the preview's contact sheets. Its pictures go to
``OUT/report/``; everything is written through the store, atomically.

A refresh is cheap: a shot's pictures are redrawn only when its record changed after they
were drawn, and the warping errors come from the records (the render measures its own and
the source's along the flows its temporal loss computed); the few the report measures
itself, for renders that recorded none, are measured once and kept.
"""

from __future__ import annotations

import dataclasses
import json
import time
from pathlib import Path

import numpy as np

import framestyle
from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.finish.compose import to_display
from framestyle.imaging import resize
from framestyle.qc.stability import pair_warping_error
from framestyle.report.figures import png_bytes, shot_plot, strip, strip_frames, thumbnail
from framestyle.report.page import PageData, ShotView, render_page
from framestyle.report.status import render_status, shot_series
from framestyle.settings import Settings
from framestyle.shots import Shot
from framestyle.shots.lists import frame_range
from framestyle.store import FLASH_KINDS, REPORT_FILES, ReportStore, Store, output_names, recorded_shots
from framestyle.timecode import ClipTimecode
from framestyle.working import prepare_frame, working_size

__all__ = ["refresh_report"]

_STYLE_HEIGHT = 160  # style thumbnails' height in pixels


def refresh_report(out: Path, source: io.FrameSource | None = None, settings: Settings | None = None,
                   timecode: ClipTimecode | None = None, *, redraw: bool = False, every: int | None = None,
                   look_for_renders: bool = False) -> Path:
    """Write (or refresh) ``out/report.html`` and its pictures; return the page's path.

    Parameters
    ----------
    out : the output folder
    source, settings, timecode : the render's input, settings and frame labels; may be None
        for a folder that holds only a preview
    redraw : draw every picture again, not only those of shots whose records changed
    every : a shot's strip shows every ``every``-th frame (default: at most
        :data:`~framestyle.report.figures.STRIP_TILES` frames a shot)
    look_for_renders : say whether a process renders the unfinished shots now (from their
        locks); for a report drawn from outside a render, which cannot know otherwise

    Raises
    ------
    FramestyleError
        The folder holds neither a render nor a preview, or its manifest is unreadable.
    """
    store = Store(out)
    if store.manifest() is None and not store.preview_sheets():
        raise FramestyleError(f"{store.out}: holds no render and no preview to report on")
    with store.report() as files:
        manifest = store.manifest()
        data = PageData(heading=store.out.resolve().name, version=framestyle.__version__, updated=time.time(),
                        previews=tuple(store.preview_sheets()))
        if manifest is None:
            return files.write_page(render_page(data))
        if source is None or settings is None or timecode is None:
            raise ValueError("a render's report needs its source, settings and timecode")
        records = store.records()
        shots = list(recorded_shots(manifest))
        views = tuple(_shot_view(store, files, source, settings, timecode, shot,
                                 records.get(shot.index, {"frames": {}}), redraw, every) for shot in shots)
        data = dataclasses.replace(
            data, status=render_status(manifest, records), shots=views, settings=manifest["settings"],
            styles=tuple(_styles(files, settings, redraw)), source=_source_facts(source, timecode, manifest),
            environment=manifest.get("environment", {}), products=tuple(store.videos()),
            flashes=_flash_checks(store, None), flash_plot=_flash_plot_url(store),
            idle=look_for_renders and not store.rendering([s.index for s in shots]))
        return files.write_page(render_page(data))


# --- one shot ---------------------------------------------------------------------------------

def _shot_view(store: Store, files: ReportStore, source: io.FrameSource, settings: Settings, timecode: ClipTimecode,
               shot: Shot, record: dict, redraw: bool, every: int | None) -> ShotView:
    """A shot's view: its figures, and its pictures, redrawn if its record changed since."""
    frames = record["frames"]
    shot_settings = settings.for_shot(shot.index)
    names = output_names(source)
    stem = f"shot_{shot.index:03d}"
    changed = settings.for_shot(0).differences(shot_settings)  # the clip's look against the shot's
    look = ", ".join(f"{key} {_setting(getattr(shot_settings, key))}" for key in changed)
    view = ShotView(index=shot.index, frames=frame_range(shot, source.numbers),
                    timecode=f"{timecode.label(shot.start)} – {timecode.label(shot.end)}", length=shot.length,
                    series=None, look=look,
                    render_label="render" if shot_settings.temporal else "render (delivered frames)",
                    flashes=_flash_checks(store, shot.index), picture=record.get("area", ""))
    if not frames:
        return view
    measured = _measured(store, files, source, shot_settings, shot, frames, names, stem)
    series = shot_series(shot, names, source.numbers, frames, measured)
    record_time = store.record_modified(shot.index) or 0
    drawn = files.modified(f"{stem}_plot.png")
    if redraw or drawn is None or drawn <= record_time or files.modified(f"{stem}_strip.png") is None:
        files.write_image(f"{stem}_strip.png", _strip(store, source, shot, names, frames, every))
        files.write_file(f"{stem}_plot.png", png_bytes(shot_plot(series, view.render_label)))  # last: marks both drawn
    return dataclasses.replace(view, series=series, strip=_url(files, f"{stem}_strip.png"),
                               plot=_url(files, f"{stem}_plot.png"))


def _measured(store: Store, files: ReportStore, source: io.FrameSource, settings: Settings, shot: Shot,
              frames: dict[str, dict], names: list[str], stem: str) -> dict | None:
    """Warping errors (Lai et al. 2018) the render did not record, measured here; None if none is missing.

    A render records, for each frame after the first of its chain, its warping error and the
    source's along the same flows; a frame it solved apart (``odd``: a flash, a short cutaway)
    has none and none is measured, as ``framestyle stability`` leaves it out (its change is
    the footage's, not the paint's). Where another finished frame has none (a render without
    temporal consistency; the source's in a render from before it was recorded), the source's is
    measured on the working frames the render solved, and the render's on its delivered
    frames at the same size, both as :func:`~framestyle.qc.stability.pair_warping_error`
    does. What is measured is kept in ``report/<stem>.json`` (frames never change once
    finished), so each pair is measured once.
    """
    entries = [frames.get(names[i]) for i in shot.frames]
    needs = {key: {k for k in range(1, shot.length)
                   if entries[k] is not None and entries[k].get(recorded) is None
                   and not (entries[k].get("fresh") or entries[k].get("odd"))
                   and (key == "source_error" or entries[k - 1] is not None)}
             for key, recorded in (("source_error", "source_warp_error"), ("render_error", "warp_error"))}
    if not any(needs.values()):
        return None
    cache_name = f"{stem}.json"
    measured = _read_json(files, cache_name)
    if measured is None or not all(isinstance(measured.get(key), list) and len(measured[key]) == shot.length
                                   for key in needs):
        measured = {key: [None] * shot.length for key in needs}
    missing = sorted(k for key, ks in needs.items() for k in ks if measured[key][k] is None)
    if not missing:
        return measured
    size = working_size(source.width, source.height, settings.width, 1, source.pixel_aspect)  # the render checked its minimum
    previous = None
    for index, raw in io.iter_frames(source, shot.start + missing[0] - 1, shot.start + missing[-1] + 1):
        k = index - shot.start
        content = prepare_frame(raw, size, settings, source.linear).content
        delivered = (_delivered(store, names[index], source.linear, size)
                     if needs["render_error"] and entries[k] is not None else None)
        if previous is not None:
            if k in needs["source_error"] and measured["source_error"][k] is None:
                measured["source_error"][k] = pair_warping_error(previous[0], content, previous[0], content,
                                                                 settings.flow_preset)
            readable = previous[1] is not None and delivered is not None
            if k in needs["render_error"] and measured["render_error"][k] is None and readable:
                measured["render_error"][k] = pair_warping_error(previous[1], delivered, previous[0], content,
                                                                 settings.flow_preset)
        previous = (content, delivered)
    files.write_file(cache_name, json.dumps(measured).encode())
    return measured


def _strip(store: Store, source: io.FrameSource, shot: Shot, names: list[str], frames: dict, every: int | None
           ) -> np.ndarray:
    """The shot's thumbnail strip: source above render, the render's frames that are finished."""
    wanted = strip_frames(shot.start, shot.end, every)
    raws = dict(io.pick_frames(source, wanted))
    tiles = []
    for i in wanted:
        rendered = None
        if names[i] in frames:
            try:
                rendered = thumbnail(to_display(io.read_image(store.frame_paths([names[i]])[0]), source.linear))
            except FramestyleError:  # gone or damaged since: its shot renders it again; a grey tile till then
                pass
        tiles.append((str(source.numbers[i]), thumbnail(to_display(raws[i], source.linear)), rendered))
    return strip(tiles, source.width / source.height)


def _delivered(store: Store, name: str, linear: bool, size: tuple[int, int]) -> np.ndarray | None:
    """A finished frame as delivered, display-referred, at working size; None if it does not
    read back (its shot renders it again)."""
    try:
        return resize(to_display(io.read_image(store.frame_paths([name])[0]), linear), size)
    except FramestyleError:
        return None


# --- the render as a whole --------------------------------------------------------------------

def _styles(files: ReportStore, settings: Settings, redraw: bool):
    """(file name, thumbnail URL) of every style image of the render, its shots' looks too."""
    paths = sorted({p for n in [None, *map(int, settings.shot_looks)]
                    for p in (settings if n is None else settings.for_shot(n)).styles})
    for k, path in enumerate(paths, 1):
        name = f"style_{k}.png"
        if redraw or files.modified(name) is None:
            try:
                image = io.read_image(Path(path))
            except FramestyleError:  # moved or deleted since the render started: named only
                yield Path(path).name, ""
                continue
            width = max(1, round(image.shape[1] * _STYLE_HEIGHT / image.shape[0]))
            files.write_image(name, resize(image, (width, _STYLE_HEIGHT)))
        yield Path(path).name, _url(files, name)


def _source_facts(source: io.FrameSource, timecode: ClipTimecode, manifest: dict) -> dict:
    return {
        "input": str(source.path),
        "frames": f"{source.count} ({source.numbers[0]}–{source.numbers[-1]}), {source.width}×{source.height}, "
                  f"{source.bit_depth}-bit{' float' if source.linear else ''}",
        "timecode": f"{timecode.label(0)} at {timecode.fps:g} fps",
        "shot list": manifest["shot_list"]["file"] or "detected",
        "started": manifest.get("created", "—"),
    }


def _flash_checks(store: Store, shot: int | None) -> dict:
    """The recorded flash checks of the whole render (``shot`` None) or of one shot, by kind."""
    checks = {kind: store.flash_check(kind, shot) for kind in FLASH_KINDS}
    return {kind: check for kind, check in checks.items() if check is not None}


def _flash_plot_url(store: Store) -> str | None:
    path = store.flash_plot()
    return None if path is None else f"{path.name}?v={path.stat().st_mtime_ns}"


def _url(files: ReportStore, name: str) -> str:
    """A picture's URL relative to the page; the query changes with the file so that a
    browser reloading the page shows the new picture, not its cached copy."""
    return f"{REPORT_FILES}/{name}?v={files.modified(name)}"


def _read_json(files: ReportStore, name: str) -> dict | None:
    try:
        value = json.loads(files.read(name))
    except (FileNotFoundError, ValueError):  # not measured yet, or damaged: measured again
        return None
    return value if isinstance(value, dict) else None



def _setting(value) -> str:
    if isinstance(value, (list, tuple)):
        return ", ".join(Path(v).name if isinstance(v, str) else str(v) for v in value)
    return str(value)

