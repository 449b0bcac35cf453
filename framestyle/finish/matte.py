"""Mattes: where the style applies — a folder of matte frames or the input's alpha, softened."""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np

from framestyle import io
from framestyle.errors import FramestyleError


def soft_matte(matte: np.ndarray, softness: float) -> np.ndarray:
    """Soften a matte's edge: Gaussian blur with standard deviation ``softness`` pixels.

    Parameters
    ----------
    matte : (H, W) float in [0, 1]; 1 = stylise, 0 = keep the footage
    softness : blur sigma in pixels (0 = hard edge)
    """
    matte = np.clip(matte.astype(np.float32), 0.0, 1.0)
    return cv2.GaussianBlur(matte, (0, 0), softness) if softness > 0 else matte


class Mattes:
    """Per-frame mattes of an input: a folder of matte frames, the input's alpha, or none.

    Parameters
    ----------
    source : the input clip
    spec : a folder of matte frames (one per input frame, its size; grey level times alpha,
        so a white matte in an alpha channel and a grey matte on opaque frames both work),
        ``"alpha"`` for the input's own alpha channel, or None for no matte
    """

    def __init__(self, source: io.FrameSource, spec: str | None):
        self.source, self.spec, self.folder = source, spec, None
        if spec and spec != "alpha":
            self.folder = io.open_source(Path(spec))
            if self.folder.count != source.count or (self.folder.width, self.folder.height) != (
                    source.width, source.height):
                raise FramestyleError(
                    f"{spec}: mattes must match the input, one {source.width}×{source.height} "
                    f"frame per input frame ({source.count}), found {self.folder.count} of "
                    f"{self.folder.width}×{self.folder.height}"
                )
            shifts = [m - n for m, n in zip(self.folder.numbers, source.numbers)]
            if self.folder.kind == source.kind == "folder" and len(set(shifts)) > 1:
                at = next(i for i, shift in enumerate(shifts) if shift != shifts[0])
                raise FramestyleError(
                    f"{spec}: its numbering skips where the input's does not ({self.folder.files[at]} would go "
                    f"with {source.files[at]}); give one matte frame per input frame, numbered alike"
                )
        elif spec == "alpha" and not source.has_alpha:
            raise FramestyleError(f"{source.path}: the matte is to be the input's alpha, but the input has no alpha "
                                  f"channel")

    def __call__(self, index: int, softness: float) -> np.ndarray | None:
        """The softened (H, W) matte of frame ``index``, or None without mattes."""
        if self.spec is None:
            return None
        if self.folder is None:
            raw = io.read_alpha(self.source, index)
        else:  # the matte frame as it shows over black: grey level times its alpha, if it has one
            raw = io.read_frame(self.folder, index).mean(axis=2)
            if self.folder.has_alpha:
                raw = raw * io.read_alpha(self.folder, index)
        return soft_matte(raw, softness)
