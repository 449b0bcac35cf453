"""Finishing a stylised frame for the edit: colour preservation, strength, matte, light encoding.

Mattes themselves (reading and softening) are in :mod:`framestyle.finish.matte`.

The solver works on display-referred RGB at working size; these pure functions turn its
result into the delivered frame at source size. They run after the optimisation, so none of
them disturbs the temporal chain (which is built from the solver's results).

Example
-------
>>> src = np.random.rand(4, 6, 3).astype(np.float32)
>>> np.array_equal(finish(src * 0.5, src, strength=0.0), src)
True
"""

from __future__ import annotations

import numpy as np

from framestyle.finish.colour import linear_to_srgb, luma, luminance_transfer, srgb_to_linear

COLOURS = ("style", "luma", "match")
"""Palette choices: the painting's colours; the footage's (luminance-only transfer, Gatys et
al. 2017); the painting's recoloured to the footage's histogram (Gatys et al. 2017)."""


def luma_image(rgb: np.ndarray, standard: str) -> np.ndarray:
    """Luma replicated into three channels, (H, W, 3): what the network sees in "luma" mode.

    Luminance-only transfer (Gatys, Ecker, Bethge, Hertzmann & Shechtman 2017, "Controlling
    Perceptual Factors in Neural Style Transfer", Sec. 5.1) stylises the luminance of content
    and style; the network expects RGB, so the luma goes into all three channels.
    """
    return np.repeat(luma(rgb, standard)[..., None], 3, axis=2).astype(np.float32)


def finish(
    stylised: np.ndarray, source: np.ndarray, *, colour: str = "style", standard: str = "bt709",
    strength: float = 1.0, matte: np.ndarray | None = None,
) -> np.ndarray:
    """The delivered frame from the solver's result and the source frame (same size).

    Parameters
    ----------
    stylised : (H, W, 3) solver result in [0, 1] (luma in all channels in "luma" mode)
    source : (H, W, 3) the source frame, display-referred, in [0, 1]
    colour : one of :data:`COLOURS`; "luma" recombines the stylised luma with the source's
        chroma (Gatys et al. 2017, Sec. 5.1; ITU-R BT.601/BT.709 luma per ``standard``)
    strength : 0 = the footage, 1 = full style; a linear mix, as an opacity control would be
    matte : (H, W) in [0, 1] where the style applies (already softened), or None for everywhere

    Returns
    -------
    (H, W, 3) float32 in [0, 1]
    """
    out = luminance_transfer(stylised, source, standard) if colour == "luma" else stylised
    weight = np.float32(strength) if matte is None else strength * matte[..., None]
    return (source + weight * (out - source)).astype(np.float32)


def with_alpha(rgb: np.ndarray, alpha: np.ndarray, premultiplied: bool) -> np.ndarray:
    """The delivered frame with the source frame's alpha as its fourth channel.

    A straight-alpha source (PNG, TIFF) keeps the colour as it is, the stylised paint
    included where the alpha hides it; a premultiplied one (OpenEXR's convention: Kainz,
    Bogart et al., "Technical Introduction to OpenEXR", from memory) has its colour multiplied
    by the alpha, so that no colour shows where the frame is transparent (a compositor adds
    it in an "over": Porter & Duff 1984).

    Parameters
    ----------
    rgb : (H, W, 3) the delivered frame, in the source's encoding
    alpha : (H, W) the source frame's alpha in [0, 1]

    Returns
    -------
    (H, W, 4) float32
    """
    colour = rgb * alpha[..., None] if premultiplied else rgb
    return np.concatenate([colour, alpha[..., None]], axis=2).astype(np.float32)


def to_display(image: np.ndarray, linear: bool) -> np.ndarray:
    """Display-referred RGB in [0, 1] for the network: linear light is sRGB-encoded
    (IEC 61966-2-1) and values outside [0, 1] are clipped."""
    return np.clip(linear_to_srgb(image) if linear else image, 0.0, 1.0).astype(np.float32)


def from_display(image: np.ndarray, linear: bool) -> np.ndarray:
    """Back to the source's encoding: sRGB-decoded to linear light for linear (EXR) sources."""
    return srgb_to_linear(image).astype(np.float32) if linear else image
