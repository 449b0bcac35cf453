"""Finishing a stylised frame for the edit: colour preservation, strength, matte, light encoding.

Mattes themselves (reading and softening) are in :mod:`framestyle.finish.matte`.

The solver works on display-referred RGB at working size; these pure functions turn its
result into the delivered frame at source size. They run after the optimisation, so none of
them disturbs the temporal chain (which is built from the solver's results).

Example
-------
>>> src = np.random.rand(4, 6, 3).astype(np.float32)
>>> np.array_equal(mix(src, paint(src * 0.5, src), strength=0.0), src)
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


def paint(stylised: np.ndarray, source: np.ndarray, *, colour: str = "style", standard: str = "bt709") -> np.ndarray:
    """The stylised picture at full strength, display-referred, from the solver's result.

    Parameters
    ----------
    stylised : (H, W, 3) solver result in [0, 1] (luma in all channels in "luma" mode)
    source : (H, W, 3) the source frame, display-referred, in [0, 1]
    colour : one of :data:`COLOURS`; "luma" recombines the stylised luma with the source's
        chroma (Gatys et al. 2017, Sec. 5.1; ITU-R BT.601/BT.709 luma per ``standard``)

    Returns
    -------
    (H, W, 3) float32
    """
    return (luminance_transfer(stylised, source, standard) if colour == "luma" else stylised).astype(np.float32)


def mix(footage: np.ndarray, picture: np.ndarray, strength: float = 1.0, matte: np.ndarray | None = None) -> np.ndarray:
    """``footage + w·(picture − footage)``, w = strength × matte: a linear mix, as an opacity
    control would be, so w = 0 gives back ``footage`` exactly.

    Parameters
    ----------
    footage, picture : (H, W, C) arrays in the same encoding
    strength : 0 = the footage, 1 = the picture
    matte : (H, W) in [0, 1] where the picture applies (already softened), or None for everywhere

    Returns
    -------
    (H, W, C) float32
    """
    weight = np.float32(strength) if matte is None else strength * matte[..., None]
    return (footage + weight * (picture - footage)).astype(np.float32)


def associated(rgb: np.ndarray, alpha: np.ndarray) -> np.ndarray:
    """Straight colour ``(H, W, 3)`` back to associated (premultiplied) colour as a file stores
    it: times the alpha ``(H, W)`` where it is above 0. Where the alpha is 0 the colour is left
    as read (:mod:`framestyle.io.stills` reads it undivided there): light that covers nothing,
    such as a glow, which an "over" adds (Porter & Duff 1984)."""
    a = alpha[..., None]
    return np.where(a > 0, rgb * a, rgb).astype(np.float32)


def with_alpha(colour: np.ndarray, alpha: np.ndarray) -> np.ndarray:
    """The delivered frame with the source frame's alpha as its fourth channel.

    The colour is given in the source's convention: straight for PNG and TIFF (the stylised
    paint kept where the alpha hides it), associated for OpenEXR (Kainz, Bogart et al.,
    "Technical Introduction to OpenEXR", from memory: colour times alpha, so that no paint
    shows where the frame is transparent and a compositor's "over" adds it, Porter & Duff 1984).

    Parameters
    ----------
    colour : (H, W, 3) the delivered frame, in the source's encoding
    alpha : (H, W) the source frame's alpha in [0, 1]

    Returns
    -------
    (H, W, 4) float32
    """
    return np.concatenate([colour, alpha[..., None]], axis=2).astype(np.float32)


def to_display(image: np.ndarray, linear: bool) -> np.ndarray:
    """Display-referred RGB in [0, 1] for the network: linear light is sRGB-encoded
    (IEC 61966-2-1) and values outside [0, 1] are clipped."""
    return np.clip(linear_to_srgb(image) if linear else image, 0.0, 1.0).astype(np.float32)


def from_display(image: np.ndarray, linear: bool) -> np.ndarray:
    """Back to the source's encoding: sRGB-decoded to linear light for linear (EXR) sources."""
    return srgb_to_linear(image).astype(np.float32) if linear else image
