"""A frame's starting image and temporal targets, from the stylised frames before it.

Each shot starts fresh; within a shot each frame starts from the previous stylised frame
warped along the optical flow and is tied to earlier frames by the short- and long-term
temporal losses (Ruder, Dosovitskiy & Brox 2016, "Artistic style transfer for videos").
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import torch

from framestyle.imaging import to_tensor
from framestyle.motion import FlowPair, long_term_masks, warp
from framestyle.style.solver import Problem

NOISE = 0.1  # std of the noise added where a frame starts from its content frame


def start_noise(shape: tuple[int, ...], seed: int, frame: int) -> torch.Tensor:
    """Seeded noise, a function of (seed, frame) only, so resumed frames get the same noise."""
    gen = torch.Generator().manual_seed(seed * 1_000_003 + frame)
    return torch.randn(shape, generator=gen) * NOISE


def fresh_problem(content: np.ndarray, noise: torch.Tensor) -> Problem:
    """A frame optimised on its own, starting from its content frame plus noise.

    content : (H, W, 3) source frame at working size; noise : (1, 3, H, W)
    """
    return Problem(to_tensor(content), to_tensor(content) + noise)


def temporal_problem(
    content: np.ndarray, earlier: Sequence[tuple[FlowPair, np.ndarray]], noise: torch.Tensor,
) -> Problem:
    """Starting image and temporal targets of a frame from earlier stylised frames.

    Parameters
    ----------
    content : (H, W, 3) source frame at working size, as the solver sees it
    earlier : (flows between this frame and an earlier one, that frame stylised (H, W, 3)),
        most recent first; the first is the previous frame
    noise : (1, 3, H, W) noise for pixels that start from the content frame

    The previous stylised frame is warped into this frame along the backward flow; pixels the
    forward-backward check marks unreliable (disocclusions, motion boundaries) start from the
    content frame plus noise instead of from smeared pixels. Each earlier frame j gives a
    temporal target with the long-term weights of Ruder et al. 2016 (Sec. 3.2), so a pixel is
    tied only to the most recent frame in which it was visible.
    """
    warped = [warp(stylised, flows.backward) for flows, stylised in earlier]
    masks = [flows.current_mask() for flows, _ in earlier]
    weights = long_term_masks(masks)
    fresh = to_tensor(content) + noise
    first = torch.from_numpy(masks[0])[None, None]
    init = first * to_tensor(warped[0]) + (1 - first) * fresh
    pairs = [(to_tensor(w), torch.from_numpy(c)[None, None]) for w, c in zip(warped, weights)]
    return Problem(to_tensor(content), init, pairs)
