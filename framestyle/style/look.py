"""A look: the perceptual network plus the style images' target Gram matrices, per frame size.

Style images are resized relative to the frame being solved — their longer side becomes
``stroke_size`` × the frame's longer side — so stroke size is a property of the look, not of
the working resolution, and coarse-to-fine levels see proportionally smaller strokes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import torch

from framestyle import io
from framestyle.errors import FramestyleError
from framestyle.finish.colour import match_histograms
from framestyle.finish.compose import luma_image
from framestyle.imaging import resize, to_tensor
from framestyle.settings import MAX_STROKE_SIZE, Settings
from framestyle.style.network import FeatureNet
from framestyle.style.solver import style_targets


@dataclass
class Look:
    """Network, style images (H, W, 3 in [0, 1], colour-processed, read from ``paths``) and
    their mix weights."""

    net: FeatureNet
    images: list[np.ndarray]
    mix: tuple[float, ...]
    layers: tuple[str, ...]
    stroke_size: float
    paths: tuple[str, ...]
    _targets: dict = field(default_factory=dict, repr=False)

    def targets(self, size: tuple[int, int]) -> dict[str, torch.Tensor]:
        """Target Gram matrices for solving a frame of ``size`` (w, h); cached per size."""
        if size not in self._targets:
            tensors = []
            for image, path in zip(self.images, self.paths):
                scale = self.stroke_size * max(size) / max(image.shape[:2])
                target = (max(1, round(image.shape[1] * scale)), max(1, round(image.shape[0] * scale)))
                if min(target) < self.net.min_side:
                    needed = self.net.min_side * max(image.shape[:2]) / (min(image.shape[:2]) * max(size))
                    if needed > MAX_STROKE_SIZE:
                        raise FramestyleError(f"{path}: a {image.shape[1]}×{image.shape[0]} style image is too elongated "
                                              f"for the network's {self.net.min_side} pixels a side at any stroke size; "
                                              f"crop it nearer to square")
                    raise FramestyleError(
                        f"{path}: a {image.shape[1]}×{image.shape[0]} style image at stroke size {self.stroke_size} "
                        f"is {target[0]}×{target[1]} beside a {size[0]}×{size[1]} frame, under the network's "
                        f"{self.net.min_side} pixels a side; use --stroke-size {math.ceil(needed * 100) / 100:g} or more, or a less "
                        f"elongated image"
                    )
                limit = style_pixel_limit(size)
                if target[0] * target[1] > limit:
                    most = self.stroke_size * math.sqrt(limit / (target[0] * target[1]))
                    raise FramestyleError(
                        f"{path}: at stroke size {self.stroke_size:g} the style image would be {target[0]}×{target[1]}, "
                        f"over the {limit / 1e6:.1f} million pixels its features can take in memory beside a "
                        f"{size[0]}×{size[1]} frame; use --stroke-size {math.floor(most * 100) / 100:g} or less"
                    )
                tensors.append(to_tensor(resize(image, target)))
            self._targets[size] = style_targets(self.net, tensors, self.mix, self.layers)
        return self._targets[size]


def style_pixel_limit(size: tuple[int, int]) -> int:
    """The most pixels a style image may have, resized by its stroke size, beside a frame of
    ``size`` (w, h): 8 times the frame's or 2 million, whichever is more. Its features are
    taken at that size in one forward pass (96 channels at full size: about 0.8 GB at
    2 million pixels); beyond it a large ``stroke_size`` runs out of memory."""
    return max(8 * size[0] * size[1], 2_000_000)


def build_look(net: FeatureNet, settings: Settings, reference: np.ndarray | None = None) -> Look:
    """Read the style images of ``settings`` and prepare them for its palette choice.

    Parameters
    ----------
    net : the perceptual network
    settings : styles, mix, scale, colour and layers
    reference : (H, W, 3) a content frame; needed for ``colour="match"``, whose style images
        are recoloured to its histogram (Gatys et al. 2017, Sec. 5.2)
    """
    if not settings.styles:
        raise FramestyleError("no style image given (--style or styles in a look file)")
    layers = tuple(settings.style_layers or net.style_layers)
    net.check_layers([*layers, settings.content_layer or net.content_layer])
    images = []
    for path in settings.styles:
        image = io.read_image(Path(path))
        if settings.colour == "luma":
            image = luma_image(image, settings.luma_standard)
        elif settings.colour == "match":
            if reference is None:
                raise ValueError("colour 'match' needs a reference frame")
            image = match_histograms(image, reference)
        images.append(image)
    mix = tuple(settings.style_mix) or (1.0,) * len(images)
    return Look(net, images, mix, layers, settings.stroke_size, tuple(settings.styles))
