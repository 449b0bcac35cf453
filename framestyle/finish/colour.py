"""Colour-science helpers: luma, full-range YCbCr, colour preservation, sRGB transfer curves.

All functions take and return numpy float images ``(H, W, 3)`` RGB in [0, 1] (float32 out),
except where a docstring says otherwise. They are pure: inputs are never modified.
"""

from __future__ import annotations

import numpy as np

# Luma weights (Kr, Kg, Kb) for R'G'B' -> Y'.
LUMA_BT601 = (0.299, 0.587, 0.114)  # ITU-R Recommendation BT.601 (standard-definition video)
LUMA_BT709 = (0.2126, 0.7152, 0.0722)  # ITU-R Recommendation BT.709 (high-definition video)

_STANDARDS = {"bt601": LUMA_BT601, "bt709": LUMA_BT709}

# IEC 61966-2-1 (sRGB) transfer-function constants.
_SRGB_ENCODED_BREAK = 0.04045  # below this, encoded values are on the linear segment
_SRGB_LINEAR_BREAK = 0.0031308  # the same break point on the linear-light side
_SRGB_SLOPE = 12.92
_SRGB_GAMMA = 2.4
_SRGB_A = 0.055


def _weights(standard: str) -> tuple[float, float, float]:
    try:
        return _STANDARDS[standard]
    except KeyError:
        raise ValueError(
            f"unknown luma standard {standard!r}; use one of {sorted(_STANDARDS)}"
        ) from None


def _check_rgb(name: str, img: np.ndarray) -> np.ndarray:
    img = np.asarray(img)
    if img.ndim != 3 or img.shape[2] != 3:
        raise ValueError(f"{name} must have shape (H, W, 3), got {img.shape}")
    if not np.issubdtype(img.dtype, np.floating):
        raise ValueError(f"{name} must be a float image in [0, 1], got dtype {img.dtype}")
    return img


def _ycbcr_matrix(standard: str) -> np.ndarray:
    """Rows give Y, Cb - 0.5, Cr - 0.5 as weighted sums of R, G, B.

    Cb = (B - Y) / (2 (1 - Kb)) and Cr = (R - Y) / (2 (1 - Kr)) span [-0.5, 0.5], the
    full-range definition used by JPEG/JFIF for BT.601 and carried over to BT.709.
    """
    kr, kg, kb = _weights(standard)
    y = np.array([kr, kg, kb])
    cb = (np.array([0.0, 0.0, 1.0]) - y) / (2.0 * (1.0 - kb))
    cr = (np.array([1.0, 0.0, 0.0]) - y) / (2.0 * (1.0 - kr))
    return np.stack([y, cb, cr])


def luma(rgb: np.ndarray, standard: str = "bt601") -> np.ndarray:
    """Luma Y' = Kr R' + Kg G' + Kb B' of a gamma-encoded RGB image.

    Parameters
    ----------
    rgb : (H, W, 3) float array, RGB in [0, 1].
    standard : ``"bt601"`` or ``"bt709"`` (ITU-R BT.601 / BT.709 weights).

    Returns
    -------
    (H, W) float32 array.
    """
    rgb = _check_rgb("rgb", rgb)
    return (rgb.astype(np.float64) @ np.array(_weights(standard))).astype(np.float32)


def rgb_to_ycbcr(rgb: np.ndarray, standard: str = "bt601") -> np.ndarray:
    """Full-range Y'CbCr of an RGB image: Y in [0, 1], Cb and Cr centred at 0.5.

    Parameters
    ----------
    rgb : (H, W, 3) float array, RGB in [0, 1].
    standard : ``"bt601"`` or ``"bt709"``.

    Returns
    -------
    (H, W, 3) float32 array with channels (Y, Cb, Cr). :func:`ycbcr_to_rgb` inverts it.
    """
    rgb = _check_rgb("rgb", rgb)
    ycc = rgb.astype(np.float64) @ _ycbcr_matrix(standard).T
    ycc[..., 1:] += 0.5
    return ycc.astype(np.float32)


def ycbcr_to_rgb(ycc: np.ndarray, standard: str = "bt601") -> np.ndarray:
    """Inverse of :func:`rgb_to_ycbcr`; no clipping, so out-of-gamut values survive.

    Parameters
    ----------
    ycc : (H, W, 3) float array with channels (Y, Cb, Cr), Cb/Cr centred at 0.5.
    standard : ``"bt601"`` or ``"bt709"``.

    Returns
    -------
    (H, W, 3) float32 RGB array.
    """
    ycc = _check_rgb("ycc", ycc).astype(np.float64)
    ycc[..., 1:] -= 0.5
    return (ycc @ np.linalg.inv(_ycbcr_matrix(standard)).T).astype(np.float32)


