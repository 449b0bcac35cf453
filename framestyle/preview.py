"""Previews: which frames a preview stylises, and the contact sheet that shows them.

A preview answers "is this the look?" before hours of CPU are committed: every Nth frame of
each shot gets a shot's first-frame treatment (no temporal chain), usually at a smaller width
(:func:`framestyle.pipeline.preview` runs it), and each shot gets a sheet with the source
frames above their stylised versions, labelled by frame.
"""

from __future__ import annotations

import cv2
import numpy as np

from framestyle.imaging import resize

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
