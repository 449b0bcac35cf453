"""Stroke detail of a render: how much of the paint's fine structure a frame keeps.

A temporal render ties each frame to its warped predecessors (Ruder, Dosovitskiy & Brox
2016); every warp resamples the image, and a solver that stops early keeps what it started
from, so fine strokes can wash out along a shot. The stroke-detail ratio of a frame is the
Laplacian energy of the rendered frame over that of the same frame rendered on its own with
the same settings: 1 keeps all the detail a frame gets when solved alone, lower is softer.
The Laplacian weighs the finest scales most (its response to a sinusoid of angular
frequency ω grows as ω²), which is where the resampling blur of a warp falls.
"""

from __future__ import annotations

import cv2
import numpy as np

from framestyle.imaging import resize
from framestyle.motion import check_rgb
from framestyle.shots import Shot


def laplacian_energy(image: np.ndarray) -> float:
    """Mean squared discrete Laplacian of an image, over pixels and channels.

        E = mean (I(x+1, y) + I(x−1, y) + I(x, y+1) + I(x, y−1) − 4 I(x, y))²

    the 4-neighbour Laplacian (OpenCV's ``Laplacian`` with ``ksize=1``), the image mirrored
    at its border without repeating the edge pixel (``BORDER_REFLECT_101``).

    Parameters
    ----------
    image : (H, W, 3) float RGB in [0, 1]
    """
    check_rgb("image", image)
    lap = cv2.Laplacian(image.astype(np.float32, copy=False), cv2.CV_32F, ksize=1, borderType=cv2.BORDER_REFLECT_101)
    return float(np.mean(np.square(lap, dtype=np.float64)))


def detail_ratio(render: np.ndarray, alone: np.ndarray, size: tuple[int, int] | None = None) -> float:
    """Stroke-detail ratio: ``laplacian_energy(render) / laplacian_energy(alone)``.

    Parameters
    ----------
    render : (H, W, 3) a frame of the render
    alone : (H, W, 3) the same frame rendered on its own, same shape
    size : (w, h) to compare at, e.g. the render's working size: delivered frames upscaled to
        the source's size are first brought back to it (area filter), so that the 8-bit
        rounding of the delivered files does not count as detail

    Returns
    -------
    float; ``nan`` if the frame rendered alone has no detail at all
    """
    check_rgb("render", render)
    check_rgb("alone", alone)
    if render.shape != alone.shape:
        raise ValueError(f"render and alone differ in shape: {render.shape} vs {alone.shape}")
    if size is not None:
        render, alone = resize(render, size), resize(alone, size)
    reference = laplacian_energy(alone)
    return laplacian_energy(render) / reference if reference > 0 else float("nan")


def detail_frames(shot: Shot, count: int) -> list[int]:
    """``count`` frames spread evenly over a shot, the last one its last frame.

    For a shot of L frames from ``start``: ``start + ⌈k·L / count⌉ − 1`` for k = 1 … count
    (fewer if the shot is shorter than ``count``): a 132-frame shot from 0 with 4 gives
    32, 65, 98 and 131, its 33rd, 66th, 99th and 132nd frames.
    """
    if count < 1:
        raise ValueError(f"count must be 1 or more, got {count}")
    return sorted({shot.start + -(-k * shot.length // count) - 1 for k in range(1, count + 1)})