def luminance_transfer(
    stylised: np.ndarray, content: np.ndarray, standard: str = "bt601"
) -> np.ndarray:
    """Keep the content's colours: luma from ``stylised``, chroma (Cb, Cr) from ``content``.

    Parameters
    ----------
    stylised : (H, W, 3) float RGB in [0, 1], the style-transfer result.
    content : (H, W, 3) float RGB in [0, 1], the original frame (same shape).
    standard : ``"bt601"`` or ``"bt709"``.

    Returns
    -------
    (H, W, 3) float32 RGB, clipped to [0, 1].

    References
    ----------
    Gatys, Ecker, Bethge, Hertzmann & Shechtman (2017), "Controlling Perceptual Factors in
    Neural Style Transfer", CVPR, section on colour control: luminance-only transfer.
    """
    stylised = _check_rgb("stylised", stylised)
    content = _check_rgb("content", content)
    if stylised.shape != content.shape:
        raise ValueError(f"stylised {stylised.shape} and content {content.shape} differ in shape")
    ycc = rgb_to_ycbcr(content, standard)
    ycc[..., 0] = luma(stylised, standard)
    return np.clip(ycbcr_to_rgb(ycc, standard), 0.0, 1.0)


def _match_channel(source: np.ndarray, reference: np.ndarray) -> np.ndarray:
    # Map each source value to the reference value at the same cumulative quantile,
    # interpolating linearly between the reference's distinct values.
    _, src_index, src_counts = np.unique(
        source.ravel(), return_inverse=True, return_counts=True
    )
    ref_values, ref_counts = np.unique(reference.ravel(), return_counts=True)
    src_quantiles = np.cumsum(src_counts) / source.size
    ref_quantiles = np.cumsum(ref_counts) / reference.size
    mapped = np.interp(src_quantiles, ref_quantiles, ref_values)
    return mapped[src_index].reshape(source.shape)


def match_histograms(source: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Per-channel histogram matching: give ``source`` the colour distribution of ``reference``.

    Used for colour preservation by matching the style image's colours to the content frame
    before style transfer (pass the style image as ``source``, the frame as ``reference``),
    and to give picture entering a warm-started frame across its edge the stylised frame's
    colours (:func:`framestyle.temporal.temporal_problem`). The images may differ in size.

    Parameters
    ----------
    source : (H, W, 3) float RGB in [0, 1].
    reference : (H2, W2, 3) float RGB in [0, 1].

    Returns
    -------
    (H, W, 3) float32 RGB; every output value is within the range of ``reference``.

    References
    ----------
    Gatys, Ecker, Bethge, Hertzmann & Shechtman (2017), "Controlling Perceptual Factors in
    Neural Style Transfer", CVPR: colour histogram matching. Gonzalez & Woods, "Digital Image
    Processing": histogram specification by CDF mapping.
    """
    source = _check_rgb("source", source)
    reference = _check_rgb("reference", reference)
    out = np.empty(source.shape, np.float32)
    for c in range(3):
        out[..., c] = _match_channel(source[..., c], reference[..., c])
    return out


def srgb_to_linear(x: np.ndarray | float) -> np.ndarray:
    """Decode sRGB-encoded values to linear light (IEC 61966-2-1 transfer function).

    ``x <= 0.04045`` maps to ``x / 12.92``; above, ``((x + 0.055) / 1.055) ** 2.4``. Values
    above 1 follow the same power law (HDR / over-range pixels stay monotonic); negative
    values are mirrored, ``f(-x) = -f(x)``, so the curve is invertible on all reals and
    :func:`linear_to_srgb` round-trips them.

    Parameters
    ----------
    x : float array of any shape (or a scalar).

    Returns
    -------
    float32 array of the same shape.
    """
    x = np.asarray(x, dtype=np.float64)
    a = np.abs(x)
    lin = np.where(
        a <= _SRGB_ENCODED_BREAK,
        a / _SRGB_SLOPE,
        ((a + _SRGB_A) / (1.0 + _SRGB_A)) ** _SRGB_GAMMA,
    )
    return (np.sign(x) * lin).astype(np.float32)


def linear_to_srgb(x: np.ndarray | float) -> np.ndarray:
    """Encode linear-light values as sRGB (IEC 61966-2-1); inverse of :func:`srgb_to_linear`.

    ``x <= 0.0031308`` maps to ``12.92 x``; above, ``1.055 x ** (1 / 2.4) - 0.055``. Values
    above 1 extend the power law; negative values are mirrored as in :func:`srgb_to_linear`.

    Parameters
    ----------
    x : float array of any shape (or a scalar).

    Returns
    -------
    float32 array of the same shape.
    """
    x = np.asarray(x, dtype=np.float64)
    a = np.abs(x)
    enc = np.where(
        a <= _SRGB_LINEAR_BREAK,
        a * _SRGB_SLOPE,
        (1.0 + _SRGB_A) * a ** (1.0 / _SRGB_GAMMA) - _SRGB_A,
    )
    return (np.sign(x) * enc).astype(np.float32)
