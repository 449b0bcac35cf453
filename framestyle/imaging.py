"""Conversions between numpy frames and torch tensors, and resizing, at one place.

Frames are (H, W, 3) float32 numpy arrays in [0, 1]; the network and solver take
(1, 3, H, W) tensors. Sizes are given as (w, h), as OpenCV does.
"""

from __future__ import annotations

import cv2
import numpy as np
import torch
import torch.nn.functional as F


def to_tensor(image: np.ndarray) -> torch.Tensor:
    """(H, W, 3) float32 array → (1, 3, H, W) tensor."""
    return torch.from_numpy(np.ascontiguousarray(image.transpose(2, 0, 1)))[None]


def to_array(image: torch.Tensor) -> np.ndarray:
    """(1, 3, H, W) tensor → (H, W, 3) float32 array."""
    return image[0].permute(1, 2, 0).contiguous().numpy()


def to_8bit(image: np.ndarray) -> np.ndarray:
    """(H, W, C) float in [0, 1] → uint8 (rounded): a frame kept compactly, a quarter of float32."""
    return np.round(np.clip(image, 0.0, 1.0) * 255.0).astype(np.uint8)


def from_8bit(image: np.ndarray) -> np.ndarray:
    """uint8 (H, W, C) → float32 in [0, 1]."""
    return image.astype(np.float32) / 255.0


def resize(image: np.ndarray, size: tuple[int, int]) -> np.ndarray:
    """Resize (H, W, C) or (H, W) to (w, h) = ``size``: area filter down, bicubic up, in [0, 1]."""
    if image.shape[1] == size[0] and image.shape[0] == size[1]:
        return image
    shrink = size[0] < image.shape[1]
    out = cv2.resize(image, size, interpolation=cv2.INTER_AREA if shrink else cv2.INTER_CUBIC)
    return np.clip(out, 0.0, 1.0)


def resize_tensor(image: torch.Tensor, size: tuple[int, int]) -> torch.Tensor:
    """Resize a (B, C, H, W) tensor to (w, h) = ``size``: area average down, bilinear up."""
    if tuple(image.shape[-2:]) == (size[1], size[0]):
        return image
    if size[0] < image.shape[-1]:
        return F.interpolate(image, size=(size[1], size[0]), mode="area")
    return F.interpolate(image, size=(size[1], size[0]), mode="bilinear", align_corners=False)
