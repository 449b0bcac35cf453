"""Quick previews: stylise every Nth frame of each shot on its own and lay out contact sheets.

A preview answers "is this the look?" before hours of CPU are committed: each previewed frame
is a shot's first-frame treatment (no temporal chain), optionally at a smaller width, and each
shot gets a sheet with the source frames above their stylised versions, labelled by frame.
"""

from __future__ import annotations

import dataclasses
import time
from pathlib import Path

import cv2
import numpy as np

from . import frames
from .errors import FramestyleError
from .imaging import resize
from .look import build_look
from .render import (Mattes, Progress, check_render, deliver, find_shots, no_progress, prepare_frame,
                     stylise_alone, working_size)
from .settings import Settings

PREVIEW_WIDTH = 240  # default preview working width: a quick look, a few seconds a frame
_TILE_WIDTH = 240  # contact-sheet tile width in pixels
_COLUMNS = 6  # tiles per row before a sheet wraps
_LABEL_HEIGHT = 22


def sample_frames(start: int, end: int, every: int) -> list[int]:
    """Frames of a shot [start, end] to preview: its first frame, then every ``every``-th."""
    return list(range(start, end + 1, every))


def contact_sheet(tiles: list[tuple[str, np.ndarray, np.ndarray]], tile_width: int = _TILE_WIDTH,
                  columns: int = _COLUMNS) -> np.ndarray:
    """Lay out (label, source, stylised) triples: source above stylised, label above both.

    Parameters
    ----------
    tiles : list of (label, source (H, W, 3), stylised (H', W', 3)) in [0, 1]

    Returns
    -------
    (H_sheet, W_sheet, 3) float32 image in [0, 1]
    """
    if not tiles:
        raise ValueError("a contact sheet needs at least one tile")
    h0, w0 = tiles[0][1].shape[:2]
    tile_h = max(1, round(h0 * tile_width / w0))
    cell_h = _LABEL_HEIGHT + 2 * tile_h + 6
    rows = (len(tiles) + columns - 1) // columns
    cols = min(columns, len(tiles))
    sheet = np.full((rows * cell_h + 4, cols * (tile_width + 4) + 4, 3), 0.12, np.float32)
    for k, (label, src, styled) in enumerate(tiles):
        y, x = 4 + (k // columns) * cell_h, 4 + (k % columns) * (tile_width + 4)
        band = np.full((_LABEL_HEIGHT, tile_width, 3), 31, np.uint8)  # OpenCV 5 draws text on 8-bit only
        cv2.putText(band, label, (2, _LABEL_HEIGHT - 7), cv2.FONT_HERSHEY_SIMPLEX, 0.5,
                    (235, 235, 235), 1, cv2.LINE_AA)
        sheet[y:y + _LABEL_HEIGHT, x:x + tile_width] = band / 255.0
        top = y + _LABEL_HEIGHT
        sheet[top:top + tile_h, x:x + tile_width] = resize(src, (tile_width, tile_h))
        sheet[top + tile_h + 2:top + 2 * tile_h + 2, x:x + tile_width] = resize(styled, (tile_width, tile_h))
    return sheet


def preview(input_path: Path, out: Path, settings: Settings, every: int, width: int | None = None,
            shot_file: Path | None = None, progress: Progress = no_progress) -> list[Path]:
    """Stylise every ``every``-th frame of each shot into ``out/preview`` and write contact sheets.

    Each previewed frame gets a shot's first-frame treatment (no temporal chain) with its
    shot's look, colour, strength and matte.

    Parameters
    ----------
    width : preview working width (default: the render's width, at most PREVIEW_WIDTH)

    Returns
    -------
    The contact sheet paths, one per shot.
    """
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise FramestyleError(f"{out}: output path is a file, not a folder")
    if every < 1:
        raise FramestyleError(f"--every {every}: must be 1 or more")
    source = frames.open_source(Path(input_path))
    width = width or min(settings.width, PREVIEW_WIDTH)
    settings = dataclasses.replace(settings, width=width, shot_looks={
        n: {**look, "width": width} for n, look in settings.shot_looks.items()})
    net = check_render(source, settings)
    shots = find_shots(source, settings, shot_file)
    chosen = {i: shot for shot in shots for i in sample_frames(shot.start, shot.end, every)}
    size = working_size(source.width, source.height, settings.width, net.min_side)
    progress("start", frames=len(chosen), shots=len(shots), done=0, size=size)
    linear = source.bit_depth == 32
    folder = out / "preview"
    tiles: dict[int, list] = {shot.index: [] for shot in shots}
    looks: dict[int, tuple] = {}  # shot -> (look, mattes)
    for index, raw in frames.iter_frames(source):
        if index not in chosen:
            continue
        t0 = time.perf_counter()
        shot = chosen[index]
        shot_settings = settings.for_shot(shot.index)
        size = working_size(source.width, source.height, shot_settings.width, net.min_side)
        frame = prepare_frame(raw, size, shot_settings, linear)
        if shot.index not in looks:  # the shot's first sampled frame is its first frame
            looks[shot.index] = (build_look(net, shot_settings, frame.display), Mattes(source, shot_settings.matte))
        look, mattes = looks[shot.index]
        result, stats = stylise_alone(look, frame.content, index, shot_settings)
        delivered = deliver(result, frame, shot_settings, mattes(index, shot_settings.matte_softness), False)
        name = frames.frame_name(source, index)
        frames.write_frame(folder / name, delivered)
        tiles[shot.index].append((Path(name).stem, frame.display, delivered))
        progress("frame", index=index, shot=shot.index, iterations=stats.iterations,
                 seconds=time.perf_counter() - t0, skipped=False)
    sheets = []
    for shot in shots:
        path = folder / f"contact_shot{shot.index:03d}.png"
        frames.write_frame(path, contact_sheet(tiles[shot.index]))
        sheets.append(path)
    return sheets
