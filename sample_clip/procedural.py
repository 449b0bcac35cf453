"""Small procedural helpers shared by the scenes and the style images: colours and noise.

Every random choice draws from a ``numpy.random.Generator`` the caller seeds, so output is
deterministic.
"""

from __future__ import annotations

import cv2
import numpy as np


def rgb(r: int, g: int, b: int) -> np.ndarray:
    """An 8-bit colour as a float32 RGB triple in [0, 1]."""
    return np.array([r, g, b], np.float32) / 255.0


def smoothstep(e0: float, e1: float, x: np.ndarray) -> np.ndarray:
    """Hermite step from 0 at ``e0`` to 1 at ``e1`` (``e1 < e0`` steps down)."""
    t = np.clip((x - e0) / (e1 - e0), 0.0, 1.0)
    return t * t * (3 - 2 * t)


def noise_1d(
    rng: np.random.Generator, xs: np.ndarray, period: float, octaves: int = 5
) -> np.ndarray:
    """Fractal value noise along ``xs`` (smoothstep-interpolated octaves, gain 0.5)."""
    out = np.zeros(xs.shape, np.float64)
    for o in range(octaves):
        p = period / 2**o
        u = (xs - xs.min()) / p
        ctrl = rng.standard_normal(int(u.max()) + 2)
        i = u.astype(int)
        f = u - i
        f = f * f * (3 - 2 * f)
        out += 0.5**o * (ctrl[i] * (1 - f) + ctrl[i + 1] * f)
    return out


def noise_2d(
    rng: np.random.Generator, h: int, w: int, period_y: float, period_x: float, octaves: int = 4
) -> np.ndarray:
    """Smooth fractal noise (bicubic-upsampled random grids), roughly unit variance."""
    out = np.zeros((h, w), np.float32)
    for o in range(octaves):
        py, px = max(period_y / 2**o, 1.0), max(period_x / 2**o, 1.0)
        gh, gw = int(h / py) + 4, int(w / px) + 4
        grid = rng.standard_normal((gh, gw)).astype(np.float32)
        big = cv2.resize(grid, (int(gw * px), int(gh * py)), interpolation=cv2.INTER_CUBIC)
        out += 0.5**o * big[int(py) : int(py) + h, int(px) : int(px) + w]
    return out
